"""``hfcore batch``: every job once, the same energies as single runs, resume, signals, Dask, bad input.

The molecules are tiny (H2, HeH+, water in STO-3G and 6-31G) so the whole
file runs in well under two minutes.
"""

from __future__ import annotations

import fcntl
import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from conftest import assert_valid_png, run_main

from hfcore.batch import energy_table, expand_geometries
from hfcore.batch.results import RESULTS_FORMAT
from hfcore.errors import InputError

BASES = "sto-3g,6-31g"

WATER = """3
water
O   0.000000   0.000000   0.117300
H   0.000000   0.757200  -0.469200
H   0.000000  -0.757200  -0.469200
"""

BROKEN = "3\nnot enough atom lines\nO 0 0 0\nH 0 0 0.96\n"


def h2(r: float) -> str:
    return f"2\nH2 r = {r:.2f}\nH 0 0 0\nH 0 0 {r:.6f}\n"


def heh(r: float) -> str:
    return f"2\nHeH+ r = {r:.2f}\nHe 0 0 0\nH 0 0 {r:.6f}\n"


def job_lines(path: Path) -> list[dict]:
    """Every job line of a results file; each line must parse on its own."""
    lines = path.read_bytes().split(b"\n")
    assert lines[-1] == b"", "the file must end with a whole line"
    records = [json.loads(line) for line in lines[:-1]]
    assert records[0]["hfcore_batch_results"] == RESULTS_FORMAT
    return records[1:]


def single_energy(path: Path, basis: str, charge: int) -> float:
    code, out, err = run_main("energy", path, "--basis", basis, "--charge", str(charge), "--json", "-")
    assert code == 0, err
    return json.loads(out)["energy"]["total"]


@pytest.fixture(scope="module")
def geometries(tmp_path_factory) -> Path:
    """A directory scan of four H2, a list file with two HeH+ (charge=1), water, a broken and a missing file."""
    root = tmp_path_factory.mktemp("batch")
    scan = root / "scan"
    scan.mkdir()
    for r in (0.65, 0.70, 0.74, 0.80):
        (scan / f"h2_{r:.2f}.xyz").write_text(h2(r))
    (scan / "notes.txt").write_text("not a geometry: a directory contributes only its .xyz files\n")
    others = root / "others"
    others.mkdir()
    (others / "heh_1.40.xyz").write_text(heh(1.40 * 0.529177))
    (others / "heh_1.46.xyz").write_text(heh(1.4632 * 0.529177))
    (others / "water.xyz").write_text(WATER)
    (others / "broken.xyz").write_text(BROKEN)
    (others / "molecules.list").write_text(
        "# our list-file syntax: a path, optionally charge=N\n"
        "heh_1.40.xyz   charge=1\n"
        "heh_1.46.xyz charge=+1   # the same ion nearer equilibrium\n"
        "\n"
        "water.xyz\n"
        "broken.xyz\n"
        "missing.xyz\n"
    )
    return root


@pytest.fixture(scope="module")
def local_run(geometries) -> tuple[Path, int, str, str]:
    results = geometries / "local.jsonl"
    code, out, err = run_main("batch", geometries / "scan", f"@{geometries / 'others' / 'molecules.list'}",
                              "--basis", BASES, "--results", results, "--workers", "2")
    return results, code, out, err


def test_list_file_syntax(geometries):
    entries = expand_geometries([f"@{geometries / 'others' / 'molecules.list'}"])
    assert [Path(e.path).name for e in entries] == ["heh_1.40.xyz", "heh_1.46.xyz", "water.xyz", "broken.xyz",
                                                    "missing.xyz"]
    assert [e.charge for e in entries] == [1, 1, None, None, None]


def test_batch_gives_the_energies_of_single_runs(geometries, local_run):
    # Source: exact property — a batch job runs the same code on the same input
    # as 'hfcore energy'. The single runs here may use more BLAS threads than
    # a batch worker (one), which changes only the rounding of matrix
    # products: 1e-12 Eh allows that and nothing else.
    results, code, _, err = local_run
    records = job_lines(results)
    ok = [r for r in records if r["status"] == "ok"]
    assert len(ok) == 7 * 2, err
    for record in ok:
        job = record["job"]
        expected = single_energy(Path(job["geometry"]), job["basis"], job["charge"])
        assert abs(record["energy"]["total"] - expected) < 1e-12, (job, record["energy"]["total"] - expected)


def test_every_job_has_exactly_one_line(local_run):
    results, _, _, _ = local_run
    records = job_lines(results)
    keys = [r["job"]["key"] for r in records]
    assert len(keys) == len(set(keys)) == 9 * 2


def test_broken_and_missing_files_give_one_failed_line_per_basis(local_run):
    results, code, out, _ = local_run
    failed = [r for r in job_lines(results) if r["status"] == "failed"]
    by_file = {}
    for record in failed:
        by_file.setdefault(Path(record["job"]["geometry"]).name, []).append(record)
        assert "energy" not in record
    assert sorted(by_file) == ["broken.xyz", "missing.xyz"]
    for name, records in by_file.items():
        assert sorted(r["job"]["basis"] for r in records) == ["6-31g", "sto-3g"]
        # The message and exit code of the equivalent single run (exit 2: bad input).
        assert {r["error"]["exit_code"] for r in records} == {2}
    assert "missing.xyz: no such file" in by_file["missing.xyz"][0]["error"]["message"]
    assert "broken.xyz:1:" in by_file["broken.xyz"][0]["error"]["message"]
    assert code == 10  # some jobs failed
    assert "Failed jobs: 4" in out


def test_a_success_line_is_the_energy_json_record_plus_the_job(local_run):
    results, _, _, _ = local_run
    record = next(r for r in job_lines(results) if r["status"] == "ok" and "water" in r["job"]["geometry"])
    for section in ("energy", "scf", "basis", "orbitals", "molecule", "analysis", "hfcore", "units"):
        assert section in record
    assert record["job"]["basis"] in BASES.split(",")
    assert record["basis"]["name"].lower() == record["job"]["basis"]
    assert record["job"]["options"]["guess"] == "sad"


def test_rerun_skips_finished_jobs_and_says_so(geometries, local_run):
    results, _, _, _ = local_run
    before = results.read_bytes()
    code, _, err = run_main("batch", geometries / "scan", f"@{geometries / 'others' / 'molecules.list'}",
                            "--basis", BASES, "--results", results)
    assert code == 10
    assert "skipping 18 job(s)" in err and "14 ok, 4 failed" in err and "--retry-failed" in err
    assert results.read_bytes() == before


def test_finished_jobs_are_recognised_by_content_not_path(tmp_path):
    (tmp_path / "a.xyz").write_text(h2(0.74))
    results = tmp_path / "r.jsonl"
    assert run_main("batch", tmp_path / "a.xyz", "--results", results, "--workers", "1")[0] == 0
    (tmp_path / "a.xyz").rename(tmp_path / "renamed.xyz")
    code, _, err = run_main("batch", tmp_path / "renamed.xyz", "--results", results, "--workers", "1")
    assert code == 0 and "skipping 1 job(s)" in err
    assert len(job_lines(results)) == 1
    # Edited content is a new job, though the path is the same.
    (tmp_path / "renamed.xyz").write_text(h2(0.80))
    code, _, err = run_main("batch", tmp_path / "renamed.xyz", "--results", results, "--workers", "1")
    assert code == 0 and "skipping" not in err
    assert len(job_lines(results)) == 2


def test_retry_failed_reruns_only_the_failed_jobs(tmp_path):
    (tmp_path / "good.xyz").write_text(h2(0.74))
    (tmp_path / "bad.xyz").write_text(BROKEN)
    results = tmp_path / "r.jsonl"
    args = ("batch", tmp_path / "good.xyz", tmp_path / "bad.xyz", "--results", results, "--workers", "1")
    assert run_main(*args)[0] == 10
    (tmp_path / "bad.xyz").write_text(BROKEN)  # still broken: same content, same key
    code, _, err = run_main(*args, "--retry-failed")
    assert code == 10 and "skipping 1 job(s)" in err and "1 ok, 0 failed" in err
    names = [Path(r["job"]["geometry"]).name for r in job_lines(results)]
    # The first run writes its two lines in the order the jobs finish (the
    # broken file fails at once, so either order is right); the retry
    # appends exactly one more line, for the failed job.
    assert sorted(names[:2]) == ["bad.xyz", "good.xyz"] and names[2:] == ["bad.xyz"]


def test_energy_options_reach_every_job_and_are_part_of_its_identity(tmp_path):
    (tmp_path / "a.xyz").write_text(h2(0.74))
    results = tmp_path / "r.jsonl"
    assert run_main("batch", tmp_path / "a.xyz", "--results", results, "--workers", "1")[0] == 0
    code, _, err = run_main("batch", tmp_path / "a.xyz", "--results", results, "--workers", "1",
                            "--energy-tol", "1e-8", "--guess", "core")
    assert code == 0 and "skipping" not in err
    second = job_lines(results)[1]
    assert second["job"]["options"]["energy_tol"] == 1e-8
    assert second["scf"]["thresholds"]["energy_tol"] == 1e-8


def test_summary_table_and_scan_plot(tmp_path, local_run):
    results, _, _, _ = local_run
    code, out, _ = run_main("batch", "--results", results, "--summary", "--plot", tmp_path / "scan.png")
    assert code == 0
    assert "h2_0.74.xyz" in out and "failed" in out and "6-31g" in out
    assert_valid_png(tmp_path / "scan.png")
    table = energy_table(str(results))
    # Not every comment holds a number (the broken and missing files have
    # none), so the geometries are numbered in the order given.
    assert table.coordinate == [float(k) for k in range(1, 10)]
    assert [Path(g).name for g in table.geometries][:4] == ["h2_0.65.xyz", "h2_0.70.xyz", "h2_0.74.xyz",
                                                             "h2_0.80.xyz"]


def test_python_api_in_three_lines_matches_the_command_line_jobs(tmp_path, local_run):
    from hfcore.batch import make_jobs, run_batch

    results, _, _, _ = local_run
    jobs, _ = make_jobs(expand_geometries([str(Path(results).parent / "scan")]), ["sto-3g", "6-31g"], 0, {})
    before = results.read_bytes()
    outcome = run_batch(jobs, str(results), workers=1)
    assert outcome.skipped_ok == 8 and not outcome.ran  # the same keys as the command-line jobs
    assert results.read_bytes() == before
    with pytest.raises(InputError, match="unknown job option"):
        make_jobs(expand_geometries([str(Path(results).parent / "scan")]), ["sto-3g"], 0, {"energy_tolerance": 1})


def test_scan_coordinate_comes_from_the_comment_lines(tmp_path):
    for r in (0.80, 0.70):
        (tmp_path / f"h2_{r}.xyz").write_text(h2(r))
    results = tmp_path / "r.jsonl"
    assert run_main("batch", tmp_path, "--results", results, "--workers", "1")[0] == 0
    table = energy_table(str(results))
    assert table.coordinate == [0.70, 0.80]
    assert table.coordinate_label.startswith("H2 r")


# --- signals: finished lines stay whole, a re-run completes every job once ------------


def _start_batch(directory: Path, results: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "hfcore", "batch", str(directory), "--basis", BASES, "--results", str(results),
         "--workers", "1", "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)},
    )


def _wait_for_lines(results: Path, count: int, proc: subprocess.Popen) -> None:
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if results.exists() and results.read_bytes().count(b"\n") >= count + 1:
            return
        time.sleep(0.02)
    pytest.fail("the batch finished or stalled before the expected number of lines")


def test_sigterm_sigint_sigkill_then_rerun_runs_every_job_exactly_once(tmp_path):
    scan = tmp_path / "scan"
    scan.mkdir()
    for k in range(8):
        (scan / f"w{k}.xyz").write_text(WATER.replace("0.117300", f"{0.11 + 0.005 * k:.6f}"))
    results = tmp_path / "r.jsonl"

    proc = _start_batch(scan, results)
    _wait_for_lines(results, 2, proc)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err
    assert "Traceback" not in err and "stopped by SIGTERM" in err
    after_term = len(job_lines(results))
    assert 2 <= after_term < 16

    proc = _start_batch(scan, results)
    _wait_for_lines(results, after_term + 1, proc)
    proc.send_signal(signal.SIGINT)  # what Ctrl-C sends
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "stopped by SIGINT" in err
    after_int = len(job_lines(results))

    proc = _start_batch(scan, results)
    _wait_for_lines(results, after_int + 1, proc)
    proc.kill()
    proc.communicate(timeout=60)
    after_kill = len(job_lines(results))
    assert after_term < after_int < after_kill < 16
    # A crash of the machine mid-write is the one way to get a partial line;
    # imitate it, so the re-run must deal with one.
    with open(results, "ab") as handle:
        handle.write(b'{"job":{"key":"cut-off')

    proc = _start_batch(scan, results)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    assert "cut off a partial last line" in err and f"skipping {after_kill} job(s)" in err
    records = job_lines(results)
    keys = [r["job"]["key"] for r in records]
    assert len(keys) == len(set(keys)) == 16
    assert all(r["status"] == "ok" for r in records)


# --- Dask -------------------------------------------------------------------------


def test_dask_cluster_gives_the_energies_of_the_local_run_even_when_a_worker_dies(tmp_path, geometries, local_run):
    pytest.importorskip("distributed", reason="the Dask extra is not installed: pip install 'hfcore[dask]'")
    import threading

    from distributed import Client, LocalCluster

    results, _, _, _ = local_run
    local = {r["job"]["key"]: r for r in job_lines(results)}
    remote_results = tmp_path / "dask.jsonl"
    outcome = {}
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster, \
            Client(cluster) as client:
        victim = next(iter(client.run(os.getpid).values()))

        def batch() -> None:
            outcome["result"] = run_main("batch", geometries / "scan", f"@{geometries / 'others' / 'molecules.list'}",
                                         "--basis", BASES, "--results", remote_results, "--scheduler",
                                         cluster.scheduler_address, "--quiet")

        runner = threading.Thread(target=batch)
        runner.start()
        while runner.is_alive() and not (remote_results.exists() and remote_results.read_bytes().count(b"\n") >= 3):
            time.sleep(0.01)
        os.kill(victim, signal.SIGKILL)  # its running job goes back to the scheduler
        runner.join(timeout=300)
    code, _, err = outcome["result"]
    assert code == 10, err
    remote = job_lines(remote_results)
    assert sorted(r["job"]["key"] for r in remote) == sorted(local)  # every job once, none lost, none twice
    for record in remote:
        twin = local[record["job"]["key"]]
        assert record["status"] == twin["status"]
        if record["status"] == "ok":
            # Source: exact property — the same job with the same code and input;
            # 1e-12 Eh for rounding only, in case the cluster's BLAS threads differ.
            assert abs(record["energy"]["total"] - twin["energy"]["total"]) < 1e-12
        else:
            assert record["error"] == twin["error"]


# --- bad input: one line and a documented exit code -----------------------------------


def assert_one_line_error(code: int, out: str, err: str, expected: int, *fragments: str) -> None:
    assert code == expected, err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("hfcore: error: "), err
    for fragment in fragments:
        assert fragment in lines[0]
    assert out == ""


def test_unreadable_results_file(tmp_path):
    (tmp_path / "a.xyz").write_text(h2(0.74))
    (tmp_path / "r.jsonl").mkdir()
    code, out, err = run_main("batch", tmp_path / "a.xyz", "--results", tmp_path / "r.jsonl")
    assert_one_line_error(code, out, err, 11, "is a directory")
    (tmp_path / "garbage.jsonl").write_bytes(b"\xff\xfe not json\n")
    code, out, err = run_main("batch", tmp_path / "a.xyz", "--results", tmp_path / "garbage.jsonl")
    assert_one_line_error(code, out, err, 11, "not an hfcore batch results file")
    assert (tmp_path / "garbage.jsonl").read_bytes() == b"\xff\xfe not json\n"


def test_results_file_from_another_version_is_refused(tmp_path):
    (tmp_path / "a.xyz").write_text(h2(0.74))
    results = tmp_path / "r.jsonl"
    old = json.dumps({"hfcore_batch_results": RESULTS_FORMAT, "hfcore_version": "0.0.1"}) + "\n"
    results.write_text(old)
    code, out, err = run_main("batch", tmp_path / "a.xyz", "--results", results)
    assert_one_line_error(code, out, err, 11, "written by hfcore 0.0.1", "use a new results file")
    assert results.read_text() == old
    code, out, err = run_main("batch", "--results", results, "--summary")
    assert_one_line_error(code, out, err, 11, "written by hfcore 0.0.1")


def test_a_second_batch_on_the_same_file_is_refused(tmp_path):
    (tmp_path / "a.xyz").write_text(h2(0.74))
    results = tmp_path / "r.jsonl"
    with open(f"{results}.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX | fcntl.LOCK_NB)
        code, out, err = run_main("batch", tmp_path / "a.xyz", "--results", results)
    assert_one_line_error(code, out, err, 11, "another batch is writing this results file")
    assert not results.exists()


def test_a_scheduler_that_does_not_answer(tmp_path):
    pytest.importorskip("distributed", reason="the Dask extra is not installed: pip install 'hfcore[dask]'")
    (tmp_path / "a.xyz").write_text(h2(0.74))
    code, out, err = run_main("batch", tmp_path / "a.xyz", "--results", tmp_path / "r.jsonl", "--quiet",
                              "--scheduler", "tcp://127.0.0.1:9", "--scheduler-timeout", "1")
    assert_one_line_error(code, out, err, 12, "tcp://127.0.0.1:9: no Dask scheduler answered within 1 s")
    assert not (tmp_path / "r.jsonl").exists()


def test_bad_list_file_line(tmp_path):
    (tmp_path / "m.list").write_text("a.xyz charge=one\n")
    code, out, err = run_main("batch", f"@{tmp_path / 'm.list'}", "--results", tmp_path / "r.jsonl")
    assert_one_line_error(code, out, err, 2, "m.list:1: expected 'PATH [charge=N] [multiplicity=M]'")
    assert not (tmp_path / "r.jsonl").exists()


def test_new_energy_options_flow_into_batch_even_when_a_batch_option_shadows_them():
    import argparse

    from hfcore.cli.batch import add_batch_parser

    root = argparse.ArgumentParser()
    sub = root.add_subparsers(dest="command")
    energy = sub.add_parser("energy")
    energy.add_argument("geometry")
    energy.add_argument("--charge", type=int, default=0)
    energy.add_argument("--new-flag", type=float, default=0.5)
    energy.add_argument("--threads", type=int, default=None)
    energy.add_argument("--plot", default=None)
    add_batch_parser(sub, energy)
    args = root.parse_args(["batch", "a.xyz", "--results", "r.jsonl", "--new-flag", "2", "--threads", "3"])
    assert args.new_flag == 2.0 and "new_flag" in args.batch_job_dests
    assert args.batch_extra_dests == ["threads"] and args.threads == 3
    assert "plot" not in args.batch_job_dests  # shadowed by batch's own --plot; the job keeps energy's default


def test_with_a_basis_file_the_job_names_the_file_it_used(tmp_path):
    # STO-3G hydrogen 1s (Hehre, Stewart & Pople 1969), the same shell as in test_bad_inputs.
    shell = {"l": 0, "exponents": ["3.42525091", "0.62391373", "0.16885540"],
             "coefficients": [["0.15432897", "0.53532814", "0.44463454"]]}
    (tmp_path / "mine.json").write_text(json.dumps({"format": "hfcore-basis/1", "name": "mine",
                                                    "elements": {"H": [shell]}}))
    (tmp_path / "a.xyz").write_text(h2(0.74))
    results = tmp_path / "r.jsonl"
    basis_file = str(tmp_path / "mine.json")
    code, _, err = run_main("batch", tmp_path / "a.xyz", "--basis", "6-31g,sto-3g", "--basis-file", basis_file,
                            "--results", results, "--workers", "1")
    assert code == 0, err
    (record,) = job_lines(results)  # the file replaces --basis: one job, not one per name
    assert record["job"]["basis"] == basis_file
    assert record["job"]["options"]["basis_file"] == basis_file
    assert record["energy"]["total"] == pytest.approx(single_energy_file(tmp_path / "a.xyz", basis_file), abs=1e-9)


def single_energy_file(path: Path, basis_file: str) -> float:
    code, out, err = run_main("energy", path, "--basis-file", basis_file, "--json", "-")
    assert code == 0, err
    return json.loads(out)["energy"]["total"]


@pytest.mark.parametrize("other_thread", [False, True])
def test_local_workers_leave_signals_to_the_parent_and_get_the_thread_limit(other_thread):
    # With another thread alive the pool must not fork from this process (fork server instead).
    stop = threading.Event()
    if other_thread:
        threading.Thread(target=stop.wait, daemon=True).start()
    try:
        _check_local_worker_signals()
    finally:
        stop.set()


def _check_local_worker_signals():
    # Whether spawned or forked from the preloading fork server, a worker must
    # not run the batch parent's signal handlers: Ctrl-C is the parent's to
    # handle, SIGTERM (sent by the parent to abandon a job) ends the worker.
    import importlib.util

    from hfcore.batch.pool import LocalPool

    def parent_handler(signum, frame):  # what 'hfcore batch' installs while it runs
        raise AssertionError("a worker ran the parent's handler")

    previous = {s: signal.signal(s, parent_handler) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        threads_at_start = threading.active_count()
        pool = LocalPool(1, 3)
        try:
            assert pool.executor.submit(signal.getsignal, signal.SIGINT).result() == signal.SIG_IGN
            assert pool.executor.submit(signal.getsignal, signal.SIGTERM).result() == signal.SIG_DFL
            assert pool.executor.submit(os.getenv, "OPENBLAS_NUM_THREADS").result() == "3"
        finally:
            pool.close(abandon=False)
    finally:
        for s, h in previous.items():
            signal.signal(s, h)
    # Linux with threadpoolctl (as in the test environment) forks; elsewhere spawn as before.
    fork_expected = sys.platform.startswith("linux") and importlib.util.find_spec("threadpoolctl") is not None
    # A single-threaded parent forks its workers itself; one with other threads uses the fork server.
    expected = ("fork" if threads_at_start == 1 else "forkserver") if fork_expected else "spawn"
    assert pool.start_method == expected
