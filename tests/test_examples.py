"""The examples in examples/: each runs as a script, and each method checks out."""

from __future__ import annotations

import dataclasses
import importlib.util
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import hfcore
from conftest import assert_valid_png

from pyscf import fci, tdscf
from reference import family_shells, reference_mole, reference_rhf

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"
TIGHT = hfcore.SCFOptions(energy_tol=1e-12, gradient_tol=1e-9)


def _load(name: str):
    spec = importlib.util.spec_from_file_location(f"example_{name}", EXAMPLES / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _run_script(name: str, *args: str) -> str:
    env = dict(os.environ, PYTHONPATH=str(ROOT), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    done = subprocess.run([sys.executable, str(EXAMPLES / f"{name}.py"), *args], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    return done.stdout


def _energies(out: str) -> list[float]:
    """Every ``E = <number> Eh`` the script printed, in order."""
    return [float(m) for m in re.findall(r"E = (-?\d+\.\d+) Eh", out)]


def test_fock_hook_script_prints_the_plain_rhf_energy_for_both_hooks(water_molecule):
    out = _run_script("fock_hook")
    plain = hfcore.run_rhf(water_molecule, "6-31g").energy_total
    # source: exact property — neither hook changes the converged state (printed to 10 decimals)
    assert _energies(out) == pytest.approx([plain, plain], abs=2e-10)
    gaps = [float(g) for g in out.splitlines()[-1].split(":", 1)[1].split()]
    assert gaps and all(g > 0 for g in gaps)


def test_custom_jk_script_rises_with_less_exchange_and_matches_our_builder_at_full_exchange():
    energies = _energies(_run_script("custom_jk"))
    assert len(energies) == 4
    full, three_quarters, half, ours = energies
    # source: exact property — the builder with all of the exchange is hfcore's own; less exchange
    # stabilisation raises the energy
    assert full == pytest.approx(ours, abs=2e-10)
    assert full < three_quarters < half


def test_start_from_orbitals_script_reaches_one_state_from_three_starts():
    energies = _energies(_run_script("start_from_orbitals"))
    assert len(energies) == 3
    # source: exact property — methanol's RHF ground state does not depend on the start
    assert max(energies) - min(energies) < 1e-8


def test_cis_script_prints_positive_singlets_above_their_triplets():
    rows = [line.split() for line in _run_script("cis_excitations").splitlines()[1:]]
    assert len(rows) >= 3
    singlets = [float(r[1]) for r in rows]
    triplets = [float(r[2]) for r in rows]
    # source: exact property — the singlet CIS matrix is the triplet one plus a positive semidefinite
    # exchange part, so the k-th singlet lies at or above the k-th triplet (Weyl's inequality)
    assert all(t > 0 for t in triplets)
    assert all(s >= t for s, t in zip(singlets, triplets))
    assert singlets == sorted(singlets) and triplets == sorted(triplets)


def test_full_ci_example_draws_its_figure(tmp_path):
    out = _run_script("h2_full_ci", str(tmp_path / "h2.png"))
    assert "full CI" in out
    assert_valid_png(tmp_path / "h2.png")


def test_do_nothing_hook_changes_nothing(water_molecule):
    hook = _load("fock_hook")
    mine = hook.run_with_hook(water_molecule, "6-31g", hook.do_nothing, TIGHT)
    plain = hfcore.run_rhf(water_molecule, "6-31g", TIGHT)
    ref = reference_rhf(reference_mole(water_molecule, family_shells(water_molecule, "6-31g"), spherical=False), conv_tol=1e-12)
    # source: reference library run (PySCF RHF, same shells) and an independent run_rhf
    assert mine.energy_total == pytest.approx(ref.e_tot, abs=1e-8)
    assert mine.energy_total == pytest.approx(plain.energy_total, abs=1e-10)
    assert mine.iterations == plain.iterations


def test_level_shift_hook_changes_the_path_not_the_answer(water_molecule):
    hook = _load("fock_hook")
    recorder = hook.GapRecorder(water_molecule.n_electrons // 2, shift=1.0, until=4)
    shifted = hook.run_with_hook(water_molecule, "6-31g", recorder, dataclasses.replace(TIGHT, auto_aids=False))
    # source: exact property — convergence is tested on the unmodified Fock matrix
    assert shifted.energy_total == pytest.approx(hfcore.run_rhf(water_molecule, "6-31g", TIGHT).energy_total, abs=1e-9)
    assert len(recorder.gaps) == shifted.iterations - 1 and all(g > 0 for g in recorder.gaps)


def test_a_builder_equal_to_ours_gives_our_energy(water_molecule):
    jk = _load("custom_jk")
    mine = jk.rhf_with_builder(water_molecule, "6-31g", lambda eri: jk.ScaledExchangeJK(eri, 1.0), TIGHT)
    # source: an independent run with hfcore's own packed-store builder
    assert mine.energy_total == pytest.approx(hfcore.run_rhf(water_molecule, "6-31g", TIGHT).energy_total, abs=1e-9)
    weaker = jk.rhf_with_builder(water_molecule, "6-31g", lambda eri: jk.ScaledExchangeJK(eri, 0.5), TIGHT)
    # source: exact property — less exchange stabilisation raises the energy
    assert weaker.energy_total > mine.energy_total + 1.0


def test_projected_and_own_starts_reach_the_same_state(water_molecule):
    start = _load("start_from_orbitals")
    basis = hfcore.build_basis(water_molecule, "cc-pvdz")
    default = hfcore.run_rhf(water_molecule, basis, TIGHT)
    own = hfcore.run_rhf(water_molecule, basis, TIGHT, guess=start.density_from_orbitals(start.core_orbitals(water_molecule, basis)))
    _, projected = start.projected_start(water_molecule, "sto-3g", "cc-pvdz")
    # source: exact property — water's RHF ground state does not depend on the start
    assert own.energy_total == pytest.approx(default.energy_total, abs=1e-9)
    assert projected.energy_total == pytest.approx(default.energy_total, abs=1e-8)


@pytest.mark.parametrize("distance", [1.4, 4.0])
def test_two_electron_full_ci_matches_reference_library(distance):
    ci = _load("h2_full_ci")
    mol = ci.h2(distance)
    result = hfcore.run_rhf(mol, "cc-pvdz", TIGHT, guess="core")
    ref = reference_rhf(reference_mole(mol, family_shells(mol, "cc-pvdz"), spherical=True), conv_tol=1e-12)
    expected = fci.FCI(ref).kernel()[0]
    # source: reference library run (PySCF full CI on its RHF orbitals), same shells
    assert ci.fci_energy(result) == pytest.approx(expected, abs=1e-6)


def test_full_ci_separates_into_atoms_and_rhf_does_not():
    ci = _load("h2_full_ci")
    rhf, full = ci.curve([12.0])
    atoms = 2.0 * ci.hydrogen_atom_energy()
    # source: textbook behaviour (common practice) — exact two-electron energy tends to 2 E(H) in the same basis;
    # RHF keeps the ionic half of its wavefunction and stays far above
    assert full[0] == pytest.approx(atoms, abs=1e-5)
    assert rhf[0] - atoms > 0.1


def test_cis_matches_reference_library(water_molecule):
    cis = _load("cis_excitations")
    result = hfcore.run_rhf(water_molecule, "6-31g", TIGHT)
    ref = reference_rhf(reference_mole(water_molecule, family_shells(water_molecule, "6-31g"), spherical=False), conv_tol=1e-12)
    singlets = tdscf.TDA(ref)
    singlets.nstates, singlets.conv_tol = 5, 1e-10
    triplets = tdscf.TDA(ref)
    triplets.nstates, triplets.conv_tol, triplets.singlet = 5, 1e-10, False
    # source: reference library run (PySCF TDA on its RHF), same shells
    np.testing.assert_allclose(cis.cis_energies(result), singlets.kernel()[0], atol=1e-6, rtol=0)
    np.testing.assert_allclose(cis.cis_energies(result, triplet=True), triplets.kernel()[0], atol=1e-6, rtol=0)
