"""Job identity of a batch: the charge and the multiplicity are part of every job's key.

Sources: hfcore/batch/jobs.py (make_jobs, request_key, read_list_file), hfcore/runs.py
(RunRequest.key_fields), hfcore/cli/batch.py (resume after a kill). The signal handling follows
tests/test_batch.py.
"""

from __future__ import annotations

import dataclasses
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from conftest import INPUTS

import hfcore.batch.jobs
from hfcore.batch import make_jobs, read_list_file

# One geometry with two charges (the same multiplicity, so only the charge tells them apart), another
# with two multiplicities (the same charge): four different runs.
LIST = "water.xyz charge=1 multiplicity=2\nwater.xyz charge=-1 multiplicity=2\no2.xyz multiplicity=1\no2.xyz multiplicity=3\n"
# What each job is: (geometry, charge, multiplicity).
EXPECTED = {("water.xyz", 1, 2), ("water.xyz", -1, 2), ("o2.xyz", 0, 1), ("o2.xyz", 0, 3)}
# Big enough that each job takes a few tenths of a second, so a kill lands mid-way.
BASIS = "cc-pvtz"


@pytest.fixture
def batch_dir(tmp_path: Path) -> Path:
    for name in ("water", "o2"):
        shutil.copy(INPUTS / f"{name}.xyz", tmp_path / f"{name}.xyz")
    (tmp_path / "m.list").write_text(LIST)
    return tmp_path


def identities(jobs) -> list[tuple[str, tuple[str, int, int | None]]]:
    """(key, (geometry, charge, multiplicity)) of Job objects."""
    return [(job.key, (Path(job.geometry).name, job.charge, job.options.get("multiplicity"))) for job in jobs]


def record_identities(records: list[dict]) -> list[tuple[str, tuple[str, int, int | None]]]:
    """(key, (geometry, charge, multiplicity)) of results-file lines."""
    return [(r["job"]["key"], (Path(r["job"]["geometry"]).name, r["job"]["charge"],
                               r["job"]["options"].get("multiplicity"))) for r in records]


def check_four_jobs(found: list[tuple[str, tuple]]) -> None:
    """The batch holds four jobs, one per (geometry, charge, multiplicity), each with its own key."""
    assert sorted(what for _, what in found) == sorted(EXPECTED), found
    keys = [key for key, _ in found]
    assert len(set(keys)) == 4, f"two different runs share a key: {found}"


def check_resume(jobs: list[tuple[str, tuple]], before: list[tuple[str, tuple]], after: list[tuple[str, tuple]]) -> None:
    """After a kill and a resume: no finished job ran again, no unfinished job was skipped."""
    check_four_jobs(jobs)
    keys = [key for key, _ in after]
    assert len(keys) == len(set(keys)), "a finished job ran again"
    assert after[: len(before)] == before, "the lines written before the kill changed"
    assert {k for k, _ in after} == {k for k, _ in jobs}, "a job that had not run was skipped"
    assert dict(after) == dict(jobs), "a line's key names another run"


def job_lines(path: Path) -> list[dict]:
    lines = path.read_bytes().split(b"\n")
    whole = [line for line in lines[1:] if line.strip()]
    out = []
    for line in whole:
        try:
            out.append(json.loads(line))
        except json.JSONDecodeError:  # a line cut by the kill is not a finished job
            pass
    return out


def _start(directory: Path, results: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "hfcore", "batch", "@m.list", "--basis", BASIS, "--results", str(results),
         "--workers", "1", "--quiet"],
        cwd=directory, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)},
    )


def test_four_runs_of_two_geometries_are_four_jobs_with_four_keys(batch_dir, monkeypatch):
    monkeypatch.chdir(batch_dir)
    jobs, duplicates = make_jobs(read_list_file("m.list"), [BASIS], 0, {})
    assert duplicates == 0
    check_four_jobs(identities(jobs))


@pytest.mark.parametrize("ignored", ["charge", "multiplicity"])
def test_a_key_that_ignores_the_charge_or_the_multiplicity_fails_the_check(batch_dir, monkeypatch, ignored):
    # A deliberately broken key rule: the check above must catch it.
    honest = hfcore.batch.jobs.request_key
    blank = {"charge": 0, "multiplicity": None}[ignored]

    def broken(digest, request):
        return honest(digest, dataclasses.replace(request, **{ignored: blank}))

    monkeypatch.setattr(hfcore.batch.jobs, "request_key", broken)
    monkeypatch.chdir(batch_dir)
    jobs, _ = make_jobs(read_list_file("m.list"), [BASIS], 0, {})
    with pytest.raises(AssertionError):
        check_four_jobs(identities(jobs))


def test_sigkill_mid_batch_then_resume_reruns_no_finished_job_and_skips_none(batch_dir, monkeypatch):
    monkeypatch.chdir(batch_dir)
    jobs, _ = make_jobs(read_list_file("m.list"), [BASIS], 0, {})
    results = batch_dir / "r.jsonl"
    proc = _start(batch_dir, results)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if results.exists() and len(job_lines(results)) >= 1:
            break
        time.sleep(0.01)
    os.kill(proc.pid, signal.SIGKILL)
    proc.communicate(timeout=60)
    before = record_identities(job_lines(results))
    assert 1 <= len(before) < 4, "the kill came after every job had finished"

    proc = _start(batch_dir, results)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert f"skipping {len(before)} job(s)" in err, err
    records = job_lines(results)
    assert all(r["status"] == "ok" for r in records)
    check_resume(identities(jobs), before, record_identities(records))
    methods = {(Path(r["job"]["geometry"]).name, r["job"]["charge"], r["job"]["options"].get("multiplicity")):
               r["hfcore"]["method"] for r in records}
    # source: issue 15 part 1 — a singlet runs RHF, an open shell UHF, with neither --uhf nor --rohf
    assert methods == {("water.xyz", 1, 2): "UHF", ("water.xyz", -1, 2): "UHF", ("o2.xyz", 0, 1): "RHF",
                       ("o2.xyz", 0, 3): "UHF"}


def test_an_open_shell_job_that_fails_is_a_failed_line_not_a_lost_batch(batch_dir):
    # water with multiplicity 2 is impossible (10 electrons): that job fails, the others finish
    (batch_dir / "bad.list").write_text("water.xyz multiplicity=2\no2.xyz multiplicity=3\n")
    results = batch_dir / "bad.jsonl"
    proc = subprocess.run(
        [sys.executable, "-m", "hfcore", "batch", "@bad.list", "--basis", "sto-3g", "--results", str(results),
         "--workers", "1", "--quiet"],
        cwd=batch_dir, capture_output=True, text=True, env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)},
    )
    assert proc.returncode == 10, proc.stderr  # some jobs failed
    assert "Traceback" not in proc.stderr
    records = {r["job"]["options"]["multiplicity"]: r for r in job_lines(results)}
    assert records[2]["status"] == "failed" and "multiplicity 2 does not fit 10 electrons" in records[2]["error"]["message"]
    assert records[2]["error"]["exit_code"] == 2
    assert records[3]["status"] == "ok" and records[3]["hfcore"]["method"] == "UHF"
