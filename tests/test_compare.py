"""Basis-set comparison driver, its table, its estimates and its figure."""

from __future__ import annotations

import json
import sys

import numpy as np
import pytest
from conftest import assert_valid_png

import hfcore
from hfcore.studies import (
    ComparisonRow,
    basis_limit_estimates,
    compare_bases,
    project_density,
)
from hfcore.errors import InputError
from hfcore.units import KCAL_MOL_PER_HARTREE
from hfcore.plots import plot_comparison

NESTED = ["6-31g*", "6-31g"]


@pytest.fixture(scope="module")
def nested(hydrogen_fluoride_molecule):
    messages: list[str] = []
    comparison = compare_bases(hydrogen_fluoride_molecule, NESTED, message_progress=messages.append)
    return comparison, messages


def test_larger_of_nested_bases_gives_lower_energy(nested):
    comparison, _ = nested
    small, large = comparison.rows[1], comparison.rows[0]
    assert (small.basis, large.basis) == ("6-31g", "6-31g*")
    assert large.n_functions > small.n_functions
    # source: exact property — 6-31G ⊂ 6-31G*, variational principle
    assert large.energy_total < small.energy_total
    assert all(r.converged for r in comparison.rows)


def test_deltas_are_relative_to_the_largest_basis(nested):
    comparison, _ = nested
    assert comparison.reference_basis == "6-31g*"
    e_ref = comparison.rows[0].energy_total
    for row in comparison.rows:
        # source: exact property — the table's definitions
        assert row.delta_mEh == pytest.approx(1e3 * (row.energy_total - e_ref), abs=1e-9)
        assert row.delta_kcal_mol == pytest.approx((row.energy_total - e_ref) * KCAL_MOL_PER_HARTREE, abs=1e-9)
    assert comparison.rows[0].delta_mEh == 0.0
    assert comparison.rows[1].delta_mEh > 0.0


def test_kcal_per_hartree():
    # source: from memory — 1 Eh = 627.5095 kcal/mol (CODATA)
    assert KCAL_MOL_PER_HARTREE == pytest.approx(627.5095, abs=1e-4)


def test_rows_keep_the_given_order_and_results(nested):
    comparison, _ = nested
    assert [r.basis for r in comparison.rows] == NESTED
    assert [res.basis.n_functions for res in comparison.results] == [r.n_functions for r in comparison.rows]


def test_projected_guess_reaches_the_same_energy_as_atomic_guess(hydrogen_fluoride_molecule, nested):
    comparison, _ = nested
    atomic = compare_bases(hydrogen_fluoride_molecule, NESTED, guess="sad")
    assert atomic.rows[0].guess == "sad"
    for a, b in zip(comparison.rows, atomic.rows):
        # source: exact property — the converged RHF state does not depend on the start (same state here)
        assert a.energy_total == pytest.approx(b.energy_total, abs=1e-8)


def test_automatic_guess_projects_for_molecules_and_not_for_atoms(nested):
    comparison, _ = nested
    assert [r.guess for r in comparison.rows] == ["projected from 6-31g", "sad"]
    neon = hfcore.Molecule(np.array([10]), np.zeros((1, 3)))
    atom = compare_bases(neon, ["sto-3g", "6-31g"])
    assert [r.guess for r in atom.rows] == ["sad", "sad"]


def test_projection_keeps_a_density_in_the_same_basis(hydrogen_fluoride_molecule, nested):
    comparison, _ = nested
    result = comparison.results[0]
    # source: exact property — projecting onto the same space is the identity
    np.testing.assert_allclose(project_density(result.density, result.basis, result.basis), result.density, atol=1e-9)


def test_progress_reports_each_basis(nested):
    _, messages = nested
    assert len(messages) == 2
    assert "6-31g " in messages[0] and "6-31g* " in messages[1]


def test_to_dict_has_stable_keys_and_is_json(nested):
    comparison, _ = nested
    data = comparison.to_dict()
    assert set(data) == {"reference_basis", "rows", "estimates", "limit", "notes"}
    assert set(data["rows"][0]) == {
        "basis",
        "n_functions",
        "spherical",
        "energy_total",
        "delta_mEh",
        "delta_kcal_mol",
        "iterations",
        "wall_seconds",
        "wall_time",  # the deprecated key, kept for one release
        "converged",
        "guess",
        "stable",
        "method",
        "s_squared",
    }
    assert data["rows"][0]["method"] == "RHF" and data["rows"][0]["s_squared"] is None
    assert data["estimates"] == []
    assert json.loads(json.dumps(data)) == data


def _rows(energies: dict[str, float]) -> list[ComparisonRow]:
    return [ComparisonRow(name, 10 * k, True, e, 0.0, 0.0, 10, 0.1, True, "sad") for k, (name, e) in enumerate(energies.items(), 1)]


# Synthetic energies with a decaying difference so every estimate is solvable.
ENERGIES = {"cc-pVDZ": -76.0268, "cc-pVTZ": -76.0571, "cc-pVQZ": -76.0649, "aug-cc-pVDZ": -76.0414}


@pytest.mark.parametrize(
    ("names", "expected"),
    [
        (["cc-pVDZ", "cc-pVQZ"], []),
        (["cc-pVDZ", "aug-cc-pVDZ"], []),
        (["aug-cc-pVDZ", "cc-pVTZ"], []),
        (["cc-pVDZ", "cc-pVTZ"], [("two-point", ("cc-pVDZ", "cc-pVTZ"))]),
        (
            ["cc-pVDZ", "cc-pVTZ", "cc-pVQZ"],
            [("two-point", ("cc-pVTZ", "cc-pVQZ")), ("three-point", ("cc-pVDZ", "cc-pVTZ", "cc-pVQZ"))],
        ),
    ],
)
def test_estimates_need_consecutive_cardinal_numbers_of_one_family(names, expected):
    estimates, notes = basis_limit_estimates(_rows({n: ENERGIES[n] for n in names}), -76.0)
    assert [(e.method, e.bases) for e in estimates] == expected
    assert notes == []


def test_estimate_values_and_deltas():
    rows = _rows(ENERGIES)
    estimates, _ = basis_limit_estimates(rows, ENERGIES["cc-pVQZ"])
    three = next(e for e in estimates if e.method == "three-point")
    e1, e2, e3 = ENERGIES["cc-pVDZ"], ENERGIES["cc-pVTZ"], ENERGIES["cc-pVQZ"]
    # source: D. Feller, J. Chem. Phys. 96, 6104 (1992), closed form for X = 2, 3, 4
    assert three.energy_total == pytest.approx((e1 * e3 - e2**2) / (e1 + e3 - 2 * e2), abs=1e-12)
    assert three.delta_mEh == pytest.approx(1e3 * (three.energy_total - e3), abs=1e-9)
    assert three.cardinal_numbers == (2, 3, 4)


def test_non_converging_series_gives_a_note_not_an_estimate():
    estimates, notes = basis_limit_estimates(_rows({"cc-pVDZ": -1.0, "cc-pVTZ": -1.1, "cc-pVQZ": -1.3}), -1.3)
    assert [e.method for e in estimates] == ["two-point"]
    assert len(notes) == 1 and "three-point" in notes[0]


def test_unconverged_rows_are_left_out_of_estimates():
    rows = _rows({"cc-pVDZ": -76.0268, "cc-pVTZ": -76.0571})
    rows[1] = ComparisonRow("cc-pVTZ", 20, True, -76.0571, 0.0, 0.0, 100, 0.1, False, "sad")
    assert basis_limit_estimates(rows, -76.0571) == ([], [])


@pytest.mark.parametrize("names", [[], ["6-31g", "6-31G"], "6-31g"], ids=["empty", "repeated", "one string"])
def test_bad_name_lists_are_refused(hydrogen_fluoride_molecule, names):
    with pytest.raises(InputError):
        compare_bases(hydrogen_fluoride_molecule, names)


def test_unknown_guess_is_refused(hydrogen_fluoride_molecule):
    with pytest.raises(InputError, match="guess"):
        compare_bases(hydrogen_fluoride_molecule, ["sto-3g"], guess="core")


def test_plot_writes_a_png(nested, tmp_path):
    comparison, _ = nested
    path = tmp_path / "compare.png"
    plot_comparison(comparison, path)
    assert_valid_png(path)
    assert [p.name for p in tmp_path.iterdir()] == ["compare.png"]


def test_plot_into_missing_directory_is_an_input_error(nested, tmp_path):
    comparison, _ = nested
    with pytest.raises(InputError, match="directory"):
        plot_comparison(comparison, tmp_path / "missing" / "compare.png")


def test_plot_without_matplotlib_names_the_install_command(nested, tmp_path, monkeypatch):
    comparison, _ = nested
    # A None entry in sys.modules makes the import fail as if the package were absent.
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(InputError, match=r"pip install 'hfcore\[plot\]'"):
        plot_comparison(comparison, tmp_path / "compare.png")


def test_unconverged_runs_are_flagged_not_raised(hydrogen_fluoride_molecule):
    comparison = compare_bases(hydrogen_fluoride_molecule, ["sto-3g", "6-31g"], options=hfcore.SCFOptions(max_iterations=2))
    assert [r.converged for r in comparison.rows] == [False, False]
    assert [r.iterations for r in comparison.rows] == [2, 2]
    # Nothing converged, so nothing could be projected.
    assert [r.guess for r in comparison.rows] == ["sad", "sad"]
