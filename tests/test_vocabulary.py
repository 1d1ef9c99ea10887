"""One vocabulary: old names keep working for one release, records become dicts one way."""

from __future__ import annotations

import dataclasses
import io
import json
from pathlib import Path

import pytest

from hfcore.cli import main
from hfcore.errors import InputError
from hfcore.scf import SCFOptions

INPUTS = Path(__file__).resolve().parent.parent / "inputs"


def test_diis_space_keyword_sets_max_diis_size_with_a_warning():
    with pytest.warns(DeprecationWarning, match="max_diis_size"):
        options = SCFOptions(diis_space=5)
    assert options.max_diis_size == 5


def test_the_old_attribute_reads_the_new_one_with_a_warning():
    with pytest.warns(DeprecationWarning, match="SCFOptions.diis_space is deprecated; use max_diis_size"):
        assert SCFOptions(max_diis_size=5).diis_space == 5


def test_both_names_at_once_are_refused():
    with pytest.raises(InputError, match="not both"), pytest.warns(DeprecationWarning):
        SCFOptions(diis_space=5, max_diis_size=6)


def test_replace_changes_the_new_name():
    with pytest.warns(DeprecationWarning):
        assert dataclasses.replace(SCFOptions(max_diis_size=4), max_diis_size=6).diis_space == 6


@pytest.mark.parametrize("flag", ["--max-diis-size", "--diis-space"])
def test_both_spellings_of_the_flag_reach_the_json(flag):
    out, err = io.StringIO(), io.StringIO()
    code = main(["energy", str(INPUTS / "water.xyz"), flag, "3", "--json", "-"], stdout=out, stderr=err)
    assert code == 0
    thresholds = json.loads(out.getvalue())["scf"]["thresholds"]
    assert thresholds["max_diis_size"] == 3 and thresholds["diis_space"] == 3
    warned = [line for line in err.getvalue().splitlines() if "deprecated" in line]
    if flag == "--diis-space":
        assert warned == ["hfcore: warning: --diis-space is deprecated; use --max-diis-size"]
    else:
        assert warned == []


def test_the_old_flag_is_hidden_from_help():
    out = io.StringIO()
    assert main(["energy", "--help"], stdout=out, stderr=io.StringIO()) == 0
    assert "--max-diis-size" in out.getvalue() and "--diis-space" not in out.getvalue()


def test_eri_bytes_is_the_old_name_of_eri_memory_bytes():
    import hfcore
    from hfcore import integrals
    from hfcore.scf import plan_jk

    water = hfcore.read_xyz(INPUTS / "water.xyz")
    basis = hfcore.build_basis(water, "sto-3g")
    result = hfcore.run_rhf(water, basis)
    plan = plan_jk(basis)
    # source: exact property — the predicted store size is the documented estimate
    assert result.eri_memory_bytes == plan.eri_memory_bytes == integrals.estimate_eri_memory(basis)
    with pytest.warns(DeprecationWarning, match="RHFResult.eri_bytes is deprecated; use eri_memory_bytes"):
        assert result.eri_bytes == result.eri_memory_bytes
    with pytest.warns(DeprecationWarning, match="JKPlan.eri_bytes is deprecated; use eri_memory_bytes"):
        assert plan.eri_bytes == plan.eri_memory_bytes
    with pytest.warns(DeprecationWarning, match=r"RHFResult\(eri_bytes=...\) is deprecated"):
        old = type(result)(
            **{**{f.name: getattr(result, f.name) for f in dataclasses.fields(result) if f.name != "eri_memory_bytes"},
               "eri_bytes": 123}
        )
    assert old.eri_memory_bytes == 123
    with pytest.raises(InputError, match="not both"), pytest.warns(DeprecationWarning):
        type(plan)(mode="stored", eri_bytes=1, eri_memory_bytes=1, limit_bytes=2)


def test_rhf_result_becomes_a_dict_the_way_the_json_export_writes_it():
    import hfcore

    out = io.StringIO()
    assert main(["energy", str(INPUTS / "water.xyz"), "--json", "-"], stdout=out, stderr=io.StringIO()) == 0
    from_cli = json.loads(out.getvalue())
    record = hfcore.run_rhf(hfcore.read_xyz(INPUTS / "water.xyz")).to_dict()
    assert set(from_cli) - {"analysis"} == set(record)
    # source: exact property — determinism: the same input gives the same digits
    assert record["energy"]["total"] == from_cli["energy"]["total"]


def test_the_two_guess_lists_have_their_own_names():
    from hfcore.analysis import compare
    from hfcore.analysis.compare import COMPARISON_GUESSES
    from hfcore.scf import GUESSES as SCF_GUESSES

    with pytest.warns(DeprecationWarning, match="compare.GUESSES is deprecated; use COMPARISON_GUESSES"):
        assert compare.GUESSES is COMPARISON_GUESSES
    assert "projected" in COMPARISON_GUESSES and "projected" not in SCF_GUESSES


def test_mp2_totals_are_energy_totals_and_the_old_names_warn():
    import hfcore

    result = hfcore.run_rhf(hfcore.read_xyz(INPUTS / "water.xyz"), "sto-3g")
    mp2 = hfcore.mp2_energy(result)
    # source: exact property — a total is the RHF energy plus the correlation energy
    assert mp2.energy_total == result.energy_total + mp2.correlation
    assert mp2.scs_energy_total == result.energy_total + mp2.scs_correlation
    with pytest.warns(DeprecationWarning, match="MP2Result.total is deprecated; use energy_total"):
        assert mp2.total == mp2.energy_total
    with pytest.warns(DeprecationWarning, match="MP2Result.scs_total is deprecated; use scs_energy_total"):
        assert mp2.scs_total == mp2.scs_energy_total
    record = mp2.to_dict()
    assert (record["total"], record["scs_total"]) == (mp2.energy_total, mp2.scs_energy_total)


def test_diis_space_keyword_and_attribute_are_the_old_max_size():
    from hfcore.scf import DIIS

    with pytest.warns(DeprecationWarning, match=r"DIIS\(space=...\) is deprecated; use max_size"):
        diis = DIIS(space=3)
    assert diis.max_size == 3
    with pytest.warns(DeprecationWarning, match="DIIS.space is deprecated; use max_size"):
        assert diis.space == 3


def test_every_accelerator_name_is_in_the_one_table():
    from hfcore.scf import SCFOptions, accelerators, options, solver

    assert options.ACCELERATOR_NAMES is accelerators.ACCELERATOR_NAMES
    assert solver.AID_STAGES is accelerators.AID_STAGES
    assert set(accelerators.ACCELERATOR_NAMES) | set(accelerators.AID_STAGES) == set(accelerators.ACCELERATORS)
    for name in accelerators.ACCELERATORS:
        assert isinstance(accelerators.build_accelerator(SCFOptions(), name), accelerators.Chain)


@pytest.mark.parametrize("count, closed", [(2, True), (10, True), (2.0, True), (0, False), (-2, False), (3, False),
                                           (2.5, False), (True, False), ("2", False)])
def test_the_closed_shell_rule(count, closed):
    from hfcore.geometry import is_closed_shell

    # source: common practice — RHF doubly occupies every orbital, so it needs a positive even count
    assert is_closed_shell(count) is closed


@pytest.mark.parametrize("value", [-1e-12, 1.0, float("nan"), True, "1e-12"])
def test_one_screening_rule_for_the_options_and_the_integral_engines(value):
    import hfcore
    from hfcore.integrals import compute_eri
    from hfcore.integrals.direct import DirectERI

    basis = hfcore.build_basis(hfcore.read_xyz(INPUTS / "water.xyz"), "sto-3g")
    with pytest.raises(InputError, match=r"SCF option screening must be a number in \[0.0, 1.0\)"):
        SCFOptions(screening=value)
    with pytest.raises(InputError, match=r"the screening threshold must be a number in \[0.0, 1.0\)"):
        DirectERI(basis, threshold=value)
    with pytest.raises(InputError, match=r"the screening threshold must be a number in \[0.0, 1.0\)"):
        compute_eri(basis, threshold=value)


def test_stability_report_to_dict_is_the_json_object_and_products_is_an_old_name():
    import hfcore
    from hfcore import export

    result = hfcore.run_rhf(hfcore.read_xyz(INPUTS / "water.xyz"), "sto-3g")
    st = result.stability
    record = json.loads(export.to_json(result.to_dict()))["scf"]["stability"]
    assert set(record) == set(st.to_dict()) and record["mode"] == "descend" and record["stable"] is True
    assert record["hessian_products"] == st.hessian_products > 0
    with pytest.warns(DeprecationWarning, match="StabilityReport.products is deprecated; use hessian_products"):
        assert st.products == st.hessian_products


def test_sto_fit_to_dict_is_the_fit_object_of_its_json_record():
    from hfcore import export
    from hfcore.basis.sto import fit_sto

    fit = fit_sto("1s", 3)
    written = json.loads(export.to_json(export.sto_fit_record(fit)))["fit"]
    assert set(written) == {"shell", "n_gaussians", "zeta", "exponents", "coefficients", "overlaps"}
    assert written["exponents"] == fit.exponents.tolist() and written["n_gaussians"] == 3
    assert written["coefficients"] == {"s": fit.coefficients[0].tolist()} and written["overlaps"] == {"s": fit.overlaps[0]}
