"""The single-point run as a library function, the batch key rules, the open-shell gate and the renamed values."""

from __future__ import annotations

import json
import shutil
import warnings
from pathlib import Path

import pytest
from conftest import INPUTS, run_main

from hfcore.batch import GeometryEntry, expand_geometries, make_jobs, run_batch
from hfcore.batch.jobs import format1_key
from hfcore.errors import InputError
from hfcore.runs import RunProgress, RunRequest, open_shell_engine, run_single
from hfcore.scf import SCFOptions

FORMAT1 = Path(__file__).parent / "data" / "format1"


def _one_error_line(err: str) -> str:
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("hfcore: error: "), err
    return lines[0]


def test_run_single_matches_the_reference_library_and_the_energy_command_prints_its_record():
    from pyscf import mp
    from reference import family_shells, reference_mole, reference_rhf

    request = RunRequest(INPUTS / "water.xyz", basis="6-31g*", spherical=False, mp2=True, energy_tol=1e-12,
                         gradient_tol=1e-9)
    outcome = run_single(request)
    molecule = outcome.molecule
    ref = reference_rhf(reference_mole(molecule, family_shells(molecule, "6-31g*"), spherical=False),
                        conv_tol=1e-12, conv_tol_grad=1e-9)
    theirs = mp.MP2(ref).run(verbose=0)
    # source: reference library run (RHF and MP2 on the same shells)
    assert outcome.record["energy"]["total"] == pytest.approx(ref.e_tot, abs=1e-8)
    assert outcome.mp2.correlation == pytest.approx(theirs.e_corr, abs=1e-8)
    code, out, _ = run_main("energy", INPUTS / "water.xyz", "--basis", "6-31g*", "--cartesian", "--mp2",
                            "--energy-tol", "1e-12", "--gradient-tol", "1e-9", "--json", "-")
    printed = json.loads(out)
    assert code == 0
    assert printed["energy"]["total"] == pytest.approx(ref.e_tot, abs=1e-8)
    assert printed["mp2"]["correlation"] == pytest.approx(theirs.e_corr, abs=1e-8)


def test_the_mp2_table_shows_the_reference_spin_parts_and_their_scaled_sums():
    from pyscf import mp
    from reference import family_shells, reference_mole, reference_rhf

    code, out, _ = run_main("energy", INPUTS / "water.xyz", "--basis", "6-31g*", "--cartesian", "--mp2", "--quiet",
                            "--energy-tol", "1e-12", "--gradient-tol", "1e-9")
    assert code == 0
    rows = out.split("MP2 / Eh", 1)[1].splitlines()[3:7]
    table = {row.split()[0]: [float(v) for v in row.split()[1:]] for row in rows}
    molecule = run_single(RunRequest(INPUTS / "water.xyz")).molecule
    ref = reference_rhf(reference_mole(molecule, family_shells(molecule, "6-31g*"), spherical=False),
                        conv_tol=1e-12, conv_tol_grad=1e-9)
    theirs = mp.MP2(ref).run(verbose=0)
    # source: reference library run; SCS weights 6/5 and 1/3 from S. Grimme, J. Chem. Phys. 118, 9095 (2003)
    # (from memory). The table prints 12 decimals.
    ss, os_ = theirs.e_corr_ss, theirs.e_corr_os
    expected = {"same-spin": [ss, ss / 3], "opposite-spin": [os_, 1.2 * os_], "correlation": [ss + os_, ss / 3 + 1.2 * os_],
                "total": [ref.e_tot + ss + os_, ref.e_tot + ss / 3 + 1.2 * os_]}
    for name, (plain, scaled) in expected.items():
        assert table[name] == pytest.approx([plain, scaled], abs=1e-8), name


def test_run_single_reports_progress_through_its_callbacks():
    seen = {"prepared": 0, "iteration": 0}
    progress = RunProgress(prepared=lambda m, b, p: seen.__setitem__("prepared", seen["prepared"] + 1),
                           iteration=lambda rec: seen.__setitem__("iteration", seen["iteration"] + 1))
    outcome = run_single(RunRequest(INPUTS / "water.xyz"), progress)
    assert seen["prepared"] == 1 and seen["iteration"] == outcome.result.iterations


def test_request_fields_are_normalised_so_the_same_run_has_one_key():
    one = RunRequest("w.xyz", basis_for={"O": "cc-pvdz", "h": "6-31g"})
    two = RunRequest("w.xyz", basis_for=["H=6-31g", "O=cc-pvdz"])
    assert one.basis_for == (("H", "6-31g"), ("O", "cc-pvdz"))
    assert one.key_fields() == two.key_fields()
    assert RunRequest("w.xyz", basis=" STO-3G").key_fields() == RunRequest("w.xyz").key_fields()
    # threads change no digit beyond ~1e-13 Eh, so they are no part of the identity
    assert RunRequest("w.xyz", threads=2).key_fields() == RunRequest("w.xyz").key_fields()
    assert RunRequest("w.xyz", multiplicity=3).key_fields() != RunRequest("w.xyz").key_fields()
    assert RunRequest("w.xyz", method="uhf").key_fields() != RunRequest("w.xyz").key_fields()


def test_a_job_key_is_made_of_request_fields_not_of_flag_names(tmp_path):
    shutil.copy(INPUTS / "water.xyz", tmp_path / "w.xyz")
    entries = expand_geometries([str(tmp_path / "w.xyz")])
    from_python, _ = make_jobs(entries, ["sto-3g"], 0, RunRequest("", energy_tol=1e-9, memory_mib=100.0))
    from_fields, _ = make_jobs(entries, ["sto-3g"], 0, {"energy_tol": 1e-9, "memory_mib": 100.0})
    assert from_python[0].key == from_fields[0].key
    assert set(from_python[0].options) <= {f for f in RunRequest("").to_dict()}
    results = tmp_path / "r.jsonl"
    code, _, err = run_main("batch", tmp_path / "w.xyz", "--results", results, "--workers", "1",
                            "--energy-tol", "1e-9", "--memory", "100")
    assert code == 0, err
    line = json.loads(results.read_text().splitlines()[1])
    assert line["job"]["key"] == from_python[0].key
    assert "memory_mib" in line["job"]["options"] and "memory" not in line["job"]["options"]
    assert json.loads(results.read_text().splitlines()[0])["hfcore_batch_results"] == 2


def test_a_results_file_of_format_1_still_resumes_by_its_old_keys(tmp_path, monkeypatch):
    # The fixture was written by hfcore at commit 98172fa (results format 1, keys from option names):
    #   batch h2.xyz h2_080.xyz --basis sto-3g,6-31g --energy-tol 1e-9 --basis-for H=sto-3g --results results.jsonl
    #   batch h2.xyz --basis sto-3g --results results.jsonl --stability check
    for item in FORMAT1.iterdir():
        shutil.copy(item, tmp_path / item.name)
    monkeypatch.chdir(tmp_path)
    before = (tmp_path / "results.jsonl").read_bytes()
    assert json.loads(before.splitlines()[0])["hfcore_batch_results"] == 1
    code, _, err = run_main("batch", "h2.xyz", "h2_080.xyz", "--basis", "sto-3g,6-31g", "--energy-tol", "1e-9",
                            "--basis-for", "H=sto-3g", "--results", "results.jsonl", "--workers", "1")
    assert code == 0, err
    assert "skipping 4 job(s)" in err and "running" not in err
    code, _, err = run_main("batch", "h2.xyz", "--basis", "sto-3g", "--results", "results.jsonl",
                            "--stability", "report")
    assert code == 0 and "skipping 1 job(s)" in err and "running" not in err
    assert (tmp_path / "results.jsonl").read_bytes() == before
    # A new job added to the old file runs once, and is found on the next run.
    args = ("batch", "h2.xyz", "--basis", "sto-3g", "--results", "results.jsonl", "--workers", "1")
    code, _, err = run_main(*args)
    assert code == 0 and "running 1 job(s)" in err
    code, _, err = run_main(*args)
    assert code == 0 and "skipping 1 job(s)" in err and "running" not in err


def test_the_format_1_key_of_a_request_is_the_key_old_files_hold(tmp_path):
    line = json.loads((FORMAT1 / "results.jsonl").read_text().splitlines()[1])
    job = line["job"]
    request = RunRequest(str(FORMAT1 / job["geometry"]), basis=job["basis"], charge=job["charge"], energy_tol=1e-9,
                         basis_for=["H=sto-3g"])
    assert format1_key(job["geometry_sha256"], request) == job["key"]
    assert format1_key(job["geometry_sha256"], RunRequest("x.xyz", multiplicity=1)) is None


def test_an_unknown_request_field_is_refused_by_name(tmp_path):
    entries = [GeometryEntry(str(tmp_path / "w.xyz"))]
    with pytest.raises(InputError, match="unknown job option.*energy_tolerance"):
        make_jobs(entries, ["sto-3g"], 0, {"energy_tolerance": 1})


@pytest.mark.parametrize("flags, what", [
    (["--multiplicity", "2"], "multiplicity 2 does not fit 10 electrons"),
    (["--multiplicity", "13"], "needs 12 unpaired electrons but the molecule has 10"),
    (["--charge", "1", "--rohf", "--mp2"], "MP2 on an ROHF reference"),
])
def test_impossible_spin_requests_are_refused_before_any_integral(monkeypatch, flags, what):
    import hfcore.scf as scf

    def no_integrals(*args, **kwargs):
        raise AssertionError("integrals computed for a refused request")

    monkeypatch.setattr(scf, "plan_jk", no_integrals)
    code, out, err = run_main("energy", INPUTS / "water.xyz", *flags)
    assert code == 2 and out == ""
    assert what in _one_error_line(err)


@pytest.mark.parametrize("name, flags, method, multiplicity", [
    ("water", ["--multiplicity", "3"], "uhf", 3),
    ("oh", [], "uhf", 2),                      # an odd electron count defaults to a doublet, run as UHF
    ("oh", ["--rohf"], "rohf", 2),
    ("hydroxide", ["--charge", "-1", "--uhf"], "uhf", 1),
])
def test_open_shell_requests_run_the_method_they_name(name, flags, method, multiplicity):
    from open_reference import open_reference_mole, reference_open_scf

    from hfcore import read_xyz

    code, out, err = run_main("energy", INPUTS / f"{name}.xyz", "--basis", "6-31g", *flags, "--json", "-")
    assert code == 0, err
    record = json.loads(out)
    assert record["hfcore"]["method"] == method.upper()
    assert record["spin"]["multiplicity"] == multiplicity
    charge = -1 if name == "hydroxide" else 0
    molecule = read_xyz(INPUTS / f"{name}.xyz", charge=charge, multiplicity=multiplicity)
    # source: reference library run (UHF or ROHF, same shells and spin, converged to 1e-12)
    reference = reference_open_scf(open_reference_mole(molecule, "6-31g"), method)
    assert abs(record["energy"]["total"] - reference.e_tot) < 1e-8
    assert abs(record["spin"]["s_squared"] - reference.spin_square()[0]) < 1e-6


def test_uhf_and_rohf_exclude_each_other():
    code, _, err = run_main("energy", INPUTS / "water.xyz", "--uhf", "--rohf")
    assert code == 2 and "not allowed with argument" in _one_error_line(err)


@pytest.mark.parametrize("command", [["compare", "--basis", "sto-3g"],
                                     ["interaction", "--fragments", "1,2-3", "--basis", "sto-3g"]])
def test_studies_refuse_an_impossible_multiplicity_too(command):
    # studies run open shells (tests/test_open_studies.py); a spin that does not fit is refused in one line
    code, out, err = run_main(command[0], INPUTS / "water.xyz", *command[1:], "--multiplicity", "2")
    assert code == 2 and out == "" and "multiplicity 2 does not fit 10 electrons" in _one_error_line(err)


def test_the_open_shell_gate_passes_closed_shells_to_rhf(water_molecule):
    assert open_shell_engine(RunRequest(water_molecule), water_molecule) is None
    assert open_shell_engine(RunRequest(water_molecule, multiplicity=1), water_molecule) is None


def test_list_files_take_a_multiplicity_beside_the_charge(tmp_path):
    from hfcore.batch import read_list_file

    (tmp_path / "m.list").write_text("a.xyz charge=1 multiplicity=2\nb.xyz multiplicity=3 charge=0\nc.xyz\n")
    entries = read_list_file(str(tmp_path / "m.list"))
    assert [(e.charge, e.multiplicity) for e in entries] == [(1, 2), (0, 3), (None, None)]
    jobs, _ = make_jobs(entries, ["sto-3g"], 0, {})
    assert [j.options["multiplicity"] for j in jobs] == [2, 3, None]
    (tmp_path / "bad.list").write_text("a.xyz multiplicity=two\n")
    with pytest.raises(InputError, match="bad.list:1"):
        read_list_file(str(tmp_path / "bad.list"))


def test_batch_jobs_carry_their_multiplicity_and_an_impossible_one_is_a_failed_line(tmp_path):
    shutil.copy(INPUTS / "water.xyz", tmp_path / "w.xyz")
    (tmp_path / "m.list").write_text("w.xyz multiplicity=3\nw.xyz multiplicity=2\n")
    results = tmp_path / "r.jsonl"
    code, _, _ = run_main("batch", f"@{tmp_path / 'm.list'}", "--results", results, "--workers", "1")
    assert code == 10  # some jobs failed; the batch itself went on
    lines = {json.loads(x)["job"]["options"]["multiplicity"]: json.loads(x) for x in results.read_text().splitlines()[1:]}
    assert lines[3]["status"] == "ok" and lines[3]["hfcore"]["method"] == "UHF" and lines[3]["spin"]["multiplicity"] == 3
    assert lines[2]["status"] == "failed" and lines[2]["error"]["exit_code"] == 2
    assert "does not fit 10 electrons" in lines[2]["error"]["message"]


# -- the stability values: names of our own, old spellings warned for one release --------------------------


@pytest.mark.parametrize("old, new", [("off", "skip"), ("check", "report"), ("follow", "descend")])
def test_old_stability_spellings_warn_and_still_work(old, new):
    with pytest.warns(DeprecationWarning, match=f"'{old}' is deprecated; use '{new}'"):
        options = SCFOptions(stability=old)
    assert options.stability == new
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert SCFOptions(stability=new).stability == new
    assert SCFOptions().stability == "descend"


def test_the_cli_takes_old_stability_spellings_with_a_warning_and_writes_the_new_names():
    code, out, err = run_main("energy", INPUTS / "water.xyz", "--stability", "check", "--json", "-")
    assert code == 0
    assert err.strip() == "hfcore: warning: --stability check is deprecated; use --stability report"
    assert json.loads(out)["scf"]["stability"]["mode"] == "report"
    code, out, _ = run_main("energy", INPUTS / "water.xyz", "--stability", "skip", "--json", "-")
    assert code == 0 and json.loads(out)["scf"]["stability"]["mode"] == "skip"


def test_energy_help_names_only_the_new_stability_values():
    code, out, _ = run_main("energy", "--help")
    assert code == 0
    text = " ".join(out.split())
    assert "{skip,report,descend}" in text and "'descend' (default)" in text
    for old in ("off", "check", "follow"):
        assert f"'{old}'" not in text and f",{old}" not in text and f"{{{old}" not in text
