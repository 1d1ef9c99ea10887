"""The ``hfcore`` command line: exit codes, one-line errors, JSON on stdout, atomic files, npz contents.

Exit-code and no-traceback checks run the real process (``python -m hfcore``);
the rest call :func:`hfcore.cli.main` in-process to stay quick.
"""

from __future__ import annotations

import io
import json
import os

import numpy as np
import pytest
from conftest import assert_one_line_error, assert_valid_png, cli_result, hfcore_process, only_inputs_left, run_main

from reference import family_shells, reference_mole, reference_rhf

from hfcore import export
from hfcore.geometry import read_xyz
from hfcore.cli import main
from hfcore.runs import parse_basis_for
from hfcore.errors import InputError

REQUIRED_JSON_KEYS = [
    ("energy", "total"),
    ("energy", "nuclear_repulsion"),
    ("energy", "electronic"),
    ("energy", "one_electron"),
    ("energy", "two_electron"),
    ("scf", "converged"),
    ("scf", "iterations"),
    ("scf", "history"),
    ("scf", "thresholds"),
    ("basis", "name"),
    ("basis", "n_functions"),
    ("basis", "spherical"),
    ("orbitals", "energies"),
    ("orbitals", "occupations"),
    ("orbitals", "homo"),
    ("orbitals", "lumo"),
    ("molecule", "charge"),
    ("molecule", "n_electrons"),
    ("molecule", "symbols"),
    ("molecule", "coordinates_bohr"),
    ("hfcore", "version"),
]


# --- bad input: one line, an exit code, no traceback, nothing written ---------------

BAD_GEOMETRIES = [
    ("empty", "", "mol.xyz:1: the file is empty"),
    ("count not an integer", "two\n\nH 0 0 0\nH 0 0 0.74\n", "mol.xyz:1: expected the number of atoms"),
    ("count too large", "3\n\nH 0 0 0\nH 0 0 0.74\n", "mol.xyz:1: the count line says 3 atoms but 2 atom lines follow"),
    ("count too small", "1\n\nH 0 0 0\nH 0 0 0.74\n", "mol.xyz:1: the count line says 1 atoms but 2 atom lines follow"),
    ("unknown element", "2\n\nH 0 0 0\nXx 0 0 0.74\n", "mol.xyz:4: unknown element 'Xx'"),
    ("coordinate not a number", "2\n\nH 0 0 0\nH 0 0 0,74\n", "mol.xyz:4: the z coordinate '0,74' is not a finite number"),
    ("coordinate not finite", "2\n\nH 0 0 0\nH 0 nan 0.74\n", "mol.xyz:4: the y coordinate 'nan' is not a finite number"),
    ("atoms too close", "2\n\nH 0 0 0\nH 0 0 0.05\n", "mol.xyz:4: atom 2 is 0.05 Å from atom 1 (line 3)"),
]


@pytest.mark.parametrize(("text", "fragment"), [c[1:] for c in BAD_GEOMETRIES], ids=[c[0] for c in BAD_GEOMETRIES])
def test_bad_geometry_gives_one_line_exit_2_and_writes_nothing(tmp_path, text, fragment):
    (tmp_path / "mol.xyz").write_text(text)
    proc = hfcore_process("energy", "mol.xyz", "--json", "out.json", "--npz", "out.npz", cwd=tmp_path)
    assert_one_line_error(proc, 2, fragment)
    assert only_inputs_left(tmp_path, "mol.xyz")


def test_missing_geometry_file(tmp_path):
    proc = hfcore_process("energy", "nothere.xyz", "--json", "out.json", cwd=tmp_path)
    assert_one_line_error(proc, 2, "nothere.xyz: no such file")
    assert only_inputs_left(tmp_path)


def test_a_singlet_asked_for_odd_electrons_names_the_multiplicities_that_fit(tmp_path):
    (tmp_path / "nh4.xyz").write_text(
        "5\nammonium\nN 0 0 0\nH 0.59 0.59 0.59\nH -0.59 -0.59 0.59\nH -0.59 0.59 -0.59\nH 0.59 -0.59 -0.59\n"
    )
    proc = hfcore_process("energy", "nh4.xyz", "--multiplicity", "1", cwd=tmp_path)
    # exact property: an odd electron count has an odd number of unpaired electrons, so 2S+1 is even
    assert_one_line_error(proc, 2, "11 electrons", "2, 4, 6")


@pytest.mark.parametrize(
    ("basis", "element", "charge", "fragment"),
    [
        ("sto-3g", "Kr", "0", "mol.xyz:5: basis STO-3G does not cover element Kr"),
        ("cc-pvdz", "K", "1", "mol.xyz:5: basis cc-pVDZ does not cover element K"),
    ],
)
def test_element_the_basis_does_not_cover_exits_3(tmp_path, basis, element, charge, fragment):
    (tmp_path / "mol.xyz").write_text(f"3\n\nH 0 0 0\nH 0 0 0.74\n{element} 0 0 3.5\n")
    proc = hfcore_process("energy", "mol.xyz", "--basis", basis, "--charge", charge, "--json", "o.json", cwd=tmp_path)
    assert_one_line_error(proc, 3, fragment)
    assert only_inputs_left(tmp_path, "mol.xyz")


def test_unknown_basis_name_exits_3(water_file):
    proc = hfcore_process("energy", water_file.name, "--basis", "no-such-basis-zz", "--json", "o.json", cwd=water_file.parent)
    assert_one_line_error(proc, 3, "no-such-basis-zz")
    assert only_inputs_left(water_file.parent, water_file.name)


@pytest.mark.parametrize(
    ("names", "code", "fragment"),
    [("sto-3g,no-such-basis-zz", 3, "no-such-basis-zz"), ("sto-3g,STO-3G", 2, "more than once")],
)
def test_compare_with_a_bad_basis_list_prints_only_the_error(water_file, names, code, fragment):
    proc = hfcore_process("compare", water_file.name, "--basis", names, "--json", "o.json", cwd=water_file.parent)
    assert_one_line_error(proc, code, fragment)
    assert only_inputs_left(water_file.parent, water_file.name)


@pytest.mark.parametrize(
    ("item", "fragment", "via"),
    [
        ("He", "He", "process"),
        ("O=abc", "abc", "main"),
        ("O=-1", "-1", "main"),
        ("Xx=1.0", "Xx", "main"),
        ("H:2sp=1.0", "2sp", "main"),
    ],
)
def test_bad_zeta_exits_2(water_file, item, fragment, via):
    proc = cli_result("energy", water_file.name, "--zeta", item, "--json", "o.json", cwd=water_file.parent, via=via)
    assert_one_line_error(proc, 2, "zeta", fragment)
    assert only_inputs_left(water_file.parent, water_file.name)


@pytest.mark.parametrize(
    ("item", "code", "fragment", "via"),
    [
        ("H", 2, "expected EL=NAME", "process"),
        ("H=", 2, "expected EL=NAME", "main"),
        ("Xx=cc-pvdz", 2, "unknown element 'Xx'", "main"),
        ("H=no-such-basis-zz", 3, "no-such-basis-zz", "process"),
    ],
)
def test_bad_basis_for(water_file, item, code, fragment, via):
    proc = cli_result("energy", water_file.name, "--basis-for", item, "--json", "o.json", cwd=water_file.parent, via=via)
    assert_one_line_error(proc, code, fragment)
    assert only_inputs_left(water_file.parent, water_file.name)


def test_bad_basis_file_exits_3(water_file):
    (water_file.parent / "bad.json").write_text('{"format": "hfcore-basis/1", "name": "x", "elements": {"O": [}')
    proc = hfcore_process("energy", water_file.name, "--basis-file", "bad.json", cwd=water_file.parent)
    assert_one_line_error(proc, 3, "bad.json")


def test_output_in_a_missing_directory_fails_before_computing(water_file):
    proc = hfcore_process("energy", water_file.name, "--json", "nodir/out.json", cwd=water_file.parent)
    assert_one_line_error(proc, 2, "nodir/out.json", "does not exist")


@pytest.mark.parametrize(
    ("args", "via"),
    [
        (["energy"], "process"),
        (["energy", "w.xyz", "--charge", "one"], "main"),
        (["energy", "w.xyz", "--max-iterations", "0"], "main"),
        (["energy", "w.xyz", "--energy-tol", "-1e-8"], "main"),
        (["energy", "w.xyz", "--cartesian", "--spherical"], "main"),
        (["energy", "w.xyz", "--no-such-flag"], "main"),
        (["fit-sto", "--shell", "4f", "--gaussians", "3"], "process"),
        (["no-such-command"], "main"),
    ],
)
def test_usage_errors_exit_2_without_traceback(tmp_path, args, via):
    proc = cli_result(*args, cwd=tmp_path, via=via)
    assert_one_line_error(proc, 2)


def test_scf_not_converged_exits_4_with_last_energy_and_gradient(water_file):
    old = '{"kept": true}\n'
    (water_file.parent / "o.json").write_text(old)
    proc = hfcore_process("energy", water_file.name, "--max-iterations", "2", "--json", "o.json", "--quiet", cwd=water_file.parent)
    assert proc.returncode == 4
    assert "Traceback" not in proc.stderr
    line = proc.stderr.strip()
    assert line.startswith("hfcore: error: ") and "\n" not in line
    assert "energy" in line and "gradient" in line
    # a failed run leaves an existing output file as it was
    assert (water_file.parent / "o.json").read_text() == old
    assert only_inputs_left(water_file.parent, water_file.name, "o.json")


def test_parse_basis_for_canonicalises_symbols():
    assert parse_basis_for(["h=cc-pvdz", "CL=6-31g*"]) == {"H": "cc-pvdz", "Cl": "6-31g*"}
    with pytest.raises(InputError, match="element H given twice"):
        parse_basis_for(["H=cc-pvdz", "h=sto-3g"])


# --- successful runs ------------------------------------------------------------------


def test_json_to_stdout_is_pure_json_with_the_required_keys(water_file):
    proc = hfcore_process("energy", water_file.name, "--basis", "sto-3g", "--json", "-", cwd=water_file.parent)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    record = json.loads(proc.stdout)
    for section, key in REQUIRED_JSON_KEYS:
        assert key in record[section], (section, key)
    assert "energy" in record["units"] and "length" in record["units"]
    assert record["scf"]["converged"] is True
    assert record["basis"]["n_functions"] == 7  # source: common practice — STO-3G water is 1s2s2p on O + 1s on each H
    # source: exact property — 8 + 1 + 1 electrons, five doubly occupied orbitals (0-based HOMO 4)
    assert record["molecule"]["n_electrons"] == 10
    assert record["orbitals"]["homo"] == 4 and record["orbitals"]["lumo"] == 5
    assert record["orbitals"]["occupations"] == [2.0] * 5 + [0.0] * 2
    # source: exact property — sum of Z_A Z_B / R_AB over inputs/water.xyz, with the CODATA 2018
    # Bohr radius 0.529177210903 Å from memory (not the record's own coordinates)
    xyz = np.array([[0.0, 0.0, 0.065634], [0.0, 0.757481, -0.520870], [0.0, -0.757481, -0.520870]]) / 0.529177210903
    z = [8.0, 1.0, 1.0]
    nuclear = sum(z[a] * z[b] / np.linalg.norm(xyz[a] - xyz[b]) for a in range(3) for b in range(a))
    assert record["energy"]["nuclear_repulsion"] == pytest.approx(nuclear, rel=2e-9)
    assert len(record["scf"]["history"]) == record["scf"]["iterations"]


def test_json_file_matches_json_stdout_and_the_human_report(water_file):
    code, out, err = run_main("energy", str(water_file), "--json", str(water_file.parent / "w.json"))
    assert code == 0, err
    record = json.loads((water_file.parent / "w.json").read_text())
    # the human report shows the same total energy, to the digits it prints
    assert f"{record['energy']['total']:22.12f}".strip() in out
    for section in ("Molecule", "Basis", "SCF iterations", "Energy / Eh", "Orbitals", "Mulliken charges", "Dipole moment", "Timings"):
        assert section in out
    assert "HOMO" in out and "LUMO" in out
    assert only_inputs_left(water_file.parent, water_file.name, "w.json")


def test_human_report_prints_one_row_per_iteration_and_quiet_drops_them(water_file):
    code, out, _ = run_main("energy", str(water_file), "--json", str(water_file.parent / "w.json"))
    assert code == 0
    iterations = json.loads((water_file.parent / "w.json").read_text())["scf"]["iterations"]
    lines = out.splitlines()
    table = lines[lines.index("SCF iterations") + 3 : next(k for k, l in enumerate(lines) if "converged after" in l)]
    rows = [line for line in table if line.strip()]
    assert [int(r.split()[0]) for r in rows] == list(range(1, iterations + 1))
    code, quiet, _ = run_main("energy", str(water_file), "--quiet")
    assert code == 0
    assert "SCF iterations" not in quiet and "total energy" in quiet


def energy_record(*args: str) -> dict:
    code, out, err = run_main("energy", *args, "--json", "-")
    assert code == 0, err
    return json.loads(out)


def test_basis_for_gives_one_element_another_basis(water_file):
    record = energy_record(str(water_file), "--basis", "sto-3g", "--basis-for", "H=6-31g")
    # source: common practice — STO-3G O has 5 functions, 6-31G H has 2
    assert record["basis"]["n_functions"] == 5 + 2 * 2
    assert "6-31G" in record["basis"]["name"]


def test_several_items_after_one_flag_or_repeated_flags_are_the_same(water_file):
    one = energy_record(str(water_file), "--basis", "sto-3g", "--zeta", "O=7.7", "H=1.3")
    repeated = energy_record(str(water_file), "--basis", "sto-3g", "--zeta", "O=7.7", "--zeta", "H=1.3")
    default = energy_record(str(water_file), "--basis", "sto-3g")
    assert one["energy"]["total"] == repeated["energy"]["total"] != default["energy"]["total"]


def test_cartesian_and_spherical_flags_change_the_d_functions(water_file):
    spherical = energy_record(str(water_file), "--basis", "cc-pvdz", "--spherical", "--quiet")
    cartesian = energy_record(str(water_file), "--basis", "cc-pvdz", "--cartesian", "--quiet")
    # source: common practice — cc-pVDZ water: O 3s2p1d, H 2s1p; a d shell has 5 spherical or 6 Cartesian functions
    assert (spherical["basis"]["n_functions"], cartesian["basis"]["n_functions"]) == (24, 25)
    assert spherical["basis"]["spherical"] is True and cartesian["basis"]["spherical"] is False
    # source: exact property (variational principle) — the Cartesian d space contains the spherical one
    assert cartesian["energy"]["total"] < spherical["energy"]["total"]


def test_basis_file_with_the_textbook_fit_reproduces_sto3g(tmp_path):
    xyz = tmp_path / "h2.xyz"
    xyz.write_text("2\n\nH 0 0 0\nH 0 0 1.4\n")
    # source: Szabo & Ostlund (1996), ch. 3, STO-3G fit for zeta = 1 (from memory), scaled by zeta(H)**2 = 1.24**2
    alphas = [str(a * 1.24**2) for a in (2.227660, 0.405771, 0.109818)]
    shell = {"l": 0, "exponents": alphas, "coefficients": [["0.154329", "0.535328", "0.444635"]]}
    (tmp_path / "mine.json").write_text(json.dumps({"format": "hfcore-basis/1", "name": "mine", "elements": {"H": [shell]}}))
    mine = energy_record(str(xyz), "--units", "bohr", "--basis-file", str(tmp_path / "mine.json"))
    fitted = energy_record(str(xyz), "--units", "bohr", "--basis", "sto-3g")
    assert mine["basis"]["name"] == "mine"
    # six-digit table values against hfcore's own fit: the same energy to well below the book's 1e-4
    assert mine["energy"]["total"] == pytest.approx(fitted["energy"]["total"], abs=1e-6)


def test_core_guess_reaches_the_same_energy(water_file):
    sad = energy_record(str(water_file))
    core = energy_record(str(water_file), "--guess", "core")
    # source: common practice — for closed-shell water near equilibrium both guesses reach the same RHF solution
    assert core["energy"]["total"] == pytest.approx(sad["energy"]["total"], abs=1e-9)


def test_scf_thresholds_are_passed_on(water_file):
    record = energy_record(str(water_file), "--energy-tol", "1e-6", "--gradient-tol", "1e-4", "--max-diis-size", "4")
    thresholds = record["scf"]["thresholds"]
    assert (thresholds["energy_tol"], thresholds["gradient_tol"], thresholds["max_diis_size"]) == (1e-6, 1e-4, 4)
    assert max(h["diis_size"] for h in record["scf"]["history"]) <= 4


def test_long_orbital_lists_are_cut_after_ten_virtuals(water_file):
    code, out, _ = run_main("energy", str(water_file), "--basis", "cc-pvdz", "--quiet")
    assert code == 0
    orbitals = out[out.index("Orbitals") : out.index("Mulliken charges")]
    rows = [line for line in orbitals.splitlines() if line.strip()[:1].isdigit()]
    # 5 occupied + the LUMO and 9 more virtuals are listed; 24 - 15 are counted
    # (source: common practice — cc-pVDZ water has 24 spherical functions)
    assert len(rows) == 15
    assert "9 higher virtual orbitals not shown" in orbitals


def test_npz_holds_the_arrays_for_prototyping(water_file):
    path = water_file.parent / "w.npz"
    code, _, err = run_main("energy", str(water_file), "--npz", str(path), "--json", str(water_file.parent / "w.json"))
    assert code == 0, err
    record = json.loads((water_file.parent / "w.json").read_text())
    with np.load(path, allow_pickle=False) as data:
        arrays = {k: data[k] for k in data.files}
    nbf = 7
    for key in ("overlap", "kinetic", "nuclear_attraction", "core_hamiltonian", "density", "fock"):
        assert arrays[key].shape == (nbf, nbf) and arrays[key].dtype == np.float64
    assert arrays["eri"].shape == (nbf,) * 4
    assert arrays["coordinates"].shape == (3, 3)
    assert arrays["atomic_numbers"].tolist() == [8, 1, 1]
    mol = reference_mole(read_xyz(water_file), family_shells(read_xyz(water_file), "sto-3g"), spherical=False)
    # source: reference library run (PySCF integrals and RHF density), same shells and geometry
    np.testing.assert_allclose(arrays["overlap"], mol.intor("int1e_ovlp"), rtol=0, atol=1e-10)
    np.testing.assert_allclose(arrays["kinetic"], mol.intor("int1e_kin"), rtol=0, atol=1e-10)
    np.testing.assert_allclose(arrays["nuclear_attraction"], mol.intor("int1e_nuc"), rtol=0, atol=1e-10)
    np.testing.assert_allclose(arrays["core_hamiltonian"], mol.intor("int1e_kin") + mol.intor("int1e_nuc"), rtol=0, atol=1e-10)
    np.testing.assert_allclose(arrays["density"], reference_rhf(mol).make_rdm1(), rtol=0, atol=1e-6)
    np.testing.assert_allclose(arrays["coordinates"], record["molecule"]["coordinates_bohr"], rtol=0, atol=0)
    assert float(arrays["energy_total"]) == record["energy"]["total"]
    # source: exact property — the energy is recovered from the saved arrays:
    # E = ½ tr D H + ½ tr D F + E_nuc, with F = H + J - ½K from the dense ERI
    d, h, eri = arrays["density"], arrays["core_hamiltonian"], arrays["eri"]
    f = h + np.einsum("ijkl,kl->ij", eri, d) - 0.5 * np.einsum("ikjl,kl->ij", eri, d)
    energy = 0.5 * np.sum(d * (h + f)) + record["energy"]["nuclear_repulsion"]
    assert energy == pytest.approx(record["energy"]["total"], abs=1e-8)


def test_npz_leaves_out_the_eri_tensor_above_the_size_limit(water_file):
    import hfcore

    mol = hfcore.read_xyz(water_file)
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"))
    assert "eri" in export.result_arrays(result)
    assert "eri" not in export.result_arrays(result, eri_max_functions=6)


def test_outputs_replace_existing_files_whole(water_file):
    target = water_file.parent / "w.json"
    target.write_text("old content that is longer than nothing\n" * 1000)
    code, _, _ = run_main("energy", str(water_file), "--json", str(target), "--quiet")
    assert code == 0
    json.loads(target.read_text())
    assert only_inputs_left(water_file.parent, water_file.name, "w.json")


def test_outputs_get_the_permissions_of_any_new_file(water_file):
    previous = os.umask(0o027)
    try:
        code, _, err = run_main("energy", str(water_file), "--json", str(water_file.parent / "w.json"), "--npz", str(water_file.parent / "w.npz"))
    finally:
        os.umask(previous)
    assert code == 0, err
    for name in ("w.json", "w.npz"):
        # common practice: a new file gets 0666 less the umask, not a temporary file's private 0600
        assert (water_file.parent / name).stat().st_mode & 0o777 == 0o640


def test_staging_failure_writes_no_file_at_all(tmp_path):
    files = {str(tmp_path / "a.json"): b"{}", str(tmp_path / "missing" / "b.npz"): b"x"}
    with pytest.raises(InputError, match="b.npz: cannot write"):
        export.write_files_atomically(files)
    assert only_inputs_left(tmp_path)


def test_json_and_npz_to_the_same_path_is_refused(water_file):
    code, out, err = run_main("energy", str(water_file), "--json", "x.out", "--npz", "x.out")
    assert code == 2 and "given for two outputs" in err and out == ""


def test_json_mode_sends_errors_to_stderr_only(tmp_path):
    (tmp_path / "mol.xyz").write_text("2\n\nH 0 0 0\nH 0 0 0.05\n")
    code, out, err = run_main("energy", str(tmp_path / "mol.xyz"), "--json", "-")
    assert code == 2 and out == "" and err.startswith("hfcore: error: ")


def test_fit_sto_json_to_stdout(tmp_path):
    proc = hfcore_process("fit-sto", "--shell", "1s", "--gaussians", "3", "--json", "-", cwd=tmp_path)
    assert proc.returncode == 0 and proc.stderr == ""
    fit = json.loads(proc.stdout)["fit"]
    assert fit["shell"] == "1s" and fit["n_gaussians"] == 3 and fit["zeta"] == 1.0
    # source: Szabo & Ostlund, Modern Quantum Chemistry (1996), ch. 3, STO-3G fit to a zeta = 1 Slater 1s (from memory)
    np.testing.assert_allclose(fit["exponents"], [2.227660, 0.405771, 0.109818], rtol=1e-5)
    np.testing.assert_allclose(fit["coefficients"]["s"], [0.154329, 0.535328, 0.444635], rtol=1e-5)
    # source: exact property — two different unit functions overlap by less than 1 (Cauchy–Schwarz)
    assert 0.99 < fit["overlaps"]["s"] < 1.0


def test_fit_sto_zeta_scales_the_published_exponents():
    code, out, _ = run_main("fit-sto", "--shell", "2sp", "--gaussians", "3", "--zeta", "2", "--json", "-")
    assert code == 0
    fit = json.loads(out)["fit"]
    # source: Hehre, Stewart & Pople, J. Chem. Phys. 51, 2657 (1969), STO-3G 2sp at zeta = 1 (from memory);
    # exponents scale as zeta**2 and coefficients not at all (exact property)
    np.testing.assert_allclose(fit["exponents"], 4 * np.array([0.994203, 0.231031, 0.0751386]), rtol=1e-5)
    np.testing.assert_allclose(fit["coefficients"]["s"], [-0.0999672, 0.399513, 0.700115], rtol=1e-5)
    np.testing.assert_allclose(fit["coefficients"]["p"], [0.155916, 0.607684, 0.391957], rtol=1e-5)


def test_fit_sto_human_report_lists_both_expansions():
    code, out, _ = run_main("fit-sto", "--shell", "2sp", "--gaussians", "3")
    assert code == 0
    assert "d(s)" in out and "d(p)" in out
    assert "overlap with the Slater s function" in out and "overlap with the Slater p function" in out


def test_fit_sto_plot_writes_a_png(tmp_path):
    png = tmp_path / "fit.png"
    code, out, err = run_main("fit-sto", "--shell", "1s", "--gaussians", "2", "--plot", str(png))
    assert code == 0, err
    assert_valid_png(png)
    assert only_inputs_left(tmp_path, "fit.png")


def test_plot_failure_leaves_no_json_behind(monkeypatch, tmp_path):
    import hfcore.plots

    def no_matplotlib(*args, **kwargs):
        raise InputError("plotting needs matplotlib")

    monkeypatch.setattr(hfcore.plots, "plot_sto_fit", no_matplotlib)
    code, out, err = run_main(
        "fit-sto", "--shell", "1s", "--gaussians", "2", "--json", str(tmp_path / "f.json"), "--plot", str(tmp_path / "f.png")
    )
    assert code == 2 and out == "" and err.startswith("hfcore: error: plotting needs matplotlib")
    assert only_inputs_left(tmp_path)


def test_bases_lists_shipped_and_fitted_sets():
    code, out, _ = run_main("bases")
    assert code == 0
    for name in ("cc-pVDZ", "6-31G*", "def2-SVP", "STO-3G", "STO-6G"):
        assert name in out


def test_compare_json_rows_and_table(tmp_path):
    (tmp_path / "h2.xyz").write_text("2\nH2\nH 0 0 0\nH 0 0 0.74\n")
    proc = hfcore_process("compare", "h2.xyz", "--basis", "sto-3g,cc-pvdz,cc-pvtz", "--json", "-", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    comparison = json.loads(proc.stdout)["comparison"]
    rows = comparison["rows"]
    assert [r["basis"] for r in rows] == ["sto-3g", "cc-pvdz", "cc-pvtz"]
    for key in ("n_functions", "spherical", "energy_total", "delta_mEh", "delta_kcal_mol", "iterations", "wall_time", "converged"):
        assert key in rows[0]
    assert rows[-1]["delta_mEh"] == 0.0
    # source: common practice — for H2 each step up STO-3G -> cc-pVDZ -> cc-pVTZ lowers the RHF energy
    # (the sets are not strictly nested, so this is not the variational principle itself)
    assert rows[0]["energy_total"] > rows[1]["energy_total"] > rows[2]["energy_total"]
    assert len(comparison["estimates"]) >= 1
    code, out, err = run_main("compare", str(tmp_path / "h2.xyz"), "--basis", "sto-3g,cc-pvdz,cc-pvtz")
    assert code == 0
    assert "Basis comparison" in out and "Basis-limit estimates" in out
    assert err.count("hfcore: ") == 3  # one progress line per basis, on stderr


def test_version_flag(tmp_path):
    proc = hfcore_process("--version", cwd=tmp_path)
    assert proc.returncode == 0 and proc.stdout.startswith("hfcore ")


def test_numpy_out_of_memory_exits_5_with_one_line(monkeypatch, water_file):
    import hfcore.runs as runs

    def exhausted(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr(runs, "read_molecule", exhausted)
    code, out, err = run_main("energy", str(water_file))
    assert code == 5 and out == ""
    assert err.startswith("hfcore: error: not enough memory") and err.count("\n") == 1


class _ClosedPipe(io.StringIO):
    def write(self, text: str) -> int:
        raise BrokenPipeError(32, "Broken pipe")


def test_reader_that_goes_away_ends_the_run_quietly_with_141(water_file):
    err = io.StringIO()
    code = main(["energy", str(water_file)], stdout=_ClosedPipe(), stderr=err)
    # common practice: 128 + SIGPIPE, and no message, as for a pipeline member killed by the signal
    assert code == 141 and err.getvalue() == ""


def test_interrupt_exits_130_with_one_line(monkeypatch, water_file):
    import hfcore.runs as runs

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(runs, "read_molecule", interrupted)
    code, out, err = run_main("energy", str(water_file))
    assert code == 130 and out == "" and err == "hfcore: interrupted\n"
    assert os.path.exists(water_file)
