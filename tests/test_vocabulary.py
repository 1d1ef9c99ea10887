"""One vocabulary: old names keep working for one release, records become dicts one way."""

from __future__ import annotations

import dataclasses
import io
import json

import pytest

from hfcore.cli import main
from hfcore.errors import InputError
from hfcore.scf import SCFOptions

from conftest import INPUTS


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


def test_rhf_result_becomes_a_dict_the_way_the_json_export_writes_it(water_molecule):
    import numpy as np

    import hfcore
    from hfcore import export, integrals
    from hfcore.scf import solve_rhf

    out = io.StringIO()
    assert main(["energy", str(INPUTS / "water.xyz"), "--json", "-"], stdout=out, stderr=io.StringIO()) == 0
    from_cli = json.loads(out.getvalue())
    result = hfcore.run_rhf(water_molecule)
    record = json.loads(export.to_json(result.to_dict({"note": "extra"})))
    assert set(from_cli) == set(record) and record["analysis"] == {"note": "extra"}
    assert "analysis" not in result.to_dict()
    # source: exact property — determinism: the same input gives the same digits
    assert record["energy"]["total"] == from_cli["energy"]["total"] == result.energy_total
    # the record holds the result's own numbers, in bohr and hartree
    np.testing.assert_array_equal(record["molecule"]["coordinates_bohr"], water_molecule.coordinates)
    np.testing.assert_array_equal(record["orbitals"]["energies"], result.orbital_energies)
    assert record["orbitals"]["homo"] == result.homo == 4 and record["molecule"]["n_electrons"] == 10
    assert record["basis"]["n_functions"] == result.basis.n_functions == 7
    assert [h["energy"] for h in record["scf"]["history"]] == [h.energy for h in result.history]
    assert record["scf"]["stability"]["stable"] is True and record["hfcore"]["version"] == hfcore.__version__
    # a run on bare matrices has no molecule or basis to describe
    basis = result.basis
    bare = solve_rhf(result.overlap, result.core_hamiltonian, integrals.compute_eri(basis), 10,
                     result.energy_nuclear)
    with pytest.raises(InputError, match="carries its molecule and basis"):
        bare.to_dict()


def test_the_two_guess_lists_have_their_own_names(water_molecule):
    import hfcore
    from hfcore.studies import compare
    from hfcore.studies.compare import COMPARISON_GUESSES

    with pytest.warns(DeprecationWarning, match="compare.GUESSES is deprecated; use COMPARISON_GUESSES"):
        assert compare.GUESSES == COMPARISON_GUESSES
    # a projected start belongs to a comparison (from the previous basis), not to one SCF run
    with pytest.raises(InputError, match="unknown SCF guess 'projected'"):
        hfcore.run_rhf(water_molecule, "sto-3g", guess="projected")
    rows = hfcore.compare_bases(water_molecule, ["sto-3g", "6-31g"], guess="projected").rows
    assert [r.guess for r in rows] == ["sad", "projected from sto-3g"]
    with pytest.raises(InputError, match="unknown guess 'core' for a basis comparison"):
        hfcore.compare_bases(water_molecule, ["sto-3g"], guess="core")


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


#: Water in STO-3G at commit 98172fa (hfcore's own earlier value, tests/test_energies_frozen.py).
WATER_STO3G = -74.96304857620731


@pytest.mark.parametrize("name", ["diis", "damping", "second_order", "none", "diis+level_shift",
                                  "damping+level_shift"])
def test_every_name_in_the_accelerator_table_converges_water_to_one_energy(name, water_molecule):
    import hfcore
    from hfcore import integrals
    from hfcore.scf import accelerators, sad_density, solve_rhf

    assert name in accelerators.ACCELERATORS
    basis = hfcore.build_basis(water_molecule, "sto-3g")
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, water_molecule.atomic_numbers,
                                                                 water_molecule.coordinates)
    options = SCFOptions(auto_aids=False, max_iterations=300, stability="off")
    accelerator = accelerators.build_accelerator(SCFOptions(damping=0.3), name)
    result = solve_rhf(s, h, integrals.compute_eri(basis), water_molecule.n_electrons,
                       water_molecule.nuclear_repulsion(), options, sad_density(basis, water_molecule.atomic_numbers),
                       accelerator=accelerator)
    # source: hfcore's own earlier value (regression guard): every method reaches the same solution
    assert result.energy_total == pytest.approx(WATER_STO3G, abs=1e-9)


def test_options_accept_exactly_the_chosen_names_of_the_table():
    from hfcore.scf import accelerators

    for name in accelerators.ACCELERATOR_NAMES:
        damping = 0.5 if name == "damping" else 0.0
        assert SCFOptions(accelerator=name, damping=damping).accelerator == name
    for name in set(accelerators.ACCELERATORS) - set(accelerators.ACCELERATOR_NAMES):
        with pytest.raises(InputError, match="accelerator"):
            SCFOptions(accelerator=name)


def test_second_order_steps_are_an_accelerator_that_moves_the_orbitals_itself(water_molecule):
    import hfcore
    from hfcore.scf import SecondOrder

    with pytest.raises(NotImplementedError, match="next_density"):
        SecondOrder().next_fock(None)
    result = hfcore.run_rhf(water_molecule, "sto-3g", SCFOptions(accelerator="second_order"))
    assert {h.aid for h in result.history[:-1]} == {"second_order"}
    assert all(h.diis_size == 0 for h in result.history)
    # source: hfcore's own earlier value (regression guard)
    assert result.energy_total == pytest.approx(WATER_STO3G, abs=1e-9)


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
