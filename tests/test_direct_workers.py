"""Direct mode on forked worker processes: the same J, K and energies as on one process."""

from __future__ import annotations

import gc
import os
from pathlib import Path

import numpy as np
import pytest
from conftest import read_input
from open_reference import open_reference_mole, reference_open_scf
from reference import family_shells, reference_mole, reference_rhf

import hfcore
from hfcore import _parallel as pool
from hfcore.geometry import read_xyz
from hfcore.integrals import DirectERI, direct
from hfcore.scf import SCFOptions, run_rhf, run_scf

INPUTS = Path(__file__).resolve().parent.parent / "inputs"

pytestmark = pytest.mark.skipif(
    not pool.can_fork() or pool.usable_cores() < 2, reason="no fork or a single core: direct builds stay on threads"
)

TIGHT = dict(gradient_tol=1e-9, energy_tol=1e-11)


def _symmetric(n: int, seed: int) -> np.ndarray:
    a = np.random.default_rng(seed).standard_normal((n, n))
    return a + a.T


@pytest.fixture(scope="module")
def basis():
    return hfcore.build_basis(read_input("formaldehyde"), "6-31g*")


@pytest.fixture
def small_units(monkeypatch):
    # Small work units, so the team really splits this small basis.
    monkeypatch.setattr(direct, "_MIN_UNIT_QUARTETS", 1 << 10)


def test_worker_processes_give_the_bits_of_one_process(basis, small_units):
    density = _symmetric(basis.n_functions, 3)
    one, two = DirectERI(basis, threads=1), DirectERI(basis, threads=2)
    assert len(one._units) > 4
    for x, y in zip(one.jk(density), two.jk(density)):
        assert np.array_equal(x, y)  # exact property: the same partial sums added in the same order
    assert two._team is not None and two._team.size == 2
    assert one.last_stats == two.last_stats


def test_two_densities_in_rounds_of_few_slots_give_the_bits_of_one_process(basis, small_units, monkeypatch):
    # A round budget of a few units' slots: the build runs in several rounds.
    n = basis.n_functions
    monkeypatch.setattr(direct, "_TEAM_ROUND_BYTES", 3 * 8 * (n * (n + 1) // 2 + 2 * n * n + 2))
    densities = np.stack([_symmetric(n, 4), _symmetric(n, 5)])
    one, two = DirectERI(basis, threads=1), DirectERI(basis, threads=2)
    expected = one.jk_multi(densities)
    got = two.jk_multi(densities)
    assert two._team.slots == 3 < two._team.n_units
    for x, y in zip(expected, got):
        assert np.array_equal(x, y)
    # One density after two on the same team: the shared arrays take the smaller build too.
    for x, y in zip(one.jk(densities[1]), two.jk(densities[1])):
        assert np.array_equal(x, y)


def test_more_densities_than_the_team_takes_run_on_threads_with_the_same_bits(basis, small_units):
    n = basis.n_functions
    densities = np.stack([_symmetric(n, s) for s in (6, 7, 8)])
    one, two = DirectERI(basis, threads=1), DirectERI(basis, threads=2)
    for x, y in zip(one.jk_multi(densities), two.jk_multi(densities)):
        assert np.array_equal(x, y)


def test_the_team_ends_with_its_engine(basis, small_units):
    engine = DirectERI(basis, threads=2)
    engine.jk(_symmetric(basis.n_functions, 9))
    pids = list(engine._team._team._pids)
    assert pids
    del engine
    gc.collect()
    for pid in pids:
        with pytest.raises(ChildProcessError):
            os.waitpid(pid, os.WNOHANG)  # already reaped by the team's close


def test_direct_rhf_on_workers_equals_one_process_and_the_reference_library():
    mol = read_input("formaldehyde")
    b = hfcore.build_basis(mol, "6-31g*")
    one = run_rhf(mol, b, SCFOptions(direct=True, threads=1, **TIGHT))
    two = run_rhf(mol, b, SCFOptions(direct=True, threads=2, **TIGHT))
    assert one.jk_mode == two.jk_mode == "direct"
    assert abs(two.energy_total - one.energy_total) < 1e-10
    # source: reference library run (PySCF RHF), same shells and coordinates, conv_tol 1e-11
    ref = reference_rhf(reference_mole(mol, family_shells(mol, "6-31g*"), spherical=b.spherical))
    assert abs(two.energy_total - ref.e_tot) < 1e-8


def test_direct_uhf_on_workers_equals_one_process_and_the_reference_library():
    # UHF takes two densities per build: one J and two K from one pass on the team.
    mol = read_xyz(INPUTS / "oh.xyz", multiplicity=2)
    one = run_scf(mol, "6-31g*", SCFOptions(direct=True, threads=1, **TIGHT))
    two = run_scf(mol, "6-31g*", SCFOptions(direct=True, threads=2, **TIGHT))
    assert one.method == two.method == "UHF"
    assert abs(two.energy_total - one.energy_total) < 1e-10
    # source: reference library run (PySCF UHF), same shells and coordinates, conv_tol 1e-12
    ref = reference_open_scf(open_reference_mole(mol, "6-31g*"))
    assert abs(two.energy_total - ref.e_tot) < 1e-8
