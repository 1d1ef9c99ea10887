"""Ghost atoms: basis functions without nucleus or electrons, in the API and in `hfcore energy --ghost`."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import INPUTS, run_main
from reference import family_shells, reference_energy, reference_mole

import hfcore
from hfcore.analysis import core_orbital_count, mulliken_charges
from hfcore.errors import InputError
from hfcore.geometry import parse_atom_ranges

DIMER = INPUTS / "water_dimer.xyz"


@pytest.fixture(scope="module")
def dimer():
    return hfcore.read_xyz(DIMER)


def test_a_ghost_has_no_charge_no_electrons_and_no_nuclear_repulsion(dimer):
    half = dimer.with_ghosts([3, 4, 5])
    # source: exact property — ghosts carry no nuclear charge, so the molecule is one water
    assert half.n_electrons == 10
    assert np.array_equal(half.nuclear_charges, [8.0, 1.0, 1.0, 0.0, 0.0, 0.0])
    assert half.nuclear_repulsion() == pytest.approx(dimer.subset([0, 1, 2]).nuclear_repulsion(), abs=1e-12)
    # source: exact property — a ghost oxygen has no core orbital
    assert core_orbital_count(half) == 1
    # the ghost keeps the basis functions of its element
    assert hfcore.build_basis(half, "6-31g").n_functions == hfcore.build_basis(dimer, "6-31g").n_functions


@pytest.mark.parametrize("basis", ["6-31g", "cc-pvdz"])
def test_ghost_atom_single_point_equals_the_reference_library(dimer, basis):
    half = dimer.with_ghosts([3, 4, 5])
    result = hfcore.run_rhf(half, hfcore.build_basis(half, basis))
    spherical = result.basis.spherical
    mol = reference_mole(half, family_shells(half, basis), spherical=spherical)
    # source: reference library run — ghost atoms written "ghost-O", same shells, conv_tol 1e-11
    assert result.energy_total == pytest.approx(reference_energy(mol), abs=1e-8)


def test_mulliken_charges_with_ghosts_sum_to_the_charge(dimer):
    half = dimer.with_ghosts([0, 1, 2])
    result = hfcore.run_rhf(half, hfcore.build_basis(half, "sto-3g"))
    charges = mulliken_charges(result)
    # source: exact property — Mulliken populations sum to the electron count, ghosts have Z = 0
    assert charges.sum() == pytest.approx(0.0, abs=1e-8)


def test_energy_ghost_option_marks_ghosts_in_report_and_json(tmp_path):
    path = tmp_path / "half.json"
    code, out, err = run_main("energy", str(DIMER), "--basis", "sto-3g", "--ghost", "1-3", "--quiet", "--json", str(path))
    assert code == 0, err
    assert "ghost atoms         1-3" in out
    assert sum(line.endswith("ghost") for line in out.splitlines()) == 6  # positions and Mulliken charges
    record = json.loads(path.read_text())
    assert record["molecule"]["ghost_atoms"] == [0, 1, 2]
    assert record["molecule"]["n_electrons"] == 10
    code, out2, _ = run_main("energy", str(INPUTS / "water.xyz"), "--basis", "sto-3g", "--json", "-")
    # source: exact property — far-away ghost functions lower the energy a little, never raise it
    assert record["energy"]["total"] <= json.loads(out2)["energy"]["total"] + 1e-10


@pytest.mark.parametrize(
    "value, fragment",
    [("1-6", "every atom would be a ghost"), ("7", "atom 7 does not exist"), ("3-1", "not a range"), ("a", "expected")],
)
def test_bad_ghost_option_is_one_line_exit_2(value, fragment):
    code, out, err = run_main("energy", str(DIMER), "--ghost", value)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("hfcore: error: ") and fragment in err


def test_parse_atom_ranges():
    assert parse_atom_ranges("1-3, 5,4", 6) == [0, 1, 2, 3, 4]
    with pytest.raises(InputError, match="does not exist"):
        parse_atom_ranges("2-9", 6)


def test_energy_atoms_option_runs_one_fragment_as_interaction_does():
    from hfcore.studies.interaction import interaction_energies

    code, out, err = run_main("energy", str(DIMER), "--basis", "sto-3g", "--atoms", "4-6", "--json", "-")
    assert code == 0, err
    record = json.loads(out)
    assert record["molecule"]["symbols"] == ["O", "H", "H"]
    code, out, _ = run_main("energy", str(DIMER), "--basis", "sto-3g", "--ghost", "1-3", "--json", "-")
    with_ghosts = json.loads(out)["energy"]["total"]
    study = interaction_energies(hfcore.read_xyz(DIMER), [[0, 1, 2], [3, 4, 5]], ["sto-3g"])
    # source: exact property — the same molecules in the same bases as the interaction's pieces
    assert record["energy"]["total"] == pytest.approx(study.rows[0].fragments_own_basis[1], abs=1e-9)
    assert with_ghosts == pytest.approx(study.rows[0].fragments_full_basis[1], abs=1e-9)
    code, _, err = run_main("energy", str(DIMER), "--ghost", "1-3", "--atoms", "1-3")
    assert code == 2 and "every atom kept is a ghost" in err


def test_dipole_with_ghosts_equals_the_reference_library(dimer):
    from reference import reference_rhf

    from hfcore.analysis import dipole_moment

    half = dimer.with_ghosts([0, 1, 2])
    result = hfcore.run_rhf(half, hfcore.build_basis(half, "6-31g"))
    mf = reference_rhf(reference_mole(half, family_shells(half, "6-31g"), spherical=False))
    # source: reference library run — ghost atoms carry no nuclear charge in its dipole either
    assert dipole_moment(result) == pytest.approx(mf.dip_moment(unit="AU", verbose=0), abs=1e-6)


def test_starting_guess_gives_a_ghost_no_density(dimer):
    from hfcore.scf import sad_density

    basis = hfcore.build_basis(dimer, "sto-3g")
    half = dimer.with_ghosts([3, 4, 5])
    density = sad_density(basis, np.where(half.ghosts, 0, half.atomic_numbers))
    on_ghosts = np.isin(basis.function_atoms(), [3, 4, 5])
    # source: exact property — a ghost has no electrons of its own
    assert np.all(density[on_ghosts] == 0.0) and np.all(density[:, on_ghosts] == 0.0)
    assert np.trace(density @ hfcore.integrals.overlap(basis)) == pytest.approx(10.0, abs=1e-8)
