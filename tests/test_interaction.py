"""Interaction energies: raw, counterpoise-corrected, superposition error; `hfcore interaction`."""

from __future__ import annotations

import json

import pytest
from conftest import INPUTS, assert_valid_png, run_main
from reference import family_shells, reference_energy, reference_mole

import hfcore
from hfcore.units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from hfcore.studies.interaction import check_fragments, interaction_energies, interaction_pieces
from hfcore.cli.interaction import parse_fragments
from hfcore.errors import InputError

DIMER = INPUTS / "water_dimer.xyz"  # a geometry of our own (see its comment line)
BASES = ["sto-3g", "6-31g", "cc-pvdz"]
FRAGMENTS = [[0, 1, 2], [3, 4, 5]]


@pytest.fixture(scope="module")
def dimer():
    return hfcore.read_xyz(DIMER)


@pytest.fixture(scope="module")
def study(dimer):
    return interaction_energies(dimer, FRAGMENTS, BASES)


def _reference_interaction(dimer, basis: str) -> tuple[float, float]:
    """Raw and corrected interaction energies assembled from reference library runs."""
    shells = family_shells(dimer, basis)
    spherical = hfcore.build_basis(dimer, basis).spherical

    def energy(molecule):
        return reference_energy(reference_mole(molecule, shells, spherical=spherical))

    e_ab = energy(dimer)
    own = [energy(dimer.subset(f)) for f in FRAGMENTS]
    full = [energy(dimer.with_ghosts(FRAGMENTS[1 - k])) for k in range(2)]
    return e_ab - sum(own), e_ab - sum(full)


@pytest.mark.parametrize("basis", BASES)
def test_interaction_energies_equal_the_reference_library(study, dimer, basis):
    row = next(r for r in study.rows if r.basis == basis)
    raw, corrected = _reference_interaction(dimer, basis)
    # source: reference library run — complex, fragments alone and fragments with "ghost-" partner atoms,
    # same shells, conv_tol 1e-11, assembled as Boys & Bernardi (1970)
    assert row.raw == pytest.approx(raw, abs=1e-8)
    assert row.counterpoise == pytest.approx(corrected, abs=1e-8)


def test_counterpoise_correction_is_never_negative(study):
    for row in study.rows:
        # source: exact property within RHF — the complex's basis contains each fragment's own (variational principle)
        for own, full in zip(row.fragments_own_basis, row.fragments_full_basis):
            assert full <= own + 1e-10
        assert row.superposition_error >= 0.0
        assert row.superposition_error == pytest.approx(row.counterpoise - row.raw, abs=1e-14)


def test_reusing_the_complex_integrals_changes_no_energy(dimer, study):
    separate = interaction_energies(dimer, FRAGMENTS, BASES[:2], reuse_integrals=False)
    for a, b in zip(separate.rows, study.rows):
        # source: exact property — a fragment in the full basis has the complex's S, T and (μν|λσ)
        assert a.counterpoise == pytest.approx(b.counterpoise, abs=1e-10)
        assert a.raw == pytest.approx(b.raw, abs=1e-10)
    assert not any(p.reused_integrals for p in separate.pieces)
    assert sum(p.reused_integrals for p in study.pieces) == 2 * len(BASES)


def test_pieces_are_explicit_data(dimer):
    pieces = interaction_pieces(dimer.n_atoms, FRAGMENTS, ["sto-3g"], [0, 0])
    assert [(p.kind, p.fragment) for p in pieces] == [
        ("complex", None), ("own basis", 0), ("own basis", 1), ("full basis", 0), ("full basis", 1)
    ]
    assert pieces[3].ghosts == (3, 4, 5) and pieces[3].atoms == (0, 1, 2)
    assert pieces[2].molecule(dimer).n_atoms == 3 and pieces[2].molecule(dimer).source == dimer.source


@pytest.mark.parametrize(
    "fragments, charges, fragment",
    [
        ([[0, 1, 2]], None, "at least two fragments"),
        ([[0, 1, 2], [2, 3, 4, 5]], None, "atom 3 is in fragment 1 and in fragment 2"),
        ([[0, 1, 2], [3, 4]], None, "atom 6 is in no fragment"),
        ([[0, 1, 2], [3, 4, 5]], [0], "1 fragment charges for 2 fragments"),
    ],
)
def test_bad_fragments_are_refused(fragments, charges, fragment):
    with pytest.raises(InputError, match=fragment):
        check_fragments(6, fragments, charges)


def test_parse_fragments_joins_parts_with_plus():
    assert parse_fragments("1-2+6,3-5", 6) == [[0, 1, 5], [2, 3, 4]]


def test_interaction_command_json_and_plot(tmp_path):
    png, path = tmp_path / "cp.png", tmp_path / "cp.json"
    code, out, err = run_main(
        "interaction", str(DIMER), "--fragments", "1-3,4-6", "--basis", "sto-3g", "--json", str(path), "--plot", str(png)
    )
    assert code == 0, err
    assert "Counterpoise-corrected interaction energy" in out and "Basis-set superposition error" in out
    record = json.loads(path.read_text())["interaction"]
    row = record["rows"][0]
    # source: exact property — unit conversions with the CODATA factors of scipy.constants
    assert row["counterpoise_kJ_mol"] == pytest.approx(row["counterpoise"] * KJ_MOL_PER_HARTREE, rel=1e-12)
    assert row["superposition_error_kcal_mol"] == pytest.approx(row["superposition_error"] * KCAL_MOL_PER_HARTREE, rel=1e-12)
    assert record["fragments"] == FRAGMENTS and len(record["runs"]) == 5
    assert_valid_png(png)
    code, out, err = run_main("interaction", str(DIMER), "--fragments", "1-3,4-6", "--basis", "sto-3g", "--json", "-")
    assert code == 0 and json.loads(out)["interaction"]["rows"][0]["raw"] == pytest.approx(row["raw"], abs=1e-12)
    assert err == ""


@pytest.mark.parametrize(
    "extra, fragment",
    [
        (["--fragments", "1-3,3-6"], "atom 3 is in fragment 1 and in fragment 2"),
        (["--fragments", "1-3,4-9"], "atom 9 does not exist"),
        (["--fragments", "1-3,4-6", "--fragment-charges=1,-1", "--fragment-multiplicities=1,2"],
         "fragment 1 (charge +1): multiplicity 1 does not fit 9 electrons"),
        (["--fragments", "1-3,4-6", "--fragment-charges", "0"], "1 charges for 2 fragments"),
    ],
)
def test_interaction_command_errors_are_one_line_before_any_run(extra, fragment):
    code, out, err = run_main("interaction", str(DIMER), "--basis", "sto-3g", *extra)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("hfcore: error: ") and fragment in err


def test_raw_interaction_energy_equals_the_dimerisation_energy(study, monkeypatch):
    from hfcore.studies.reaction import reaction_energies

    monkeypatch.chdir(INPUTS)
    dimerisation = reaction_energies("2 water.xyz -> water_dimer.xyz", BASES[:2])
    for row, reaction in zip(study.rows, dimerisation.rows):
        # source: exact property — both monomers of water_dimer.xyz are water.xyz moved rigidly, and the energy is
        # invariant under rigid motion; the tolerance covers the 6-decimal rounding of the coordinates (1e-6 Å)
        assert row.raw == pytest.approx(reaction.reaction_energies[0], abs=2e-7)


def test_shared_integrals_must_belong_to_the_basis(dimer):
    from hfcore.scf import prepare_integrals, run_rhf

    shared = prepare_integrals(hfcore.build_basis(dimer, "sto-3g"))
    other = hfcore.build_basis(dimer, "sto-3g")
    with pytest.raises(InputError, match="another basis"):
        run_rhf(dimer, other, shared=shared)
    ghost = dimer.with_ghosts([0, 1, 2])
    alone = run_rhf(ghost, shared.basis)
    # source: exact property — the same integrals, whether computed for this run or shared
    assert run_rhf(ghost, shared.basis, shared=shared).energy_total == pytest.approx(alone.energy_total, abs=1e-11)


def test_pieces_through_the_batch_machinery_match_and_resume(study, tmp_path):
    results = tmp_path / "cp.jsonl"
    args = ("interaction", str(DIMER), "--fragments", "1-3,4-6", "--basis", "sto-3g", "--results", str(results),
            "--workers", "1", "--json", "-")
    code, out, err = run_main(*args)
    assert code == 0, err
    row = json.loads(out)["interaction"]["rows"][0]
    # source: exact property — the same pieces as `energy`, `energy --atoms` and `energy --ghost` jobs
    assert row["counterpoise"] == pytest.approx(study.rows[0].counterpoise, abs=1e-10)
    assert row["raw"] == pytest.approx(study.rows[0].raw, abs=1e-10)
    lines = results.read_text().splitlines()
    assert len(lines) == 6  # the header and five pieces
    code, out, _ = run_main(*args)
    assert code == 0 and results.read_text().splitlines() == lines  # resumed: nothing ran again
    code, _, err = run_main("interaction", str(DIMER), "--fragments", "1-3,4-6", "--basis", "sto-3g", "--workers", "2")
    assert code == 2 and "--workers goes with --results" in err


def test_fitted_interaction_equals_the_separate_fitted_energy_runs(study):
    # Exact property: the command's pieces are the same fitted calculations as
    # `energy --fit-basis` runs of the complex, of each fragment alone
    # (--atoms) and of each fragment with ghosts (--ghost), each computing its
    # own integrals and fitted factors.
    fit = ("--basis", "6-31g", "--fit-basis", "def2-universal-jkfit")
    code, out, err = run_main("interaction", DIMER, "--fragments", "1-3,4-6", *fit, "--json", "-")
    assert code == 0, err
    row = json.loads(out)["interaction"]["rows"][0]

    def energy(*extra: str) -> float:
        code, out, err = run_main("energy", DIMER, *fit, *extra, "--json", "-")
        assert code == 0, err
        assert json.loads(out)["scf"]["jk_mode"] == "fitted"
        return json.loads(out)["energy"]["total"]

    e_ab = energy()
    own = [energy("--atoms", "1-3"), energy("--atoms", "4-6")]
    full = [energy("--ghost", "4-6"), energy("--ghost", "1-3")]
    assert row["energy_complex"] == pytest.approx(e_ab, abs=1e-8)
    assert row["raw"] == pytest.approx(e_ab - sum(own), abs=1e-8)
    assert row["counterpoise"] == pytest.approx(e_ab - sum(full), abs=1e-8)
    # The fitting was applied: the fitted interaction is near the exact one
    # (common practice: fitting errors of these sets are ~1e-5 Eh per atom)
    # but not equal to it.
    exact = study.rows[BASES.index("6-31g")]
    assert 0 < abs(row["counterpoise"] - exact.counterpoise) < 1e-4


def test_interaction_record_carries_a_basis_limit_record(study):
    from dataclasses import replace

    from hfcore.studies.extrapolation import karton_martin_two_point

    record = study.to_dict()
    # one correlation-consistent set only: a note, never an exception or an invented interval
    assert record["limit"]["energy_total"] is None and "only one cardinal number" in record["limit"]["note"]
    assert record["limit_raw"]["uncertainty"] is None
    # Two consecutive sets (values of our own): the rule runs on the difference's own series, no variational cut.
    rows = (replace(study.rows[2], basis="cc-pvdz", counterpoise=-0.0080),
            replace(study.rows[2], basis="cc-pvtz", counterpoise=-0.0075))
    limit = replace(study, rows=rows).limit()
    assert limit.method == "two-point" and not limit.cut
    # exact property: the candidate is the Karton–Martin form through the two values
    assert limit.candidate == pytest.approx(karton_martin_two_point(-0.0080, -0.0075, 2, 3), abs=1e-15)
    assert abs(limit.candidate - limit.energy_total) <= limit.uncertainty
    assert limit.uncertainty > 0
