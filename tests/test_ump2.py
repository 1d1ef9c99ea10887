"""UMP2: same-spin (αα, ββ) and opposite-spin (αβ) second-order energies of UHF solutions, exact and fitted.

Sources: reference library runs (PySCF UMP2 and density-fitted UMP2 on its
own UHF with the same shells), S. Grimme, J. Chem. Phys. 118, 9095 (2003)
for the SCS weights (from memory), and exact properties.
"""

from __future__ import annotations

import pytest
from open_reference import open_reference_mole, reference_open_scf
from pyscf import mp
from reference import family_shells, reference_mole
from test_uhf import INPUTS, species

from hfcore.analysis import mp2_energy
from hfcore.analysis.ump2 import check_mp2_reference, ump2_energy
from hfcore.errors import InputError
from hfcore.geometry import read_xyz
from hfcore.scf import SCFOptions, run_scf, run_uhf

TIGHT = SCFOptions(gradient_tol=1e-9, energy_tol=1e-11)


@pytest.fixture(scope="module", params=["OH", "O2", "CH2"])
def pair(request):
    molecule = species(request.param)
    return molecule, run_scf(molecule, "cc-pvdz", TIGHT), reference_open_scf(open_reference_mole(molecule, "cc-pvdz"))


@pytest.mark.parametrize("frozen", [0, 1])
def test_ump2_matches_the_reference_library(pair, frozen):
    _, result, mf = pair
    ours = ump2_energy(result, frozen_core=frozen)
    # source: reference library run (PySCF UMP2 on its UHF), same shells
    theirs = mp.UMP2(mf, frozen=frozen or None).run(verbose=0)
    assert abs(ours.correlation - theirs.e_corr) < 1e-8
    assert abs(ours.energy_total - (result.energy_total + theirs.e_corr)) < 1e-8


def test_fitted_ump2_matches_the_reference_library_with_the_same_fitting_set(pair):
    molecule, result, mf = pair
    ours = ump2_energy(result, fit_basis="cc-pvdz-rifit")
    aux = reference_mole(molecule, family_shells(molecule, "cc-pvdz-rifit"), spherical=True)
    # source: reference library run (PySCF density-fitted UMP2), same orbital and fitting shells
    theirs = mp.UMP2(mf).density_fit(auxbasis=aux._basis).run(verbose=0)
    assert abs(ours.correlation - theirs.e_corr) < 1e-8
    assert ours.fit_name is not None


def test_the_parts_add_up_and_scs_weighs_them(pair):
    _, result, _ = pair
    u = ump2_energy(result)
    # exact property: E(2) is the sum of the three spin blocks
    assert abs(u.correlation - (u.same_spin_alpha + u.same_spin_beta + u.opposite_spin)) < 1e-14
    # source: Grimme 2003 (from memory): 6/5 opposite spin + 1/3 same spin
    assert abs(u.scs_correlation - (1.2 * u.opposite_spin + u.same_spin / 3.0)) < 1e-14
    assert u.same_spin_alpha < 0 and u.same_spin_beta < 0 and u.opposite_spin < 0


def test_ump2_of_a_closed_shell_equals_rhf_mp2():
    water = read_xyz(INPUTS / "water.xyz")
    rhf = run_scf(water, "6-31g", TIGHT)
    uhf = run_uhf(water, "6-31g", TIGHT)
    closed, opened = mp2_energy(rhf), ump2_energy(uhf)
    # exact property: with C_alpha = C_beta the UMP2 blocks are the RHF MP2 parts
    assert abs(opened.correlation - closed.correlation) < 1e-9
    assert abs(opened.opposite_spin - closed.opposite_spin) < 1e-9
    assert abs(opened.same_spin - closed.same_spin) < 1e-9


def test_mp2_on_rohf_is_refused_in_one_line_before_the_scf():
    with pytest.raises(InputError, match="ROHF") as info:
        check_mp2_reference("rohf")
    assert "\n" not in str(info.value)
    check_mp2_reference("uhf")
    rohf = run_scf(species("OH"), "sto-3g", SCFOptions(method="rohf"))
    with pytest.raises(InputError, match="ROHF"):
        ump2_energy(rohf)
