#!/usr/bin/env python
"""Time open-shell SCF runs against closed-shell ones and against the reference library, in one run.

For each case (an open-shell species and the closed-shell molecule of the
same basis size) every measurement runs in a fresh child process, one after
the other, one thread: hfcore's UHF, hfcore's RHF of the closed-shell
partner, and the reference library's UHF on the same shells and geometry
(when it is installed). The table reports whole-process and SCF seconds,
seconds per SCF iteration, the open/closed ratio of hfcore's per-iteration
cost (target: at most 1.5), the hfcore/reference ratio, the energy
difference and peak resident memory. A second table times one J/K build
of two densities (``jk_multi``) against one of a single density (``jk``)
for the same builder in every J/K mode. Benchmarks are not tests: nothing
here asserts a time.

Usage::

    python scripts/benchmark_open.py
    python scripts/benchmark_open.py --only "O2/cc-pVTZ"
    python scripts/benchmark_open.py --json out.json
    python scripts/benchmark_open.py --targets --no-jk   # fitted C6H6+ cc-pVTZ, exact O2 cc-pVQZ
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import argparse
import json
import multiprocessing as mp
import resource
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
INPUTS = ROOT / "inputs"
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

#: (label, open-shell file, charge, multiplicity, closed-shell partner file, basis, fitting set or None)
CASES = [
    ("H2O+/cc-pVTZ", "water.xyz", 1, 2, "water.xyz", "cc-pvtz", None),
    ("O2/cc-pVTZ", "o2.xyz", 0, 3, "o2.xyz", "cc-pvtz", None),
    ("C6H6+/cc-pVDZ", "benzene.xyz", 1, 2, "benzene.xyz", "cc-pvdz", None),
    ("C6H6+/cc-pVDZ/DF", "benzene.xyz", 1, 2, "benzene.xyz", "cc-pvdz", "def2-universal-jkfit"),
]
#: The issue's speed targets (run with --targets): fitted benzene cation in cc-pVTZ, exact O2 in cc-pVQZ.
TARGETS = [
    ("C6H6+/cc-pVTZ/DF", "benzene.xyz", 1, 2, "benzene.xyz", "cc-pvtz", "cc-pvtz-jkfit"),
    ("O2/cc-pVQZ", "o2.xyz", 0, 3, "o2.xyz", "cc-pvqz", None),
]


def _peak_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _hfcore(kind: str, path: str, charge: int, multiplicity: int | None, basis: str, fit: str | None, queue) -> None:
    t0 = time.perf_counter()
    import hfcore
    from hfcore.scf import SCFOptions, run_scf

    molecule = hfcore.read_xyz(INPUTS / path, charge=charge, multiplicity=multiplicity)
    options = SCFOptions(fit_basis=fit, threads=1, stability="skip")
    result = run_scf(molecule, basis, options)
    queue.put({
        "program": f"hfcore {kind}", "energy": result.energy_total, "iterations": result.iterations,
        "scf": result.timings["scf"], "integrals": result.timings["integrals"], "jk_mode": result.jk_mode,
        "process": time.perf_counter() - t0, "peak_mib": _peak_mib(),
    })


def _reference(path: str, charge: int, multiplicity: int, basis: str, fit: str | None, queue, method: str = "uhf") -> None:
    t0 = time.perf_counter()
    import hfcore
    from open_reference import open_reference_mole
    from pyscf import scf
    from reference import family_shells, reference_mole

    molecule = hfcore.read_xyz(INPUTS / path, charge=charge, multiplicity=multiplicity)
    mol = open_reference_mole(molecule, basis)
    mf = scf.UHF(mol) if method == "uhf" else scf.RHF(mol)
    if fit is not None:
        mf = mf.density_fit(auxbasis=reference_mole(molecule, family_shells(molecule, fit), spherical=True)._basis)
    mf.conv_tol, mf.verbose = 1e-10, 0
    cycles = []
    mf.callback = lambda env: cycles.append(1)
    t1 = time.perf_counter()
    mf.kernel()
    queue.put({
        "program": f"reference {method.upper()}", "energy": float(mf.e_tot), "iterations": len(cycles), "scf": time.perf_counter() - t1,
        "integrals": 0.0, "jk_mode": "", "process": time.perf_counter() - t0, "peak_mib": _peak_mib(),
    })


def _child(target, *args, **kwargs) -> dict:
    ctx = mp.get_context("fork")
    queue = ctx.Queue()
    t0 = time.perf_counter()
    process = ctx.Process(target=target, args=(*args, queue), kwargs=kwargs)
    process.start()
    out = queue.get()
    process.join()
    out["wall"] = time.perf_counter() - t0
    return out


def _jk_builds(path: str, basis_name: str, fit: str | None, repeats: int = 5) -> list[dict]:
    """Seconds of one jk (one density) and one jk_multi (two) for each J/K mode of a basis."""
    import numpy as np

    import hfcore
    from hfcore import integrals
    from hfcore.basis.fitting import fitting_basis
    from hfcore.scf.fitted_jk import FittedJK, plan_fitting

    molecule = hfcore.read_xyz(INPUTS / path)
    basis = hfcore.build_basis(molecule, basis_name)
    n = basis.n_functions
    rng = np.random.default_rng(1)
    c = rng.standard_normal((2, n, molecule.n_electrons // 2))
    densities = np.einsum("qik,qjk->qij", c, c)
    builders = {}
    if fit is None:
        if 8 * (n * (n + 1) // 2) ** 2 < (256 << 20):
            builders["stored"] = integrals.compute_eri(basis)
        builders["stored-lean"] = integrals.compute_eri(basis, lean=True)
        builders["direct"] = integrals.DirectERI(basis)
    else:
        choice = fitting_basis(molecule, basis, fit)
        builders["fitted"] = FittedJK(basis, choice.basis, plan_fitting(basis, choice.basis, molecule.n_electrons, 8 << 30))
    rows = []
    for mode, builder in builders.items():
        builder.jk(densities[0])
        builder.jk_multi(densities)  # warm (exchange kernel, caches)
        t_one = min(_timed(lambda: builder.jk(densities[0])) for _ in range(repeats if mode != "direct" else 1))
        t_two = min(_timed(lambda: builder.jk_multi(densities)) for _ in range(repeats if mode != "direct" else 1))
        rows.append({"mode": mode, "nbf": n, "jk": t_one, "jk_multi": t_two, "ratio": t_two / t_one})
    return rows


def _timed(work) -> float:
    t0 = time.perf_counter()
    work()
    return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", default="", help="comma-separated case labels")
    parser.add_argument("--json", default=None, help="write the measurements to this file")
    parser.add_argument("--no-reference", action="store_true", help="skip the reference library")
    parser.add_argument("--targets", action="store_true", help="run the issue's target cases instead")
    parser.add_argument("--no-jk", action="store_true", help="skip the table of single J/K builds")
    args = parser.parse_args(argv)
    wanted = {s.strip() for s in args.only.split(",") if s.strip()}
    load = os.getloadavg()
    print(f"load average {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}; one thread", flush=True)
    out = {"load": load, "cases": [], "jk": []}
    header = f"{'case':20s} {'program':15s} {'mode':12s} {'it':>4s} {'proc/s':>8s} {'scf/s':>8s} {'s/it':>8s} {'MiB':>7s} {'E/Eh':>18s}"
    print(header)
    for label, path, charge, mult, partner, basis, fit in (TARGETS if args.targets else CASES):
        if wanted and label not in wanted:
            continue
        runs = [_child(_hfcore, "UHF", path, charge, mult, basis, fit),
                _child(_hfcore, "RHF", partner, 0, None, basis, fit)]
        if not args.no_reference:
            try:
                runs.append(_child(_reference, path, charge, mult, basis, fit))
                runs.append(_child(_reference, partner, 0, 1, basis, fit, method="rhf"))
            except ImportError:
                pass
        for r in runs:
            r["per_iteration"] = r["scf"] / max(r["iterations"], 1)
            print(f"{label:20s} {r['program']:15s} {r['jk_mode']:12s} {r['iterations']:4d} {r['wall']:8.2f} "
                  f"{r['scf']:8.2f} {r['per_iteration']:8.4f} {r['peak_mib']:7.0f} {r['energy']:18.10f}")
        ratios = {"open_over_closed_per_iteration": runs[0]["per_iteration"] / runs[1]["per_iteration"]}
        if len(runs) > 2:
            ratios["hfcore_over_reference_process"] = runs[0]["wall"] / runs[2]["wall"]
            ratios["hfcore_over_reference_memory"] = runs[0]["peak_mib"] / runs[2]["peak_mib"]
            ratios["energy_difference"] = runs[0]["energy"] - runs[2]["energy"]
            ratios["reference_open_over_closed_per_iteration"] = runs[2]["per_iteration"] / runs[3]["per_iteration"]
        print("    " + ", ".join(f"{k} {v:.3g}" for k, v in ratios.items()), flush=True)
        out["cases"].append({"label": label, "runs": runs, "ratios": ratios})
    print(f"\n{'J/K builds':20s} {'mode':12s} {'nbf':>5s} {'jk/s':>9s} {'jk_multi/s':>11s} {'ratio':>6s}")
    jk_cases = () if args.no_jk else (("benzene.xyz", "cc-pvdz", None), ("benzene.xyz", "cc-pvdz", "def2-universal-jkfit"))
    for path, basis, fit in jk_cases:
        for row in _jk_builds(path, basis, fit):
            print(f"{path + '/' + basis:20s} {row['mode']:12s} {row['nbf']:5d} {row['jk']:9.4f} {row['jk_multi']:11.4f} {row['ratio']:6.2f}", flush=True)
            out["jk"].append(row)
    load = os.getloadavg()
    print(f"load average at the end {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
    if args.json:
        Path(args.json).write_text(json.dumps(out, indent=1, default=float))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
