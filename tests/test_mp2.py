"""MP2 and SCS-MP2 from the packed integral store, against the reference library, and on the command line."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest

import hfcore
from hfcore.analysis import core_orbital_count, mp2_energy
from hfcore.cli import main
from hfcore.errors import ResourceError
from hfcore.integrals import compute_eri

from pyscf import mp
from reference import family_shells, reference_mole, reference_rhf

from conftest import INPUTS
TIGHT = dict(energy_tol=1e-12, gradient_tol=1e-9)
REFERENCE_TIGHT = dict(conv_tol=1e-12, conv_tol_grad=1e-9)

CASES = [
    (name, basis, spherical)
    for name in ("water", "ammonia", "hydrogen_fluoride", "hydrogen_chloride")
    for basis, spherical in (("cc-pvdz", True), ("6-31g*", False))
]


@pytest.fixture(scope="module", params=CASES, ids=[f"{n}/{b}" for n, b, _ in CASES])
def pair(request):
    name, basis_name, spherical = request.param
    mol = hfcore.read_xyz(INPUTS / f"{name}.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, basis_name, spherical=spherical), hfcore.SCFOptions(**TIGHT))
    ref = reference_rhf(reference_mole(mol, family_shells(mol, basis_name), spherical=spherical), **REFERENCE_TIGHT)
    return result, ref


def test_mp2_matches_reference_all_electrons(pair):
    result, ref = pair
    mine = mp2_energy(result)
    theirs = mp.MP2(ref).run(verbose=0)
    # source: reference library run (PySCF MP2 on its own tight RHF), same shells
    assert mine.correlation == pytest.approx(theirs.e_corr, abs=1e-8)
    assert mine.opposite_spin == pytest.approx(theirs.e_corr_os, abs=1e-8)
    assert mine.same_spin == pytest.approx(theirs.e_corr_ss, abs=1e-8)


def test_mp2_matches_reference_frozen_core(pair):
    result, ref = pair
    core = core_orbital_count(result.molecule)
    mine = mp2_energy(result, frozen_core=core)
    theirs = mp.MP2(ref, frozen=core).run(verbose=0)
    # source: reference library run (PySCF MP2 with the same lowest orbitals frozen), same shells
    assert mine.correlation == pytest.approx(theirs.e_corr, abs=1e-8)
    assert mine.frozen_core == core


def test_scs_mp2_is_built_from_the_reference_spin_parts(pair):
    result, ref = pair
    mine = mp2_energy(result)
    theirs = mp.MP2(ref).run(verbose=0)
    # source: S. Grimme, J. Chem. Phys. 118, 9095 (2003), 6/5 opposite-spin + 1/3 same-spin (from memory),
    # applied to the reference library's spin components
    expected = 6.0 / 5.0 * theirs.e_corr_os + 1.0 / 3.0 * theirs.e_corr_ss
    assert mine.scs_correlation == pytest.approx(expected, abs=1e-8)
    assert mine.scs_energy_total == pytest.approx(ref.e_tot + expected, abs=1e-8)


@pytest.fixture(scope="module")
def water_631gs():
    mol = hfcore.read_xyz(INPUTS / "water.xyz")
    return hfcore.run_rhf(mol, hfcore.build_basis(mol, "6-31g*"), hfcore.SCFOptions(**TIGHT))


def _dense_mp2(result) -> float:
    """E(2) the textbook way, from the dense tensor: an independent transformation."""
    eri = compute_eri(result.basis, threshold=0.0).to_dense()
    n_occ = result.n_occupied
    c, e = result.coefficients, result.orbital_energies
    ovov = np.einsum("pi,qa,rj,sb,pqrs->iajb", c[:, :n_occ], c[:, n_occ:], c[:, :n_occ], c[:, n_occ:], eri, optimize=True)
    d = e[:n_occ, None, None, None] - e[None, n_occ:, None, None] + e[None, None, :n_occ, None] - e[None, None, None, n_occ:]
    return float(np.sum(ovov * (2 * ovov - ovov.transpose(0, 3, 2, 1)) / d))


def test_occupied_blocks_of_one_orbital_give_the_dense_answer(water_631gs):
    # source: exact property — the blocking only reorders the sums; compared with a dense einsum transformation
    assert mp2_energy(water_631gs, memory_bytes=1).correlation == pytest.approx(_dense_mp2(water_631gs), abs=1e-10)


def test_a_given_store_of_another_basis_is_refused(water_631gs):
    small = hfcore.run_rhf(water_631gs.molecule, "sto-3g")
    with pytest.raises(hfcore.InputError, match="functions"):
        mp2_energy(water_631gs, eri=compute_eri(small.basis))


def test_mp2_beyond_the_memory_limit_fails_before_computing(water_631gs):
    tiny = hfcore.run_rhf(water_631gs.molecule, water_631gs.basis, hfcore.SCFOptions(memory_limit=0.01))
    with pytest.raises(ResourceError, match="MP2"):
        mp2_energy(tiny)


def _run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_cli_mp2_json_keys_and_values(water_631gs):
    code, out, err = _run("energy", str(INPUTS / "water.xyz"), "--basis", "6-31g*", "--mp2", "--frozen-core",
                          "--energy-tol", "1e-12", "--gradient-tol", "1e-9", "--json", "-")
    assert code == 0, err
    assert err == ""  # quiet in --json - mode
    record = json.loads(out)["mp2"]
    direct = mp2_energy(water_631gs, frozen_core=1)
    # source: exact property — the command line reports what the API computes for the same run
    assert record["correlation"] == pytest.approx(direct.correlation, abs=1e-9)
    assert record["frozen_core"] == 1
    for key, attribute in (("total", "energy_total"), ("scs_correlation", "scs_correlation"),
                           ("scs_total", "scs_energy_total"), ("same_spin", "same_spin"),
                           ("opposite_spin", "opposite_spin")):
        assert record[key] == pytest.approx(getattr(direct, attribute), abs=1e-9)


def test_cli_mp2_report_states_the_core_choice():
    code, out, _ = _run("energy", str(INPUTS / "water.xyz"), "--basis", "sto-3g", "--mp2", "--quiet")
    assert code == 0
    assert "MP2 / Eh" in out and "all electrons correlated" in out
    section = out.split("MP2 / Eh", 1)[1].split("Orbitals", 1)[0].splitlines()
    assert section[2].split() == ["MP2", "SCS-MP2"]
    assert [line.split()[0] for line in section[3:7]] == ["same-spin", "opposite-spin", "correlation", "total"]


def test_cli_frozen_core_without_mp2_is_a_usage_error():
    code, out, err = _run("energy", str(INPUTS / "water.xyz"), "--frozen-core")
    assert code == 2 and out == ""
    assert err.startswith("hfcore: error: --frozen-core") and err.count("\n") == 1
