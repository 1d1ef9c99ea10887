"""Time and peak memory of RHF + MP2, hfcore against the reference library, side by side.

Each program runs in its own child process, one thread each: hfcore through
its command line (``hfcore energy --mp2 --json``), the reference library
(PySCF, used here as a benchmark reference only, never by hfcore) through a
short script with the same geometry, basis and thresholds. Peak memory is
the child's maximum resident set (``wait4``); the MP2 step is each
program's own timing of it.

Usage::

    python scripts/benchmark_mp2.py                          # benzene/cc-pVDZ exact and fitted
    python scripts/benchmark_mp2.py --basis cc-pvtz          # benzene/cc-pVTZ
    python scripts/benchmark_mp2.py --only exact --json rows.json

Not a test: the figures depend on the machine and its load (printed).
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
#: The fitting sets of the fitted case: JK fitting for the SCF, RI fitting for MP2.
FITTING = {
    "cc-pvdz": ("cc-pvtz-jkfit", "cc-pvdz-rifit"),
    "cc-pvtz": ("cc-pvtz-jkfit", "cc-pvtz-rifit"),
    "cc-pvqz": ("cc-pvqz-jkfit", "cc-pvqz-rifit"),
}

REFERENCE = r"""
import json, sys, time
t0 = time.perf_counter()
from pyscf import gto, scf, mp, df, lib
lib.num_threads(1)
geometry, basis, jk_fit, mp2_fit = sys.argv[1:5]
mol = gto.M(atom=geometry, basis=basis, verbose=0, max_memory=12000)
mf = scf.RHF(mol)
if jk_fit != "-":
    mf = mf.density_fit(auxbasis=jk_fit)
mf.conv_tol = 1e-10
mf.max_memory = 12000
mf.kernel()
t1 = time.perf_counter()
if mp2_fit != "-":
    from pyscf.mp import dfmp2
    pt = dfmp2.DFMP2(mf)
    pt.with_df = df.DF(mol, auxbasis=mp2_fit)
else:
    pt = mp.MP2(mf)
pt.max_memory = 12000
e_corr = pt.kernel()[0]
t2 = time.perf_counter()
print(json.dumps({"scf_energy": mf.e_tot, "correlation": e_corr, "mp2_time": t2 - t1, "wall": t2 - t0}))
"""


def _child(args: list[str]) -> tuple[str, float, float]:
    """Run a child, return its stdout, wall time (s) and peak resident memory (MiB)."""
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1", PYTHONPATH=str(ROOT))
    with tempfile.TemporaryFile() as out:
        t0 = time.perf_counter()
        proc = subprocess.Popen(args, stdout=out, stderr=subprocess.DEVNULL, env=env, cwd=ROOT)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        text = out.read().decode()
    if proc.returncode != 0:
        raise RuntimeError(f"{args[:3]} ended with exit code {proc.returncode}")
    return text, wall, usage.ru_maxrss / 1024.0


def run(geometry: str, basis: str, fitted: bool) -> dict:
    jk_fit, mp2_fit = FITTING[basis] if fitted else ("-", "-")
    cmd = [sys.executable, "-m", "hfcore", "energy", geometry, "--basis", basis, "--mp2", "--threads", "1",
           "--energy-tol", "1e-10", "--json", "-"]
    if fitted:
        cmd += ["--fit-basis", jk_fit, "--mp2-fit-basis", mp2_fit]
    text, wall, peak = _child(cmd)
    ours = json.loads(text)
    rtext, rwall, rpeak = _child([sys.executable, "-c", REFERENCE, geometry, basis, jk_fit, mp2_fit])
    ref = json.loads(rtext)
    return {
        "case": f"{Path(geometry).stem}/{basis}" + (f" + {jk_fit}/{mp2_fit}" if fitted else " exact"),
        "hfcore_wall": wall,
        "reference_wall": rwall,
        "hfcore_mp2": ours["timings"]["mp2"],
        "reference_mp2": ref["mp2_time"],
        "hfcore_peak_mib": peak,
        "reference_peak_mib": rpeak,
        "correlation_difference": ours["mp2"]["correlation"] - ref["correlation"],
        "scf_difference": ours["energy"]["total"] - ref["scf_energy"],
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--geometry", default=str(ROOT / "inputs" / "benzene.xyz"))
    parser.add_argument("--basis", default="cc-pvdz", choices=sorted(FITTING))
    parser.add_argument("--only", choices=["exact", "fitted"], help="run one of the two cases")
    parser.add_argument("--json", help="write the rows as JSON to this path")
    args = parser.parse_args()
    print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f} at start", flush=True)
    rows = []
    for fitted in (False, True):
        if args.only and args.only != ("fitted" if fitted else "exact"):
            continue
        row = run(args.geometry, args.basis, fitted)
        rows.append(row)
        print(
            f"{row['case']}: whole process {row['hfcore_wall']:.1f} s vs {row['reference_wall']:.1f} s "
            f"({row['hfcore_wall'] / row['reference_wall']:.2f}); MP2 step {row['hfcore_mp2']:.2f} s vs "
            f"{row['reference_mp2']:.2f} s ({row['hfcore_mp2'] / row['reference_mp2']:.2f}); peak "
            f"{row['hfcore_peak_mib']:.0f} vs {row['reference_peak_mib']:.0f} MiB "
            f"({row['hfcore_peak_mib'] / row['reference_peak_mib']:.2f}); dE(MP2) {row['correlation_difference']:.1e} Eh",
            flush=True,
        )
    print(f"load average {os.getloadavg()[0]:.2f} at end")
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))


if __name__ == "__main__":
    main()
