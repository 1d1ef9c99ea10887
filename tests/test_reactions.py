"""Reaction energies across bases: the equation syntax, balance checks, `hfcore reaction`."""

from __future__ import annotations

import json
import os
from fractions import Fraction
from pathlib import Path

import pytest
from conftest import INPUTS, assert_one_line_error, assert_valid_png, cli_result, run_main

import hfcore.studies.reaction
from hfcore.units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from hfcore.studies.extrapolation import karton_martin_two_point
from hfcore.studies.reaction import load_reactions, parse_reaction, reaction_energies, reaction_pieces

HYDROGENATION = "formaldehyde.xyz + hydrogen.xyz -> methanol.xyz"
DIMERISATION = "2 water.xyz -> water_dimer.xyz"


@pytest.fixture
def in_inputs(monkeypatch):
    monkeypatch.chdir(INPUTS)


def test_parse_reaction_reads_factors_and_charges():
    left, right = parse_reaction("2 water.xyz + 1/2 hydrogen.xyz -> ammonium.xyz[+1] + 0.5 hydroxide.xyz[-1]")
    assert left == [(Fraction(2), "water.xyz", 0), (Fraction(1, 2), "hydrogen.xyz", 0)]
    assert right == [(Fraction(1), "ammonium.xyz", 1), (Fraction(1, 2), "hydroxide.xyz", -1)]


@pytest.mark.parametrize(
    "spec, fragment",
    [
        ("formaldehyde.xyz + water.xyz -> methanol.xyz", "not balanced: O 2 on the left, 1 on the right"),
        ("water.xyz -> water_dimer.xyz", "not balanced: H 2 on the left, 4 on the right"),
        ("ammonium.xyz[+1] -> ammonium.xyz[-1]", "not balanced in charge: +1 on the left, -1 on the right"),
        ("ammonia.xyz + water.xyz -> ammonium.xyz[+1] + hydroxide.xyz", "not balanced in charge"),
        ("ammonium.xyz[triplet] -> ammonium.xyz[triplet]", "multiplicity 3 does not fit 11 electrons"),
        ("water.xyz => water.xyz", "write one '->'"),
        ("water.xyz + -> water.xyz", "a species is missing"),
        ("0 water.xyz -> water.xyz", "must be positive"),
        ("water.xyz[one] -> water.xyz", "must be a whole number"),
        ("missing.xyz -> water.xyz", "no such file"),
    ],
)
def test_bad_equation_is_one_line_exit_2_before_any_run(in_inputs, monkeypatch, spec, fragment):
    def no_scf(*args, **kwargs):  # the check must come before the first SCF run
        raise AssertionError("an SCF ran before the equation was checked")

    monkeypatch.setattr(hfcore.studies.reaction, "run_scf", no_scf)  # where the study's runner finds it
    code, out, err = run_main("reaction", spec, "--basis", "sto-3g")
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("hfcore: error: ") and fragment in err


def test_identical_species_are_computed_once(in_inputs):
    species, reactions = load_reactions([HYDROGENATION, DIMERISATION, "methanol.xyz -> formaldehyde.xyz + hydrogen.xyz"])
    assert [s.path for s in species] == ["formaldehyde.xyz", "hydrogen.xyz", "methanol.xyz", "water.xyz", "water_dimer.xyz"]
    assert len(reaction_pieces(species, ["sto-3g", "6-31g"])) == 10
    assert reactions[1].terms == ((3, Fraction(-2)), (4, Fraction(1)))


def test_reaction_energy_equals_the_separate_energy_runs(in_inputs):
    code, out, err = run_main("reaction", HYDROGENATION, DIMERISATION, "--basis", "sto-3g,6-31g", "--json", "-")
    assert code == 0, err
    record = json.loads(out)["reaction"]
    totals = {}
    for name in ("formaldehyde", "hydrogen", "methanol", "water", "water_dimer"):
        for basis in ("sto-3g", "6-31g"):
            code, text, _ = run_main("energy", f"{name}.xyz", "--basis", basis, "--json", "-")
            totals[name, basis] = json.loads(text)["energy"]["total"]
    for row in record["rows"]:
        b = row["basis"]
        hydrogenation = totals["methanol", b] - totals["formaldehyde", b] - totals["hydrogen", b]
        dimerisation = totals["water_dimer", b] - 2 * totals["water", b]
        # source: exact property — ΔE is Σ ν E over separate single points of the same species and basis
        assert row["reaction_energies"][0] == pytest.approx(hydrogenation, abs=1e-9)
        assert row["reaction_energies"][1] == pytest.approx(dimerisation, abs=1e-9)
        # source: exact property — unit conversions with the CODATA factors of scipy.constants
        assert row["reaction_energies_kJ_mol"][0] == pytest.approx(hydrogenation * KJ_MOL_PER_HARTREE, rel=1e-9)
        assert row["reaction_energies_kcal_mol"][1] == pytest.approx(dimerisation * KCAL_MOL_PER_HARTREE, rel=1e-9)
    assert record["reference_basis"] == "6-31g"
    assert record["rows"][1]["deltas"] == [0.0, 0.0]


def test_same_species_on_both_sides_gives_zero(in_inputs):
    study = reaction_energies("ammonium.xyz[+1] + 1/2 hydrogen.xyz -> ammonium.xyz[+1] + 0.5 hydrogen.xyz", ["sto-3g"])
    # source: exact property — identical terms cancel
    assert study.rows[0].reaction_energies == (0.0,)
    assert len(study.species) == 2


def test_basis_limit_estimate_combines_extrapolated_totals(in_inputs):
    study = reaction_energies("2 hydrogen.xyz -> hydrogen.xyz + hydrogen.xyz", ["cc-pvdz", "cc-pvtz"])
    (estimate,) = study.estimates
    rows = {r.basis: r for r in study.rows}
    # source: exact property — Karton & Martin (2006) applied to the species' totals, then Σ ν E
    e_cbs = karton_martin_two_point(rows["cc-pvdz"].species_energies[0], rows["cc-pvtz"].species_energies[0], 2, 3)
    assert estimate.species_energies[0] == pytest.approx(e_cbs, abs=1e-12)
    assert estimate.reaction_energies == (0.0,)
    assert study.spread() is None  # no three-point estimate from two bases
    # exact property: ΔE of 2 H2 -> H2 + H2 is zero in every basis, so the limit record is 0 ± 0
    (limit,) = study.limits()
    assert (limit.method, limit.energy_total, limit.uncertainty) == ("two-point", 0.0, 0.0)


def test_reaction_plot_and_report(in_inputs, tmp_path):
    png = tmp_path / "reaction.png"
    code, out, err = run_main("reaction", DIMERISATION, "--basis", "sto-3g,6-31g", "--plot", str(png))
    assert code == 0, err
    assert "Reaction energy  2 water.xyz -> water_dimer.xyz" in out and "kJ/mol" in out
    assert "[1/4] sto-3g" in err
    assert_valid_png(png)
    assert os.path.isfile(png)


def test_three_point_estimate_and_spread(tmp_path, monkeypatch):
    from hfcore.studies.extrapolation import feller_three_point

    monkeypatch.chdir(tmp_path)
    Path("h2_long.xyz").write_text("2\nstretched hydrogen\nH 0 0 0\nH 0 0 0.9\n")
    Path("h2.xyz").write_text("2\nhydrogen\nH 0 0 0\nH 0 0 0.741\n")
    bases = ["cc-pvdz", "cc-pvtz", "cc-pvqz"]
    study = reaction_energies("h2_long.xyz -> h2.xyz", bases)
    methods = {e.method: e for e in study.estimates}
    assert set(methods) == {"two-point", "three-point"}
    totals = [[r.species_energies[k] for r in study.rows] for k in range(2)]
    # source: exact property — Feller (1992) applied to each species' totals, then Σ ν E
    expected = feller_three_point(*totals[1], 2, 3, 4) - feller_three_point(*totals[0], 2, 3, 4)
    assert methods["three-point"].reaction_energies[0] == pytest.approx(expected, abs=1e-12)
    spread = abs(methods["two-point"].reaction_energies[0] - methods["three-point"].reaction_energies[0])
    assert study.spread() == pytest.approx((spread,), abs=1e-15)
    assert study.to_dict()["spread"]["reaction_energies"] == pytest.approx([spread], abs=1e-15)
    record = study.to_dict()["reactions"][0]["limit"]
    # The interval reaches both formulas' ΔE, which rest on the same three bases (rule of docs/basis-limits.md).
    for est in study.estimates:
        assert abs(est.reaction_energies[0] - record["energy_total"]) <= record["uncertainty"] + 1e-15
    assert record["bases"] and record["rule"] and record["note"] is None


def test_reaction_with_one_cardinal_number_has_a_limit_note_not_an_exception(in_inputs):
    study = reaction_energies("2 hydrogen.xyz -> hydrogen.xyz + hydrogen.xyz", ["cc-pvdz", "sto-3g"])
    (limit,) = study.limits()
    assert limit.energy_total is None and limit.uncertainty is None
    assert "only one cardinal number" in limit.note


def test_a_run_that_does_not_converge_names_the_species_and_exits_4(in_inputs):
    code, out, err = run_main("reaction", DIMERISATION, "--basis", "sto-3g", "--max-iterations", "2")
    assert code == 4 and out == ""
    assert err.count("\n") == 1 and err.startswith("hfcore: error: water.xyz in sto-3g: SCF did not converge")


def test_unbalanced_equation_as_a_real_process():
    proc = cli_result("reaction", "formaldehyde.xyz -> methanol.xyz", "--basis", "sto-3g", cwd=INPUTS, via="process")
    # the exit code the shell sees, one line, no traceback
    assert_one_line_error(proc, 2, "not balanced: H 2 on the left, 4 on the right")


def test_pieces_through_the_batch_machinery_match_and_resume(in_inputs, tmp_path):
    results = tmp_path / "pieces.jsonl"
    args = ("reaction", DIMERISATION, "--basis", "sto-3g", "--results", str(results), "--workers", "1", "--json", "-")
    code, out, err = run_main(*args)
    assert code == 0, err
    batched = json.loads(out)["reaction"]["rows"][0]["reaction_energies"][0]
    lines = results.read_text().splitlines()
    assert len(lines) == 3  # the header and one line per species
    code, out, err = run_main("reaction", DIMERISATION, "--basis", "sto-3g", "--json", "-")
    # source: exact property — the same energy runs, in worker processes or in this one
    assert batched == pytest.approx(json.loads(out)["reaction"]["rows"][0]["reaction_energies"][0], abs=1e-10)
    code, out, err = run_main(*args)
    assert code == 0 and results.read_text().splitlines() == lines  # resumed: nothing ran again
    assert json.loads(out)["reaction"]["rows"][0]["reaction_energies"][0] == batched
