"""Resources: the memory budget and its bounds, refused allocations, threads within the cores, a batch's
shared budget, and nothing left behind after SIGTERM.

Expected values are exact properties of the rules in :mod:`hfcore._memory`
and :mod:`hfcore._parallel` (the budget is half of the least bound; counts
are capped at the usable cores), or common practice where a file format of
the kernel is involved (``/proc`` and cgroup files, named beside the check).
"""

from __future__ import annotations

import json
import os
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from conftest import INPUTS, REPO, assert_one_line_error, copy_input, run_main

from hfcore import _memory, _parallel
from hfcore._memory import MemoryBudget, MemoryPaths, allocate, budget_in_force, resolve_budget
from hfcore.errors import ResourceError

GiB = 2**30
MiB = 2**20


def _meminfo(tmp_path: Path, available_kib: int) -> str:
    path = tmp_path / "meminfo"
    # common practice: /proc/meminfo reports kB meaning KiB
    path.write_text(f"MemTotal:       {4 * available_kib} kB\nMemAvailable:   {available_kib} kB\n")
    return str(path)


def _paths(tmp_path: Path, cgroup_lines: str, available_kib: int = 64 * 2**20) -> MemoryPaths:
    (tmp_path / "self_cgroup").write_text(cgroup_lines)
    return MemoryPaths(meminfo=_meminfo(tmp_path, available_kib), self_cgroup=str(tmp_path / "self_cgroup"),
                       cgroup_root=str(tmp_path / "cg"), use_rlimits=False)


def _write(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)


# --- the bounds ----------------------------------------------------------------------


def test_without_other_bounds_the_budget_is_half_the_available_memory(tmp_path):
    paths = _paths(tmp_path, "0::/\n", available_kib=8 * 2**20)
    budget = resolve_budget(paths=paths)
    # exact property: half of 8 GiB
    assert (budget.bytes, budget.bound, budget.words) == (4 * GiB, "available", "half of available memory")
    assert budget.describe() == "4 GiB (half of available memory)"
    assert budget.hard_limit_bytes is None


def test_cgroup_v2_limit_less_usage_sets_the_budget(tmp_path):
    # common practice: cgroup v2 keeps memory.max ("max" or bytes) and memory.current in the group's directory
    paths = _paths(tmp_path, "0::/job/step\n")
    _write(tmp_path / "cg" / "cgroup.controllers", "cpu memory\n")
    _write(tmp_path / "cg" / "job" / "memory.max", f"{3 * GiB}\n")
    _write(tmp_path / "cg" / "job" / "memory.current", f"{1 * GiB}\n")
    _write(tmp_path / "cg" / "job" / "step" / "memory.max", "max\n")
    _write(tmp_path / "cg" / "job" / "step" / "memory.current", f"{1 * GiB}\n")
    budget = resolve_budget(paths=paths)
    # exact property: the parent group's 3 GiB less 1 GiB used applies (the step has no limit of its own)
    assert (budget.bytes, budget.bound) == (1 * GiB, "cgroup")
    assert budget.words == "half of the cgroup memory limit"
    assert budget.hard_limit_bytes == 2 * GiB


def test_cgroup_v1_limit_less_usage_sets_the_budget(tmp_path):
    # common practice: cgroup v1 names its controller in /proc/self/cgroup and keeps
    # memory.limit_in_bytes / memory.usage_in_bytes under the memory/ mount
    paths = _paths(tmp_path, "5:devices:/x\n4:memory:/batch/job7\n0::/\n")
    group = tmp_path / "cg" / "memory" / "batch" / "job7"
    _write(group / "memory.limit_in_bytes", f"{6 * GiB}\n")
    _write(group / "memory.usage_in_bytes", f"{2 * GiB}\n")
    _write(tmp_path / "cg" / "memory" / "memory.limit_in_bytes", "9223372036854771712\n")  # v1's "no limit"
    _write(tmp_path / "cg" / "memory" / "memory.usage_in_bytes", f"{40 * GiB}\n")
    budget = resolve_budget(paths=paths)
    assert (budget.bytes, budget.bound) == (2 * GiB, "cgroup")  # exact property: (6 - 2) / 2 GiB


def test_a_container_whose_group_path_is_not_under_the_mount_reads_the_mount_root(tmp_path):
    paths = _paths(tmp_path, "4:memory:/host/side/path\n")
    _write(tmp_path / "cg" / "memory" / "memory.limit_in_bytes", f"{2 * GiB}\n")
    _write(tmp_path / "cg" / "memory" / "memory.usage_in_bytes", "0\n")
    assert resolve_budget(paths=paths).bytes == 1 * GiB  # exact property


def test_available_memory_below_the_cgroup_headroom_wins(tmp_path):
    paths = _paths(tmp_path, "4:memory:/\n", available_kib=2**20)  # 1 GiB available
    _write(tmp_path / "cg" / "memory" / "memory.limit_in_bytes", f"{8 * GiB}\n")
    _write(tmp_path / "cg" / "memory" / "memory.usage_in_bytes", "0\n")
    budget = resolve_budget(paths=paths)
    assert (budget.bytes, budget.bound, budget.hard_limit_bytes) == (GiB // 2, "available", 8 * GiB)


def test_a_request_above_the_hard_headroom_is_refused_below_it_kept(tmp_path):
    paths = _paths(tmp_path, "4:memory:/\n")
    _write(tmp_path / "cg" / "memory" / "memory.limit_in_bytes", f"{2 * GiB}\n")
    _write(tmp_path / "cg" / "memory" / "memory.usage_in_bytes", "0\n")
    assert resolve_budget(1.5 * GiB, paths=paths).bytes == int(1.5 * GiB)  # above the default share: allowed
    with pytest.raises(ResourceError, match="cgroup memory limit leaves 2 GiB"):
        resolve_budget(3 * GiB, paths=paths)


_RLIMIT_CHILD = """
import json, sys
from hfcore._memory import MemoryPaths, resolve_budget
budget = resolve_budget(paths=MemoryPaths(meminfo=sys.argv[1], self_cgroup="/nonexistent"))
vm = int([l for l in open("/proc/self/status") if l.startswith("VmSize:")][0].split()[1]) * 1024
print(json.dumps({"bytes": budget.bytes, "bound": budget.bound, "hard": budget.hard_limit_bytes, "vm": vm}))
"""


def _limited(limit: int):
    def set_limit() -> None:
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))

    return set_limit


def _env() -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in (str(REPO), os.environ.get("PYTHONPATH", "")) if p)}


def test_an_address_space_limit_less_what_is_mapped_sets_the_budget(tmp_path):
    limit = 3 * GiB
    proc = subprocess.run([sys.executable, "-c", _RLIMIT_CHILD, _meminfo(tmp_path, 64 * 2**20)],
                          capture_output=True, text=True, timeout=120, env=_env(), preexec_fn=_limited(limit))
    assert proc.returncode == 0, proc.stderr
    seen = json.loads(proc.stdout)
    assert seen["bound"] == "address-space"
    # exact property: half of the limit less the mapped size (which only grows between the two reads)
    assert 0 < seen["bytes"] <= (limit - seen["vm"]) // 2 + 1 and seen["bytes"] > (limit - seen["vm"]) // 2 - 64 * MiB
    assert seen["hard"] == 2 * seen["bytes"] or abs(seen["hard"] - 2 * seen["bytes"]) <= 1


def test_memory_above_the_address_space_limit_is_refused_with_one_line(tmp_path):
    water = copy_input("water", tmp_path)
    proc = subprocess.run([sys.executable, "-m", "hfcore", "energy", str(water), "--memory", "100000"],
                          capture_output=True, text=True, timeout=120, env=_env(), cwd=tmp_path,
                          preexec_fn=_limited(2 * GiB))
    assert_one_line_error(proc, 5, "a memory budget of 97.7 GiB was asked for", "address-space limit")


# --- the allocator -------------------------------------------------------------------


def test_a_refused_allocation_is_one_resource_error_naming_array_size_and_budget(monkeypatch):
    def refuse(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr(_memory.np, "zeros", refuse)
    budget = MemoryBudget(3 * GiB, "cgroup", "half of the cgroup memory limit")
    with budget_in_force(budget), pytest.raises(ResourceError) as info:
        allocate("the stored integrals", (1024, 1024, 64))
    message = str(info.value)
    assert "\n" not in message
    assert "the stored integrals (512 MiB)" in message  # exact property: 8 * 2**26 bytes
    assert "budget is 3 GiB (half of the cgroup memory limit)" in message
    assert ResourceError.exit_code == 5


def test_shared_memory_refused_by_the_kernel_is_a_resource_error(monkeypatch):
    import errno
    import mmap

    def refuse(*args, **kwargs):
        raise OSError(errno.ENOMEM, "Cannot allocate memory")

    monkeypatch.setattr(mmap, "mmap", refuse)
    with pytest.raises(ResourceError, match="shared memory for the worker processes"):
        _parallel.shared_zeros((1000, 1000))


_SQUEEZE_CHILD = """
import resource, runpy, sys
import numpy as np
import hfcore.scf
from hfcore._parallel import blas_threads

# BLAS sets up its buffers on first use: do it before the squeeze, as any real start does.
for n in (1, 2):
    with blas_threads(n):
        np.ones((200, 200)) @ np.ones((200, 200))
planned = hfcore.scf.plan_jk

def plan_then_squeeze(*args, **kwargs):
    # Memory taken by someone else between the plan and the allocation: leave a quarter of the store.
    plan = planned(*args, **kwargs)
    vm = int([l for l in open("/proc/self/status") if l.startswith("VmSize:")][0].split()[1]) * 1024
    limit = vm + plan.eri_memory_bytes // 4
    resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    return plan

hfcore.scf.plan_jk = plan_then_squeeze
sys.argv = ["hfcore", *sys.argv[1:]]
runpy.run_module("hfcore", run_name="__main__")
"""


@pytest.mark.parametrize("threads", ["1", "2"])
def test_an_allocation_failing_under_an_rlimit_exits_5_with_one_line(tmp_path, threads):
    benzene = copy_input("benzene", tmp_path)
    proc = subprocess.run([sys.executable, "-c", _SQUEEZE_CHILD, "energy", str(benzene), "--basis", "6-31g",
                           "--threads", threads, "--json", "-"], capture_output=True, text=True, timeout=300, env=_env(),
                          cwd=tmp_path)
    # With two threads the store is shared memory for forked workers (an mmap refused with ENOMEM).
    assert_one_line_error(proc, 5, "not enough memory for the stored integrals", "the budget is")


# --- threads within the cores --------------------------------------------------------


def test_threads_beyond_the_cores_are_capped_with_a_note():
    cores = _parallel.usable_cores()
    assert _parallel.resolve_threads(100_000) == cores
    assert _parallel.resolve_threads(1) == 1
    assert _parallel.thread_note(cores) == ""
    assert _parallel.thread_note(cores + 5) == f"{cores + 5} threads asked for, capped at the {cores} usable " \
        f"core{'s' if cores > 1 else ''}"
    workers, threads = _parallel.split_cores(3 * cores, 4)
    assert workers == cores and workers * threads <= cores


def _children(pid: int) -> set[int]:
    found = set()
    for task in Path(f"/proc/{pid}/task").glob("*"):
        with open(task / "children") as handle:
            found.update(int(c) for c in handle.read().split())
    return found


@pytest.mark.skipif(not Path("/proc/self/task").exists(), reason="needs /proc to count child processes")
def test_oversized_threads_start_at_most_the_cores_worth_of_processes(tmp_path):
    benzene = copy_input("benzene", tmp_path)
    proc = subprocess.Popen([sys.executable, "-m", "hfcore", "energy", str(benzene), "--basis", "cc-pvdz",
                             "--threads", "200", "--json", "out.json", "--quiet"],
                            cwd=tmp_path, env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    most = 0
    while proc.poll() is None:
        with_children = set()
        try:
            with_children = _children(proc.pid)
        except OSError:
            pass
        most = max(most, len(with_children))
        time.sleep(0.01)
    out, err = proc.communicate()
    assert proc.returncode == 0, err
    cores = _parallel.usable_cores()
    assert 1 + most <= cores  # this process and its workers
    record = json.loads((tmp_path / "out.json").read_text())
    assert record["scf"]["threads"] == cores
    assert record["scf"]["resource_notes"] == [f"200 threads asked for, capped at the {cores} usable "
                                               f"core{'s' if cores > 1 else ''}"]


def test_the_report_says_the_budget_bound_and_the_thread_cap_in_words(water_file):
    code, out, err = run_main("energy", water_file, "--threads", "500")
    assert code == 0, err
    basis = out[out.index("Basis"): out.index("SCF iterations")]
    assert "memory" in basis and "budget" in basis and " (half of " in basis
    assert "e+0" not in basis  # sizes for people, not 1.18e+04 MiB
    assert "capped" in basis and "500 threads asked for" in basis


# --- a batch shares one budget -------------------------------------------------------


def test_a_batch_never_runs_jobs_whose_predictions_exceed_the_shared_budget(tmp_path):
    from hfcore.batch import expand_geometries, make_jobs, run_batch
    from hfcore.cli.batch import _memory_estimator

    names = ["water", "methane", "ammonia", "hydrogen_fluoride", "methanol", "formaldehyde"]
    for name in names:
        copy_input(name, tmp_path)
    results = tmp_path / "r.jsonl"
    memory_of = _memory_estimator()
    jobs, _ = make_jobs(expand_geometries([str(tmp_path / f"{n}.xyz") for n in names]), ["cc-pvdz"], 0, {})
    roomy = MemoryBudget(4 * GiB, "requested", "as requested")
    alone = {j.key: memory_of(j, roomy) for j in jobs}
    # Room for the largest job alone, or for two of the smaller ones.
    budget = MemoryBudget(int(1.05 * max(alone.values())), "requested", "as requested")
    forced = make_jobs(expand_geometries([str(tmp_path / "methanol.xyz")]), ["cc-pvdz"], 0,
                       {"direct": False, "memory_mib": 0.05})[0]
    outcome = run_batch(jobs + forced, str(results), workers=2, memory_of=memory_of, memory_budget=budget)
    lines = {r["job"]["key"]: r for r in outcome.ran}
    assert len(lines) == len(jobs) + 1
    refused = lines[forced[0].key]
    assert refused["status"] == "failed" and refused["error"]["exit_code"] == 5
    assert "\n" not in refused["error"]["message"] and "--direct" in refused["error"]["message"]
    ran = [lines[j.key] for j in jobs]
    assert all(r["status"] == "ok" for r in ran)
    assert sum(alone.values()) > budget.bytes  # the budget did bind
    for r in ran:
        assert r["batch"]["reserved_bytes"] == alone[r["job"]["key"]] or r["batch"]["reserved_bytes"] <= budget.bytes
    for a in ran:
        for b in ran:
            if a is b:
                continue
            overlap = a["batch"]["start_epoch_seconds"] < b["batch"]["end_epoch_seconds"] and \
                b["batch"]["start_epoch_seconds"] < a["batch"]["end_epoch_seconds"]
            if overlap:
                assert a["batch"]["reserved_bytes"] + b["batch"]["reserved_bytes"] <= budget.bytes


def test_batch_workers_times_threads_beyond_the_cores_get_fewer_threads(tmp_path):
    copy_input("water", tmp_path)
    cores = _parallel.usable_cores()
    code, out, err = run_main("batch", tmp_path / "water.xyz", "--basis", "sto-3g,6-31g", "--results",
                              tmp_path / "r.jsonl", "--workers", "2", "--threads", str(4 * cores))
    assert code == 0, err
    workers, threads = _parallel.split_cores(2, 4 * cores)
    assert f"running {workers} worker(s) x {threads} thread(s)" in err
    record = json.loads((tmp_path / "r.jsonl").read_text().splitlines()[1])
    assert record["scf"]["threads"] == threads


# --- nothing left behind -------------------------------------------------------------


def _shm() -> set[str]:
    return set(os.listdir("/dev/shm")) if os.path.isdir("/dev/shm") else set()


@pytest.mark.skipif(not _parallel.can_fork(), reason="forked workers need Linux")
def test_after_sigterm_no_worker_shared_memory_or_temporary_file_is_left(tmp_path):
    work, scratch = tmp_path / "work", tmp_path / "tmp"
    work.mkdir()
    scratch.mkdir()
    benzene = copy_input("benzene", work)
    before = _shm()
    # A lean store (--memory below the kernel's size) keeps a worker team through the SCF.
    proc = subprocess.Popen([sys.executable, "-m", "hfcore", "energy", str(benzene), "--basis", "cc-pvdz",
                             "--threads", "2", "--memory", "200", "--json", "out.json", "--npz", "out.npz"],
                            cwd=work, env={**_env(), "TMPDIR": str(scratch)}, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    workers: set[int] = set()
    while time.monotonic() < deadline and proc.poll() is None and not workers:
        with_children = set()
        try:
            with_children = _children(proc.pid)
        except OSError:
            pass
        workers = with_children
        time.sleep(0.01)
    if not workers:
        pytest.skip("the run ended before its workers could be seen (a single usable core?)")
    proc.send_signal(signal.SIGTERM)
    proc.communicate(timeout=120)
    assert proc.returncode in (143, -signal.SIGTERM)
    time.sleep(0.2)
    for pid in workers:
        assert not Path(f"/proc/{pid}").exists() or "Z" in Path(f"/proc/{pid}/stat").read_text().split()[2]
    assert _shm() <= before
    assert sorted(p.name for p in work.iterdir()) == ["benzene.xyz"]
    assert list(scratch.iterdir()) == []
