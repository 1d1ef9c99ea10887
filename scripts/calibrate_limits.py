"""Calibrate the basis-limit rule against published numerical Hartree–Fock limits.

Run from the repository root::

    python scripts/calibrate_limits.py            # the hfcore energies stored in tests/data/basis_limit_energies.json
    python scripts/calibrate_limits.py --write    # rerun the open-shell atoms with hfcore (about six minutes) and store them
    python scripts/calibrate_limits.py --compute  # rerun every system with hfcore first (add --write to store them)

Prints the calibration table of ``docs/basis-limits.md``: per system and
range of bases, the chosen estimate, the published limit, the error, the
stated uncertainty and whether the limit is inside, then the widest interval
of the first-row systems against the targets (3 mEh to QZ, 1 mEh to 5Z).

The limits are those of ``/work/shared/checks.md`` (recalled from memory
there): C. F. Bunge, J. A. Barrientos and A. V. Bunge, At. Data Nucl. Data
Tables 53, 113 (1993) for the atoms; F. Jensen, J. Chem. Phys. 110, 6601
(1999) for H2 at 1.4 bohr.

Closed shells are RHF. The open-shell atoms C (³P), N (⁴S), O (³P) and F (²P)
are restricted open-shell HF with one radial function per shell (hfcore's
``spherical_atom`` ROHF): Bunge's open-shell values are equivalence-restricted
limits of exactly that kind, which a Gaussian-basis ROHF free to break the
atom's spherical symmetry can undercut (O in cc-pVQZ: −74.810844 Eh against
the limit −74.809398), so only the restricted energies can be calibrated
against them. Every row comes from an hfcore run.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

from hfcore.studies.basis_limit import basis_limit

DATA = Path(__file__).resolve().parents[1] / "tests" / "data" / "basis_limit_energies.json"
#: Closed shells, RHF: system -> (atomic numbers, coordinates / bohr, published limit / Eh)
SYSTEMS = {
    "He": ([2], [[0.0, 0.0, 0.0]], -2.861680),
    "Be": ([4], [[0.0, 0.0, 0.0]], -14.573023),
    "Ne": ([10], [[0.0, 0.0, 0.0]], -128.547098),
    "Mg": ([12], [[0.0, 0.0, 0.0]], -199.614636),
    "Ar": ([18], [[0.0, 0.0, 0.0]], -526.817513),
    "H2": ([1, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4]], -1.133629571),
}
#: Open-shell atoms, equivalence-restricted ROHF: symbol -> (atomic number, multiplicity, published limit / Eh)
OPEN_SHELL = {"C": (6, 3, -37.688619), "N": (7, 4, -54.400934), "O": (8, 3, -74.809398), "F": (9, 2, -99.409349)}
FAMILIES = ("cc-pV{}Z", "aug-cc-pV{}Z")
LETTERS = "DTQ5"
#: First-row systems, where the width targets apply (3 mEh to QZ, 1 mEh to 5Z).
FIRST_ROW = ("Be", "C", "N", "O", "F", "Ne")
TARGETS = {"Q": 3e-3, "5": 1e-3}


def limits() -> dict[str, float]:
    """Published limit of every calibration system (hartree)."""
    return {**{s: v[2] for s, v in SYSTEMS.items()}, **{s: v[2] for s, v in OPEN_SHELL.items()}}


def basis_names() -> list[str]:
    """Every basis of the calibration, e.g. ``"aug-cc-pV5Z"``."""
    return [family.format(letter) for family in FAMILIES for letter in LETTERS]


def closed_shell_energies() -> dict:
    """RHF energies of the closed-shell systems in every basis, by hfcore."""
    from hfcore.basis import build_basis
    from hfcore.geometry import Molecule
    from hfcore.scf import run_rhf

    out: dict = {}
    for system, (z, xyz, _) in SYSTEMS.items():
        molecule = Molecule(np.array(z), np.array(xyz, dtype=float), 0, source=system)
        for name in basis_names():
            out.setdefault(system, {})[name] = float(run_rhf(molecule, build_basis(molecule, name), guess="core").energy_total)
    return out


def open_shell_energy(symbol: str, basis_name: str) -> float:
    """Equivalence-restricted ROHF energy of one open-shell atom, by hfcore (hartree)."""
    from hfcore import SCFOptions, run_scf
    from hfcore.geometry import Molecule

    z, multiplicity, _ = OPEN_SHELL[symbol]
    molecule = Molecule(np.array([z]), np.zeros((1, 3)), 0, source=symbol, multiplicity=multiplicity)
    result = run_scf(molecule, basis_name, SCFOptions(method="rohf", spherical_atom=True))
    return float(result.energy_total)


def open_shell_energies(progress: bool = True) -> dict:
    """Equivalence-restricted ROHF energies of C, N, O, F in every basis, by hfcore."""
    out: dict = {}
    for symbol in OPEN_SHELL:
        for name in basis_names():
            if progress:
                print(f"  {symbol} {name}", file=sys.stderr)
            out.setdefault(symbol, {})[name] = open_shell_energy(symbol, name)
    return out


def table(energies: dict) -> list[dict]:
    """One calibration row per system, family and largest basis (QZ, 5Z)."""
    rows = []
    for system, limit in limits().items():
        if system not in energies:
            continue
        for family in FAMILIES:
            for top in ("Q", "5"):
                names = [family.format(x) for x in LETTERS[: LETTERS.index(top) + 1]]
                record = basis_limit([(n, energies[system][n], True) for n in names])
                error = record.energy_total - limit
                rows.append({
                    "system": system, "family": family, "top": top, "bases": f"{names[0]}–{names[-1]}",
                    "chosen": record.chosen, "estimate": record.energy_total, "limit": limit,
                    "error_mEh": 1e3 * error, "uncertainty_mEh": 1e3 * record.uncertainty,
                    "inside": abs(error) <= record.uncertainty,
                })
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--compute", action="store_true", help="rerun every system with hfcore")
    parser.add_argument("--write", action="store_true", help="rerun the open-shell atoms and store the hfcore energies in the data file")
    args = parser.parse_args()
    stored = json.loads(DATA.read_text(encoding="utf-8"))
    energies = closed_shell_energies() if args.compute else dict(stored["hfcore"])
    open_shell = stored.get("hfcore_open_shell") if not args.compute else None
    if open_shell is None or args.write:
        open_shell = open_shell_energies()
    energies.update(open_shell)
    if args.write:
        stored["hfcore"] = {s: energies[s] for s in (stored.get("hfcore") or SYSTEMS)}  # keep the stored order
        stored["hfcore_open_shell"] = open_shell
        DATA.write_text(json.dumps(stored, indent=1) + "\n", encoding="utf-8")
    rows = table(energies)
    print("| system | bases | chosen estimate | E / Eh | published limit / Eh | error / mEh | stated ± / mEh | inside |")
    print("|---|---|---|---|---|---|---|---|")
    for r in rows:
        print(f"| {r['system']} | {r['bases']} | {r['chosen']} | {r['estimate']:.6f} | {r['limit']:.6f} | "
              f"{r['error_mEh']:+.3f} | {r['uncertainty_mEh']:.3f} | {'yes' if r['inside'] else 'NO'} |")
    print()
    print(f"limits inside: {sum(r['inside'] for r in rows)} of {len(rows)}")
    for top, target in TARGETS.items():
        first = [r for r in rows if r["top"] == top and r["system"] in FIRST_ROW]
        widest = max(first, key=lambda r: r["uncertainty_mEh"])
        print(f"widest first-row half-width to {top}Z: {widest['uncertainty_mEh']:.3f} mEh ({widest['system']}, "
              f"{widest['bases']}); target {1e3 * target:.0f} mEh")


if __name__ == "__main__":
    main()
