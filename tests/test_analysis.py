"""Post-SCF analysis: populations, dipole moment and MP2 on converged RHF runs."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import scipy.linalg

import hfcore
from hfcore.analysis import (
    DEBYE_PER_AU,
    core_orbital_count,
    dipole_moment,
    lowdin_charges,
    lowdin_populations,
    mp2_energy,
    mulliken_charges,
    mulliken_populations,
)
from hfcore.errors import ConvergenceError, InputError

import pyscf.lo
from pyscf import mp
from conftest import read_input
from reference import family_shells, reference_mole, reference_rhf, unit_norm_scale

TIGHT = dict(energy_tol=1e-12, gradient_tol=1e-9)
REFERENCE_TIGHT = dict(conv_tol=1e-12, conv_tol_grad=1e-9)


@pytest.fixture(scope="module", params=[("cc-pvdz", True), ("6-31g*", False)], ids=["cc-pVDZ spherical", "6-31G* Cartesian"])
def water_and_reference(request):
    name, spherical = request.param
    mol = read_input("water")
    basis = hfcore.build_basis(mol, name, spherical=spherical)
    result = hfcore.run_rhf(mol, basis, hfcore.SCFOptions(**TIGHT))
    ref = reference_rhf(reference_mole(mol, family_shells(mol, name), spherical=spherical), **REFERENCE_TIGHT)
    return result, ref


def test_mulliken_charges_match_reference(water_and_reference):
    result, ref = water_and_reference
    expected = ref.mulliken_pop(verbose=0)[1]
    # source: reference library run (PySCF), same shells, tight convergence
    np.testing.assert_allclose(mulliken_charges(result), expected, atol=1e-9, rtol=0)


def test_mulliken_populations_sum_to_electron_count(water_and_reference):
    result, _ = water_and_reference
    # source: exact property — tr(D S) = N
    assert mulliken_populations(result).sum() == pytest.approx(result.molecule.n_electrons, abs=1e-9)
    assert mulliken_charges(result).sum() == pytest.approx(result.molecule.charge, abs=1e-9)


def test_lowdin_charges_match_reference(water_and_reference):
    result, ref = water_and_reference
    ref_mol = ref.mol
    # Löwdin populations depend on the scale of each function: hfcore makes every
    # Cartesian component a unit function, the reference library does not (xy vs xx),
    # so rescale its functions to unit norm first (a no-op for spherical sets).
    scale = unit_norm_scale(ref_mol)
    s = ref.get_ovlp() * np.outer(scale, scale)
    density = ref.make_rdm1() / np.outer(scale, scale)
    # The reference library's symmetric orthogonaliser S^-1/2; D in that basis is S^1/2 D S^1/2.
    s_half = np.linalg.inv(pyscf.lo.orth.lowdin(s))
    dm_orth = s_half @ density @ s_half
    expected = ref.mulliken_pop(ref_mol, dm_orth, s=np.eye(s.shape[0]), verbose=0)[1]
    # source: reference library run (PySCF), Löwdin-orthogonalised density, same shells
    np.testing.assert_allclose(lowdin_charges(result), expected, atol=1e-9, rtol=0)
    # source: exact property — the orthogonalised density keeps the electron count
    assert lowdin_populations(result).sum() == pytest.approx(result.molecule.n_electrons, abs=1e-9)


def test_dipole_matches_reference(water_and_reference):
    result, ref = water_and_reference
    # source: reference library run (PySCF), dipole in atomic units, same shells
    np.testing.assert_allclose(dipole_moment(result), ref.dip_moment(unit="AU", verbose=0), atol=1e-9, rtol=0)


def test_dipole_of_neutral_molecule_does_not_depend_on_origin(water_and_reference):
    result, _ = water_and_reference
    # source: exact property — a neutral charge distribution has an origin-free dipole
    np.testing.assert_allclose(dipole_moment(result, origin=[1.5, -2.0, 3.0]), dipole_moment(result), atol=1e-10)


def test_mp2_correlation_matches_reference(water_and_reference):
    result, ref = water_and_reference
    mine = mp2_energy(result)
    theirs = mp.MP2(ref).run(verbose=0)
    # source: reference library run (PySCF MP2 on its own RHF), same shells
    assert mine.correlation == pytest.approx(theirs.e_corr, abs=1e-9)
    assert mine.same_spin == pytest.approx(theirs.e_corr_ss, abs=1e-9)
    assert mine.opposite_spin == pytest.approx(theirs.e_corr_os, abs=1e-9)
    # source: reference library run (PySCF MP2 total energy)
    assert mine.energy_total == pytest.approx(theirs.e_tot, abs=1e-8)


def test_mp2_frozen_core_matches_reference(water_and_reference):
    result, ref = water_and_reference
    mine = mp2_energy(result, frozen_core=core_orbital_count(result.molecule))
    theirs = mp.MP2(ref, frozen=1).run(verbose=0)
    # source: reference library run (PySCF MP2, lowest orbital frozen), same shells
    assert mine.correlation == pytest.approx(theirs.e_corr, abs=1e-9)
    assert mine.frozen_core == 1
    assert mine.n_active_occupied == 4


@pytest.fixture(scope="module")
def hydroxide(hydroxide_molecule):
    mol = hydroxide_molecule
    return hfcore.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"), hfcore.SCFOptions(**TIGHT))


def test_dipole_of_ion_shifts_with_origin_by_charge_times_shift(hydroxide):
    shift = np.array([0.3, -0.2, 1.1])
    # source: exact property — mu(O + d) = mu(O) - Q d for total charge Q
    np.testing.assert_allclose(
        dipole_moment(hydroxide, origin=shift), dipole_moment(hydroxide, origin=np.zeros(3)) + shift, atol=1e-10
    )


def test_dipole_origin_must_be_three_numbers(hydroxide):
    with pytest.raises(InputError, match="origin"):
        dipole_moment(hydroxide, origin=[0.0, 1.0])


def test_debye_conversion():
    # source: from memory — 1 e·a0 = 2.541746 D (CODATA)
    assert DEBYE_PER_AU == pytest.approx(2.541746, abs=1e-6)


def test_mp2_rejects_unconverged_result(hydroxide):
    unconverged = dataclasses.replace(hydroxide, converged=False)
    with pytest.raises(ConvergenceError):
        mp2_energy(unconverged)


@pytest.mark.parametrize("frozen", [-1, 5])
def test_mp2_rejects_impossible_frozen_core(hydroxide, frozen):
    # OH- has 5 doubly occupied orbitals, so at most 4 may be frozen.
    with pytest.raises(InputError, match="frozen_core"):
        mp2_energy(hydroxide, frozen_core=frozen)


def test_core_orbital_count_follows_noble_gas_cores():
    # source: common practice — 1s core for Li-Ne, 1s2s2p for Na-Ar, none for H-He
    mol = hfcore.Molecule(np.array([1, 8, 17, 2]), np.arange(12.0).reshape(4, 3))
    assert core_orbital_count(mol) == 0 + 1 + 5 + 0


def test_symmetric_square_root_used_for_lowdin_is_exact(hydroxide):
    # source: exact property — Löwdin populations are diag(S^1/2 D S^1/2)
    root = np.real(scipy.linalg.sqrtm(hydroxide.overlap))
    expected = np.diag(root @ hydroxide.density @ root)
    np.testing.assert_allclose(lowdin_populations(hydroxide), expected, atol=1e-10)


@pytest.mark.parametrize("analysis", [mulliken_charges, lowdin_charges, dipole_moment, mp2_energy])
def test_analysis_needs_the_molecule_and_basis(hydroxide, analysis):
    bare = dataclasses.replace(hydroxide, molecule=None, basis=None)
    with pytest.raises(InputError, match="molecule and basis"):
        analysis(bare)
