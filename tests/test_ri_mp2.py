"""Density-fitted MP2 with the shipped RI sets, against the reference library and the exact MP2."""

from __future__ import annotations

import io
import json

import pytest
from pyscf import mp
from reference import family_shells, reference_mole, reference_rhf

import hfcore
from hfcore.analysis import core_orbital_count, mp2_energy
from hfcore.cli import main

from conftest import INPUTS
TIGHT = dict(energy_tol=1e-12, gradient_tol=1e-9)
REFERENCE_TIGHT = dict(conv_tol=1e-12, conv_tol_grad=1e-9)
CASES = [("water", "cc-pvdz", "cc-pvdz-rifit"), ("ammonia", "def2-svp", "def2-svp-rifit")]


@pytest.fixture(scope="module", params=CASES, ids=[f"{n}/{b}/{f}" for n, b, f in CASES])
def pair(request):
    name, orbital, fitting = request.param
    mol = hfcore.read_xyz(INPUTS / f"{name}.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, orbital), hfcore.SCFOptions(**TIGHT))
    ref = reference_rhf(reference_mole(mol, family_shells(mol, orbital), spherical=True), **REFERENCE_TIGHT)
    aux = reference_mole(mol, family_shells(mol, fitting), spherical=True)
    return result, ref, fitting, aux


@pytest.mark.parametrize("frozen", [False, True], ids=["all-electron", "frozen-core"])
def test_fitted_mp2_matches_reference_library(pair, frozen):
    result, ref, fitting, aux = pair
    core = core_orbital_count(result.molecule) if frozen else 0
    mine = mp2_energy(result, frozen_core=core, fit_basis=fitting)
    theirs = mp.MP2(ref, frozen=core or None).density_fit(auxbasis=aux._basis).run(verbose=0)
    # source: reference library run (PySCF density-fitted MP2 on its own tight RHF), the same orbital and fitting shells
    assert mine.correlation == pytest.approx(theirs.e_corr, abs=1e-8)
    assert mine.opposite_spin == pytest.approx(theirs.e_corr_os, abs=1e-8)
    assert mine.same_spin == pytest.approx(theirs.e_corr_ss, abs=1e-8)
    assert mine.fit_basis_name.lower() == fitting
    assert mine.fit_basis_n_functions == aux.nao_nr()


def test_fitted_mp2_is_close_to_exact_mp2_on_water():
    mol = hfcore.read_xyz(INPUTS / "water.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "cc-pvtz"), hfcore.SCFOptions(**TIGHT))
    exact = mp2_energy(result)
    fitted = mp2_energy(result, fit_basis="auto")
    # source: common practice (RI error of the matched cc-pVXZ-RI set, well below 1e-4 Eh for a small molecule)
    assert abs(fitted.correlation - exact.correlation) < 1e-4
    assert fitted.fit_basis_name == "cc-pVTZ-RIFIT"
    assert exact.fit_basis_name is None


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_cli_fitted_mp2_json_keys(tmp_path):
    mol = hfcore.read_xyz(INPUTS / "water.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "cc-pvdz"))
    api = mp2_energy(result, frozen_core=1, fit_basis="cc-pvdz-ri")
    out = tmp_path / "water.json"
    code, _, err = _run(["energy", str(INPUTS / "water.xyz"), "--basis", "cc-pvdz", "--mp2", "--frozen-core",
                         "--mp2-fit-basis", "auto", "--json", str(out), "--quiet"])
    assert code == 0, err
    record = json.loads(out.read_text())["mp2"]
    assert record["fit_basis_name"] == "cc-pVDZ-RIFIT"
    # source: exact property (the command line and the API run the same SCF and fitted MP2)
    assert record["fit_basis_n_functions"] == api.fit_basis_n_functions
    assert record["correlation"] == pytest.approx(api.correlation, abs=1e-8)
    assert record["frozen_core"] == 1


@pytest.mark.parametrize(
    ("xyz", "extra", "needle"),
    [
        ("water", ["--mp2-fit-basis", "no-such-ri"], "no-such-ri"),
        ("helium_hydride", ["--charge", "1", "--mp2-fit-basis", "cc-pvtz-jkfit"], "He"),  # the JKFIT set lacks He
    ],
)
def test_cli_bad_fitting_set_is_one_line_exit_3(tmp_path, xyz, extra, needle):
    path = INPUTS / f"{xyz}.xyz"
    if not path.exists():
        path = tmp_path / "heh.xyz"
        path.write_text("2\nHeH+\nHe 0 0 0\nH 0 0 0.77\n")
    code, out, err = _run(["energy", str(path), "--basis", "cc-pvdz", "--mp2", *extra])
    # source: the documented exit code of a basis error (README, exit codes)
    assert code == 3
    assert err.count("\n") == 1 and err.startswith("hfcore: error:") and needle in err
    assert out == ""  # failed before any report, so before the SCF


def test_cli_mp2_fit_basis_needs_mp2():
    code, _, err = _run(["energy", str(INPUTS / "water.xyz"), "--basis", "cc-pvdz", "--mp2-fit-basis", "auto"])
    # source: the documented exit code of an input error (README, exit codes)
    assert code == 2 and "--mp2" in err
