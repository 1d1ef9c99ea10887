#!/usr/bin/env python
"""Time hfcore against the reference library, side by side, on fixed cases.

Each measurement runs in a fresh child process (so peak memory is the
case's own and thread settings take effect before numpy loads), one after
the other: hfcore, then the reference library if it is installed, on the
same geometry, the same shells and the same convergence threshold.

Usage::

    python scripts/benchmark.py                 # the fixed cases, one thread
    python scripts/benchmark.py --threads 2     # both programs on two threads
    python scripts/benchmark.py --scaling       # add the water-cluster series
    python scripts/benchmark.py --fitted --only benzene/cc-pVTZ/DF,benzene/cc-pVQZ/DF
                                                # density-fitted runs against the reference library's
    python scripts/benchmark.py --fitted-scaling --only "(H2O)2/cc-pVTZ/DF,(H2O)14/cc-pVTZ/DF"
    python scripts/benchmark.py --json out.json
    python scripts/benchmark.py --exact-tz      # benzene/cc-pVTZ, integrals stored
    python scripts/benchmark.py --speedup       # two threads against one, benzene/cc-pVDZ
    python scripts/benchmark.py --table         # the default command as users run it (see below)
    python scripts/benchmark.py --table --quick # its quick subset
    python scripts/benchmark.py --stability     # the stability analysis's share of the SCF time
    python scripts/benchmark.py --stability --before /tmp/hfcore-old
                                                # ... beside an older checkout of hfcore, same run

``--table`` times whole processes: hfcore's default command (``python -m
hfcore energy``, stability analysis included) against a script that runs the
reference library's plain RHF on the same shells, for water cc-pVTZ, benzene
6-31G*, benzene cc-pVTZ (exact) and benzene cc-pVQZ (fitted); water STO-3G
start-up (best of three of each); the stability analysis's share of the SCF
time; and the two-thread speed-up of the default command on benzene cc-pVDZ.
``--quick`` leaves out the two large benzene cases.

``--stability`` runs the default analysis (descend, with the RHF→UHF check)
after the SCF, in process, and reports stability seconds over SCF-iteration
seconds, the exact and fitted Hessian products, the verdicts and whether the
stated lowest eigenvalue came from exact or fitted products; beside it the
reference library's SCF followed by its own internal and RHF→UHF stability
analysis on the same shells (its share the same way). ``--before PATH`` adds
the same hfcore measurement from another checkout (PYTHONPATH=PATH) in the
same run, for before/after figures; ``--only`` picks cases by label.

The table reports wall times (integrals and SCF separately for hfcore), the
hfcore/reference ratio, the energy difference, iteration counts and peak
resident memory. ``proc/s`` is the whole child process (interpreter start,
imports, run) as the parent timed it; peak memory is the child's own
maximum resident set. hfcore's J/K mode (stored, stored-lean or direct) is
the one its automatic choice makes unless a case forces it. Benchmarks are
not tests: nothing here asserts a time.
"""

from __future__ import annotations

import argparse
import json
import math
import multiprocessing as mp
import os
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
INPUTS = ROOT / "inputs"

#: (label, geometry file, basis, spherical or None for the family default)
CASES = [
    ("water/cc-pVDZ", "water.xyz", "cc-pvdz", None),
    ("water/cc-pVTZ", "water.xyz", "cc-pvtz", None),
    ("benzene/STO-3G", "benzene.xyz", "sto-3g", None),
    ("benzene/6-31G*", "benzene.xyz", "6-31g*", None),
    ("benzene/cc-pVDZ", "benzene.xyz", "cc-pvdz", None),
]
SCALING = [(f"(H2O){n}/6-31G", f"water_cluster_{n}.xyz", "6-31g", None) for n in range(1, 9)]
#: Density-fitted cases: (label, geometry file, basis, fitting set); run with --fitted.
FITTED_CASES = [
    ("benzene/cc-pVTZ/DF", "benzene.xyz", "cc-pvtz", "cc-pvtz-jkfit"),
    ("benzene/cc-pVQZ/DF", "benzene.xyz", "cc-pvqz", "cc-pvqz-jkfit"),
]
#: Fitted water-cluster series in cc-pVTZ (58 functions per water); run with --fitted-scaling.
FITTED_SCALING = [
    (f"(H2O){n}/cc-pVTZ/DF", f"water_cluster_{n}.xyz", "cc-pvtz", "cc-pvtz-jkfit") for n in (2, 4, 6, 8, 10, 14, 18, 27)
]
#: Exact (stored) benzene in cc-pVTZ, 264 functions: minutes per program.
EXACT_TZ = [("benzene/cc-pVTZ", "benzene.xyz", "cc-pvtz", None)]
#: The case of the two-thread speed-up.
SPEEDUP = ("benzene/cc-pVDZ", "benzene.xyz", "cc-pvdz", None)

#: Memory the reference library may use for stored integrals (MB).
REFERENCE_MEMORY_MB = 12000
ENERGY_TOL = 1e-10
GRADIENT_TOL = 1e-7


def _limit_threads(threads: int) -> None:
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = str(threads)


def _peak_mib() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _run_hfcore(path: str, basis_name: str, spherical, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        import hfcore
        from hfcore.scf import SCFOptions

        t0 = time.perf_counter()
        mol = hfcore.read_xyz(path)
        basis = hfcore.build_basis(mol, basis_name, spherical=spherical)
        options = SCFOptions(energy_tol=ENERGY_TOL, gradient_tol=GRADIENT_TOL, threads=threads)
        res = hfcore.run_rhf(mol, basis, options)
        wall = time.perf_counter() - t0
        timings = dict(res.timings)
        queue.put(
            {
                "energy": res.energy_total,
                "iterations": res.iterations,
                "n_functions": basis.n_functions,
                "spherical": basis.spherical,
                "wall": wall,
                "integrals": timings.get("integrals", math.nan),
                "scf": timings.get("scf", math.nan),
                "jk_mode": res.jk_mode,
                "peak_mib": _peak_mib(),
                "shells": _shell_dump(mol, basis),
            }
        )
    except Exception as exc:  # report and keep benchmarking the other cases
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def _shell_dump(mol, basis) -> dict:
    """The exact shells and geometry, so the reference library gets the same input."""
    per_atom: dict[int, list] = {}
    for s in basis.shells:
        per_atom.setdefault(s.atom, []).append((s.l, s.exponents.tolist(), s.coefficients.tolist()))
    return {
        "atoms": [(int(z), list(map(float, r))) for z, r in zip(mol.atomic_numbers, mol.coordinates)],
        "charge": mol.charge,
        "per_atom": per_atom,
    }


def _run_reference(dump: dict, spherical: bool, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        from pyscf import gto, lib, scf  # the reference library, benchmark-only

        lib.num_threads(threads)
        from hfcore import elements

        atoms, basis = [], {}
        for k, (z, r) in enumerate(dump["atoms"]):
            label = f"{elements.symbol(z)}{k}"
            atoms.append((label, r))
            basis[label] = [[l] + [[e, *cs] for e, cs in zip(exps, zip(*coefs))] for l, exps, coefs in dump["per_atom"][k]]
        t0 = time.perf_counter()
        # Room to store the integrals, as hfcore does when they fit; the
        # library's default budget (4000 MB) would send benzene/cc-pVTZ direct.
        mol = gto.M(atom=atoms, basis=basis, unit="Bohr", charge=dump["charge"], cart=not spherical, verbose=0,
                    max_memory=REFERENCE_MEMORY_MB)
        mf = scf.RHF(mol)
        mf.conv_tol = ENERGY_TOL
        mf.conv_tol_grad = GRADIENT_TOL
        energy = mf.kernel()
        wall = time.perf_counter() - t0
        queue.put({"energy": float(energy), "iterations": int(getattr(mf, "cycles", -1)), "wall": wall, "peak_mib": _peak_mib()})
    except ImportError:
        queue.put({"error": "reference library not installed"})
    except Exception as exc:
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def _run_hfcore_fitted(path: str, basis_name: str, fit_name: str, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        import hfcore
        from hfcore.scf import SCFOptions

        t0 = time.perf_counter()
        mol = hfcore.read_xyz(path)
        basis = hfcore.build_basis(mol, basis_name)
        options = SCFOptions(energy_tol=ENERGY_TOL, gradient_tol=GRADIENT_TOL, fit_basis=fit_name, threads=threads)
        res = hfcore.run_rhf(mol, basis, options)
        wall = time.perf_counter() - t0
        queue.put(
            {
                "energy": res.energy_total,
                "iterations": res.iterations,
                "n_functions": basis.n_functions,
                "n_fit_functions": res.fit_basis.n_functions,
                "spherical": basis.spherical,
                "wall": wall,
                "integrals": res.timings.get("integrals", math.nan),
                "scf": res.timings.get("scf", math.nan),
                "jk_mode": res.jk_mode,
                "peak_mib": _peak_mib(),
                "shells": _shell_dump(mol, basis),
                "fit_shells": _shell_dump(mol, res.fit_basis),
            }
        )
    except Exception as exc:
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def _reference_basis(dump: dict) -> tuple[list, dict]:
    from hfcore import elements

    atoms, basis = [], {}
    for k, (z, r) in enumerate(dump["atoms"]):
        label = f"{elements.symbol(z)}{k}"
        atoms.append((label, r))
        basis[label] = [[l] + [[e, *cs] for e, cs in zip(exps, zip(*coefs))] for l, exps, coefs in dump["per_atom"][k]]
    return atoms, basis


def _run_reference_fitted(dump: dict, fit_dump: dict, spherical: bool, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        from pyscf import gto, lib, scf  # the reference library, benchmark-only

        lib.num_threads(threads)
        atoms, basis = _reference_basis(dump)
        _, auxbasis = _reference_basis(fit_dump)
        t0 = time.perf_counter()
        # The same room as for the stored runs, so the fitted factors stay in memory as hfcore's do.
        mol = gto.M(atom=atoms, basis=basis, unit="Bohr", charge=dump["charge"], cart=not spherical, verbose=0,
                    max_memory=REFERENCE_MEMORY_MB)
        mf = scf.RHF(mol).density_fit(auxbasis=auxbasis)
        mf.conv_tol = ENERGY_TOL
        mf.conv_tol_grad = GRADIENT_TOL
        energy = mf.kernel()
        wall = time.perf_counter() - t0
        queue.put({"energy": float(energy), "iterations": int(getattr(mf, "cycles", -1)), "wall": wall, "peak_mib": _peak_mib()})
    except ImportError:
        queue.put({"error": "reference library not installed"})
    except Exception as exc:
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def run_fitted_case(label: str, geometry: str, basis: str, fit: str, threads: int) -> dict:
    """Measure one density-fitted case with hfcore and the reference library, same orbital and fitting shells."""
    row = {"case": label, "threads": threads, "fit_basis": fit}
    ours = _in_child(_run_hfcore_fitted, str(INPUTS / geometry), basis, fit, threads)
    if "error" in ours:
        row["error"] = ours["error"]
        return row
    dump, fit_dump = ours.pop("shells"), ours.pop("fit_shells")
    row.update({f"hfcore_{k}": v for k, v in ours.items() if k not in {"n_functions", "spherical", "n_fit_functions"}})
    row["n_functions"], row["n_fit_functions"], row["spherical"] = ours["n_functions"], ours["n_fit_functions"], ours["spherical"]
    ref = _in_child(_run_reference_fitted, dump, fit_dump, ours["spherical"], threads)
    if "error" in ref:
        row["reference_error"] = ref["error"]
    else:
        row.update({f"reference_{k}": v for k, v in ref.items()})
        row["ratio"] = ours["wall"] / ref["wall"]
        row["process_ratio"] = ours["process_wall"] / ref["process_wall"]
        row["memory_ratio"] = ours["peak_mib"] / ref["peak_mib"]
        row["energy_difference"] = ours["energy"] - ref["energy"]
    return row


def _in_child(target, *args) -> dict:
    ctx = mp.get_context("spawn")
    queue = ctx.Queue()
    proc = ctx.Process(target=target, args=(*args, queue))
    t0 = time.perf_counter()
    proc.start()
    out = queue.get()
    proc.join()
    out["process_wall"] = time.perf_counter() - t0
    return out


def run_case(label: str, geometry: str, basis: str, spherical, threads: int) -> dict:
    """Measure one case with hfcore and the reference library, one child process each."""
    row = {"case": label, "threads": threads}
    path = str(INPUTS / geometry)
    ours = _in_child(_run_hfcore, path, basis, spherical, threads)
    if "error" in ours:
        row["error"] = ours["error"]
        return row
    dump = ours.pop("shells")
    print(f"  hfcore: {json.dumps(ours)}", file=sys.stderr, flush=True)
    row.update({f"hfcore_{k}": v for k, v in ours.items() if k not in {"n_functions", "spherical"}})
    row["n_functions"] = ours["n_functions"]
    row["spherical"] = ours["spherical"]
    ref = _in_child(_run_reference, dump, ours["spherical"], threads)
    if "error" in ref:
        row["reference_error"] = ref["error"]
    else:
        row.update({f"reference_{k}": v for k, v in ref.items()})
        row["ratio"] = ours["wall"] / ref["wall"]
        row["process_ratio"] = ours["process_wall"] / ref["process_wall"]
        row["memory_ratio"] = ours["peak_mib"] / ref["peak_mib"]
        row["energy_difference"] = ours["energy"] - ref["energy"]
    return row


def speedup(label: str, geometry: str, basis: str, spherical) -> dict:
    """Whole-process time on one thread over that on two, for each program, one child process each run."""
    path = str(INPUTS / geometry)
    one = _in_child(_run_hfcore, path, basis, spherical, 1)
    two = _in_child(_run_hfcore, path, basis, spherical, 2)
    row = {"case": label}
    if "error" in one or "error" in two:
        row["error"] = one.get("error") or two.get("error")
        return row
    dump = one.pop("shells")
    two.pop("shells")
    row["hfcore_speedup"] = one["process_wall"] / two["process_wall"]
    row["hfcore_process_wall"] = (one["process_wall"], two["process_wall"])
    row["hfcore_integrals"] = (one["integrals"], two["integrals"])
    row["hfcore_scf"] = (one["scf"], two["scf"])
    row["same_energy"] = one["energy"] == two["energy"]
    ref_one = _in_child(_run_reference, dump, one["spherical"], 1)
    ref_two = _in_child(_run_reference, dump, one["spherical"], 2)
    if "error" not in ref_one and "error" not in ref_two:
        row["reference_speedup"] = ref_one["process_wall"] / ref_two["process_wall"]
        row["reference_process_wall"] = (ref_one["process_wall"], ref_two["process_wall"])
    return row


def scaling_exponent(rows: list[dict], key: str) -> float | None:
    """Slope of log(time) against log(number of functions), least squares."""
    pts = [(r["n_functions"], r[key]) for r in rows if key in r and r[key] > 0]
    if len(pts) < 3:
        return None
    xs = [math.log(n) for n, _ in pts]
    ys = [math.log(t) for _, t in pts]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    sxx = sum((x - mx) ** 2 for x in xs)
    return sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sxx


def _format(rows: list[dict]) -> str:
    head = (
        f"{'case':<18}{'nbf':>5}{'mode':>12}{'ints/s':>9}{'scf/s':>8}{'hfcore/s':>10}{'ref/s':>8}{'ratio':>7}"
        f"{'proc':>6}{'dE/Eh':>10}{'it':>4}{'ref it':>7}{'MiB':>7}{'ref MiB':>8}{'mem':>6}"
    )
    lines = [head, "-" * len(head)]
    for r in rows:
        if "error" in r:
            lines.append(f"{r['case']:<18} failed: {r['error']}")
            continue
        ref = "reference_wall" in r
        lines.append(
            f"{r['case']:<18}{r['n_functions']:>5}{r['hfcore_jk_mode']:>12}{r['hfcore_integrals']:>9.3f}"
            f"{r['hfcore_scf']:>8.3f}{r['hfcore_wall']:>10.3f}"
            + (
                f"{r['reference_wall']:>8.3f}{r['ratio']:>7.2f}{r['process_ratio']:>6.2f}{r['energy_difference']:>10.1e}"
                if ref
                else f"{'-':>8}{'-':>7}{'-':>6}{'-':>10}"
            )
            + f"{r['hfcore_iterations']:>4}"
            + (f"{r['reference_iterations']:>7}" if ref else f"{'-':>7}")
            + f"{r['hfcore_peak_mib']:>7.0f}"
            + (f"{r['reference_peak_mib']:>8.0f}{r['memory_ratio']:>6.2f}" if ref else f"{'-':>8}{'-':>6}")
        )
    return "\n".join(lines)


# ----------------------------------------------------------------------------
# The default command as users run it, whole processes (--table)

#: (label, geometry file, basis, fitting set or None, in the quick subset)
TABLE_CASES = [
    ("water/cc-pVTZ", "water.xyz", "cc-pvtz", None, True),
    ("benzene/6-31G*", "benzene.xyz", "6-31g*", None, True),
    ("benzene/cc-pVTZ exact", "benzene.xyz", "cc-pvtz", None, False),
    ("benzene/cc-pVQZ fitted", "benzene.xyz", "cc-pvqz", "cc-pvqz-jkfit", False),
]
STARTUP_CASE = ("water/STO-3G", "water.xyz", "sto-3g")
STARTUP_REPEATS = 3

#: The reference library's RHF object on dumped shells (read from the job file), shared by the scripts below.
_REFERENCE_RHF = """
job = json.load(open(sys.argv[1]))
def shells(dump):
    atoms, basis = [], {}
    for k, (label, r) in enumerate(dump["atoms"]):
        atoms.append((label, r))
        basis[label] = [[l] + [[e, *cs] for e, cs in zip(exps, zip(*coefs))] for l, exps, coefs in dump["per_atom"][str(k)]]
    return atoms, basis
atoms, basis = shells(job["orbital"])
mol = gto.M(atom=atoms, basis=basis, unit="Bohr", charge=job["orbital"]["charge"], cart=not job["spherical"],
            verbose=0, max_memory=job["memory_mb"])
mf = scf.RHF(mol)
if job["fit"] is not None:
    mf = mf.density_fit(auxbasis=shells(job["fit"])[1])
"""

#: The reference side of --table: the plain RHF of the reference library on dumped shells.
_REFERENCE_SCRIPT = """
import json, sys
from pyscf import gto, lib, scf
lib.num_threads(int(sys.argv[2]))
""" + _REFERENCE_RHF + """mf.conv_tol = job["energy_tol"]
mf.conv_tol_grad = job["gradient_tol"]
print(json.dumps({"energy": float(mf.kernel()), "converged": bool(mf.converged)}))
"""


def _labelled_dump(mol, basis) -> dict:
    from hfcore import elements

    dump = _shell_dump(mol, basis)
    dump["atoms"] = [(f"{elements.symbol(z)}{k}", r) for k, (z, r) in enumerate(dump["atoms"])]
    dump["per_atom"] = {str(k): v for k, v in dump["per_atom"].items()}
    return dump


def _child_env(threads: int) -> dict:
    env = dict(os.environ)
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = str(threads)
    env["PYTHONPATH"] = str(ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


_CPU_SECONDS: list[float] = []  # CPU time (user + system) of the last child, set by _timed


def _timed(command: list[str], threads: int) -> tuple[float, str]:
    """Wall time and standard output of a child process; its CPU time goes to _CPU_SECONDS."""
    import resource
    import subprocess

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, env=_child_env(threads), cwd=str(ROOT))
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    _CPU_SECONDS[:] = [after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime]
    if done.returncode != 0:
        raise RuntimeError(f"{' '.join(command[:4])} ... exited {done.returncode}: {done.stderr.strip()[-300:]}")
    return wall, done.stdout


def _hfcore_command(geometry: str, basis: str, fit: str | None, threads: int, json_path: str) -> list[str]:
    command = [sys.executable, "-m", "hfcore", "energy", str(INPUTS / geometry), "--basis", basis,
               "--threads", str(threads), "--quiet", "--json", json_path]
    return command + (["--fit-basis", fit] if fit else [])


def _reference_job(geometry: str, basis: str, fit: str | None, folder: Path) -> list[str]:
    """Write the shells hfcore uses and the reference script; the command that runs it."""
    import hfcore
    from hfcore.basis.fitting import fitting_basis

    mol = hfcore.read_xyz(INPUTS / geometry)
    orbital = hfcore.build_basis(mol, basis)
    job = {
        "orbital": _labelled_dump(mol, orbital),
        "fit": _labelled_dump(mol, fitting_basis(mol, orbital, fit).basis) if fit else None,
        "spherical": orbital.spherical,
        "memory_mb": REFERENCE_MEMORY_MB,
        "energy_tol": ENERGY_TOL,
        "gradient_tol": GRADIENT_TOL,
    }
    job_path, script = folder / f"{basis}-{fit}.json", folder / "reference_rhf.py"
    job_path.write_text(json.dumps(job))
    script.write_text(_REFERENCE_SCRIPT)
    return [sys.executable, str(script), str(job_path)]


def _table_row(label: str, geometry: str, basis: str, fit: str | None, folder: Path) -> dict:
    row = {"case": label}
    out = str(folder / "hfcore.json")
    try:
        row["hfcore_wall"], _ = _timed(_hfcore_command(geometry, basis, fit, 1, out), 1)
        row["hfcore_cpu"] = _CPU_SECONDS[0]
        record = json.loads(Path(out).read_text())
        timings = record["timings"]
        row.update(energy=record["energy"]["total"], scf=timings.get("scf", math.nan),
                   stability=timings.get("stability", 0.0), products=record["scf"]["stability"]["hessian_products"],
                   iterations=record["scf"]["iterations"])
        ref_wall, ref_out = _timed(_reference_job(geometry, basis, fit, folder) + ["1"], 1)
        row["reference_wall"] = ref_wall
        row["reference_cpu"] = _CPU_SECONDS[0]
        row["cpu_ratio"] = row["hfcore_cpu"] / row["reference_cpu"]
        row["energy_difference"] = row["energy"] - json.loads(ref_out)["energy"]
        row["ratio"] = row["hfcore_wall"] / ref_wall
    except (RuntimeError, ImportError, KeyError) as exc:
        row["error"] = str(exc)
    return row


def _startup_row(folder: Path) -> dict:
    label, geometry, basis = STARTUP_CASE
    row = {"case": f"{label} start-up"}
    try:
        reference = _reference_job(geometry, basis, None, folder) + ["1"]
        ours, theirs, our_cpu, their_cpu = [], [], [], []
        for _ in range(STARTUP_REPEATS):  # interleaved, so a burst of load hits both
            ours.append(_timed(_hfcore_command(geometry, basis, None, 1, str(folder / "startup.json")), 1)[0])
            our_cpu.append(_CPU_SECONDS[0])
            theirs.append(_timed(reference, 1)[0])
            their_cpu.append(_CPU_SECONDS[0])
        row.update(hfcore_wall=min(ours), reference_wall=min(theirs), ratio=min(ours) / min(theirs),
                   hfcore_cpu=min(our_cpu), reference_cpu=min(their_cpu), cpu_ratio=min(our_cpu) / min(their_cpu))
    except (RuntimeError, ImportError) as exc:
        row["error"] = str(exc)
    return row


def _speedup_row(folder: Path) -> dict:
    label, geometry, basis, _ = SPEEDUP
    row = {"case": f"{label} two threads / one"}
    try:
        one = _timed(_hfcore_command(geometry, basis, None, 1, str(folder / "one.json")), 1)[0]
        two = _timed(_hfcore_command(geometry, basis, None, 2, str(folder / "two.json")), 2)[0]
        same = json.loads((folder / "one.json").read_text())["energy"]["total"] == json.loads(
            (folder / "two.json").read_text())["energy"]["total"]
        row.update(one=one, two=two, speedup=one / two, same_energy=same)
    except RuntimeError as exc:
        row["error"] = str(exc)
    return row


def user_table(quick: bool) -> dict:
    """All rows of --table (a subset with ``quick``), with the load average before and after."""
    import tempfile

    if str(ROOT) not in sys.path:
        sys.path.insert(0, str(ROOT))  # the parent builds the shells the reference script gets
    result = {"load_before": os.getloadavg(), "rows": []}
    with tempfile.TemporaryDirectory(prefix="hfcore-bench-") as tmp:
        folder = Path(tmp)
        for label, geometry, basis, fit, in_quick in TABLE_CASES:
            if quick and not in_quick:
                continue
            print(f"running {label} (default command, then the reference script) ...", file=sys.stderr, flush=True)
            result["rows"].append(_table_row(label, geometry, basis, fit, folder))
        print("timing start-up ...", file=sys.stderr, flush=True)
        result["startup"] = _startup_row(folder)
        print("timing the two-thread speed-up ...", file=sys.stderr, flush=True)
        result["speedup"] = _speedup_row(folder)
    result["load_after"] = os.getloadavg()
    return result


def _format_table(result: dict) -> str:
    head = (f"{'case':<24}{'hfcore/s':>9}{'ref/s':>8}{'ratio':>7}{'cpu':>6}{'scf/s':>7}{'stab/s':>7}{'stab/scf':>9}"
            f"{'products':>9}{'it':>4}{'dE/Eh':>10}")
    lines = [f"load average before {result['load_before'][0]:.2f}, after {result['load_after'][0]:.2f} (1 min)",
             "whole processes, one thread each; hfcore's default command (stability included) against the "
             "reference library's plain RHF on the same shells; ratio of wall times, cpu of CPU times "
             "(user + system, steadier on a loaded machine)", head, "-" * len(head)]
    for r in result["rows"]:
        if "error" in r:
            lines.append(f"{r['case']:<24} failed: {r['error']}")
            continue
        share = r["stability"] / r["scf"] if r["scf"] > 0 else math.nan
        lines.append(f"{r['case']:<24}{r['hfcore_wall']:>9.2f}{r['reference_wall']:>8.2f}{r['ratio']:>7.2f}"
                     f"{r['cpu_ratio']:>6.2f}{r['scf']:>7.2f}{r['stability']:>7.2f}{share:>9.2f}{r['products']:>9}{r['iterations']:>4}"
                     f"{r['energy_difference']:>10.1e}")
    st = result["startup"]
    lines.append(f"{st['case']:<24}" + (f" failed: {st['error']}" if "error" in st else
                 f"{st['hfcore_wall']:>9.2f}{st['reference_wall']:>8.2f}{st['ratio']:>7.2f}{st['cpu_ratio']:>6.2f}"
                 f"   (best of {STARTUP_REPEATS}; CPU {st['hfcore_cpu']:.2f} s / {st['reference_cpu']:.2f} s)"))
    sp = result["speedup"]
    lines.append(f"{sp['case']:<24}" + (f" failed: {sp['error']}" if "error" in sp else
                 f"{sp['one']:>9.2f}{sp['two']:>8.2f}  speed-up {sp['speedup']:.2f}, same energy: {sp['same_energy']}"))
    return "\n".join(lines)


# ----------------------------------------------------------------------------
# The stability analysis's share of the SCF time (--stability)

#: (label, geometry file, basis, fitting set or None, forced direct mode)
STABILITY_CASES = [
    ("water/cc-pVTZ", "water.xyz", "cc-pvtz", None, False),
    ("benzene/6-31G*", "benzene.xyz", "6-31g*", None, False),
    ("benzene/cc-pVDZ", "benzene.xyz", "cc-pvdz", None, False),
    ("water/cc-pVTZ direct", "water.xyz", "cc-pvtz", None, True),
    ("benzene/6-31G* direct", "benzene.xyz", "6-31g*", None, True),
    ("benzene/cc-pVTZ exact", "benzene.xyz", "cc-pvtz", None, False),
    ("benzene/cc-pVTZ fitted", "benzene.xyz", "cc-pvtz", "cc-pvtz-jkfit", False),
]

_STABILITY_CHILD = """
import json, sys, time
import hfcore
from hfcore.scf import SCFOptions, driver, uhf_stability
path, basis_name, fit, direct = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4] == "1"
# CPU seconds of the first SCF and of the stability stages (steadier than wall time on a loaded machine).
cpu = {"scf": 0.0, "stability": 0.0}
def timed(key, function):
    def run(*args, **kwargs):
        t0 = time.process_time()
        try:
            return function(*args, **kwargs)
        finally:
            cpu[key] += time.process_time() - t0
    return run
driver.converge_rhf = timed("scf", driver.converge_rhf)
driver.stabilise = timed("stability", driver.stabilise)
check = timed("stability", uhf_stability.check_rhf_to_uhf)
checks = []
def counted(*args, **kwargs):
    analysis = check(*args, **kwargs)
    checks.append(analysis)
    return analysis
uhf_stability.check_rhf_to_uhf = counted
mol = hfcore.read_xyz(path)
basis = hfcore.build_basis(mol, basis_name)
options = SCFOptions(energy_tol=float(sys.argv[5]), gradient_tol=float(sys.argv[6]), threads=1,
                     fit_basis=None if fit == "-" else fit, direct=True if direct else None)
res = hfcore.run_scf(mol, basis, options)
st = res.stability
print(json.dumps({
    "energy": res.energy_total, "jk_mode": res.jk_mode, "iterations": res.iterations,
    "scf": res.timings["scf"], "stability": res.timings["stability"], "stable": bool(st.stable),
    "lowest": float(st.lowest_eigenvalue), "products": int(st.hessian_products),
    "fitted_products": int(getattr(st, "fitted_products", 0)),
    "eigenvalues_from": getattr(st, "eigenvalues_from", "exact"),
    "uhf_warning": any("towards UHF" in w for w in res.warnings),
    "scf_cpu": cpu["scf"], "stability_cpu": cpu["stability"],
    "check_products": sum(int(a.products) for a in checks),
    "check_fitted_products": sum(int(getattr(a, "fitted_products", 0)) for a in checks),
}))
"""

_REFERENCE_STABILITY = """
import json, sys, time
from pyscf import gto, lib, scf
lib.num_threads(1)
""" + _REFERENCE_RHF + """if job["direct"]:
    mf.direct_scf = True
    mf._eri = None
    mf.max_memory = 1
mf.conv_tol = job["energy_tol"]
mf.conv_tol_grad = job["gradient_tol"]
mf.build()
t0, c0 = time.perf_counter(), time.process_time()
energy = mf.kernel()
t1, c1 = time.perf_counter(), time.process_time()
_, _, internal, external = mf.stability(internal=True, external=True, return_status=True)
t2, c2 = time.perf_counter(), time.process_time()
print(json.dumps({"energy": float(energy), "scf": t1 - t0, "stability": t2 - t1, "stable": bool(internal),
                  "uhf_warning": not bool(external), "scf_cpu": c1 - c0, "stability_cpu": c2 - c1}))
"""


def _stability_row(label: str, geometry: str, basis: str, fit: str | None, direct: bool, folder: Path,
                   before: str | None) -> dict:
    row = {"case": label}
    child = folder / "stability_child.py"
    child.write_text(_STABILITY_CHILD)
    args = [str(INPUTS / geometry), basis, fit or "-", "1" if direct else "0", str(ENERGY_TOL), str(GRADIENT_TOL)]
    for key, tree in (("before", before), ("after", str(ROOT))):
        if tree is None:
            continue
        env = _child_env(1)
        env["PYTHONPATH"] = tree
        import subprocess

        done = subprocess.run([sys.executable, str(child), *args], capture_output=True, text=True, env=env, cwd=tree)
        if done.returncode != 0:
            row[key] = {"error": done.stderr.strip()[-300:]}
            continue
        row[key] = json.loads(done.stdout.strip().splitlines()[-1])
    try:
        job = _reference_job(geometry, basis, fit, folder)
        job_path = Path(job[-1])
        record = json.loads(job_path.read_text())
        record["direct"] = direct
        job_path.write_text(json.dumps(record))
        script = folder / "reference_stability.py"
        script.write_text(_REFERENCE_STABILITY)
        _, out = _timed([sys.executable, str(script), str(job_path)], 1)
        row["reference"] = json.loads(out.strip().splitlines()[-1])
    except (RuntimeError, ImportError) as exc:
        row["reference"] = {"error": str(exc)}
    return row


def stability_table(only: set[str] | None, before: str | None) -> dict:
    """Rows of --stability, with the load average before and after."""
    import tempfile

    if str(ROOT) not in sys.path:
        sys.path.insert(0, str(ROOT))
    result = {"load_before": os.getloadavg(), "rows": []}
    with tempfile.TemporaryDirectory(prefix="hfcore-bench-") as tmp:
        for label, geometry, basis, fit, direct in STABILITY_CASES:
            if only and label not in only:
                continue
            print(f"running {label} (stability share) ...", file=sys.stderr, flush=True)
            result["rows"].append(_stability_row(label, geometry, basis, fit, direct, Path(tmp), before))
    result["load_after"] = os.getloadavg()
    return result


def _pair(row: dict, first: str, second: str) -> str:
    return f"{row[first]}+{row[second]}" if second in row else str(row[first])


def _format_stability(result: dict) -> str:
    head = (f"{'case':<24}{'run':<8}{'mode':<12}{'scf/s':>7}{'stab/s':>8}{'stab/scf':>9}{'cpu':>6}{'exact':>9}"
            f"{'fitted':>9}  {'lowest/Eh':>10} {'from':<7}{'verdict':<8}{'UHF':<5}")
    lines = [f"load average before {result['load_before'][0]:.2f}, after {result['load_after'][0]:.2f} (1 min); "
             "one thread; stab/scf = stability over SCF-iteration wall seconds, cpu the same in CPU seconds "
             "(steadier under load); exact and fitted Hessian products as RHF analysis+RHF->UHF check; "
             "the reference library runs its internal and RHF->UHF analyses after its SCF",
             head, "-" * len(head)]
    for r in result["rows"]:
        for key in ("before", "after", "reference"):
            x = r.get(key)
            if x is None:
                continue
            if "error" in x:
                lines.append(f"{r['case']:<24}{key:<8} failed: {x['error']}")
                continue
            share = x["stability"] / x["scf"] if x["scf"] > 0 else math.nan
            cpu = x["stability_cpu"] / x["scf_cpu"] if x.get("scf_cpu", 0) > 0 else math.nan
            verdict = "stable" if x["stable"] else "UNSTABLE"
            uhf = "warn" if x["uhf_warning"] else "-"
            if key == "reference":
                lines.append(f"{r['case']:<24}{'ref':<8}{'':<12}{x['scf']:>7.2f}{x['stability']:>8.2f}{share:>9.2f}"
                             f"{cpu:>6.2f}{'':>9}{'':>9}  {'':>10} {'':<7}{verdict:<8}{uhf:<5}")
            else:
                lines.append(f"{r['case']:<24}{key:<8}{x['jk_mode']:<12}{x['scf']:>7.2f}{x['stability']:>8.2f}"
                             f"{share:>9.2f}{cpu:>6.2f}{_pair(x, 'products', 'check_products'):>9}"
                             f"{_pair(x, 'fitted_products', 'check_fitted_products'):>9}  {x['lowest']:>10.6f} "
                             f"{x['eigenvalues_from']:<7}{verdict:<8}{uhf:<5}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--threads", type=int, default=1, help="threads for both programs (default 1)")
    parser.add_argument("--scaling", action="store_true", help="also run the water-cluster series and fit the cost exponent")
    parser.add_argument("--fitted", action="store_true", help="also run the density-fitted benzene cases")
    parser.add_argument("--fitted-scaling", action="store_true",
                        help="also run the fitted water-cluster series in cc-pVTZ and fit its cost exponent")
    parser.add_argument("--exact-tz", action="store_true", help="also run benzene/cc-pVTZ with stored integrals")
    parser.add_argument("--speedup", action="store_true",
                        help="also time benzene/cc-pVDZ on two threads against one (whole process, each program)")
    parser.add_argument("--table", action="store_true",
                        help="only the table of the default command as users run it, whole processes (see above)")
    parser.add_argument("--quick", action="store_true", help="with --table (implied): leave out the two large benzene cases")
    parser.add_argument("--only", help="comma-separated case labels to run ('none' for no fixed case)")
    parser.add_argument("--json", help="write the rows as JSON to this path ('-' for stdout)")
    parser.add_argument("--stability", action="store_true",
                        help="only the stability analysis's share of the SCF time, beside the reference library's")
    parser.add_argument("--before", help="with --stability: also measure the hfcore checkout at this path")
    args = parser.parse_args(argv)
    if args.stability:
        wanted = {s.strip() for s in args.only.split(",")} if args.only else None
        result = stability_table(wanted, args.before)
        if args.json:
            Path(args.json).write_text(json.dumps(result, indent=2) + "\n")
        print(_format_stability(result))
        return 0
    if args.table or args.quick:
        result = user_table(args.quick)
        if args.json:
            text = json.dumps(result, indent=2)
            print(text) if args.json == "-" else Path(args.json).write_text(text + "\n")
        print(_format_table(result))
        return 0
    cases = CASES + (SCALING if args.scaling else []) + (EXACT_TZ if args.exact_tz else [])
    if args.only:
        wanted = {s.strip() for s in args.only.split(",")}
        cases = [c for c in cases if c[0] in wanted or (c in EXACT_TZ and args.exact_tz)]
    fitted = (FITTED_CASES if args.fitted else []) + (FITTED_SCALING if args.fitted_scaling else [])
    if args.only:
        fitted = [c for c in fitted if c[0] in wanted]
    rows = []

    def keep(row: dict) -> None:
        # Each finished case is written at once, so a long series stopped by a time limit keeps its figures.
        rows.append(row)
        print(f"  {json.dumps(row)}", file=sys.stderr, flush=True)
        if args.json and args.json != "-":
            Path(args.json).write_text(json.dumps({"threads": args.threads, "rows": rows, "partial": True}, indent=2) + "\n")

    for label, geometry, basis, spherical in cases:
        print(f"running {label} ...", file=sys.stderr, flush=True)
        keep(run_case(label, geometry, basis, spherical, args.threads))
    for label, geometry, basis, fit in fitted:
        print(f"running {label} ...", file=sys.stderr, flush=True)
        keep(run_fitted_case(label, geometry, basis, fit, args.threads))
    summary = {}
    fitted_series = [r for r in rows if r["case"].startswith("(H2O)") and r["case"].endswith("/DF") and "error" not in r]
    if fitted_series:
        summary["fitted_scaling_exponent_hfcore"] = scaling_exponent(fitted_series, "hfcore_wall")
        summary["fitted_scaling_exponent_reference"] = scaling_exponent(fitted_series, "reference_wall")
    series = [r for r in rows if r["case"].startswith("(H2O)") and not r["case"].endswith("/DF") and "error" not in r]
    if series:
        summary["scaling_exponent_hfcore"] = scaling_exponent(series, "hfcore_wall")
        summary["scaling_exponent_reference"] = scaling_exponent(series, "reference_wall")
    if args.speedup:
        print(f"running {SPEEDUP[0]} on one and two threads ...", file=sys.stderr, flush=True)
        summary["speedup"] = speedup(*SPEEDUP)
    if args.json:
        text = json.dumps({"threads": args.threads, "rows": rows, "summary": summary}, indent=2)
        if args.json == "-":
            print(text)
            return 0
        Path(args.json).write_text(text + "\n")
    print(f"threads: {args.threads}; energy threshold {ENERGY_TOL:g} Eh, gradient {GRADIENT_TOL:g}")
    print(_format(rows))
    for key, value in summary.items():
        if isinstance(value, dict):
            print(_format_speedup(value))
        elif value is not None:
            print(f"{key}: {value:.2f}")
    return 0


def _format_speedup(row: dict) -> str:
    if "error" in row:
        return f"speed-up {row['case']}: failed: {row['error']}"
    one, two = row["hfcore_process_wall"]
    text = (
        f"two threads against one, {row['case']}, whole process: hfcore {one:.2f} s / {two:.2f} s = "
        f"{row['hfcore_speedup']:.2f} (integrals {row['hfcore_integrals'][0]:.2f} / {row['hfcore_integrals'][1]:.2f} s, "
        f"SCF {row['hfcore_scf'][0]:.2f} / {row['hfcore_scf'][1]:.2f} s; same energy: {row['same_energy']})"
    )
    if "reference_speedup" in row:
        r1, r2 = row["reference_process_wall"]
        text += f"; reference {r1:.2f} s / {r2:.2f} s = {row['reference_speedup']:.2f}"
    return text


if __name__ == "__main__":
    sys.exit(main())
