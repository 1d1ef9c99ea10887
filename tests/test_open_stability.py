"""Stability of open-shell and closed-shell solutions towards UHF, and following into broken symmetry.

Sources: checks.md's reference library run for stretched H2 (cc-pVDZ, 2.5 Å),
reference library runs in the tests (UHF, its internal stability analysis
followed until stable), and exact properties.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from open_reference import open_reference_mole
from pyscf import scf

from hfcore.geometry import read_xyz
from hfcore.scf import SCFOptions, check_rhf_to_uhf, run_rhf, run_scf
from hfcore.scf.driver import prepare_integrals
from hfcore.scf.stability import OrbitalHessian
from hfcore.scf.uhf_stability import UHFOrbitalHessian

INPUTS = Path(__file__).resolve().parent.parent / "inputs"


def _reference_followed_uhf(molecule, basis_name: str):
    """The reference library's UHF, with its internal stability analysis followed until stable."""
    mf = scf.UHF(open_reference_mole(molecule, basis_name))
    mf.conv_tol, mf.conv_tol_grad, mf.verbose = 1e-12, 1e-8, 0
    mf.kernel()
    for _ in range(6):
        mo, _, stable, _ = mf.stability(return_status=True)
        if stable:
            break
        mf.kernel(mf.make_rdm1(mo, mf.mo_occ))
    assert mf.converged and stable
    return mf


@pytest.fixture(scope="module")
def stretched_h2():
    return read_xyz(INPUTS / "hydrogen_stretched.xyz")


def test_uhf_on_stretched_h2_follows_the_instability_into_broken_symmetry(stretched_h2):
    result = run_scf(stretched_h2, "cc-pvdz", SCFOptions(method="uhf", gradient_tol=1e-9))
    # source: checks.md, reference library run: -0.9993624 Eh, <S^2> 0.978
    assert abs(result.energy_total - -0.9993624) < 1e-7
    assert abs(result.s_squared - 0.978) < 1e-3
    # source: reference library run in this test, stability-followed UHF with the same shells
    ref = _reference_followed_uhf(stretched_h2, "cc-pvdz")
    assert abs(result.energy_total - ref.e_tot) < 1e-8
    assert abs(result.s_squared - ref.spin_square()[0]) < 1e-6
    assert result.stability.stable and result.stability.rounds >= 1
    assert result.stability.solutions[0] > result.energy_total


def test_rhf_on_stretched_h2_reports_the_lower_unrestricted_solution_as_a_warning(stretched_h2):
    result = run_scf(stretched_h2, "cc-pvdz")
    # source: checks.md, reference library run: RHF -0.8653301 Eh, unstable towards UHF
    assert abs(result.energy_total - -0.8653301) < 1e-7
    assert len(result.warnings) == 1 and "unstable towards UHF" in result.warnings[0]
    assert result.to_dict()["scf"]["warnings"] == list(result.warnings)


def test_stretched_n2_uhf_reaches_the_reference_librarys_stability_followed_solution():
    molecule = read_xyz(INPUTS / "nitrogen_stretched.xyz")
    result = run_scf(molecule, "cc-pvdz", SCFOptions(method="uhf", gradient_tol=1e-9))
    # source: reference library run in this test, UHF followed along its internal instabilities
    ref = _reference_followed_uhf(molecule, "cc-pvdz")
    assert abs(result.energy_total - ref.e_tot) < 1e-8
    assert abs(result.s_squared - ref.spin_square()[0]) < 1e-6
    # source: checks.md, reference library run: the closed-shell solution lies at -108.2326862 Eh
    assert abs(result.stability.solutions[0] - -108.2326862) < 1e-6


def test_a_stable_closed_shell_has_no_unrestricted_warning():
    water = read_xyz(INPUTS / "water.xyz")
    result = run_scf(water, "6-31g")
    assert result.warnings == ()
    assert check_rhf_to_uhf(result, prepare_integrals(result.basis).jk_builder()).stable


def test_a_radical_reports_its_uhf_stability():
    result = run_scf(read_xyz(INPUTS / "oh.xyz"), "6-31g", SCFOptions(stability="report"))
    report = result.stability
    assert report.mode == "report" and report.stable and report.rounds == 0
    assert report.eigenvalues.shape == (3,) and report.lowest_eigenvalue > 0
    assert result.to_dict()["scf"]["stability"]["stable"] is True


def test_the_uhf_hessian_with_equal_spin_rotations_is_the_rhf_hessian():
    water = read_xyz(INPUTS / "water.xyz")
    rhf = run_rhf(water, "6-31g")
    jk = prepare_integrals(rhf.basis).jk_builder()
    n = rhf.n_occupied
    closed = OrbitalHessian(rhf.coefficients, rhf.fock, n, jk)
    open_ = UHFOrbitalHessian((rhf.coefficients,) * 2, (rhf.fock,) * 2, (n, n), jk)
    x = np.random.default_rng(3).standard_normal(closed.shape)
    both = open_.split(open_(np.concatenate([x.ravel(), x.ravel()])))
    # exact property: rotating both spins alike is the RHF rotation, so the chain rule sums the two spin blocks
    assert np.abs(both[0] + both[1] - closed(x)).max() < 1e-10
