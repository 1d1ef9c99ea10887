"""The fitted screen of the stability analysis and the split RHF→UHF check.

Where exact Hessian products are full integral passes (direct mode), the
analysis searches with density-fitted products first and goes on with exact
ones only near the threshold (hfcore.scf.stability.screened_eigenpairs). These
tests check that the screened verdict is the exact one, that a value near the
threshold is the exact value, and that the RHF→UHF check, split into its
spin-keeping and spin-flipping blocks, finds the lowest eigenvalue of the
whole UHF Hessian.

Sources: exact properties (the same operator solved two ways; the block
structure of the UHF Hessian at an RHF solution) and reference library runs
(its internal-stability Hessian, through test_stability's helper). The
geometries are our own, written here or in test_stability.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_stability import HARD_CASES, _molecule, _reference_hessian_eigenvalues

from hfcore import parse_xyz
from hfcore.integrals import compute_eri
from hfcore.scf import SCFOptions, analyse_stability, check_rhf_to_uhf, run_rhf
from hfcore.scf.stability import SCREEN_MARGIN
from hfcore.scf.stability_screen import SCREENED_STORE_BYTES, make_fitted_screen, screens
from hfcore.scf.uhf_stability import analyse_uhf_stability

BUDGET = 2 * 2**30


def _screen(result):
    screen = make_fitted_screen(result.molecule, result.basis, "direct", BUDGET, result.n_occupied)
    assert screen is not None
    return screen


def _first_solution(atoms: str, basis_name: str):
    """The solution the SCF reaches from its guess, not analysed (stored integrals)."""
    return run_rhf(_molecule(atoms), basis_name, SCFOptions(stability="skip"))


@pytest.mark.parametrize("name", ["N2 2.2 Å", "water, O-H 1.89 Å", "ozone"])
def test_the_screened_analysis_gives_the_exact_verdict(name):
    result = _first_solution(*HARD_CASES[name])
    jk = compute_eri(result.basis)
    args = (result.coefficients, result.fock, result.n_occupied, jk)
    exact = analyse_stability(*args, n_roots=1, tol=1e-3)
    screened = analyse_stability(*args, n_roots=1, tol=1e-3, screen=_screen(result))
    # Exact property: the same Hessian, searched once with exact products and once screened.
    assert screened.stable == exact.stable
    assert screened.fitted_products > 0
    if screened.eigenvalues_from == "exact":
        assert screened.lowest_eigenvalue == pytest.approx(exact.lowest_eigenvalue, abs=1e-5)
    else:
        # Far above the threshold; the fitting error is far below the margin that allowed it.
        assert screened.lowest_eigenvalue >= -screened.threshold + SCREEN_MARGIN
        assert screened.products == 0
        assert abs(screened.lowest_eigenvalue - exact.lowest_eigenvalue) < 0.1 * SCREEN_MARGIN


def test_an_unstable_solution_is_reported_with_the_exact_value_of_the_reference_library():
    atoms, basis_name = HARD_CASES["N2 2.2 Å"]
    result = _first_solution(atoms, basis_name)
    jk = compute_eri(result.basis)
    screened = analyse_stability(result.coefficients, result.fock, result.n_occupied, jk, n_roots=1, tol=1e-5,
                                 screen=_screen(result))
    assert not screened.stable and screened.eigenvalues_from == "exact" and screened.products > 0
    # Source: checks.md (reference library measurement): this is the unfollowed solution.
    assert result.energy_total == pytest.approx(-108.2326862, abs=1e-6)
    # Source: reference library run, its internal-stability Hessian on its own solution, solved to 1e-12.
    reference = np.atleast_1d(_reference_hessian_eigenvalues(atoms, basis_name, n_roots=1))
    assert screened.lowest_eigenvalue == pytest.approx(reference[0], abs=1e-5)


def test_near_the_threshold_the_rhf_to_uhf_check_states_the_exact_value():
    # Our own geometry: H2 at 1.18 Å in 6-31G lies just before the bond length where RHF becomes
    # unstable towards UHF, so the lowest UHF-Hessian eigenvalue is small and positive.
    result = run_rhf(parse_xyz("2\nH2 near its instability\nH 0 0 0\nH 0 0 1.18\n"), "6-31g")
    jk = compute_eri(result.basis)
    screened = check_rhf_to_uhf(result, jk, tol=1e-5, screen=_screen(result))
    c, f, n = result.coefficients, result.fock, result.n_occupied
    whole = analyse_uhf_stability((c, c), (f, f), (n, n), jk, threshold=result.options.stability_threshold, tol=1e-5)
    assert 0 < whole.lowest_eigenvalue < SCREEN_MARGIN
    assert screened.eigenvalues_from == "exact" and screened.stable and whole.stable
    # Exact property: at an RHF solution the UHF Hessian is block-diagonal in κ_α ± κ_β.
    assert screened.lowest_eigenvalue == pytest.approx(whole.lowest_eigenvalue, abs=1e-6)


@pytest.mark.parametrize("geometry, unstable", [("O 0 0 0\nH 0 0.757 0.587\nH 0 -0.757 0.587", False),
                                                ("H 0 0 0\nH 0 0 2.5", True)])
def test_the_split_check_finds_the_lowest_eigenvalue_of_the_whole_uhf_hessian(geometry, unstable):
    result = run_rhf(_molecule(geometry), "6-31g")
    jk = compute_eri(result.basis)
    split = check_rhf_to_uhf(result, jk, tol=1e-6)
    c, f, n = result.coefficients, result.fock, result.n_occupied
    whole = analyse_uhf_stability((c, c), (f, f), (n, n), jk, threshold=result.options.stability_threshold, tol=1e-6)
    # Exact property: the lowest eigenvalue of a block-diagonal operator is the lower of its blocks'.
    assert split.lowest_eigenvalue == pytest.approx(whole.lowest_eigenvalue, abs=1e-8)
    assert split.stable == whole.stable == (not unstable)
    # Its mode is a unit eigenvector of the whole Hessian (exact property).
    assert np.linalg.norm(split.mode) == pytest.approx(1.0, abs=1e-12)
    # The spin-flipping search started from the products the RHF analysis's builds already gave.
    assert result.stability.spin_flip_space is not None
    assert split.products < whole.products


def test_a_direct_run_states_fitted_values_far_from_the_threshold_and_says_so():
    molecule = _molecule("O 0 0 0\nH 0 0.757 0.587\nH 0 -0.757 0.587")
    direct = run_rhf(molecule, "cc-pvdz", SCFOptions(direct=True))
    stored = run_rhf(molecule, "cc-pvdz")
    st, exact = direct.stability, stored.stability
    assert direct.jk_mode == "direct" and stored.jk_mode == "stored"
    assert st.eigenvalues_from == "fitted" and st.hessian_products == 0 and st.fitted_products > 0
    assert st.screen_fit_basis == "cc-pVTZ-JKFIT"
    assert exact.eigenvalues_from == "exact" and exact.fitted_products == 0 and exact.screen_fit_basis is None
    # Exact property: the same verdict; the fitted value is within the fitting error of the exact one.
    assert st.stable == exact.stable
    assert abs(st.lowest_eigenvalue - exact.lowest_eigenvalue) < 0.1 * SCREEN_MARGIN
    record = direct.to_dict()["scf"]["stability"]
    assert record["eigenvalues_from"] == "fitted" and record["fitted_products"] == st.fitted_products
    assert record["screen_fit_basis"] == "cc-pVTZ-JKFIT"


def test_no_screen_where_exact_products_are_cheap_or_the_factors_do_not_fit():
    result = run_rhf(_molecule("O 0 0 0\nH 0 0.757 0.587\nH 0 -0.757 0.587"), "6-31g", SCFOptions(stability="skip"))
    small = result.eri_memory_bytes
    assert small < SCREENED_STORE_BYTES
    for mode in ("stored", "stored-lean"):
        assert make_fitted_screen(result.molecule, result.basis, mode, BUDGET, result.n_occupied, eri_bytes=small) is None
    assert make_fitted_screen(result.molecule, result.basis, "direct", 1024, result.n_occupied) is None


def test_a_large_store_is_screened_like_the_direct_mode():
    result = run_rhf(_molecule("O 0 0 0\nH 0 0.757 0.587\nH 0 -0.757 0.587"), "6-31g", SCFOptions(stability="skip"))
    screen = make_fitted_screen(result.molecule, result.basis, "stored-lean", BUDGET, result.n_occupied,
                                eri_bytes=SCREENED_STORE_BYTES)
    assert screen is not None and screen.fit_basis == "def2-universal-JKFIT"
    assert screens("direct", 0) and not screens("stored", SCREENED_STORE_BYTES - 1)


def test_the_report_says_when_the_eigenvalues_come_from_fitted_products(tmp_path):
    import subprocess
    import sys
    from pathlib import Path

    water = Path(__file__).resolve().parent.parent / "inputs" / "water.xyz"
    done = subprocess.run([sys.executable, "-m", "hfcore", "energy", str(water), "--basis", "6-31g", "--direct",
                           "--quiet"], capture_output=True, text=True, timeout=300, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert "density-fitted products" in done.stdout and "exact, " in done.stdout
