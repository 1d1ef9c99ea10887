"""Direct SCF mode: integrals recomputed for every J/K build, the memory guard and the mode choice."""

from __future__ import annotations

import io
import json
import re

import numpy as np
import pytest
from conftest import read_input, run_main

import hfcore
from hfcore import integrals
from hfcore.cli.console import IntegralProgress as _IntegralProgress
from hfcore.errors import InputError, ResourceError
from hfcore.scf import IncrementalJK, SCFOptions, plan_jk, run_rhf, solve_rhf
from hfcore.scf.options import FALLBACK_MEMORY_MIB, MEMORY_FRACTION, default_memory_limit

def random_symmetric(n: int, seed: int = 7) -> np.ndarray:
    a = np.random.default_rng(seed).standard_normal((n, n))
    return a + a.T


@pytest.mark.parametrize(
    "name, basis, spherical",
    [("water", "6-31g*", False), ("hydrogen_fluoride", "cc-pvdz", True), ("ammonia", "3-21g", None)],
)
def test_direct_jk_equals_stored_jk(name, basis, spherical):
    # exact property: both modes contract the same screened integrals
    # (Cartesian and spherical d, sp families, general contractions)
    b = hfcore.build_basis(read_input(name), basis, spherical=spherical)
    d = random_symmetric(b.n_functions)
    j_ref, k_ref = integrals.compute_eri(b).jk(d)
    j, k = integrals.DirectERI(b).jk(d)
    np.testing.assert_allclose(j, j_ref, rtol=0, atol=1e-11)
    np.testing.assert_allclose(k, k_ref, rtol=0, atol=1e-11)


@pytest.mark.parametrize("name, basis", [("water", "6-31g*"), ("hydrogen_fluoride", "cc-pvdz"), ("ammonia", "sto-3g")])
def test_direct_energy_equals_stored_energy(name, basis):
    mol = read_input(name)
    b = hfcore.build_basis(mol, basis)
    stored = run_rhf(mol, b, SCFOptions(direct=False))
    direct = run_rhf(mol, b, SCFOptions(direct=True))
    assert (stored.jk_mode, direct.jk_mode) == ("stored", "direct")
    # exact property: same integrals, so the same energy within the SCF tolerance
    assert abs(direct.energy_total - stored.energy_total) < 1e-9
    assert direct.eri_memory_bytes == stored.eri_memory_bytes == integrals.estimate_eri_memory(b)


def _direct_solve(mol, b, interval: int) -> tuple[float, IncrementalJK]:
    s = integrals.overlap(b)
    h = integrals.kinetic(b) + integrals.nuclear_attraction(b, mol.atomic_numbers.astype(float), mol.coordinates)
    jk = IncrementalJK(integrals.DirectERI(b), rebuild_interval=interval)
    result = solve_rhf(s, h, jk, mol.n_electrons, mol.nuclear_repulsion())
    return result.energy_total, jk


def test_incremental_builds_with_periodic_rebuild_reach_the_full_build_energy():
    mol = read_input("water")
    b = hfcore.build_basis(mol, "6-31g*")
    e_full, jk_full = _direct_solve(mol, b, interval=1)
    e_inc, jk_inc = _direct_solve(mol, b, interval=4)
    assert set(jk_full.builds) == {"full"}
    # common practice: a full rebuild every `interval` builds, density changes between
    assert jk_inc.builds[::4] == ["full"] * len(jk_inc.builds[::4])
    assert jk_inc.builds.count("change") == len(jk_inc.builds) - len(jk_inc.builds[::4])
    # exact property: J and K are linear in the density
    assert abs(e_inc - e_full) < 1e-9


def test_small_density_changes_skip_quartets():
    b = hfcore.build_basis(read_input("water"), "6-31g*")
    direct = integrals.DirectERI(b)
    d = random_symmetric(b.n_functions)
    direct.jk(d)
    assert direct.last_stats.skipped_fraction == 0.0
    direct.jk(1e-11 * d)
    assert 0.0 < direct.last_stats.skipped_fraction < 1.0
    j, k = direct.jk(np.zeros_like(d))
    # exact property: no density, no quartet worth computing, J = K = 0
    assert direct.last_stats.quartets_computed == 0
    assert not j.any() and not k.any()


def test_density_in_one_atom_block_screens_the_rest():
    # exact property: quartets whose six density blocks are all zero add nothing
    mol = read_input("water")
    b = hfcore.build_basis(mol, "6-31g*")
    n_o = sum(s.n_functions(b.spherical) for s in b.shells if s.atom == 0)
    d = np.zeros((b.n_functions, b.n_functions))
    d[:n_o, :n_o] = random_symmetric(n_o)
    direct = integrals.DirectERI(b)
    j, k = direct.jk(d)
    j_ref, k_ref = integrals.compute_eri(b).jk(d)
    assert direct.last_stats.skipped_fraction > 0.0
    np.testing.assert_allclose(j, j_ref, rtol=0, atol=1e-11)
    np.testing.assert_allclose(k, k_ref, rtol=0, atol=1e-11)


def test_memory_estimate_is_the_size_of_the_store():
    b = hfcore.build_basis(read_input("water"), "6-31g*")
    store = integrals.compute_eri(b)
    store.jk(np.eye(b.n_functions))
    # exact property: two packed float64 arrays of npair(npair+1)/2 elements
    assert integrals.estimate_eri_memory(b) == store.nbytes
    npair = 19 * 20 // 2
    assert integrals.estimate_eri_memory(b) == 16 * npair * (npair + 1) // 2


def test_automatic_mode_stores_then_stores_lean_then_goes_direct_as_the_budget_shrinks():
    mol = read_input("water")
    b = hfcore.build_basis(mol, "sto-3g")
    assert plan_jk(b, SCFOptions()).mode == "stored"
    lean = integrals.estimate_eri_memory(b, lean=True)
    assert plan_jk(b, SCFOptions(memory_limit=lean / 2**20)).mode == "stored-lean"
    small = SCFOptions(memory_limit=lean / 2**20 / 2)
    assert plan_jk(b, small).mode == "direct"
    result = run_rhf(mol, b, small)
    assert result.jk_mode == "direct"
    assert result.converged


def test_a_store_past_the_kernel_limit_goes_lean_even_with_memory_to_spare(monkeypatch):
    from hfcore.scf import driver

    b = hfcore.build_basis(read_input("water"), "sto-3g")
    monkeypatch.setattr(driver, "EXCHANGE_KERNEL_LIMIT_BYTES", integrals.estimate_eri_memory(b) - 1)
    plan = plan_jk(b, SCFOptions(memory_limit=1000.0))
    assert (plan.mode, plan.eri_memory_bytes) == ("stored-lean", integrals.estimate_eri_memory(b, lean=True))


def test_lean_store_is_half_the_size_and_gives_the_same_energy():
    mol = read_input("water")
    b = hfcore.build_basis(mol, "6-31g*")
    full = run_rhf(mol, b)
    lean_bytes = integrals.estimate_eri_memory(b, lean=True)
    # exact property: one packed float64 array of npair(npair+1)/2 elements
    assert lean_bytes == 8 * (19 * 20 // 2) * (19 * 20 // 2 + 1) // 2
    lean = run_rhf(mol, b, SCFOptions(direct=False, memory_limit=lean_bytes / 2**20))
    assert (full.jk_mode, lean.jk_mode) == ("stored", "stored-lean")
    assert lean.eri_memory_bytes == lean_bytes
    # exact property: the same integrals contracted in another order
    assert lean.energy_total == pytest.approx(full.energy_total, abs=1e-10)


def test_lean_store_builds_k_like_the_dense_contraction():
    b = hfcore.build_basis(read_input("water"), "6-31g*")
    store = integrals.compute_eri(b, threshold=0.0, lean=True)
    rng = np.random.default_rng(3)
    a = rng.standard_normal((b.n_functions, b.n_functions))
    density = a + a.T
    eri = store.to_dense()
    j, k = store.jk(density)
    # exact property: the definitions J = (mn|ls) D_ls and K = (ml|ns) D_ls
    np.testing.assert_allclose(j, np.einsum("mnls,ls->mn", eri, density), rtol=0, atol=1e-12)
    np.testing.assert_allclose(k, np.einsum("mlns,ls->mn", eri, density), rtol=0, atol=1e-12)
    assert store.nbytes == integrals.estimate_eri_memory(b, lean=True)  # no exchange kernel was built


def test_forced_stored_mode_beyond_the_budget_fails_before_allocating(monkeypatch):
    def no_integrals(*args, **kwargs):
        raise AssertionError("integrals were computed before the memory check")

    monkeypatch.setattr(integrals, "compute_eri", no_integrals)
    monkeypatch.setattr(integrals, "DirectERI", no_integrals)
    with pytest.raises(ResourceError) as info:
        run_rhf(read_input("water"), "6-31g*", SCFOptions(direct=False, memory_limit=0.1))
    message = str(info.value)
    assert "0.277 MiB" in message and "0.1 MiB" in message  # exact property: 16 * 18145 bytes
    assert "--direct" in message and "--memory" in message


def test_default_budget_is_half_the_available_memory(tmp_path):
    meminfo = tmp_path / "meminfo"
    meminfo.write_text("MemTotal:       16000000 kB\nMemAvailable:    8388608 kB\n")
    # common practice: /proc/meminfo reports kB (KiB)
    assert default_memory_limit(str(meminfo)) == MEMORY_FRACTION * 8192.0
    meminfo.write_text("MemTotal:       16000000 kB\n")
    assert default_memory_limit(str(meminfo)) == FALLBACK_MEMORY_MIB
    assert default_memory_limit(str(tmp_path / "missing")) == FALLBACK_MEMORY_MIB


@pytest.mark.parametrize("kwargs", [{"memory_limit": 0}, {"memory_limit": -5.0}, {"rebuild_interval": 0}])
def test_bad_memory_options_are_input_errors(kwargs):
    with pytest.raises(InputError, match=next(iter(kwargs))):
        SCFOptions(**kwargs)


def test_cli_direct_mode_shows_in_json(water_file):
    code, out, err = run_main("energy", str(water_file), "--direct", "--json", "-")
    assert code == 0, err
    assert err == ""
    record = json.loads(out)
    assert record["scf"]["jk_mode"] == "direct"
    # exact property: STO-3G water has 7 functions, 28 pairs, 28·29/2 unique quartets at 16 bytes
    assert record["scf"]["eri_memory_bytes"] == 16 * 28 * 29 // 2
    code, out, _ = run_main("energy", str(water_file), "--json", "-")
    assert json.loads(out)["scf"]["jk_mode"] == "stored"


def test_cli_lean_store_shows_in_json_and_report(water_file):
    lean_mib = 8 * (28 * 29 // 2) / 2**20  # exact property: 8 bytes per unique quartet of STO-3G water
    code, out, err = run_main("energy", str(water_file), "--stored", "--memory", repr(lean_mib), "--json", "-")
    assert code == 0, err
    record = json.loads(out)
    assert record["scf"]["jk_mode"] == "stored-lean"
    assert record["scf"]["eri_memory_bytes"] == 8 * 28 * 29 // 2
    code, out, err = run_main("energy", str(water_file), "--memory", repr(lean_mib))
    assert code == 0, err
    assert "lean" in out


def test_cli_report_states_the_mode_before_the_iterations(water_file):
    code, out, _ = run_main("energy", str(water_file), "--memory", "1e-6")
    assert code == 0
    head = out[: out.index("SCF iterations")]
    # Sizes print in binary units fit to their size (KiB for this small store).
    assert "direct" in head and re.search(r"\d (B|KiB|MiB|GiB) predicted", head)


def test_cli_stored_beyond_memory_fails_with_resource_code(water_file):
    code, out, err = run_main("energy", str(water_file), "--stored", "--memory", "1e-6")
    assert code == ResourceError.exit_code
    assert "--direct" in err and out == ""


def test_cli_direct_and_stored_exclude_each_other(water_file):
    code, _, err = run_main("energy", str(water_file), "--direct", "--stored")
    assert code == 2
    assert "not allowed" in err


class _Stream(io.StringIO):
    def __init__(self, tty: bool) -> None:
        super().__init__()
        self._tty = tty

    def isatty(self) -> bool:
        return self._tty


@pytest.mark.parametrize("tty", [True, False])
def test_integral_progress_updates_in_place_only_on_a_terminal(monkeypatch, tty):
    monkeypatch.setattr(_IntegralProgress, "DELAY_S", 0.0)
    stream = _Stream(tty)
    progress = _IntegralProgress(stream)
    for step in range(1, 101):
        progress(step / 100)
    text = stream.getvalue()
    if tty:
        assert text.count("\r") == 100 and text.endswith("100.0 %\n")
    else:
        assert "\r" not in text
        assert len(text.splitlines()) == 4  # one line per quarter
        assert text.splitlines()[-1].endswith("100.0 % done")


@pytest.mark.parametrize("tty", [True, False])
def test_a_pass_that_ends_before_the_delay_prints_nothing(tty):
    stream = _Stream(tty)
    progress = _IntegralProgress(stream)
    for step in range(1, 5):
        progress(step / 4)
    assert stream.getvalue() == ""


def test_api_reports_integral_progress_only_to_its_callback(capsys):
    fractions: list[float] = []
    run_rhf(read_input("water"), "sto-3g", integral_progress=fractions.append)
    assert fractions and fractions[-1] == pytest.approx(1.0)
    assert all(a <= b for a, b in zip(fractions, fractions[1:]))
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""
