"""Threads: the integral passes give the same bits for any thread count; the count is checked once.

Source for every bitwise equality here: exact property of the design — each
work unit's tiles are fixed by the basis alone and the partial sums are
added in unit order, so the thread count cannot change any floating-point
operation of a pass. The 1e-10 Eh energy tolerance is the issue's.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import assert_one_line_error, cli_result, copy_input, read_input, run_main

import hfcore
from hfcore.errors import InputError
from hfcore import _parallel as pool
from hfcore.integrals import DirectERI, compute_eri, direct
from hfcore.scf import SCFOptions


@pytest.fixture(scope="module")
def basis():
    return hfcore.build_basis(read_input("formaldehyde"), "6-31g*")


def _energy(path, threads: int, *extra: str) -> float:
    code, out, err = run_main("energy", path, "--basis", "6-31g", "--threads", str(threads), "--json", "-", *extra)
    assert code == 0, err
    return json.loads(out)["energy"]["total"]


@pytest.mark.parametrize("mode", ["--stored", "--direct"])
def test_two_threads_give_the_energy_of_one(tmp_path, mode):
    path = copy_input("formaldehyde", tmp_path)
    one, two = _energy(path, 1, mode), _energy(path, 2, mode)
    # The integral passes give the same bits (tests below); threaded BLAS in
    # the SCF may move the last digits (3e-13 Eh measured on benzene/cc-pVDZ).
    assert two == pytest.approx(one, abs=1e-10)


def test_stored_integrals_are_bitwise_the_same_on_two_threads(basis):
    one = compute_eri(basis, threads=1).packed
    two = compute_eri(basis, threads=2).packed
    assert np.array_equal(one, two)


def test_direct_jk_is_bitwise_the_same_on_two_threads(basis, monkeypatch):
    # Small work units, so the pool really splits this small basis.
    monkeypatch.setattr(direct, "_MIN_UNIT_QUARTETS", 1 << 10)
    rng = np.random.default_rng(7)
    a = rng.standard_normal((basis.n_functions, basis.n_functions))
    density = a + a.T
    one, two = DirectERI(basis, threads=1), DirectERI(basis, threads=2)
    assert len(one._units) > 4
    for x, y in zip(one.jk(density), two.jk(density)):
        assert np.array_equal(x, y)


@pytest.mark.parametrize("lean", [False, True])
def test_thread_pool_and_worker_processes_give_the_same_bits(basis, monkeypatch, lean):
    # Where fork exists, several threads run the stored pass and lean K on
    # worker processes; HFCORE_NO_FORK keeps them on threads. Same bits either way.
    rng = np.random.default_rng(5)
    a = rng.standard_normal((basis.n_functions, basis.n_functions))
    density = a + a.T
    one = compute_eri(basis, threads=1, lean=lean)
    monkeypatch.setenv("HFCORE_NO_FORK", "1")
    threaded = compute_eri(basis, threads=2, lean=lean)
    assert np.array_equal(one.packed, threaded.packed)
    expected = threaded.jk(density)
    monkeypatch.delenv("HFCORE_NO_FORK")
    forked = compute_eri(basis, threads=2, lean=lean)
    assert np.array_equal(one.packed, forked.packed)
    for x, y in zip(expected, forked.jk(density)):
        assert np.array_equal(x, y)


@pytest.mark.skipif(not pool.can_fork(), reason="no fork on this platform: passes use threads only")
def test_worker_processes_run_every_unit_once():
    seen = pool.shared_zeros(40, np.int64)

    def work(unit: int) -> None:
        seen[unit] += unit + 1

    reports = []
    pool.forked_units(work, 40, 3, progress=lambda finished: reports.append(int(finished.sum())))
    assert seen.tolist() == list(range(1, 41))
    assert reports[-1] == 40


@pytest.mark.skipif(not pool.can_fork(), reason="no fork on this platform: passes use threads only")
def test_a_failing_worker_process_is_reported_not_ignored():
    import os
    import time

    parent = os.getpid()

    def work(unit: int) -> None:
        if os.getpid() != parent:
            raise ValueError("tile 7 went wrong")
        time.sleep(0.01)  # leave units for the worker

    with pytest.raises(ValueError, match="tile 7 went wrong"):
        pool.forked_units(work, 200, 2)


def test_work_units_depend_only_on_the_weights():
    units = pool.work_units([3, 1, 4, 1, 5, 9, 2, 6], 6)
    assert units == [slice(0, 3), slice(3, 5), slice(5, 6), slice(6, 8)]


def test_ordered_map_keeps_item_order_on_several_threads():
    assert list(pool.ordered_map(lambda x: x * x, range(50), 3)) == [x * x for x in range(50)]


@pytest.mark.parametrize("bad", [0, -2, 1.5, True])
def test_a_thread_count_below_one_or_not_an_integer_is_refused(bad):
    with pytest.raises(InputError):
        SCFOptions(threads=bad)


def test_default_thread_count_is_the_cores_this_process_may_use():
    assert SCFOptions().n_threads == pool.usable_cores() >= 1


def test_cli_refuses_zero_threads(tmp_path):
    copy_input("formaldehyde", tmp_path)
    assert_one_line_error(cli_result("energy", "formaldehyde.xyz", "--threads", "0", cwd=tmp_path), 2)


def test_lean_exchange_is_bitwise_the_same_on_two_threads(basis):
    rng = np.random.default_rng(11)
    a = rng.standard_normal((basis.n_functions, basis.n_functions))
    density = a + a.T
    one = compute_eri(basis, lean=True, threads=1)
    two = compute_eri(basis, lean=True, threads=2)
    for x, y in zip(one.jk(density), two.jk(density)):
        assert np.array_equal(x, y)


@pytest.fixture(scope="module")
def water_fit():
    mol = read_input("water")
    return mol, hfcore.build_basis(mol, "def2-svp"), hfcore.build_basis(mol, "def2-universal-jkfit")


def test_three_centre_integrals_are_bitwise_the_same_on_two_threads(water_fit, monkeypatch):
    from hfcore.integrals import three_center

    _, orbital, aux = water_fit
    # Many small work units, so the pool really splits this small basis.
    monkeypatch.setattr(three_center, "_UNITS", 1 << 12)
    monkeypatch.setattr(three_center, "_MIN_UNIT_WORK", 1)
    one = three_center.ThreeCenterEngine(orbital, aux, threads=1)
    two = three_center.ThreeCenterEngine(orbital, aux, threads=2)
    for x, y in zip(one.compute_pair_major(), two.compute_pair_major()):
        assert np.array_equal(x, y)
    for (i1, v1), (i2, v2) in zip(one.blocks(40), two.blocks(40)):
        assert np.array_equal(i1, i2) and np.array_equal(v1, v2)


@pytest.mark.parametrize(("memory_limit", "storage"), [(None, "stored"), (0.7, "blocked")])
def test_fitted_energy_on_two_threads_is_that_of_one(water_fit, memory_limit, storage):
    # 0.7 MiB is below what the stored factors of water def2-SVP need (0.71 MiB),
    # so the blocked path (three-centre blocks recomputed every build) runs too.
    mol, orbital, aux = water_fit
    extra = {} if memory_limit is None else {"memory_limit": memory_limit}
    one = hfcore.run_rhf(mol, orbital, SCFOptions(fit_basis=aux, threads=1, **extra))
    two = hfcore.run_rhf(mol, orbital, SCFOptions(fit_basis=aux, threads=2, **extra))
    assert one.fit_storage == two.fit_storage == storage
    # The three-centre passes give the same bits (test above); threaded BLAS
    # in the SCF may move the last digits. 1e-10 Eh is the tolerance.
    assert two.energy_total == pytest.approx(one.energy_total, abs=1e-10)
