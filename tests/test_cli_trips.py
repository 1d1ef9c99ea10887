"""What a new user tripped over, each a behaviour of the command line (issue 16, part 9)."""

from __future__ import annotations

import json

import pytest
from conftest import INPUTS, hfcore_process, run_main


def _error_line(code: int, out: str, err: str, expected: int = 2) -> str:
    assert code == expected and out == "", err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("hfcore: error: "), err
    return lines[0]


def _energy_json(*args) -> dict:
    code, out, err = run_main("energy", *args, "--json", "-")
    assert code == 0, err
    return json.loads(out)


@pytest.mark.parametrize("option, items", [("--basis-for", ["H=6-31g"]), ("--zeta", ["O=7.7", "H=1.3"])])
def test_element_items_before_the_geometry_leave_the_geometry_alone(option, items):
    before = _energy_json(option, *items, INPUTS / "water.xyz")
    after = _energy_json(INPUTS / "water.xyz", option, *items)
    plain = _energy_json(INPUTS / "water.xyz")
    assert before["energy"]["total"] == after["energy"]["total"] != plain["energy"]["total"]


def test_an_element_option_followed_by_no_item_names_what_it_found():
    line = _error_line(*run_main("energy", "--basis-for", INPUTS / "water.xyz"))
    assert "--basis-for took" in line and "water.xyz" in line and "EL=" in line


def test_a_negative_fragment_charge_list_says_to_attach_it():
    line = _error_line(*run_main("interaction", INPUTS / "water_dimer.xyz", "--fragments", "1-3,4-6",
                                 "--basis", "sto-3g", "--fragment-charges", "-1,1"))
    assert "write --fragment-charges=-1,1" in line


def test_the_energy_units_block_names_only_what_the_record_holds():
    record = _energy_json(INPUTS / "water.xyz")
    units = record["units"]
    assert "coordinates_angstrom" not in json.dumps(units)
    assert "coordinates_angstrom" not in record["molecule"]
    assert "quadrupole_au" in record["analysis"] and "e*bohr^2" in units["quadrupole"]
    assert "quadrupole_debye_angstrom" in units["quadrupole"]


def test_study_records_carry_units_only_for_their_data(tmp_path):
    code, out, _ = run_main("compare", INPUTS / "water.xyz", "--basis", "sto-3g", "--json", "-")
    assert code == 0
    assert set(json.loads(out)["units"]) == {"energy", "time"}
    code, out, _ = run_main("reaction", f"2 {INPUTS / 'water.xyz'} -> {INPUTS / 'water_dimer.xyz'}",
                            "--basis", "sto-3g", "--json", "-")
    assert code == 0
    units = json.loads(out)["units"]
    assert set(units) == {"energy", "charges", "time"} and "_kJ_mol" in units["energy"]


def _section(text: str, title: str) -> list[str]:
    return text.split(f"\n{title}\n", 1)[1].split("\n\n", 1)[0].splitlines()[1:]


def test_the_stability_verdict_is_said_once():
    code, out, _ = run_main("energy", INPUTS / "water.xyz")
    assert code == 0
    rows = _section(out, "Stability and occupation")
    verdict = next(r for r in rows if r.strip().startswith("internal stability"))
    assert verdict.split() == ["internal", "stability", "stable"]
    assert any(r.split()[:2] == ["setting", "descend"] for r in rows)


def test_the_memory_limit_prints_in_readable_units():
    code, out, _ = run_main("energy", INPUTS / "water.xyz", "--memory", "2000", "--quiet")
    assert code == 0
    stored = next(r for r in _section(out, "Basis") if "stored size" in r)
    assert "limit 1.95 GiB" in stored and "e+" not in stored  # exact property: 2000 MiB / 1024 = 1.953 GiB


def test_memory_sizes_never_print_an_exponent():
    from hfcore.cli.report import _mib

    # exact properties of the units: 1 GiB = 1024 MiB, 1 TiB = 1024 GiB
    assert [_mib(x * 2**20) for x in (0.277, 12.5, 999.0, 1000.0, 12345.0, 3 * 2**20)] == [
        "284 KiB", "12.5 MiB", "999 MiB", "0.977 GiB", "12.1 GiB", "3 TiB"]


def test_timings_say_what_the_scf_total_holds_and_list_mp2_after_it():
    code, out, _ = run_main("energy", INPUTS / "water.xyz", "--mp2", "--quiet")
    assert code == 0
    labels = [r.rsplit(None, 2)[0].strip() for r in _section(out, "Timings")]
    assert labels.index("SCF total") < labels.index("MP2 (not in the SCF total)") < len(labels) - 1
    assert labels[-1] == "whole command (since hfcore.cli.main began)"


def test_the_whole_command_counts_from_the_process_start(tmp_path):
    proc = hfcore_process("energy", str(INPUTS / "water.xyz"), "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "whole command (since the process started)" in proc.stdout


@pytest.mark.parametrize("command", [
    ["compare", str(INPUTS / "water.xyz"), "--basis", "sto-3g"],
    ["interaction", str(INPUTS / "water_dimer.xyz"), "--fragments", "1-3,4-6", "--basis", "sto-3g"],
    ["reaction", f"2 {INPUTS / 'water.xyz'} -> {INPUTS / 'water_dimer.xyz'}", "--basis", "sto-3g"],
    ["bases"],
    ["energy", str(INPUTS / "water.xyz"), "--quiet"],
])
def test_every_report_starts_with_a_title_line(command):
    code, out, _ = run_main(*command)
    assert code == 0
    first, second = out.splitlines()[:2]
    assert first.startswith("hfcore ") and " · " in first and second == ""


def test_the_reaction_table_weights_functions_by_stoichiometric_factors():
    code, out, _ = run_main("reaction", f"2 {INPUTS / 'water.xyz'} -> {INPUTS / 'water_dimer.xyz'}",
                            "--basis", "sto-3g")
    assert code == 0
    row = next(line for line in out.splitlines() if line.split()[:1] == ["sto-3g"] and len(line.split()) == 7)
    # exact property: STO-3G has 7 functions on water and 14 on the dimer, so 2 × 7 + 14
    assert row.split()[1] == "28"
    assert "times its stoichiometric factor" in out


def test_the_fitting_sets_are_spelled_one_way_and_marked_in_bases():
    from hfcore.basis.library import available_basis_sets

    from hfcore.cli import build_parser

    parser = build_parser()
    energy = parser._subparsers._group_actions[0].choices["energy"]
    help_text = " ".join(a.help or "" for a in energy._actions)
    names = set(available_basis_sets())
    mentioned = {w.strip("(),;:'") for w in help_text.split() if "FIT" in w.upper() and "-" in w}
    mentioned = {w for w in mentioned if w.lower().endswith(("-ri", "-rifit", "-jkfit"))}
    assert mentioned and mentioned <= names | {"cc-pVXZ-RIFIT"}
    code, out, _ = run_main("bases")
    rows = {line.split()[0]: line for line in out.splitlines() if line.startswith("  ") and len(line.split()) > 2}
    assert "MP2 fitting" in rows["cc-pVTZ-RIFIT"] and "J/K fitting" in rows["cc-pVTZ-JKFIT"]
    assert "orbital set" in rows["cc-pVDZ"]


def test_the_unknown_basis_hint_names_only_sets_that_exist_for_common_elements():
    pytest.importorskip("basis_set_exchange")
    line = _error_line(*run_main("energy", INPUTS / "water.xyz", "--basis", "cc-pvxz"), expected=3)
    close = line.split("close names: ", 1)[1].rstrip(")").split(", ")
    from hfcore.basis.library import available_basis_sets

    assert close and set(close) <= set(available_basis_sets()) and "cc-pV9Z" not in line


def test_fit_sto_help_lists_every_shell_the_fitter_takes():
    from hfcore.basis.sto import SLATER_SHELLS
    from hfcore.cli.fit_sto import SHELLS_IN_HELP

    assert SHELLS_IN_HELP == tuple(SLATER_SHELLS)
    code, out, _ = run_main("fit-sto", "--help")
    assert code == 0 and "1s, 2p, 2sp, 3sp, 3d" in " ".join(out.split())
    code, out, _ = run_main("fit-sto", "--shell", "2p", "--gaussians", "3", "--json", "-")
    assert code == 0 and json.loads(out)["fit"]["shell"] == "2p"


@pytest.mark.parametrize("value", ["nan", "inf", "+inf"])
def test_a_non_finite_origin_is_a_one_line_error(value):
    line = _error_line(*run_main("energy", INPUTS / "water.xyz", "--origin", "0", value, "0"))
    assert "--origin" in line and "finite" in line and "array" not in line
