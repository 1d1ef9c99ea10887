"""Open shells in the studies: spin words in equations, reaction/compare/interaction with UHF and ROHF.

Sources: hfcore/studies/equations.py, reaction.py, compare.py, interaction.py, fragments.py, pieces.py;
hfcore/cli/reaction.py, compare.py, interaction.py, arguments.py (check_study_spin).
"""

from __future__ import annotations

import json
import shutil
from fractions import Fraction

import pytest
from conftest import INPUTS, run_main

import hfcore.studies.compare
import hfcore.studies.interaction
import hfcore.studies.reaction
from hfcore.errors import InputError
from hfcore.geometry import read_xyz
from hfcore.scf import SCFOptions
from hfcore.scf.open_driver import run_scf
from hfcore.studies.equations import load_reactions, parse_equation, parse_reaction
from hfcore.studies.pieces import piece_method

ATOMIZATION = "water.xyz -> o.xyz[triplet] + 2 h.xyz[doublet]"


@pytest.fixture
def in_copies(tmp_path, monkeypatch):
    """A temporary directory holding copies of the inputs the tests name."""
    for name in ("water", "o", "h", "oh", "o2", "hydroxide", "hydrogen_stretched", "water_dimer", "ch2"):
        shutil.copy(INPUTS / f"{name}.xyz", tmp_path / f"{name}.xyz")
    monkeypatch.chdir(tmp_path)
    return tmp_path


@pytest.fixture
def no_scf(monkeypatch):
    """Every study's SCF entry point raises: a check that must come before any integral."""
    def refuse(*args, **kwargs):
        raise AssertionError("an SCF ran before the input was checked")

    for module in (hfcore.studies.reaction, hfcore.studies.compare, hfcore.studies.interaction):
        monkeypatch.setattr(module, "run_scf", refuse)
    monkeypatch.setattr(hfcore.studies.interaction, "prepare_integrals", refuse)


def _one_line_exit_2(code: int, out: str, err: str, *fragments: str) -> None:
    assert code == 2 and out == "", err
    assert err.count("\n") == 1 and err.startswith("hfcore: error: "), err
    for fragment in fragments:
        assert fragment in err, err


# --- the equation syntax -------------------------------------------------------------------------------


def test_spin_words_follow_the_charge_inside_the_brackets():
    left, right = parse_equation("water.xyz[+1 doublet] -> o.xyz[triplet] + 2 h.xyz[doublet] + x.xyz[-1] + y.xyz")
    assert left == [(Fraction(1), "water.xyz", 1, 2)]
    assert right == [(Fraction(1), "o.xyz", 0, 3), (Fraction(2), "h.xyz", 0, 2), (Fraction(1), "x.xyz", -1, None),
                     (Fraction(1), "y.xyz", 0, None)]
    # parse_reaction keeps its (factor, path, charge) terms
    assert parse_reaction("a.xyz[quintet] -> b.xyz[+2 sextet]") == ([(Fraction(1), "a.xyz", 0)], [(Fraction(1), "b.xyz", 2)])


def test_species_carry_their_multiplicity_and_an_open_shell_without_a_word_takes_the_default(in_copies):
    species, _ = load_reactions(["water.xyz -> o.xyz[triplet] + 2 h.xyz", "oh.xyz -> o.xyz[triplet] + h.xyz[doublet]"])
    assert [(s.label, s.multiplicity, s.molecule.spin_multiplicity) for s in species] == [
        ("water.xyz", 1, 1), ("o.xyz[triplet]", 3, 3), ("h.xyz[doublet]", 2, 2), ("oh.xyz[doublet]", 2, 2)]


def test_the_same_file_with_two_spins_is_two_species(in_copies):
    species, reactions = load_reactions(["o2.xyz[singlet] -> o2.xyz[triplet]"])
    assert [s.multiplicity for s in species] == [1, 3]
    assert reactions[0].terms == ((0, Fraction(-1)), (1, Fraction(1)))


@pytest.mark.parametrize("spec, fragment", [
    ("water.xyz -> o.xyz[tripplet] + 2 h.xyz", "unknown spin 'tripplet'"),
    ("water.xyz -> o.xyz[+1 triplet] + 2 h.xyz[-1 doublet]", "multiplicity 3 does not fit 7 electrons"),
    ("water.xyz -> o.xyz[doublet] + 2 h.xyz", "multiplicity 2 does not fit 8 electrons"),
    ("2 h.xyz[quartet] -> 2 h.xyz[quartet]", "multiplicity 4 needs 3 unpaired electrons but the molecule has 1"),
    ("water.xyz -> o.xyz[triplet doublet] + 2 h.xyz", "one spin word"),
])
def test_a_bad_spin_in_an_equation_is_one_line_exit_2_before_any_integral(in_copies, no_scf, spec, fragment):
    _one_line_exit_2(*run_main("reaction", spec, "--basis", "sto-3g"), fragment)


# --- the method rule --------------------------------------------------------------------------------------


def test_the_open_shell_choice_applies_to_open_shells_and_uhf_also_to_singlets():
    # source: issue 15 part 7 — closed-shell singlets stay RHF unless --uhf
    assert [piece_method(1, m) for m in (None, "uhf", "rohf")] == [None, "uhf", None]
    assert [piece_method(3, m) for m in (None, "uhf", "rohf")] == [None, "uhf", "rohf"]


@pytest.mark.parametrize("command", [
    ["reaction", ATOMIZATION, "--basis", "sto-3g"],
    ["compare", "o.xyz", "--basis", "sto-3g"],
    ["interaction", "hydrogen_stretched.xyz", "--fragments", "1,2", "--basis", "sto-3g"],
])
def test_uhf_with_rohf_is_one_line_exit_2(in_copies, no_scf, command):
    _one_line_exit_2(*run_main(*command, "--uhf", "--rohf"), "not allowed with argument")


@pytest.mark.parametrize("command, fragment", [
    (["compare", "water.xyz", "--basis", "sto-3g", "--multiplicity", "2"], "multiplicity 2 does not fit 10 electrons"),
    (["compare", "h.xyz", "--basis", "sto-3g", "--multiplicity", "4"], "needs 3 unpaired electrons"),
    (["interaction", "water_dimer.xyz", "--fragments", "1-3,4-6", "--basis", "sto-3g",
      "--fragment-multiplicities=2,1"], "fragment 1 (charge +0): multiplicity 2 does not fit 10 electrons"),
    (["interaction", "hydrogen_stretched.xyz", "--fragments", "1,2", "--basis", "sto-3g", "--multiplicity", "2"],
     "the complex (given): multiplicity 2 does not fit 2 electrons"),
    (["interaction", "hydrogen_stretched.xyz", "--fragments", "1,2", "--basis", "sto-3g",
      "--fragment-multiplicities=2"], "1 multiplicities for 2 fragments"),
])
def test_an_impossible_multiplicity_in_a_study_is_one_line_exit_2_before_any_integral(in_copies, no_scf, command,
                                                                                       fragment):
    _one_line_exit_2(*run_main(*command), fragment)


# --- the studies run open shells ------------------------------------------------------------------------


def _energy(path: str, multiplicity: int | None, basis: str, method: str | None = None) -> float:
    molecule = read_xyz(path).with_multiplicity(multiplicity)
    return float(run_scf(molecule, basis, SCFOptions(method=method)).energy_total)


def test_a_reaction_with_rohf_runs_rohf_for_open_shells_and_rhf_for_the_singlet(in_copies):
    code, out, err = run_main("reaction", ATOMIZATION, "--basis", "sto-3g", "--rohf", "--json", "-")
    assert code == 0, err
    record = json.loads(out)["reaction"]
    assert [(s["multiplicity"], s["method"]) for s in record["species"]] == [(1, "RHF"), (3, "ROHF"), (2, "ROHF")]
    expected = _energy("o.xyz", 3, "sto-3g", "rohf") + 2 * _energy("h.xyz", 2, "sto-3g", "rohf") \
        - _energy("water.xyz", None, "sto-3g")
    # source: exact property — ΔE is Σ ν E over separate single points of the same species, method and basis
    assert record["rows"][0]["reaction_energies"][0] == pytest.approx(expected, abs=1e-9)


def test_compare_runs_an_open_shell_in_every_basis(in_copies):
    code, out, err = run_main("compare", "o.xyz", "--multiplicity", "3", "--basis", "sto-3g,6-31g", "--json", "-")
    assert code == 0, err
    rows = json.loads(out)["comparison"]["rows"]
    assert [r["method"] for r in rows] == ["UHF", "UHF"]
    for row in rows:
        # source: exact property — the comparison's row is the single UHF run of that basis
        assert row["energy_total"] == pytest.approx(_energy("o.xyz", 3, row["basis"]), abs=1e-8)
        # source: exact property — ⟨S²⟩ ≥ S(S+1) = 2 for a UHF triplet
        assert row["s_squared"] >= 2.0 - 1e-9


def test_interaction_of_two_doublets_derives_the_high_spin_complex(in_copies):
    code, out, err = run_main("interaction", "hydrogen_stretched.xyz", "--fragments", "1,2", "--basis", "sto-3g",
                              "--json", "-")
    assert code == 0, err
    record = json.loads(out)["interaction"]
    assert record["fragment_multiplicities"] == [2, 2]
    assert record["multiplicity"] == 3 and record["multiplicity_rule"] == "high-spin coupling"
    runs = record["runs"]
    assert {(r["kind"], r["multiplicity"], r["method"]) for r in runs} == {
        ("complex", 3, "UHF"), ("own basis", 2, "UHF"), ("full basis", 2, "UHF")}
    molecule = read_xyz("hydrogen_stretched.xyz")
    triplet = run_scf(molecule.with_multiplicity(3), "sto-3g").energy_total
    atom = run_scf(molecule.subset([0], 0), "sto-3g").energy_total
    row = record["rows"][0]
    # source: exact property — the raw interaction energy is E(complex) − Σ E(fragment alone), the same runs
    assert row["raw"] == pytest.approx(triplet - 2 * atom, abs=1e-9)
    assert row["energy_complex"] == pytest.approx(triplet, abs=1e-9)
    # the counterpoise pieces are the fragments (doublets) in the complex's basis, the partner a ghost
    ghosted = run_scf(molecule.with_ghosts([1]).with_multiplicity(2), "sto-3g").energy_total
    assert row["fragments_full_basis"][0] == pytest.approx(ghosted, abs=1e-9)


def test_interaction_takes_the_complex_multiplicity_given(in_copies):
    code, out, err = run_main("interaction", "oh.xyz", "--fragments", "1,2", "--fragment-multiplicities=3,2",
                              "--multiplicity", "2", "--basis", "sto-3g")
    assert code == 0, err
    assert "fragment 1   atoms 1            charge 0   multiplicity 3" in out
    assert "complex: multiplicity 2 (as given)" in out


# --- the atomization example ------------------------------------------------------------------------------


def test_the_atomization_energy_is_the_sum_of_its_single_points_and_matches_the_reference_library(in_copies):
    from open_reference import open_reference_mole, reference_open_scf
    from reference import family_shells, reference_mole, reference_rhf

    code, out, err = run_main("reaction", ATOMIZATION, "--basis", "sto-3g,6-31g", "--json", "-")
    assert code == 0, err
    record = json.loads(out)["reaction"]
    assert [(s["path"], s["multiplicity"], s["method"]) for s in record["species"]] == [
        ("water.xyz", 1, "RHF"), ("o.xyz", 3, "UHF"), ("h.xyz", 2, "UHF")]
    water, oxygen, hydrogen = read_xyz("water.xyz"), read_xyz("o.xyz", multiplicity=3), read_xyz("h.xyz")
    for row in record["rows"]:
        basis = row["basis"]
        e_w, e_o, e_h = (float(run_scf(m, basis).energy_total) for m in (water, oxygen, hydrogen))
        # source: exact property — ΔE = E(O, UHF triplet) + 2 E(H) − E(water) over separate single points
        assert row["reaction_energies"][0] == pytest.approx(e_o + 2 * e_h - e_w, abs=1e-9)
        # source: reference library run (UHF for the atoms, RHF for water, the same basis-set-exchange shells)
        ref_o = reference_open_scf(open_reference_mole(oxygen, basis)).e_tot
        ref_h = reference_open_scf(open_reference_mole(hydrogen, basis)).e_tot
        spherical = row["spherical"]
        ref_w = reference_rhf(reference_mole(water, family_shells(water, basis), spherical=spherical),
                              conv_tol=1e-12).e_tot
        assert row["species_energies"] == pytest.approx([ref_w, ref_o, ref_h], abs=1e-8)
        assert row["reaction_energies"][0] == pytest.approx(ref_o + 2 * ref_h - ref_w, abs=1e-8)
    assert "Hartree–Fock misses electron correlation" in run_main("reaction", ATOMIZATION, "--basis", "sto-3g")[1]


def test_an_rhf_method_on_an_open_shell_species_is_refused_before_any_integral(in_copies, no_scf):
    with pytest.raises(InputError, match="RHF describes singlets only"):
        hfcore.studies.reaction.reaction_energies(ATOMIZATION, ["sto-3g"], method="rhf")


# --- the batch runner (--results) carries multiplicity and method into each job -----------------------------


def test_a_reaction_run_as_batch_jobs_gives_the_in_process_energies_spin_and_method_included(in_copies):
    for flags in ([], ["--rohf"]):
        code, out, err = run_main("reaction", ATOMIZATION, "--basis", "sto-3g", *flags, "--json", "-")
        assert code == 0, err
        here = json.loads(out)["reaction"]
        results = in_copies / f"r{len(flags)}.jsonl"
        code, out, err = run_main("reaction", ATOMIZATION, "--basis", "sto-3g", *flags, "--results", results,
                                  "--workers", "1", "--json", "-")
        assert code == 0, err
        batch = json.loads(out)["reaction"]
        # source: exact property — the same runs in another process give the same energies
        assert batch["rows"][0]["species_energies"] == pytest.approx(here["rows"][0]["species_energies"], abs=1e-9)
        assert [s["method"] for s in batch["species"]] == [s["method"] for s in here["species"]]
        lines = [json.loads(line) for line in results.read_text().splitlines()[1:]]
        spins = {(line["job"]["geometry"], line["job"]["options"]["multiplicity"], line["job"]["options"]["method"],
                  line["hfcore"]["method"]) for line in lines}
        method = "rohf" if flags else None
        assert spins == {("water.xyz", None, None, "RHF"), ("o.xyz", 3, method, (method or "uhf").upper()),
                         ("h.xyz", 2, method, (method or "uhf").upper())}


def test_an_interaction_run_as_batch_jobs_carries_the_fragment_multiplicities(in_copies):
    args = ["interaction", "hydrogen_stretched.xyz", "--fragments", "1,2", "--basis", "sto-3g", "--json", "-"]
    code, out, err = run_main(*args)
    assert code == 0, err
    here = json.loads(out)["interaction"]["rows"][0]
    code, out, err = run_main(*args, "--results", in_copies / "i.jsonl", "--workers", "1")
    assert code == 0, err
    batch = json.loads(out)["interaction"]
    # source: exact property — the same runs as batch jobs (no shared integrals) give the same energies
    assert batch["rows"][0]["raw"] == pytest.approx(here["raw"], abs=1e-9)
    assert batch["rows"][0]["counterpoise"] == pytest.approx(here["counterpoise"], abs=1e-9)
    assert {(r["kind"], r["multiplicity"], r["method"]) for r in batch["runs"]} == {
        ("complex", 3, "UHF"), ("own basis", 2, "UHF"), ("full basis", 2, "UHF")}


def test_a_species_made_without_a_multiplicity_takes_the_molecule_s():
    from hfcore.studies.equations import Species

    hydrogen = read_xyz(INPUTS / "h.xyz")
    assert Species("h.xyz", 0, hydrogen).multiplicity == 2  # the default of one electron
    assert Species("o.xyz", 0, read_xyz(INPUTS / "o.xyz", multiplicity=3)).label == "o.xyz[triplet]"
