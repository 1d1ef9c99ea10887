"""UHF (J. A. Pople and R. K. Nesbet, J. Chem. Phys. 22, 571 (1954)) on atoms, radicals, ions and triplets.

Each expected value names its source: a reference library run (PySCF) with
the very same shells and geometry, or an exact property.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from open_reference import open_reference_mole, reference_open_scf

from hfcore import build_basis, integrals
from hfcore.errors import InputError
from hfcore.geometry import Molecule, read_xyz
from hfcore.scf import SCFOptions, UHFResult, run_rhf, run_scf, run_uhf, solve_uhf
from hfcore.scf.guess import split_density

INPUTS = Path(__file__).resolve().parent.parent / "inputs"

#: Our own geometries (inputs/): file, charge, multiplicity.
SPECIES = {
    "C": ("c.xyz", 0, 3),
    "N": ("n.xyz", 0, 4),
    "O": ("o.xyz", 0, 3),
    "F": ("f.xyz", 0, 2),
    "OH": ("oh.xyz", 0, 2),
    "CH3": ("ch3.xyz", 0, 2),
    "NH2": ("nh2.xyz", 0, 2),
    "H2O+": ("water.xyz", 1, 2),
    "NH4": ("ammonium.xyz", 0, 2),
    "O2": ("o2.xyz", 0, 3),
    "CH2": ("ch2.xyz", 0, 3),
}
BASES = ("6-31g", "cc-pvdz")
TIGHT = SCFOptions(gradient_tol=1e-9, energy_tol=1e-11)


def species(name: str) -> Molecule:
    path, charge, multiplicity = SPECIES[name]
    return read_xyz(INPUTS / path, charge=charge, multiplicity=multiplicity)


@pytest.fixture(scope="module")
def runs() -> dict[tuple[str, str], UHFResult]:
    return {(name, b): run_scf(species(name), b, TIGHT) for name in SPECIES for b in BASES}


@pytest.mark.parametrize("basis_name", BASES)
@pytest.mark.parametrize("name", list(SPECIES))
def test_uhf_energy_and_s_squared_match_the_reference_library(runs, name, basis_name):
    result = runs[name, basis_name]
    assert isinstance(result, UHFResult) and result.method == "UHF" and result.converged
    # source: reference library run (PySCF UHF), same shells and coordinates, conv_tol 1e-12
    ref = reference_open_scf(open_reference_mole(species(name), basis_name))
    assert abs(result.energy_total - ref.e_tot) < 1e-8
    assert abs(result.s_squared - ref.spin_square()[0]) < 1e-6
    ea, eb = ref.mo_energy
    assert np.abs(result.orbital_energies_alpha - ea).max() < 1e-5
    assert np.abs(result.orbital_energies_beta - eb).max() < 1e-5


def test_a_pure_doublet_has_s_squared_near_three_quarters_and_a_small_contamination(runs):
    result = runs["OH", "cc-pvdz"]
    # exact property: S(S+1) = 3/4 for a doublet; UHF's <S^2> lies above it
    assert result.s_squared_exact == 0.75
    assert 0.0 <= result.spin_contamination < 0.02


def test_uhf_of_a_stable_closed_shell_molecule_equals_rhf():
    water = read_xyz(INPUTS / "water.xyz")
    rhf = run_rhf(water, "6-31g")
    uhf = run_uhf(water, "6-31g")
    # exact property: a stable closed shell is its own UHF solution (the symmetry-breaking start returns to it)
    assert abs(uhf.energy_total - rhf.energy_total) < 1e-10
    assert abs(uhf.s_squared) < 1e-8
    assert np.abs(uhf.density - rhf.density).max() < 1e-6


def test_one_electron_uhf_is_the_lowest_eigenvalue_of_the_core_hamiltonian():
    hydrogen = read_xyz(INPUTS / "h.xyz")
    basis = build_basis(hydrogen, "cc-pvdz")
    s, h = integrals.overlap(basis), integrals.kinetic(basis) + integrals.nuclear_attraction(
        basis, hydrogen.nuclear_charges, hydrogen.coordinates
    )
    lowest = float(np.linalg.eigvalsh(np.linalg.solve(np.linalg.cholesky(s), np.linalg.solve(np.linalg.cholesky(s), h).T))[0])
    uhf = run_scf(hydrogen, basis)
    rohf = run_scf(hydrogen, basis, SCFOptions(method="rohf"))
    # exact property: one electron feels no two-electron energy, so UHF = ROHF = the lowest core eigenvalue
    assert abs(uhf.energy_total - lowest) < 1e-10
    assert abs(rohf.energy_total - lowest) < 1e-10
    assert abs(uhf.energy_two_electron) < 1e-12


def test_method_defaults_rhf_for_singlets_and_uhf_otherwise():
    water = read_xyz(INPUTS / "water.xyz")
    assert run_scf(water, "sto-3g", SCFOptions(stability="skip")).__class__.__name__ == "RHFResult"
    assert run_scf(water.with_charge(1), "sto-3g").method == "UHF"


def test_rhf_on_a_triplet_is_refused_in_one_line():
    with pytest.raises(InputError, match="RHF describes singlets only") as info:
        run_scf(species("O2"), "sto-3g", SCFOptions(method="rhf"))
    assert "\n" not in str(info.value)


def test_unknown_method_is_refused_in_one_line():
    with pytest.raises(InputError, match="unknown SCF method"):
        SCFOptions(method="uhf+rohf")


@pytest.mark.parametrize("mode", ["stored", "stored-lean", "direct"])
def test_every_exact_jk_mode_gives_the_same_uhf_energy(runs, mode):
    molecule = species("NH2")
    options = {
        "stored": SCFOptions(direct=False),
        "stored-lean": SCFOptions(direct=False, memory_limit=0.5),
        "direct": SCFOptions(direct=True),
    }[mode]
    result = run_scf(molecule, "cc-pvdz", options)
    assert result.jk_mode == mode
    # source: the stored run above, itself checked against the reference library
    assert abs(result.energy_total - runs["NH2", "cc-pvdz"].energy_total) < 1e-9


@pytest.mark.parametrize("storage_limit", [None, 0.4])
def test_fitted_uhf_matches_the_reference_library_with_the_same_fitting_set(storage_limit):
    from reference import family_shells, reference_mole

    molecule = species("OH")
    options = SCFOptions(fit_basis="def2-universal-jkfit", memory_limit=storage_limit, gradient_tol=1e-9)
    result = run_scf(molecule, "cc-pvdz", options)
    assert result.jk_mode == "fitted"
    assert result.fit_storage == ("stored" if storage_limit is None else "blocked")
    aux = reference_mole(molecule, family_shells(molecule, "def2-universal-jkfit"), spherical=True)
    # source: reference library run (PySCF UHF with density fitting), same orbital and fitting shells
    ref = reference_open_scf(open_reference_mole(molecule, "cc-pvdz"), auxbasis=aux._basis)
    assert abs(result.energy_total - ref.e_tot) < 1e-8


def test_the_atomic_density_start_is_split_by_spin():
    total = np.diag([2.0, 1.0, 1.0])
    alpha, beta = split_density(total, 3, 1)
    # exact property: the split keeps the total and gives each spin its share of the electrons
    assert np.allclose(alpha + beta, total) and np.isclose(np.trace(alpha), 3.0) and np.isclose(np.trace(beta), 1.0)


def test_solve_uhf_on_bare_matrices_needs_no_molecule():
    molecule = species("OH")
    basis = build_basis(molecule, "sto-3g")
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, molecule.nuclear_charges, molecule.coordinates)
    result = solve_uhf(s, h, integrals.compute_eri(basis), 5, 4, molecule.nuclear_repulsion())
    # source: the molecule-level run of the same problem
    assert abs(result.energy_total - run_scf(molecule, basis).energy_total) < 1e-9
    with pytest.raises(InputError):
        result.to_dict()


def test_the_json_record_has_a_spin_object_and_the_method(runs):
    result = runs["O2", "6-31g"]
    record = result.to_dict()
    assert record["hfcore"]["method"] == "UHF"
    spin = record["spin"]
    assert spin["multiplicity"] == 3 and spin["s_squared_exact"] == 2.0
    assert spin["s_squared"] == result.s_squared
    # exact property: Mulliken spin populations sum to N_alpha - N_beta
    assert abs(sum(spin["mulliken_spin_populations"]) - 2.0) < 1e-10
    assert record["energy"]["total"] == result.energy_total
    assert record["orbitals"]["alpha"]["homo"] == 8 and record["orbitals"]["beta"]["homo"] == 6
    from hfcore.export import to_json

    assert json.loads(to_json(record))["spin"]["multiplicity"] == 3


def test_the_npz_arrays_hold_both_spins_and_the_total_density(runs):
    result = runs["CH3", "6-31g"]
    arrays = result.to_arrays()
    for key in ("coefficients_alpha", "coefficients_beta", "density_alpha", "density_beta", "orbital_energies_alpha",
                "orbital_energies_beta", "density"):
        assert key in arrays
    # exact property: the total density is the sum of the spin densities and holds every electron
    assert np.allclose(arrays["density"], arrays["density_alpha"] + arrays["density_beta"])
    assert abs(np.sum(arrays["density"] * result.overlap) - 9.0) < 1e-10


def test_koopmans_charges_and_dipole_work_on_an_open_shell_record(runs):
    from hfcore.analysis import dipole_moment, mulliken_charges
    from hfcore.analysis.properties import orbital_properties

    result = runs["OH", "6-31g"]
    charges = mulliken_charges(result)
    # exact property: the charges add up to the molecular charge
    assert abs(charges.sum()) < 1e-10
    props = orbital_properties(result)
    assert props.koopmans_ionisation == -result.homo_energy > 0
    assert 1.9 < props.virial_ratio < 2.1  # common practice: near 2 at a reasonable geometry
    assert np.linalg.norm(dipole_moment(result)) > 0.1
    from hfcore.analysis import lowdin_charges, quadrupole_moment

    assert abs(lowdin_charges(result).sum()) < 1e-10  # exact property: charges sum to the molecular charge
    assert abs(np.trace(quadrupole_moment(result))) < 1e-10  # exact property: the quadrupole is traceless


@pytest.mark.parametrize(
    "options",
    [SCFOptions(accelerator="damping", damping=0.3), SCFOptions(accelerator="none"), SCFOptions(level_shift=0.3)],
    ids=["damping", "none", "level-shift"],
)
def test_every_fock_accelerator_reaches_the_same_uhf_solution(runs, options):
    result = run_scf(species("OH"), "6-31g", options)
    # source: the DIIS run above, itself checked against the reference library
    assert abs(result.energy_total - runs["OH", "6-31g"].energy_total) < 1e-9


def test_the_second_order_accelerator_is_refused_for_open_shells():
    with pytest.raises(InputError, match="RHF only"):
        run_scf(species("OH"), "sto-3g", SCFOptions(accelerator="second_order"))


def test_the_npz_export_writes_the_open_shell_arrays(runs):
    from hfcore.export import result_arrays

    arrays = result_arrays(runs["OH", "6-31g"])
    for key in ("coefficients_alpha", "coefficients_beta", "density_alpha", "density_beta", "density", "kinetic"):
        assert key in arrays
    # exact property: the saved total density is the sum of the saved spin densities
    assert np.allclose(arrays["density"], arrays["density_alpha"] + arrays["density_beta"])


def test_a_uhf_npz_reads_back_and_holds_the_energy_of_its_own_matrices(tmp_path):
    from conftest import run_main

    from hfcore.export import load_arrays

    code, _, err = run_main("energy", INPUTS / "oh.xyz", "--basis", "6-31g", "--quiet", "--npz", tmp_path / "oh.npz")
    assert code == 0, err
    saved = load_arrays(tmp_path / "oh.npz")
    assert saved.coefficients is None and saved.multiplicity == 2
    da, db, s = saved.density_alpha, saved.density_beta, saved.overlap
    # exact properties: the total density is the sum of the spins', each spin holds its electrons
    assert np.allclose(da + db, saved.density)
    assert np.isclose(np.trace(da @ s), 5.0) and np.isclose(np.trace(db @ s), 4.0)
    # exact property (Pople and Nesbet 1954): with F_σ = H + J[Dα + Dβ] − K[D_σ] from the saved integrals,
    # E = 1/2 tr[(Dα + Dβ) H + Dα Fα + Dβ Fβ] + E_nuc
    h, eri = saved.core_hamiltonian, saved.eri
    j = np.einsum("ijkl,kl->ij", eri, da + db)
    fa, fb = h + j - np.einsum("ikjl,kl->ij", eri, da), h + j - np.einsum("ikjl,kl->ij", eri, db)
    energy = 0.5 * np.sum((da + db) * h + da * fa + db * fb) + saved.nuclear_repulsion()
    assert abs(energy - saved.energy_total) < 1e-9
    # the saved Fock matrices are those of the converged densities (to the convergence threshold)
    assert np.abs(saved.fock_alpha - fa).max() < 1e-6 and np.abs(saved.fock_beta - fb).max() < 1e-6
