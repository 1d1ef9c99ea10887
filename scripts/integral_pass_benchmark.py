#!/usr/bin/env python
"""Time hfcore's four-centre integral pass against the reference library's, side by side.

Each measurement runs in a fresh child process, one after the other, on the
same shells: hfcore's stored pass (``compute_eri``), and the reference
library's 8-fold-symmetric two-electron integrals (``int2e`` with ``s8``),
which is what its in-memory RHF computes before the first iteration.
``--direct-scf`` times a whole RHF in direct mode in each program (hfcore's
``direct=True`` against the reference library's direct SCF, its integrals
kept out of memory), ``--direct`` one direct J/K build of each program on the
atomic-start density instead (hfcore's ``DirectERI.jk`` against the
reference library's direct J/K build). ``--steps`` splits hfcore's pass by
pair class (total angular momentum of bra and ket pair) and by step: Boys
function, Hermite recursion, the gather of R into G, the two contraction
products (the spherical transform is folded into the coefficients, so it
costs nothing here), and the scatter into the packed store.

Usage::

    python scripts/integral_pass_benchmark.py                    # the default cases
    python scripts/integral_pass_benchmark.py --only benzene/cc-pVDZ --steps
    python scripts/integral_pass_benchmark.py --direct --only benzene/6-31G*
    python scripts/integral_pass_benchmark.py --direct-scf --threads 2 --only benzene/6-31G*

Each side reports wall and CPU seconds (``cpu_ratio``: on a shared, loaded
machine the CPU time is the steadier figure). Benchmarks are not tests:
nothing here asserts a time. Report the ratios with the load average the
script prints (the machine is shared).
"""

from __future__ import annotations

import argparse
import json
import multiprocessing as mp
import os
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
INPUTS = ROOT / "inputs"

#: (label, geometry, basis)
CASES = [
    ("benzene/cc-pVDZ", "benzene.xyz", "cc-pvdz"),
    ("O2/cc-pVQZ", "o2.xyz", "cc-pvqz"),
    ("benzene/6-31G*", "benzene.xyz", "6-31g*"),
    ("benzene/cc-pVTZ", "benzene.xyz", "cc-pvtz"),
]


ENERGY_TOL = 1e-10
GRADIENT_TOL = 1e-7


def _cpu() -> float:
    """CPU seconds of this process and its finished children (forked workers included)."""
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def _limit_threads(threads: int) -> None:
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = str(threads)


def _load(path: str, basis_name: str):
    import hfcore

    mol = hfcore.read_xyz(path)
    return mol, hfcore.build_basis(mol, basis_name)


def _shell_dump(mol, basis) -> dict:
    """The shells of benchmark.py's dump, with the spherical choice and 2S beside them."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import benchmark

    return {
        **benchmark._shell_dump(mol, basis),
        "spherical": bool(basis.spherical),
        "charge": int(mol.charge),
        "spin": int(getattr(mol, "multiplicity", 1) or 1) - 1,
    }


def _start_density(basis, mol):
    """A fixed symmetric density both programs get: the core-Hamiltonian start's, in hfcore's function order."""
    import numpy as np
    import scipy.linalg

    from hfcore import integrals

    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, mol.nuclear_charges, mol.coordinates)
    s = integrals.overlap(basis)
    _, c = scipy.linalg.eigh(h, s)
    nocc = mol.n_electrons // 2
    return 2.0 * c[:, :nocc] @ c[:, :nocc].T


def _hfcore_pass(path: str, basis_name: str, steps: bool, direct, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        import numpy as np

        from hfcore import integrals

        mol, basis = _load(path, basis_name)
        out = {"n_functions": basis.n_functions, "shells": _shell_dump(mol, basis)}
        if direct in ("scf", "scf-skip"):
            import hfcore
            from hfcore.scf import SCFOptions

            extra = {"stability": "skip"} if direct == "scf-skip" else {}
            options = SCFOptions(energy_tol=ENERGY_TOL, gradient_tol=GRADIENT_TOL, threads=threads, direct=True, **extra)
            t0, c0 = time.perf_counter(), _cpu()
            res = hfcore.run_rhf(mol, basis, options)
            out["wall"], out["cpu"] = time.perf_counter() - t0, _cpu() - c0
            out["energy"], out["iterations"], out["jk_mode"] = res.energy_total, res.iterations, res.jk_mode
            out["timings"] = {k: v for k, v in res.timings.items() if k in ("guess", "scf", "stability")}
        elif direct:
            d = _start_density(basis, mol)
            t0 = time.perf_counter()
            engine = integrals.DirectERI(basis, threads=threads)
            out["setup"] = time.perf_counter() - t0
            t0, c0 = time.perf_counter(), _cpu()
            j, k = engine.jk(d)
            out["wall"], out["cpu"] = time.perf_counter() - t0, _cpu() - c0
            out["coulomb"], out["exchange"] = float((d * j).sum()), float((d * k).sum())
        elif steps:
            out.update(_steps(basis))
        else:
            t0, c0 = time.perf_counter(), _cpu()
            store = integrals.compute_eri(basis, lean=True, threads=threads)
            out["wall"], out["cpu"] = time.perf_counter() - t0, _cpu() - c0
            out["checksum"] = float(np.abs(store.packed).sum())
        queue.put(out)
    except Exception as exc:
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def _steps(basis) -> dict:
    """The stored pass, step by step (the same operations as tiles.tile_integrals and store._store)."""
    import numpy as np

    from hfcore.integrals.boys import boys
    from hfcore.integrals import hermite, store, tiles
    from hfcore.integrals.eri_pairs import prepare_pairs

    clock = time.process_time  # CPU time of this one-threaded process: steadier on a shared machine
    t0 = clock()
    pairs = prepare_pairs(basis, 1e-12)
    prep = clock() - t0
    n = basis.n_functions
    npair = n * (n + 1) // 2
    packed = store._store_array("the stored integrals", npair * (npair + 1) // 2, False)
    by_class: dict[str, dict[str, float]] = {}
    for g1, g2 in tiles.batch_pairs(pairs):
        for tile in tiles.iter_tiles(g1, g2, 1e-12):
            bra, ket, brows, krows = tile.bra, tile.ket, tile.brows, tile.krows
            key = f"{min(bra.L, ket.L)}{max(bra.L, ket.L)}"
            row = by_class.setdefault(key, dict.fromkeys(("boys", "hermite", "gather", "ket", "bra", "store", "quartets", "integrals"), 0.0))
            L = bra.L + ket.L
            a = clock()
            p, q = bra.p[brows], ket.p[krows]
            nb, ip = p.shape
            nk, jq = q.shape
            pq = bra.P[:, brows][:, None, None, :, :] - ket.P[:, krows][:, :, :, None, None]
            pq_sum = p[None, None] + q[:, :, None, None]
            alpha = (p[None, None] * q[:, :, None, None] / pq_sum).reshape(-1)
            pqf = pq.reshape(3, -1)
            tt = alpha * np.einsum("kn,kn->n", pqf, pqf)
            base = boys(L, tt)
            fac = tiles._ERI_CONST / np.sqrt(pq_sum.reshape(-1))
            base[0] *= fac
            for m in range(1, L + 1):
                fac *= -2.0 * alpha
                base[m] *= fac
            b = clock()
            R = hermite.hermite_r(L, pqf, base)
            c = clock()
            nhb = hermite.n_hermite(bra.L)
            g = R.reshape(R.shape[0], nk * jq, nb * ip).transpose(1, 0, 2)
            if ket.L:
                g = g[:, hermite.sum_index(ket.L, bra.L)]
            g = g.reshape(nk, -1, nhb * nb * ip)
            d = clock()
            x = np.matmul(ket.e_ket[krows], g)
            y = x.reshape(nk * ket.nf, nhb, nb, ip).transpose(2, 1, 3, 0).reshape(nb, nhb * ip, nk * ket.nf)
            e = clock()
            block = np.matmul(bra.e_bra[brows], y)
            f = clock()
            store._store(tile, block, packed)
            h = clock()
            for name, dt in (("boys", b - a), ("hermite", c - b), ("gather", d - c), ("ket", e - d), ("bra", f - e), ("store", h - f)):
                row[name] += dt
            row["quartets"] += tile.quartets
            row["integrals"] += block.size
    return {"prepare": prep, "classes": by_class, "wall": prep + sum(sum(v for k, v in r.items() if k not in ("quartets", "integrals")) for r in by_class.values())}


def _reference_mol(dump: dict):
    from pyscf import gto  # the reference library, benchmark-only

    from hfcore import elements

    atoms, basis = [], {}
    for k, (z, r) in enumerate(dump["atoms"]):
        label = f"{elements.symbol(z)}{k}"
        atoms.append((label, r))
        basis[label] = [[l] + [[e, *cs] for e, cs in zip(exps, zip(*coefs))] for l, exps, coefs in dump["per_atom"][k]]
    return gto.M(atom=atoms, basis=basis, unit="Bohr", cart=not dump["spherical"], verbose=0, max_memory=12000,
                 charge=dump["charge"], spin=dump["spin"])


def _reference_pass(dump: dict, direct, threads: int, queue) -> None:
    _limit_threads(threads)
    try:
        import numpy as np
        from pyscf import lib, scf

        lib.num_threads(threads)
        mol = _reference_mol(dump)
        if direct in ("scf", "scf-skip"):
            t0, c0 = time.perf_counter(), _cpu()
            mf = scf.RHF(mol) if dump["spin"] == 0 else scf.UHF(mol)
            mf.max_memory = 1  # no room for the integrals: every J/K build is a direct pass
            mf.conv_tol, mf.conv_tol_grad = ENERGY_TOL, GRADIENT_TOL
            energy = mf.kernel()
            wall, cpu = time.perf_counter() - t0, _cpu() - c0
            queue.put({"wall": wall, "cpu": cpu, "energy": float(energy), "iterations": int(getattr(mf, "cycles", -1)),
                       "stored": mf._eri is not None})
        elif direct:
            # Its own core-Hamiltonian start: the same density in its own function order.
            h, s = mol.intor("int1e_kin") + mol.intor("int1e_nuc"), mol.intor("int1e_ovlp")
            import scipy.linalg

            _, c = scipy.linalg.eigh(h, s)
            nocc = mol.nelectron // 2
            d = 2.0 * c[:, :nocc] @ c[:, :nocc].T
            t0, c0 = time.perf_counter(), _cpu()
            j, k = scf.hf.get_jk(mol, d, hermi=1)
            wall, cpu = time.perf_counter() - t0, _cpu() - c0
            queue.put({"wall": wall, "cpu": cpu, "coulomb": float((d * j).sum()), "exchange": float((d * k).sum())})
        else:
            t0, c0 = time.perf_counter(), _cpu()
            eri = mol.intor("int2e", aosym="s8")
            wall, cpu = time.perf_counter() - t0, _cpu() - c0
            queue.put({"wall": wall, "cpu": cpu, "checksum": float(np.abs(eri).sum())})
    except ImportError:
        queue.put({"error": "reference library not installed"})
    except Exception as exc:
        queue.put({"error": f"{type(exc).__name__}: {exc}"})


def _in_child(target, *args) -> dict:
    ctx = mp.get_context("spawn")
    queue = ctx.Queue()
    proc = ctx.Process(target=target, args=(*args, queue))
    proc.start()
    out = queue.get()
    proc.join()
    return out


def run(label: str, geometry: str, basis: str, steps: bool, direct: bool, threads: int) -> dict:
    ours = _in_child(_hfcore_pass, str(INPUTS / geometry), basis, steps, direct, threads)
    row = {"case": label, "threads": threads, "load": os.getloadavg()}
    if "error" in ours:
        row["error"] = ours["error"]
        return row
    dump = ours.pop("shells")
    ref = _in_child(_reference_pass, dump, direct, threads)
    row.update({f"hfcore_{k}": v for k, v in ours.items()})
    if "error" in ref:
        row["reference_error"] = ref["error"]
        return row
    row.update({f"reference_{k}": v for k, v in ref.items()})
    row["ratio"] = ours["wall"] / ref["wall"]
    if "cpu" in ours and "cpu" in ref:
        row["cpu_ratio"] = ours["cpu"] / ref["cpu"]
    if "checksum" in ref and "checksum" in ours and dump["spherical"]:
        # (Cartesian components are normalised differently by the two programs.)
        row["checksum_relative_difference"] = abs(ours["checksum"] - ref["checksum"]) / ref["checksum"]
    for key in ("coulomb", "exchange", "energy"):
        if key in ref and key in ours:
            row[f"{key}_difference"] = ours[key] - ref[key]
    row["load_after"] = os.getloadavg()
    return row


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--only", help="comma-separated case labels")
    parser.add_argument("--steps", action="store_true", help="split hfcore's pass by pair class and step")
    parser.add_argument("--direct", action="store_true", help="one direct J/K build of each program instead")
    parser.add_argument("--direct-scf", action="store_true", help="a whole direct RHF in each program instead")
    parser.add_argument("--skip-stability", action="store_true",
                        help="with --direct-scf: hfcore skips its stability analysis (the reference library runs none)")
    parser.add_argument("--threads", type=int, default=1)
    parser.add_argument("--json", help="also write the rows here")
    args = parser.parse_args(argv)
    wanted = set(args.only.split(",")) if args.only else None
    cases = [c for c in CASES if wanted is None or c[0] in wanted]
    rows = []
    for label, geometry, basis in cases:
        print(f"{label} ...", file=sys.stderr, flush=True)
        row = run(label, geometry, basis, args.steps, ("scf-skip" if args.skip_stability else "scf") if args.direct_scf else args.direct, args.threads)
        rows.append(row)
        print(json.dumps(row, indent=1), flush=True)
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
