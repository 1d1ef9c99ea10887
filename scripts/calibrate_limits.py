"""Calibrate the basis-limit rule against published numerical Hartree–Fock limits.

Run from the repository root::

    python scripts/calibrate_limits.py            # energies from tests/data/basis_limit_energies.json
    python scripts/calibrate_limits.py --compute  # recompute every RHF energy with hfcore first (about a minute)
    python scripts/calibrate_limits.py --compute --write  # ... and store them in that file

Prints the calibration table of ``docs/basis-limits.md``: per system and
range of bases, the chosen estimate, the published limit, the error, the
stated uncertainty and whether the limit is inside. The limits are those of
``/work/shared/checks.md`` (recalled from memory there): C. F. Bunge,
J. A. Barrientos and A. V. Bunge, At. Data Nucl. Data Tables 53, 113 (1993)
for the atoms; F. Jensen, J. Chem. Phys. 110, 6601 (1999) for H2 at 1.4 bohr.

The open-shell atoms C, N, O and F (restricted open-shell limits in the same
table) join once hfcore runs UHF/ROHF: add them to ``SYSTEMS`` with their
multiplicity and feed their energies through the same rule.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np

from hfcore.studies.basis_limit import basis_limit

DATA = Path(__file__).resolve().parents[1] / "tests" / "data" / "basis_limit_energies.json"
#: system -> (atomic numbers, coordinates / bohr, published limit / Eh)
SYSTEMS = {
    "He": ([2], [[0.0, 0.0, 0.0]], -2.861680),
    "Be": ([4], [[0.0, 0.0, 0.0]], -14.573023),
    "Ne": ([10], [[0.0, 0.0, 0.0]], -128.547098),
    "Mg": ([12], [[0.0, 0.0, 0.0]], -199.614636),
    "Ar": ([18], [[0.0, 0.0, 0.0]], -526.817513),
    "H2": ([1, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4]], -1.133629571),
}
#: Open-shell atoms waiting for UHF/ROHF: (atomic number, multiplicity, restricted open-shell limit / Eh).
PENDING_OPEN_SHELL = {"C": (6, 3, -37.688619), "N": (7, 4, -54.400934), "O": (8, 3, -74.809398), "F": (9, 2, -99.409349)}
FAMILIES = ("cc-pV{}Z", "aug-cc-pV{}Z")
LETTERS = "DTQ5"
#: First-row systems, where the width targets apply (3 mEh to QZ, 1 mEh to 5Z).
FIRST_ROW = ("Be", "Ne")


def compute() -> dict:
    """RHF energies of every calibration system in every basis, by hfcore."""
    from hfcore.basis import build_basis
    from hfcore.geometry import Molecule
    from hfcore.scf import run_rhf

    out: dict = {}
    for system, (z, xyz, _) in SYSTEMS.items():
        molecule = Molecule(np.array(z), np.array(xyz, dtype=float), 0, source=system)
        for family in FAMILIES:
            for letter in LETTERS:
                name = family.format(letter)
                result = run_rhf(molecule, build_basis(molecule, name), guess="core")
                out.setdefault(system, {})[name] = float(result.energy_total)
    return out


def table(energies: dict) -> list[dict]:
    """One calibration row per system, family and largest basis (QZ, 5Z)."""
    rows = []
    for system, (_, _, limit) in SYSTEMS.items():
        for family in FAMILIES:
            for top in ("Q", "5"):
                names = [family.format(x) for x in LETTERS[: LETTERS.index(top) + 1]]
                record = basis_limit([(n, energies[system][n], True) for n in names])
                error = record.energy_total - limit
                rows.append({
                    "system": system, "bases": f"{names[0]}–{names[-1]}", "chosen": record.chosen,
                    "estimate": record.energy_total, "limit": limit, "error_mEh": 1e3 * error,
                    "uncertainty_mEh": 1e3 * record.uncertainty, "inside": abs(error) <= record.uncertainty,
                })
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--compute", action="store_true", help="recompute the energies with hfcore")
    parser.add_argument("--write", action="store_true", help="store the recomputed hfcore energies in the data file")
    args = parser.parse_args()
    stored = json.loads(DATA.read_text(encoding="utf-8"))
    energies = stored["hfcore"]
    if args.compute:
        energies = compute()
        if args.write:
            stored["hfcore"] = energies
            DATA.write_text(json.dumps(stored, indent=1) + "\n", encoding="utf-8")
    print("| system | bases | chosen estimate | E / Eh | published limit / Eh | error / mEh | stated ± / mEh | inside |")
    print("|---|---|---|---|---|---|---|---|")
    for r in table(energies):
        print(f"| {r['system']} | {r['bases']} | {r['chosen']} | {r['estimate']:.6f} | {r['limit']:.6f} | "
              f"{r['error_mEh']:+.3f} | {r['uncertainty_mEh']:.3f} | {'yes' if r['inside'] else 'NO'} |")
    print(f"\nopen-shell atoms pending UHF/ROHF: {', '.join(PENDING_OPEN_SHELL)}")


if __name__ == "__main__":
    main()
