#!/usr/bin/env python
"""Start-up and serial time of hfcore's default command, side by side with the reference library.

Three measurements, each in fresh child processes (the helpers of
``scripts/benchmark.py``, so the figures are the same as its ``--table``):

- **start-up**: water STO-3G as a whole ``hfcore energy`` command against a
  script that runs the reference library's plain RHF on the same shells
  (best of ``--repeats`` of each, interleaved so a burst of load hits both);
- **speed-up**: benzene cc-pVDZ, ``--threads 2`` against ``--threads 1``,
  whole processes (best of ``--repeats``);
- **serial phases** (``--phases``): one in-process run of benzene cc-pVDZ at
  one thread, timed phase by phase (imports, geometry, basis, plan, SCF with
  its guess, analysis, record), to show which part of the whole is serial.

The machine's load average is printed beside every figure: the machines are
shared, so a two-thread speed-up measured under load says little; the serial
share of the one-thread run is the steadier figure. Benchmarks are not
tests: nothing here asserts a time.

Usage::

    python scripts/startup_benchmark.py              # start-up and speed-up
    python scripts/startup_benchmark.py --phases     # and the serial phases
    python scripts/startup_benchmark.py --only phases
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "scripts"))
sys.path.insert(0, str(ROOT))

import benchmark as bench  # noqa: E402  (the shared helpers: child processes, the reference script)

_PHASES_CHILD = r"""
import json, sys, time
t0 = time.perf_counter()
from hfcore.runs import RunRequest, read_molecule, build_basis_for, analysis_record
from hfcore.scf import plan_jk, run_scf
import hfcore.export
t_import = time.perf_counter()
request = RunRequest(sys.argv[1], basis=sys.argv[2], threads=1)
molecule = read_molecule(request)
t_read = time.perf_counter()
basis = build_basis_for(request, molecule)
t_basis = time.perf_counter()
options = request.scf_options()
plan = plan_jk(basis, options, n_occupied=molecule.n_electrons // 2)
t_plan = time.perf_counter()
result = run_scf(molecule, basis, options, guess=request.guess, plan=plan)
t_scf = time.perf_counter()
analysis = analysis_record(result)
t_analysis = time.perf_counter()
from hfcore.scf import guess
guess._CACHE.clear()  # the atomic SCFs again, alone (the run's guess stage also holds the first J/K build)
t_sad0 = time.perf_counter()
guess.sad_density(basis, molecule.atomic_numbers)
t_sad = time.perf_counter() - t_sad0
text = hfcore.export.to_json(result.to_dict(analysis))
t_record = time.perf_counter()
print(json.dumps({
    "imports": t_import - t0, "geometry": t_read - t_import, "basis": t_basis - t_read, "plan": t_plan - t_basis,
    "scf": t_scf - t_plan, "analysis": t_analysis - t_scf, "record": t_record - t_analysis - t_sad, "sad": t_sad,
    "scf_timings": dict(result.timings),
}))
"""


def _installed_copy(folder: Path, tree: Path) -> Path:
    """A copy of the hfcore package with its bytecode compiled, as ``pip install`` leaves it; its root folder.

    Some shells set PYTHONDONTWRITEBYTECODE, so a run from the source tree
    compiles every hfcore module again each time, while the reference
    library's installed files come with their bytecode. The children then run
    from (and in) this copy, which Python reads compiled whatever that setting.
    """
    import compileall
    import shutil

    root = folder / "installed"
    shutil.copytree(tree / "hfcore", root / "hfcore", ignore=shutil.ignore_patterns("__pycache__"))
    compileall.compile_dir(str(root / "hfcore"), quiet=1)
    return root


def _load() -> str:
    one, five, fifteen = os.getloadavg()
    return f"load {one:.2f} / {five:.2f} / {fifteen:.2f} (1/5/15 min)"


def startup(folder: Path, repeats: int) -> dict:
    """Best-of-``repeats`` whole-process wall and CPU times of water STO-3G, both programs."""
    label, geometry, basis = bench.STARTUP_CASE
    reference = bench._reference_job(geometry, basis, None, folder) + ["1"]
    bench._timed(bench._hfcore_command(geometry, basis, None, 1, str(folder / "s.json")), 1)  # warm-up
    bench._timed(reference, 1)
    ours, theirs, our_cpu, their_cpu = [], [], [], []
    for _ in range(repeats):
        ours.append(bench._timed(bench._hfcore_command(geometry, basis, None, 1, str(folder / "s.json")), 1)[0])
        our_cpu.append(bench._CPU_SECONDS[0])
        theirs.append(bench._timed(reference, 1)[0])
        their_cpu.append(bench._CPU_SECONDS[0])
    return {"case": f"{label} whole command", "hfcore": min(ours), "reference": min(theirs),
            "ratio": min(ours) / min(theirs), "hfcore_cpu": min(our_cpu), "reference_cpu": min(their_cpu),
            "cpu_ratio": min(our_cpu) / min(their_cpu), "load": _load()}


def speedup(folder: Path, repeats: int) -> dict:
    """Best-of-``repeats`` whole-process times of benzene cc-pVDZ on one and two threads."""
    label, geometry, basis, _ = bench.SPEEDUP
    one, two, one_cpu = [], [], []
    for _ in range(repeats):
        one.append(bench._timed(bench._hfcore_command(geometry, basis, None, 1, str(folder / "one.json")), 1)[0])
        one_cpu.append(bench._CPU_SECONDS[0])
        two.append(bench._timed(bench._hfcore_command(geometry, basis, None, 2, str(folder / "two.json")), 2)[0])
    first, second = (json.loads((folder / f"{n}.json").read_text()) for n in ("one", "two"))
    same = first["energy"]["total"] == second["energy"]["total"]
    stages = {k: (first["timings"][k], second["timings"][k]) for k in first["timings"]}
    return {"case": f"{label} --threads 2 / --threads 1", "one": min(one), "two": min(two),
            "speedup": min(one) / min(two), "one_cpu": min(one_cpu), "same_energy": same, "stages": stages,
            "load": _load()}


def phases() -> dict:
    """Phase times of one in-process benzene cc-pVDZ run at one thread (a fresh child)."""
    _, geometry, basis, _ = bench.SPEEDUP
    t0 = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", _PHASES_CHILD, str(bench.INPUTS / geometry), basis],
                          capture_output=True, text=True, env=bench._child_env(1), cwd=str(bench.ROOT), check=True)
    wall = time.perf_counter() - t0
    out = json.loads(done.stdout)
    out["process"] = wall
    out["load"] = _load()
    return out


def _format_phases(p: dict) -> str:
    st = p["scf_timings"]
    # The threaded part is run_scf's wall time less its atomic SCFs; the rest of the process is serial.
    threaded = p["scf"] - p["sad"]
    serial = p["process"] - threaded - p["sad"]  # the repeated atomic SCFs are no part of the user's run
    p = {**p, "process": p["process"] - p["sad"]}
    lines = [f"serial phases, benzene cc-pVDZ at one thread, one process of {p['process']:.2f} s ({p['load']}):"]
    for key in ("imports", "geometry", "basis", "plan"):
        lines.append(f"  {key:<34}{p[key]:>8.3f} s   serial")
    lines.append(f"  {'SCF: atomic SCFs of the guess':<34}{p['sad']:>8.3f} s   serial")
    lines.append(f"  {'SCF: the rest':<34}{threaded:>8.3f} s   threaded in part (integrals, iterations, stability: "
                 f"{st.get('integrals', 0.0):.2f} / {st.get('scf', 0.0):.2f} / {st.get('stability', 0.0):.2f} s)")
    lines.append(f"  {'analysis':<34}{p['analysis']:>8.3f} s   serial")
    lines.append(f"  {'record (JSON text)':<34}{p['record']:>8.3f} s   serial")
    lines.append(f"  serial share of the process: {serial:.2f} s = {serial / p['process']:.0%} "
                 f"(interpreter start and everything "
                 f"outside the threaded SCF stages); "
                 f"Amdahl bound on two threads: {1.0 / (serial / p['process'] + (1 - serial / p['process']) / 2):.2f}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3, help="runs of each process (best is kept; default 3)")
    parser.add_argument("--phases", action="store_true", help="also time the serial phases in process")
    parser.add_argument("--only", choices=("startup", "speedup", "phases"), help="one measurement only")
    parser.add_argument("--json", help="write the figures as JSON to this path")
    parser.add_argument("--bytecode", choices=("cached", "as-is"), default="cached",
                        help="cached: hfcore runs from a copy with its bytecode compiled, as an installed package "
                        "(and the reference library) has it; as-is: from the source tree in the environment as it "
                        "is (default cached)")
    parser.add_argument("--tree", type=Path, default=ROOT,
                        help="the source tree whose hfcore is timed (default this one; e.g. an exported older commit "
                        "for a before/after figure in one run)")
    args = parser.parse_args(argv)
    wanted = {args.only} if args.only else {"startup", "speedup"} | ({"phases"} if args.phases else set())
    result: dict = {"load_before": _load(), "bytecode": args.bytecode, "tree": str(args.tree)}
    with tempfile.TemporaryDirectory(prefix="hfcore-startup-") as tmp:
        folder = Path(tmp)
        # the children's working folder and PYTHONPATH
        bench.ROOT = _installed_copy(folder, args.tree.resolve()) if args.bytecode == "cached" else args.tree.resolve()
        if "startup" in wanted:
            result["startup"] = startup(folder, args.repeats)
            s = result["startup"]
            print(f"{s['case']}: hfcore {s['hfcore']:.3f} s, reference {s['reference']:.3f} s, ratio {s['ratio']:.2f} "
                  f"(CPU {s['hfcore_cpu']:.3f} / {s['reference_cpu']:.3f} s = {s['cpu_ratio']:.2f}; "
                  f"best of {args.repeats}; bytecode {args.bytecode}; {s['load']})", flush=True)
        if "speedup" in wanted:
            result["speedup"] = speedup(folder, args.repeats)
            s = result["speedup"]
            print(f"{s['case']}: {s['one']:.2f} s / {s['two']:.2f} s = {s['speedup']:.2f} "
                  f"(same energy: {s['same_energy']}; best of {args.repeats}; {s['load']})", flush=True)
            print("  stages of the last run of each, one thread / two: " + ", ".join(
                f"{k} {a:.2f}/{b:.2f} s" for k, (a, b) in s["stages"].items()), flush=True)
        if "phases" in wanted:
            result["phases"] = phases()
            print(_format_phases(result["phases"]), flush=True)
    result["load_after"] = _load()
    if args.json:
        Path(args.json).write_text(json.dumps(result, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
