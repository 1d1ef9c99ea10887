"""What a run imports at start-up, the tables that stand in for scipy at import time, and analysis made only when used."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from scipy.special import gammaincc

from pathlib import Path

from hfcore.basis import sto
from hfcore.integrals import boys as _boys_function  # noqa: F401  (the module is looked up below)

BOYS = sys.modules["hfcore.integrals.boys"]
WATER = str(Path(__file__).resolve().parent.parent / "inputs" / "water.xyz")


def _imported_after(code: str) -> set[str]:
    probe = code + "; import sys; print(' '.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    return set(out.split())


def test_a_water_sto3g_run_imports_no_optimizer_no_special_functions_no_constants():
    modules = _imported_after(
        f"from hfcore.cli import main; main(['energy', {WATER!r}, '--basis', 'sto-3g', '--quiet', '--json', '-'])"
    )
    assert not {m for m in modules if m.startswith(("scipy.optimize", "scipy.special", "scipy.constants"))}


def test_the_help_imports_no_optimizer_no_special_functions_no_constants():
    modules = _imported_after("from hfcore.cli import main\ntry:\n    main(['--help'])\nexcept SystemExit:\n    pass")
    assert not {m for m in modules if m.startswith(("scipy.optimize", "scipy.special", "scipy.constants"))}


#: Modules a plain closed-shell energy run has no use for: other commands, batch, studies and MP2.
LAZY_MODULES = (
    "hfcore.batch", "hfcore.studies", "hfcore.cli.batch", "hfcore.cli.compare", "hfcore.cli.interaction",
    "hfcore.cli.reaction", "hfcore.cli.fit_sto", "hfcore.cli.bases", "hfcore.cli.pieces",
    "hfcore.cli.report_batch", "hfcore.cli.report_differences", "hfcore.analysis.mp2", "hfcore.analysis.mp2_terms",
    "hfcore.analysis.ump2", "hfcore.analysis.ri_mp2", "concurrent.futures.process",
)


def _lazy_ones(modules: set[str]) -> set[str]:
    return {m for m in modules if m == "hfcore.batch" or m.startswith(LAZY_MODULES)}


def test_a_plain_energy_run_imports_no_other_command_no_batch_no_study_no_mp2():
    modules = _imported_after(
        f"from hfcore.cli import main; main(['energy', {WATER!r}, '--basis', 'sto-3g', '--quiet', '--json', '-'])"
    )
    assert "hfcore.cli.energy" in modules and "hfcore.analysis.populations" in modules  # the run did run
    assert not _lazy_ones(modules)


def test_an_mp2_run_loads_the_mp2_code_it_needs():
    modules = _imported_after(
        f"from hfcore.cli import main; main(['energy', {WATER!r}, '--mp2', '--quiet', '--json', '-'])"
    )
    assert {"hfcore.analysis.mp2", "hfcore.analysis.ump2"} <= modules


def test_the_mp2_names_of_the_analysis_package_are_served_on_first_use():
    import hfcore
    import hfcore.analysis as analysis
    from hfcore.analysis.mp2 import mp2_energy
    from hfcore.analysis.ump2 import check_mp2_reference

    assert analysis.mp2_energy is mp2_energy and hfcore.mp2_energy is mp2_energy
    assert analysis.check_mp2_reference is check_mp2_reference
    assert {"mp2_energy", "ump2_energy", "MP2Result"} <= set(dir(analysis))
    with pytest.raises(AttributeError):
        analysis.no_such_name  # noqa: B018


def _help_of_every_command(parser) -> dict[str, str]:
    sub = parser._subparsers._group_actions[0]
    return {name: p.format_help() for name, p in sub.choices.items()}


@pytest.mark.parametrize("command", ["energy", "batch", "compare", "interaction", "reaction", "fit-sto", "bases"])
def test_the_parser_built_for_one_command_reads_it_as_the_full_parser_does(command):
    from hfcore.cli import build_parser
    from hfcore.cli.commands import COMMANDS

    full, lean = build_parser(), build_parser(command)
    assert lean.format_help() == full.format_help()  # the list of commands with their help lines
    assert _help_of_every_command(lean)[command] == _help_of_every_command(full)[command]
    if command == "batch":
        assert _help_of_every_command(lean)["energy"] == _help_of_every_command(full)["energy"]
    assert list(_help_of_every_command(full)) == list(COMMANDS)


def test_the_full_parser_gives_every_command_its_help_line_from_the_command_table():
    from hfcore.cli import build_parser
    from hfcore.cli.commands import COMMANDS

    sub = build_parser()._subparsers._group_actions[0]
    shown = {action.dest: action.help for action in sub._choices_actions}
    assert shown == {name: text for name, (_, text) in COMMANDS.items()}


def test_the_help_of_a_lazily_built_command_still_lists_every_command(capsys):
    from hfcore.cli import main

    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    assert all(name in out for name in ("energy", "batch", "compare", "interaction", "reaction", "fit-sto", "bases"))


# --- analysis only when it is used ------------------------------------------------------------------


def test_a_run_whose_analysis_is_not_read_does_not_compute_it(monkeypatch):
    from hfcore import runs

    calls = []
    real = runs.analysis_record
    monkeypatch.setattr(runs, "analysis_record", lambda *a, **k: calls.append(1) or real(*a, **k))
    outcome = runs.run_single(runs.RunRequest(WATER, basis="sto-3g"))
    assert outcome.result.converged and outcome.result.energy_total < 0
    assert calls == [] and not outcome.analysed
    record = outcome.record
    assert calls == [1] and outcome.analysed
    assert set(record["analysis"]) == set(outcome.analysis)
    outcome.record, outcome.analysis  # noqa: B018  (read again: made once)
    assert calls == [1]


def test_the_lazy_record_holds_every_analysis_key_and_the_integral_pass_in_its_timings():
    from hfcore.runs import RunRequest, run_single

    record = run_single(RunRequest(WATER, basis="6-31g*")).record
    assert set(record["analysis"]) == {
        "mulliken_charges", "lowdin_charges", "homo_lumo_gap", "koopmans_ionisation", "kinetic", "potential",
        "virial_ratio", "origin_bohr", "origin_is_centre_of_mass", "dipole_au", "dipole_debye",
        "dipole_magnitude_debye", "quadrupole_au", "quadrupole_debye_angstrom",
    }
    t = record["timings"]
    assert set(t) == {"integrals", "guess", "scf", "stability", "total"}
    # exact property: the stages are parts of the whole run, one after the other
    assert t["integrals"] > 0 and t["total"] >= t["integrals"] + t["guess"] + t["scf"] + t["stability"]


def test_the_analysis_with_the_scfs_kinetic_matrix_equals_one_with_a_fresh_one():
    from hfcore.integrals import kinetic
    from hfcore.runs import RunRequest, analysis_record, run_single

    outcome = run_single(RunRequest(WATER, basis="cc-pvdz"))
    fresh = analysis_record(outcome.result, kinetic=None)
    given = outcome.analysis
    assert outcome._kinetic is not None  # the run did hand the SCF's matrix on
    assert np.allclose(outcome._kinetic, kinetic(outcome.basis), rtol=0, atol=1e-13)
    for key in ("kinetic", "potential", "virial_ratio"):
        assert given[key] == pytest.approx(fresh[key], rel=1e-13, abs=1e-12), key
    # exact property: the kinetic and potential parts add up to the total energy
    assert given["kinetic"] + given["potential"] == pytest.approx(outcome.result.energy_total, abs=1e-10)


def test_orbital_properties_refuse_a_kinetic_matrix_of_another_basis():
    from hfcore.analysis import orbital_properties
    from hfcore.errors import InputError
    from hfcore.runs import RunRequest, run_single

    result = run_single(RunRequest(WATER, basis="sto-3g")).result
    with pytest.raises(InputError, match="kinetic-energy matrix"):
        orbital_properties(result, kinetic=np.eye(3))


def test_upper_incomplete_gamma_of_half_orders_equals_scipy():
    # source: scipy.special.gammaincc (regularised upper incomplete gamma function)
    t = np.arange(1.0, 400.0)
    a = np.arange(BOYS.M_MAX + 1.0)[:, None] + 0.5
    reference = gammaincc(a, t)
    ours = BOYS._upper_gamma_half_orders(t)
    shown = reference > 1e-290
    assert np.allclose(ours[shown], reference[shown], rtol=1e-12, atol=0)


def test_boys_switch_points_are_those_of_scipy_gammaincc():
    # source: scipy.special.gammaincc — the definition the switch points had before the closed form
    t = np.arange(1.0, 400.0)
    a = np.arange(BOYS.M_MAX + 1.0)[:, None] + 0.5
    assert np.array_equal(BOYS._T_SWITCH, np.argmax(gammaincc(a, t) < 1e-17, axis=1) + 1.0)


@pytest.mark.parametrize("shell", list(sto.SLATER_SHELLS))
@pytest.mark.parametrize("m", range(1, sto.MAX_GAUSSIANS + 1))
def test_shipped_sto_fit_equals_a_fresh_fit(shell, m):
    # The table is a cache of the fitter's own output (scripts/make_sto_fits.py); fitting again must give it.
    exponents, coefficients, overlaps = sto._fit_unit_now(shell, m)
    table = sto._fit_table()[shell][str(m)]
    assert np.allclose(table["exponents"], exponents, rtol=1e-10, atol=0)
    assert np.allclose(np.array(table["coefficients"]), np.array(coefficients), rtol=1e-9, atol=1e-12)
    assert np.allclose(table["overlaps"], overlaps, rtol=1e-12, atol=0)


def test_a_fit_missing_from_the_table_is_made_by_the_fitter(monkeypatch):
    table = sto._fit_table()["1s"]["3"]
    monkeypatch.setattr(sto, "_fit_table", lambda: {})
    sto._fit_unit.cache_clear()
    try:
        exponents, _, overlaps = sto._fit_unit("1s", 3)
    finally:
        sto._fit_unit.cache_clear()
    assert np.allclose(exponents, table["exponents"], rtol=1e-10, atol=0)
    assert overlaps[0] == pytest.approx(table["overlaps"][0], rel=1e-12)
