"""RHF total energies in every shipped published basis set against the reference library.

The reference library gets the very same shells (exponents and coefficients
from hfcore's ElementShell records), the same coordinates in bohr and the
same Cartesian or spherical choice, so any difference is in the integrals or
the SCF, not in the basis data.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference import family_shells, reference_energy, reference_mole

from hfcore.basis import build_basis
from hfcore.basis.library import find_family
from hfcore.geometry import Molecule
from hfcore.scf import run_rhf

# Small closed-shell systems spanning H-Ar, our own geometries in bohr:
# (atomic numbers, coordinates, charge).
MOLECULES = {
    "H2": ([1, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4]], 0),
    "H3+": ([1, 1, 1], [[0.0, 0.0, 0.0], [1.65, 0.0, 0.0], [0.825, 1.429, 0.0]], 1),
    "HeH+": ([2, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4632]], 1),
    "H-": ([1], [[0.0, 0.0, 0.0]], -1),
    "He": ([2], [[0.0, 0.0, 0.0]], 0),
    "LiH": ([3, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 3.015]], 0),
    "HF": ([9, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.733]], 0),
    "F-": ([9], [[0.0, 0.0, 0.0]], -1),
    "Ne": ([10], [[0.0, 0.0, 0.0]], 0),
    "He2": ([2, 2], [[0.0, 0.0, 0.0], [0.0, 0.0, 5.6]], 0),
    "N2": ([7, 7], [[0.0, 0.0, -1.037], [0.0, 0.0, 1.037]], 0),
    "H2O": ([8, 1, 1], [[0.0, 0.0, 0.0], [0.0, 1.431, 1.108], [0.0, -1.431, 1.108]], 0),
    "OH-": ([8, 1], [[0.0, 0.0, 0.0], [0.0, 0.3, 1.81]], -1),
    "Na+": ([11], [[0.0, 0.0, 0.0]], 1),
    "HCl": ([17, 1], [[0.0, 0.0, 0.0], [0.1, 0.0, 2.409]], 0),
    "H2S": ([16, 1, 1], [[0.0, 0.0, 0.0], [0.0, 1.82, 1.73], [0.0, -1.82, 1.73]], 0),
    "Ar": ([18], [[0.0, 0.0, 0.0]], 0),
}

# Every family on eight systems, each list with a cation and an anion, all
# lists together spanning H-Ar; the larger sets on atoms and diatomics to
# keep the run short.
SMALL_SYSTEMS = ["H2", "HeH+", "LiH", "H2O", "OH-", "N2", "HCl", "H2S"]
MEDIUM_SYSTEMS = ["H2", "HeH+", "LiH", "HF", "F-", "Ne", "Na+", "HCl"]
TRIPLE_ZETA_SYSTEMS = ["H2", "HeH+", "He", "LiH", "HF", "F-", "Ne", "OH-"]
DIFFUSE_TRIPLE_ZETA_SYSTEMS = ["H2", "H3+", "HeH+", "He", "H-", "F-", "Ne", "Ar"]
QUADRUPLE_ZETA_SYSTEMS = ["H2", "H3+", "HeH+", "He", "He2", "H-", "F-", "Ne"]
FAMILIES = {
    "3-21G": SMALL_SYSTEMS,
    "6-31G": SMALL_SYSTEMS,
    "6-31G*": SMALL_SYSTEMS,
    "6-31G**": SMALL_SYSTEMS,
    "6-31+G*": SMALL_SYSTEMS,
    "6-311G**": SMALL_SYSTEMS,
    "cc-pVDZ": SMALL_SYSTEMS,
    "def2-SVP": SMALL_SYSTEMS,
    "aug-cc-pVDZ": MEDIUM_SYSTEMS,
    "def2-TZVP": MEDIUM_SYSTEMS,
    "cc-pVTZ": TRIPLE_ZETA_SYSTEMS,
    "aug-cc-pVTZ": DIFFUSE_TRIPLE_ZETA_SYSTEMS,
    "cc-pVQZ": QUADRUPLE_ZETA_SYSTEMS,
    # h functions on Ne, F and Ar (H stops at g in cc-pV5Z)
    "cc-pV5Z": ["H2", "He", "Ne", "HF", "Ar"],
    "aug-cc-pVQZ": ["H2", "He", "F-", "Ne", "Ar"],
    "aug-cc-pV5Z": ["He", "Ne"],
}
CASES = [(basis, system) for basis, systems in FAMILIES.items() for system in systems]


def _molecule(system: str) -> Molecule:
    z, xyz, charge = MOLECULES[system]
    return Molecule(np.array(z), np.array(xyz), charge, source=system)


def _reference_energy(molecule: Molecule, basis_names: str | dict[str, str], spherical: bool) -> float:
    """RHF energy from the reference library, given hfcore basis name(s) per element symbol."""
    return reference_energy(reference_mole(molecule, family_shells(molecule, basis_names), spherical=spherical))


@pytest.mark.parametrize("basis_name, system", CASES, ids=[f"{b}-{s}" for b, s in CASES])
def test_rhf_energy_matches_reference_library_with_the_same_shells(basis_name, system):
    molecule = _molecule(system)
    basis = build_basis(molecule, basis_name)
    assert basis.spherical is find_family(basis_name).default_spherical
    # The guess cannot change the converged closed-shell energy, and the core
    # guess costs nothing, where an atomic-density guess repeats an SCF per
    # element in the same (here large) basis.
    result = run_rhf(molecule, basis, guess="core")
    assert result.converged
    # source: reference library run (PySCF), same shells, same geometry, same cart/spherical choice
    expected = _reference_energy(molecule, basis_name, basis.spherical)
    assert abs(result.energy_total - expected) < 1e-8


def test_mixed_basis_energy_matches_reference_library():
    molecule = _molecule("H2O")
    basis = build_basis(molecule, "cc-pVDZ", per_element={"H": "6-31G"})
    result = run_rhf(molecule, basis)
    assert result.converged
    # source: reference library run (PySCF), same mixed shells, spherical as the main set
    expected = _reference_energy(molecule, {"O": "cc-pVDZ", "H": "6-31G"}, spherical=True)
    assert abs(result.energy_total - expected) < 1e-8
