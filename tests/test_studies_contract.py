"""The studies' one contract: pieces (plain data) -> a runner -> assemble, whichever runner ran them."""

from __future__ import annotations

import dataclasses

import pytest
from conftest import INPUTS, read_input

import hfcore
from hfcore.errors import InputError
from hfcore.studies import (
    PieceOutcome,
    compare_bases,
    interaction_energies,
    reaction_energies,
    series_estimates,
)
from hfcore.studies.extrapolation import feller_three_point, karton_martin_two_point

BASES = ["sto-3g", "6-31g"]


def _replaying(record: dict, seen: list):
    """A runner that answers from a finished in-process study's outcomes, as the batch machinery would."""

    def run(pieces, *rest):
        seen.append([p.key for p in pieces])
        return {p.key: record[p.key] for p in pieces}

    return run


def test_a_passed_in_runner_gives_the_comparison_of_its_outcomes(water_molecule):
    here = compare_bases(water_molecule, BASES)
    outcomes = {row.basis: PieceOutcome(row.energy_total, 1.5, row.n_functions, row.iterations) for row in here.rows}
    seen: list = []
    elsewhere = compare_bases(water_molecule, BASES, runner=_replaying(outcomes, seen))
    assert seen == [BASES]
    assert [r.energy_total for r in elsewhere.rows] == [r.energy_total for r in here.rows]
    assert [r.delta_mEh for r in elsewhere.rows] == [r.delta_mEh for r in here.rows]
    assert [r.wall_seconds for r in elsewhere.rows] == [1.5, 1.5]
    assert elsewhere.reference_basis == "6-31g" and elsewhere.results == ()


def test_a_runner_that_leaves_a_piece_out_is_refused(water_molecule):
    with pytest.raises(InputError, match="no outcome for the piece 'sto-3g'"):
        compare_bases(water_molecule, BASES, runner=lambda pieces: {"6-31g": (-75.0, 1.0)})


def test_a_reaction_runner_may_report_pairs_of_energy_and_seconds():
    equation = f"2 {INPUTS / 'water.xyz'} -> {INPUTS / 'water_dimer.xyz'}"
    here = reaction_energies(equation, ["sto-3g"])
    pairs = {(k, "sto-3g"): (e, 2.0) for k, e in enumerate(here.rows[0].species_energies)}
    seen: list = []
    elsewhere = reaction_energies(equation, ["sto-3g"], runner=_replaying(pairs, seen))
    assert seen == [[(0, "sto-3g"), (1, "sto-3g")]]
    assert elsewhere.rows[0].reaction_energies == here.rows[0].reaction_energies
    # the row's time is the sum of its pieces' times
    assert elsewhere.rows[0].wall_seconds == 4.0


def test_an_interaction_runner_gets_every_piece_and_its_rows_sum_their_times():
    dimer = read_input("water_dimer")
    here = interaction_energies(dimer, [[0, 1, 2], [3, 4, 5]], ["sto-3g"])
    outcomes = {p.piece.key: (p.energy_total, 0.5) for p in here.pieces}
    elsewhere = interaction_energies(dimer, [[0, 1, 2], [3, 4, 5]], ["sto-3g"], runner=_replaying(outcomes, []))
    assert elsewhere.batch and not elsewhere.reuse_integrals
    assert elsewhere.rows[0].counterpoise == here.rows[0].counterpoise
    assert elsewhere.rows[0].wall_seconds == 5 * 0.5


def test_series_estimates_work_on_plain_energies_by_cardinal_number():
    energies = {2: -76.0267, 3: -76.0571, 4: -76.0649}
    estimates, notes = series_estimates(energies, "cc-pVXZ")
    assert notes == []
    two, three = estimates
    assert (two.method, two.cardinal_numbers) == ("two-point", (3, 4))
    assert two.energy_total == karton_martin_two_point(energies[3], energies[4], 3, 4)
    assert (three.method, three.cardinal_numbers) == ("three-point", (2, 3, 4))
    assert three.energy_total == feller_three_point(energies[2], energies[3], energies[4], 2, 3, 4)
    # source: exact property — both forms lie below the largest basis' energy for a converging series
    assert two.energy_total < energies[4] and three.energy_total < energies[4]
    assert series_estimates({2: -76.0, 4: -76.1}) == ([], [])


def test_the_studies_old_names_in_analysis_warn_and_still_work(water_molecule):
    from hfcore import analysis

    with pytest.warns(DeprecationWarning, match="hfcore.analysis.compare_bases is deprecated; use hfcore.studies"):
        old = analysis.compare_bases
    assert old is compare_bases
    with pytest.warns(DeprecationWarning, match=r"compare_bases\(progress=...\) is deprecated; use message_progress"):
        lines: list[str] = []
        comparison = compare_bases(water_molecule, ["sto-3g"], progress=lines.append)
    assert len(lines) == 1 and lines[0].startswith("[1/1] sto-3g")
    with pytest.warns(DeprecationWarning, match="ComparisonRow.wall_time is deprecated; use wall_seconds"):
        assert comparison.rows[0].wall_time == comparison.rows[0].wall_seconds
    with pytest.warns(DeprecationWarning, match="Molecule.natom is deprecated; use n_atoms"):
        assert water_molecule.natom == 3
    assert hfcore.compare_bases is compare_bases and hfcore.interaction_energies is interaction_energies


def test_solve_rhf_checks_stability_and_converge_rhf_stops_at_the_first_solution(water_molecule):
    from hfcore import integrals
    from hfcore.scf import solve_rhf
    from hfcore.scf.solver import converge_rhf

    basis = hfcore.build_basis(water_molecule, "sto-3g")
    args = (integrals.overlap(basis),
            integrals.kinetic(basis) + integrals.nuclear_attraction(basis, water_molecule.atomic_numbers,
                                                                     water_molecule.coordinates),
            integrals.compute_eri(basis), water_molecule.n_electrons, water_molecule.nuclear_repulsion())
    first = converge_rhf(*args)
    checked = solve_rhf(*args)
    assert first.stability is None and first.timings["stability"] == 0.0
    assert checked.stability is not None and checked.stability.stable
    assert checked.energy_total == pytest.approx(first.energy_total, abs=1e-12)
    off = solve_rhf(*args, options=dataclasses.replace(hfcore.SCFOptions(), stability="skip"))
    assert off.stability is None
