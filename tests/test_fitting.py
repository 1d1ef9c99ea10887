"""Density fitting: three- and two-centre integrals, fitted J/K energies, fitting sets, --fit-basis."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from pyscf import df, scf
from reference import family_shells, reference_mole, unit_norm_scale

from hfcore.basis import build_basis
from hfcore.basis.fitting import fitting_basis
from hfcore.basis.library import find_family
from hfcore.basis.shells import BasisSet, Shell
from hfcore.cli import main
from hfcore.errors import BasisError, InputError, ResourceError
from hfcore.geometry import parse_xyz, read_xyz
from hfcore.integrals.three_center import three_center_integrals, two_center_integrals
from hfcore.scf import SCFOptions, run_rhf
from hfcore.scf.fitted_jk import MetricFactor, plan_fitting

from conftest import INPUTS
TIGHT = {"energy_tol": 1e-11, "gradient_tol": 1e-8}


def _by_l(shells: dict) -> dict:
    # The reference library keeps each element's shells in increasing l.
    return {k: sorted(v, key=lambda s: s.l) for k, v in shells.items()}


def _sorted_basis(molecule, name: str, spherical: bool | None = None) -> BasisSet:
    basis = build_basis(molecule, name, spherical=spherical)
    shells = sorted(basis.shells, key=lambda s: (s.atom, s.l))
    return BasisSet(basis.name, tuple(shells), basis.spherical)


@pytest.mark.parametrize(
    ("geometry", "orbital", "fitting", "spherical"),
    [
        ("water", "cc-pvdz", "cc-pvtz-jkfit", True),
        ("hydrogen_fluoride", "cc-pvqz", "cc-pv5z-jkfit", True),  # i fitting functions with g orbital pairs
        ("hydrogen_fluoride", "cc-pv5z", "cc-pv5z-jkfit", True),  # i fitting functions with h orbital pairs
        ("ammonia", "6-31g*", "def2-universal-jkfit", False),
    ],
)
def test_three_and_two_centre_integrals_match_reference_library(geometry, orbital, fitting, spherical):
    # source: reference library run (int3c2e through df.incore.aux_e2, and int2c2e) with the same shells
    mol = read_xyz(INPUTS / f"{geometry}.xyz")
    basis = _sorted_basis(mol, orbital, spherical)
    # The reference library pairs Cartesian orbitals only with Cartesian fitting functions.
    aux = _sorted_basis(mol, fitting, spherical)
    three = three_center_integrals(basis, aux)
    metric = two_center_integrals(aux)
    ref_orb = reference_mole(mol, _by_l(family_shells(mol, orbital)), spherical=spherical)
    ref_aux = reference_mole(mol, _by_l(family_shells(mol, fitting)), spherical=spherical)
    ref_three = df.incore.aux_e2(ref_orb, ref_aux, intor="int3c2e").transpose(2, 0, 1)
    scale, aux_scale = unit_norm_scale(ref_orb), unit_norm_scale(ref_aux)
    ref_three = ref_three * aux_scale[:, None, None] * scale[None, :, None] * scale[None, None, :]
    ref_metric = ref_aux.intor("int2c2e") * aux_scale[:, None] * aux_scale[None, :]
    assert three.shape == ref_three.shape
    assert np.abs(three - ref_three).max() < 1e-10
    assert np.abs(metric - ref_metric).max() < 1e-10


def _reference_fitted_energy(mol, orbital: str, fitting: str) -> float:
    ref_orb = reference_mole(mol, family_shells(mol, orbital), spherical=True)
    ref_aux = reference_mole(mol, family_shells(mol, fitting), spherical=True)
    mf = scf.RHF(ref_orb).density_fit(auxbasis=ref_aux._basis)
    mf.conv_tol = 1e-11
    mf.kernel()
    assert mf.converged
    return float(mf.e_tot)


@pytest.mark.parametrize(
    ("geometry", "orbital", "fitting"),
    [
        ("water", "def2-svp", "def2-universal-jkfit"),
        ("methane", "def2-svp", "def2-universal-jkfit"),
        ("hydrogen_chloride", "def2-svp", "def2-universal-jkfit"),
        ("hydrogen_fluoride", "cc-pvdz", "cc-pvtz-jkfit"),
        ("ammonia", "cc-pvdz", "cc-pvtz-jkfit"),
        ("hydrogen_cyanide", "cc-pvdz", "cc-pvtz-jkfit"),
        ("hydrogen_fluoride", "cc-pv5z", "cc-pv5z-jkfit"),  # h orbital functions, i fitting functions
    ],
)
def test_fitted_energy_matches_reference_library(geometry, orbital, fitting):
    # source: reference library run, density-fitted RHF with the same orbital and fitting shells, conv_tol 1e-11
    mol = read_xyz(INPUTS / f"{geometry}.xyz")
    result = run_rhf(mol, orbital, SCFOptions(fit_basis=fitting, **TIGHT))
    assert result.jk_mode == "fitted" and result.fit_storage == "stored"
    assert abs(result.energy_total - _reference_fitted_energy(mol, orbital, fitting)) < 1e-8


def test_blocked_fitted_energy_matches_reference_library():
    # source: reference library run, density-fitted RHF; a budget below the whole factors forces blocks
    mol = read_xyz(INPUTS / "water.xyz")
    result = run_rhf(mol, "cc-pvdz", SCFOptions(fit_basis="cc-pvtz-jkfit", memory_limit=0.8, **TIGHT))
    assert result.fit_storage == "blocked"
    assert abs(result.energy_total - _reference_fitted_energy(mol, "cc-pvdz", "cc-pvtz-jkfit")) < 1e-8


def _one_centre_sets(complete: bool) -> tuple[BasisSet, BasisSet]:
    """He with uncontracted s and p functions, and every product of two of them as a fitting set.

    On one centre the product of primitives of exponents a and b is a
    primitive of exponent a + b: s·s an s, s·p a p, and p·p a Cartesian d
    (whose six components hold the s-type r² part as well). With
    ``complete`` false the s product 0.4 + 0.4 is left out.
    """
    centre = np.zeros(3)
    s_exp, p_exp = [0.4, 1.3, 4.1], [0.9]
    shells = [Shell(0, [a], [[1.0]], centre, 0) for a in s_exp] + [Shell(1, [a], [[1.0]], centre, 0) for a in p_exp]
    sums = lambda xs, ys: sorted({round(x + y, 12) for x in xs for y in ys})  # noqa: E731
    aux = [Shell(0, [a], [[1.0]], centre, 0) for a in sums(s_exp, s_exp) if complete or a != 0.8]
    aux += [Shell(1, [a], [[1.0]], centre, 0) for a in sums(s_exp, p_exp)]
    aux += [Shell(2, [a], [[1.0]], centre, 0) for a in sums(p_exp, p_exp)]
    return BasisSet("he-sp", tuple(shells), True), BasisSet("he-products", tuple(aux), False)


def test_fitting_set_spanning_every_product_gives_the_exact_energy():
    # source: exact property — when every orbital product lies in the fitting space, the
    # Coulomb-metric fit reproduces (mn|ls) exactly, so fitted and exact energies agree
    mol = parse_xyz("1\nhelium\nHe 0 0 0\n")
    basis, aux = _one_centre_sets(complete=True)
    exact = run_rhf(mol, basis, SCFOptions(**TIGHT))
    fitted = run_rhf(mol, basis, SCFOptions(fit_basis=aux, **TIGHT))
    assert fitted.jk_mode == "fitted"
    assert abs(fitted.energy_total - exact.energy_total) < 1e-10


def test_fitting_set_missing_products_differs_from_the_exact_energy():
    # source: exact property — without one of the s·s products the occupied density is no longer in the
    # fitting space, so the fit, and with it the energy, moves (the control for the test above)
    mol = parse_xyz("1\nhelium\nHe 0 0 0\n")
    basis, aux = _one_centre_sets(complete=False)
    exact = run_rhf(mol, basis, SCFOptions(**TIGHT))
    fitted = run_rhf(mol, basis, SCFOptions(fit_basis=aux, **TIGHT))
    assert abs(fitted.energy_total - exact.energy_total) > 1e-8


def test_near_singular_metric_drops_duplicates_and_keeps_the_energy():
    # source: exact property — a fitting shell given twice adds nothing to the fitting space
    mol = read_xyz(INPUTS / "water.xyz")
    aux = build_basis(mol, "def2-universal-jkfit")
    doubled = BasisSet(aux.name, aux.shells + aux.shells[:1], aux.spherical)
    factor = MetricFactor(two_center_integrals(doubled))
    assert factor.method == "eigen" and factor.n_dropped == 1
    once = run_rhf(mol, "def2-svp", SCFOptions(fit_basis=aux, **TIGHT))
    twice = run_rhf(mol, "def2-svp", SCFOptions(fit_basis=doubled, **TIGHT))
    assert twice.fit_dropped == 1
    assert abs(once.energy_total - twice.energy_total) < 1e-8


def test_auto_takes_the_matching_set_and_universal_for_what_it_lacks():
    # source: common practice — cc-pVTZ-JKFIT serves cc-pVDZ; the cc-pVXZ-JKFIT sets have no Ne
    # (basis-set-exchange package); def2-universal-JKFIT for other orbital sets
    water = read_xyz(INPUTS / "water.xyz")
    assert fitting_basis(water, build_basis(water, "cc-pvdz"), "auto").basis.name == "cc-pVTZ-JKFIT"
    assert fitting_basis(water, build_basis(water, "cc-pvqz"), "auto").basis.name == "cc-pVQZ-JKFIT"
    assert fitting_basis(water, build_basis(water, "def2-svp"), "auto").basis.name == "def2-universal-JKFIT"
    neon_hydride = parse_xyz("2\nNeH+\nNe 0 0 0\nH 0 0 1.0\n", charge=1)
    choice = fitting_basis(neon_hydride, build_basis(neon_hydride, "cc-pvdz"), "auto")
    assert choice.basis.name == "cc-pVTZ-JKFIT (Ne: def2-universal-JKFIT)"
    assert any("lacks Ne" in note for note in choice.notes)


def test_shipped_fitting_sets_cover_the_published_elements():
    # source: basis-set-exchange package metadata — cc-pVXZ-JKFIT lack He, Li, Be, Ne, Na, Mg, Ar;
    # def2-universal-JKFIT covers H-Ar
    first_rows = set(range(1, 19))
    assert find_family("def2-universal-jkfit").elements() >= first_rows
    for name in ("cc-pvtz-jkfit", "cc-pvqz-jkfit", "cc-pv5z-jkfit"):
        assert first_rows - find_family(name).elements() == {2, 3, 4, 10, 11, 12, 18}
    assert max(s.l for s in find_family("cc-pv5z-jkfit").element_shells(8)) == 6


def test_lacking_element_is_a_basis_error_naming_it():
    mol = parse_xyz("2\nNeH+\nNe 0 0 0\nH 0 0 1.0\n", charge=1)
    with pytest.raises(BasisError, match="does not cover element Ne"):
        fitting_basis(mol, build_basis(mol, "cc-pvdz"), "cc-pvtz-jkfit")


def test_budget_below_the_blocked_path_is_refused_before_any_integral():
    mol = read_xyz(INPUTS / "water.xyz")
    basis = build_basis(mol, "cc-pvdz")
    aux = build_basis(mol, "cc-pvtz-jkfit")
    with pytest.raises(ResourceError, match="even in blocks"):
        plan_fitting(basis, aux, 5, 100_000)


def test_fit_basis_excludes_direct():
    with pytest.raises(InputError, match="exclude each other"):
        SCFOptions(fit_basis="auto", direct=True)


def _run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(args), stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_cli_fit_basis_reports_the_fitting_set_and_json_keys(tmp_path):
    code, out, _ = _run("energy", str(INPUTS / "water.xyz"), "--basis", "cc-pvdz", "--fit-basis", "auto", "--json", "-")
    assert code == 0
    record = json.loads(out)
    assert record["scf"]["jk_mode"] == "fitted"
    assert record["basis"]["fit_basis_name"] == "cc-pVTZ-JKFIT"
    assert record["basis"]["fit_basis_n_functions"] == build_basis(read_xyz(INPUTS / "water.xyz"), "cc-pvtz-jkfit").n_functions
    # the deprecated keys, kept for one release, say the same
    assert (record["basis"]["fit_name"], record["basis"]["fit_n_functions"]) == (
        record["basis"]["fit_basis_name"], record["basis"]["fit_basis_n_functions"])
    code, out, _ = _run("energy", str(INPUTS / "water.xyz"), "--basis", "cc-pvdz", "--fit-basis", "auto", "--quiet")
    assert code == 0 and "fitting set    cc-pVTZ-JKFIT" in out


@pytest.mark.parametrize(
    ("geometry", "extra", "code", "message"),
    [
        ("water.xyz", ["--fit-basis", "no-such-jkfit"], 3, "no-such-jkfit"),
        (None, ["--fit-basis", "cc-pvtz-jkfit", "--charge", "1"], 3, "does not cover element Ne"),
        ("water.xyz", ["--fit-basis", "auto", "--memory", "0.05"], 5, "even in blocks"),
    ],
)
def test_cli_bad_fitting_input_is_one_line_before_any_output(tmp_path, geometry, extra, code, message):
    if geometry is None:
        path = tmp_path / "neh.xyz"
        path.write_text("2\nNeH+\nNe 0 0 0\nH 0 0 1.0\n")
    else:
        path = INPUTS / geometry
    got, out, err = _run("energy", str(path), "--basis", "cc-pvdz", *extra)
    assert got == code
    assert out == ""
    assert err.startswith("hfcore: error: ") and err.count("\n") == 1 and message in err


def test_cli_compare_takes_fit_basis():
    code, out, _ = _run("compare", str(INPUTS / "water.xyz"), "--basis", "def2-svp,cc-pvdz", "--fit-basis", "auto",
                        "--json", "-")
    assert code == 0
    assert len(json.loads(out)["comparison"]["rows"]) == 2
