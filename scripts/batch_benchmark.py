#!/usr/bin/env python
"""Time ``hfcore batch`` on one and on two local workers, and a single ``hfcore energy`` run.

A batch of small jobs (by default 8 geometries from ``inputs/`` times the
bases sto-3g and 6-31g: 16 jobs) runs as a whole ``hfcore batch`` command,
once with ``--workers 1`` and once with ``--workers 2``, each into a fresh
results file; then every job runs once more as its own ``hfcore energy``
command. Every time is the wall time of a child process as this script saw
it, interpreter start included. The figures printed:

* the wall time of each batch and the speed-up ``workers 1 / workers 2``;
* the mean wall time of a single ``hfcore energy`` run of the same jobs;
* the overhead per job of the batch against a single run:
  ``batch(workers 1) / jobs - single`` (negative when a batch job costs
  less than a single run, which pays the start-up every time);
* the batch's own fixed cost: ``batch(workers 1) - sum of the jobs' own
  wall_seconds`` (start-up, dispatch and writing, over the whole batch);
* the machine load (``os.getloadavg``) before and after, since the
  machine may be shared.

Usage::

    python scripts/batch_benchmark.py
    python scripts/batch_benchmark.py --repeat 3
    python scripts/batch_benchmark.py --geometries water,methanol --bases sto-3g,6-31g
    git archive OLD hfcore | tar -x -C /tmp/old && python scripts/batch_benchmark.py --source /tmp/old

Benchmarks are not tests: nothing here asserts a time.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_GEOMETRIES = (
    "water_cluster_3", "water_cluster_4", "water_cluster_5", "water_cluster_6", "water_cluster_7", "benzene",
    "fluoromethane", "methanol",
)
DEFAULT_BASES = ("sto-3g", "6-31g")


#: The checkout whose hfcore is timed (--source).
SOURCE = [ROOT]


def _env() -> dict[str, str]:
    path = os.environ.get("PYTHONPATH")
    return {**os.environ, "PYTHONPATH": str(SOURCE[0]) + (os.pathsep + path if path else "")}


def _timed(command: list[str]) -> tuple[float, str]:
    started = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, env=_env(), cwd=ROOT)
    wall = time.perf_counter() - started
    if done.returncode != 0:
        sys.exit(f"batch_benchmark: {' '.join(command)} failed (exit {done.returncode}): "
                 f"{done.stderr.strip().splitlines()[-1:]}")
    return wall, done.stdout


def _load() -> str:
    try:
        return " ".join(f"{x:.2f}" for x in os.getloadavg())
    except OSError:
        return "unknown"


def run_batch(geometries: list[str], bases: str, workers: int, directory: Path) -> tuple[float, list[dict]]:
    """Wall time of one whole ``hfcore batch`` command and its job lines."""
    results = directory / f"w{workers}_{time.monotonic_ns()}.jsonl"
    wall, _ = _timed([sys.executable, "-m", "hfcore", "batch", *geometries, "--basis", bases,
                      "--results", str(results), "--workers", str(workers), "--quiet"])
    lines = [json.loads(line) for line in results.read_text().splitlines()[1:]]
    return wall, lines


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--geometries", default=",".join(DEFAULT_GEOMETRIES),
                        help="comma-separated names of files in inputs/ (without .xyz)")
    parser.add_argument("--bases", default=",".join(DEFAULT_BASES), help="comma-separated basis names")
    parser.add_argument("--repeat", type=int, default=1, help="batch pairs to run (1 then 2 workers each time)")
    parser.add_argument("--json", metavar="FILE", help="also write the figures here")
    parser.add_argument("--source", metavar="DIR", default=str(ROOT),
                        help="time the hfcore package in DIR (e.g. an export of an older commit; default this "
                        "checkout); the geometries still come from this checkout's inputs/")
    args = parser.parse_args()
    SOURCE[0] = Path(args.source).resolve()

    geometries = [str(ROOT / "inputs" / f"{name.strip()}.xyz") for name in args.geometries.split(",")]
    bases = [b.strip() for b in args.bases.split(",")]
    n_jobs = len(geometries) * len(bases)
    load_before = _load()
    walls: dict[int, list[float]] = {1: [], 2: []}
    job_seconds: list[float] = []
    each_job: list[float] = []
    with tempfile.TemporaryDirectory() as tmp:
        for _ in range(args.repeat):
            for workers in (1, 2):
                wall, lines = run_batch(geometries, ",".join(bases), workers, Path(tmp))
                if len(lines) != n_jobs or any(r["status"] != "ok" for r in lines):
                    sys.exit(f"batch_benchmark: the batch on {workers} worker(s) did not finish every job")
                walls[workers].append(wall)
                if workers == 1:
                    job_seconds.append(sum(r["batch"]["wall_seconds"] for r in lines))
                    each_job = sorted(r["batch"]["wall_seconds"] for r in lines)
        singles = []
        for geometry in geometries:
            for basis in bases:
                wall, _ = _timed([sys.executable, "-m", "hfcore", "energy", geometry, "--basis", basis,
                                  "--json", "-"])
                singles.append(wall)
    load_after = _load()

    w1, w2 = statistics.median(walls[1]), statistics.median(walls[2])
    single = statistics.mean(singles)
    per_job_batch = w1 / n_jobs
    fixed = w1 - statistics.median(job_seconds)
    figures = {
        "jobs": n_jobs, "repeat": args.repeat, "cores": len(os.sched_getaffinity(0)),
        "batch_workers1_s": w1, "batch_workers2_s": w2, "speedup": w1 / w2,
        "single_energy_mean_s": single, "batch_per_job_s": per_job_batch,
        "overhead_per_job_s": per_job_batch - single, "jobs_own_wall_s": statistics.median(job_seconds),
        "batch_fixed_cost_s": fixed, "job_s_min": each_job[0], "job_s_max": each_job[-1], "load_before": load_before, "load_after": load_after,
        "all_batch_walls": {str(k): v for k, v in walls.items()},
    }
    print(f"{n_jobs} jobs ({len(geometries)} geometries x {', '.join(bases)}), {figures['cores']} usable cores, "
          f"median of {args.repeat}")
    print(f"  load average before: {load_before}   after: {load_after}")
    print(f"  hfcore batch --workers 1      {w1:8.2f} s")
    print(f"  hfcore batch --workers 2      {w2:8.2f} s   speed-up {w1 / w2:.2f}x")
    print(f"  single hfcore energy (mean)   {single:8.2f} s per run")
    print(f"  batch --workers 1 per job     {per_job_batch:8.2f} s   overhead per job against a single run "
          f"{per_job_batch - single:+.2f} s")
    print(f"  jobs' own time in the batch   {statistics.median(job_seconds):8.2f} s   "
          f"batch fixed cost {fixed:.2f} s ({fixed / n_jobs:.3f} s per job)")
    print(f"  one job in the batch          {each_job[0]:.2f} to {each_job[-1]:.2f} s")
    if args.json:
        Path(args.json).write_text(json.dumps(figures, indent=2) + "\n")


if __name__ == "__main__":
    main()
