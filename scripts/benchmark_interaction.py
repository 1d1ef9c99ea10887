#!/usr/bin/env python
"""Time a counterpoise-corrected interaction energy three ways, side by side.

1. ``interaction_energies`` as ``hfcore interaction`` runs it: the fragments
   in the full basis reuse the complex's overlap, kinetic and two-electron
   integrals;
2. the same pieces as separate runs (``reuse_integrals=False``), each
   computing its own integrals, as separate ``hfcore energy --ghost`` runs
   would (without their process start-up);
3. the reference library's five runs per basis (complex, each fragment
   alone, each fragment with ghost partners), with the same shells, if it
   is installed.

Usage::

    python scripts/benchmark_interaction.py [GEOMETRY] [--fragments 1-3,4-6] [--basis 6-31g,cc-pvdz,cc-pvtz]

One thread (set before numpy loads). Benchmarks are not tests: nothing
here asserts a time.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))


def main() -> None:
    import hfcore
    from hfcore.studies.interaction import interaction_energies
    from hfcore.cli.interaction import parse_fragments

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("geometry", nargs="?", default=str(ROOT / "inputs" / "water_dimer.xyz"))
    parser.add_argument("--fragments", default="1-3,4-6")
    parser.add_argument("--basis", default="6-31g,cc-pvdz,cc-pvtz")
    args = parser.parse_args()
    molecule = hfcore.read_xyz(args.geometry)
    fragments = parse_fragments(args.fragments, molecule.n_atoms)
    names = args.basis.split(",")
    print(f"{args.geometry}, fragments {args.fragments}, bases {args.basis}, one thread")
    print(f"{'basis':<10} {'functions':>9} {'shared / s':>11} {'separate / s':>13} {'reference / s':>14} "
          f"{'shared/separate':>16} {'shared/reference':>17} {'CP diff / Eh':>13}")
    totals = [0.0, 0.0, 0.0]
    for name in names:
        shared = interaction_energies(molecule, fragments, [name])
        separate = interaction_energies(molecule, fragments, [name], reuse_integrals=False)
        ref_seconds, ref_cp = _reference(molecule, fragments, name)
        row = shared.rows[0]
        totals[0] += shared.wall_seconds
        totals[1] += separate.wall_seconds
        totals[2] += ref_seconds
        ratio_ref = f"{shared.wall_seconds / ref_seconds:17.2f}" if ref_seconds else f"{'—':>17}"
        diff = f"{row.counterpoise - ref_cp:13.1e}" if ref_cp is not None else f"{'—':>13}"
        print(f"{name:<10} {row.n_functions:>9} {shared.wall_seconds:11.2f} {separate.wall_seconds:13.2f} {ref_seconds:14.2f} "
              f"{shared.wall_seconds / separate.wall_seconds:16.2f} {ratio_ref} {diff}")
    print(f"{'all':<10} {'':>9} {totals[0]:11.2f} {totals[1]:13.2f} {totals[2]:14.2f} "
          f"{totals[0] / totals[1]:16.2f} {(totals[0] / totals[2]) if totals[2] else float('nan'):17.2f}")


def _reference(molecule, fragments, name):
    """(seconds, corrected interaction energy) of the reference library's five runs; (0, None) without it."""
    try:
        from reference import family_shells, reference_energy, reference_mole
    except ImportError:
        return 0.0, None
    import hfcore

    shells = family_shells(molecule, name)
    spherical = hfcore.build_basis(molecule, name).spherical
    start = time.perf_counter()
    e_ab = reference_energy(reference_mole(molecule, shells, spherical=spherical))
    everything = set(range(molecule.n_atoms))
    full = []
    for part in fragments:
        full.append(reference_energy(reference_mole(molecule.with_ghosts(sorted(everything - set(part))), shells,
                                                    spherical=spherical)))
        reference_energy(reference_mole(molecule.subset(part), shells, spherical=spherical))
    return time.perf_counter() - start, e_ab - sum(full)


if __name__ == "__main__":
    main()
