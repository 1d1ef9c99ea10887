"""Density-fitted MP2 with the shipped RI sets, against the reference library and the exact MP2."""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from pyscf import mp
from reference import family_shells, reference_mole, reference_rhf

import hfcore
from hfcore.analysis import core_orbital_count, mp2_energy
from hfcore.cli import main

INPUTS = Path(__file__).resolve().parent.parent / "inputs"
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
    assert mine.fit_name.lower() == fitting
    assert mine.fit_n_functions == aux.nao_nr()


def test_fitted_mp2_is_close_to_exact_mp2_on_water():
    mol = hfcore.read_xyz(INPUTS / "water.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "cc-pvtz"), hfcore.SCFOptions(**TIGHT))
    exact = mp2_energy(result)
    fitted = mp2_energy(result, fit_basis="auto")
    # source: common practice (RI error of the matched cc-pVXZ-RI set, well below 1e-4 Eh for a small molecule)
    assert abs(fitted.correlation - exact.correlation) < 1e-4
    assert fitted.fit_name == "cc-pVTZ-RIFIT"
    assert exact.fit_name is None


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()
