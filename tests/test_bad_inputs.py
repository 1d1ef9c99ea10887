"""A named list of bad and odd inputs, each run through the command line, each with what it gets.

Accepted forms (README, "Input rules") must give the molecule they spell;
refused ones exit with the documented code, print one line
``hfcore: error: ...`` holding the named fragment, and write no file.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import assert_one_line_error, cli_result, only_inputs_left

#: The bohr radius in ångström, CODATA 2018 (from memory); CODATA 2022 differs by 7e-10 relative.
BOHR_ANGSTROM = 0.529177210903

H2 = "2\nhydrogen\nH 0 0 0\nH 0 0 0.74\n"
H2_BOHR = [[0.0, 0.0, 0.0], [0.0, 0.0, 0.74 / BOHR_ANGSTROM]]


def basis_document(elements: dict) -> bytes:
    return json.dumps({"format": "hfcore-basis/1", "name": "mine", "elements": elements}).encode()


#: One s shell per element: STO-3G's hydrogen 1s (Hehre, Stewart & Pople 1969, from memory), enough for H2.
H_SHELL = {"l": 0, "exponents": ["3.42525091", "0.62391373", "0.16885540"], "coefficients": [["0.15432897", "0.53532814", "0.44463454"]]}


def shell(l, exponents, coefficients):
    return {"l": l, "exponents": exponents, "coefficients": coefficients}


# (id, files {name: bytes, or None for a directory}, extra arguments, exit code, message fragment)
# Geometry files are read from mol.xyz unless the arguments name another.
REFUSED = [
    ("binary data", {"mol.xyz": b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x01"}, [], 2, "not a text file"),
    ("latin-1 text", {"mol.xyz": "2\nwasser, ü\nH 0 0 0\nH 0 0 0.74\n".encode("latin-1")}, [], 2, "cannot decode as UTF-8"),
    ("empty file", {"mol.xyz": b""}, [], 2, "mol.xyz:1: the file is empty"),
    ("only blank lines", {"mol.xyz": b"\n  \n\t\n"}, [], 2, "mol.xyz:1: the file is empty"),
    ("zero atoms", {"mol.xyz": b"0\nnothing\n"}, [], 2, "mol.xyz:1: the atom count must be positive, found 0"),
    ("negative count", {"mol.xyz": b"-2\n\nH 0 0 0\nH 0 0 0.74\n"}, [], 2, "the atom count must be positive"),
    ("huge count", {"mol.xyz": b"100000000000000000000\n\nH 0 0 0\nH 0 0 0.74\n"}, [], 2,
     "the count line says 100000000000000000000 atoms but 2 atom lines follow"),
    ("count not a whole number", {"mol.xyz": b"2.0\n\nH 0 0 0\nH 0 0 0.74\n"}, [], 2, "expected the number of atoms, found '2.0'"),
    ("NaN coordinate", {"mol.xyz": b"2\n\nH 0 0 0\nH NaN 0 0.74\n"}, [], 2, "mol.xyz:4: the x coordinate 'NaN' is not a finite number"),
    ("infinite coordinate", {"mol.xyz": b"2\n\nH 0 0 0\nH 0 -inf 0.74\n"}, [], 2, "the y coordinate '-inf' is not a finite number"),
    ("coordinate overflowing to infinity", {"mol.xyz": b"2\n\nH 0 0 0\nH 0 0 1e400\n"}, [], 2, "the z coordinate '1e400' is not a finite number"),
    ("coordinate of 1e200", {"mol.xyz": b"3\n\nO 0 0 1e200\nH 0 0.75 -0.5\nH 0 -0.75 -0.5\n"}, [], 2,
     "mol.xyz:3: the z coordinate 1e200 is out of range; every coordinate must be at most 10000 Å"),
    ("coordinate just beyond 1e4 Å", {"mol.xyz": b"2\n\nH 0 0 -10000.0001\nH 0 0 -9999.3\n"}, [], 2, "out of range"),
    ("coordinate beyond 1e4 Å in bohr units", {"mol.xyz": b"2\n\nH 0 0 0\nH 0 0 20000\n"}, ["--units", "bohr"], 2, "out of range"),
    ("charged symbol O-", {"mol.xyz": b"2\nhydroxide\nO- 0 0 0\nH 0 0 0.97\n"}, ["--charge", "-1"], 2,
     "unknown element 'O-': write the bare symbol 'O' (the charge comes from --charge)"),
    ("dummy atom X", {"mol.xyz": b"3\n\nX 0 0 1\nH 0 0 0\nH 0 0 0.74\n"}, [], 2, "mol.xyz:3: 'X' is a dummy atom"),
    ("unknown symbol", {"mol.xyz": b"2\n\nH 0 0 0\nQq 0 0 0.74\n"}, [], 2, "mol.xyz:4: unknown element 'Qq'"),
    ("atomic number 0", {"mol.xyz": b"2\n\nH 0 0 0\n0 0 0 0.74\n"}, [], 2, "unknown element '0'"),
    ("superscript digit as atomic number", {"mol.xyz": "2\n\nH 0 0 0\n² 0 0 0.74\n".encode()}, [], 2, "unknown element '²'"),
    ("too few columns", {"mol.xyz": b"2\n\nH 0 0 0\nH 0 0.74\n"}, [], 2, "mol.xyz:4: expected 'symbol x y z'"),
    ("blank line among atoms", {"mol.xyz": b"2\n\nH 0 0 0\n\nH 0 0 0.74\n"}, [], 2, "mol.xyz:4: blank line among the atom lines"),
    ("atoms on top of each other", {"mol.xyz": b"2\n\nH 0 0 0\nH 0 0 0\n"}, [], 2, "atoms closer than 0.1 Å are not allowed"),
    ("a directory given as the geometry", {"mol.xyz": None}, [], 2, "mol.xyz: is a directory, not a geometry file"),
    ("missing geometry file", {}, [], 2, "mol.xyz: no such file"),
    ("charge not a whole number", {"mol.xyz": H2.encode()}, ["--charge", "1.5"], 2, "the charge must be a whole number"),
    ("multiplicity of the wrong parity", {"mol.xyz": H2.encode()}, ["--charge", "1", "--multiplicity", "1"], 2,
     "multiplicity 1 does not fit 1 electrons"),
    ("more unpaired electrons than electrons", {"mol.xyz": H2.encode()}, ["--multiplicity", "5"], 2,
     "multiplicity 5 needs 4 unpaired electrons but the molecule has 2"),
    ("a multiplicity of zero", {"mol.xyz": H2.encode()}, ["--multiplicity", "0"], 2, "multiplicity"),
    ("MP2 on ROHF", {"mol.xyz": H2.encode()}, ["--charge", "1", "--rohf", "--mp2"], 2, "MP2 on an ROHF reference"),
    ("charge leaving no electrons", {"mol.xyz": H2.encode()}, ["--charge", "2"], 2, "leaves 0 electrons"),
    ("NaN threshold", {"mol.xyz": H2.encode()}, ["--lindep-threshold", "nan"], 2, "must be a positive finite number"),
    ("infinite energy tolerance", {"mol.xyz": H2.encode()}, ["--energy-tol", "inf"], 2, "must be a positive finite number"),
    ("unknown length unit", {"mol.xyz": H2.encode()}, ["--units", "parsec"], 2, "invalid choice: 'parsec'"),
    ("more electrons than functions", {"mol.xyz": H2.encode()}, ["--basis", "sto-3g", "--charge", "-4"], 3,
     "6 electrons need 3 orbitals but basis STO-3G has only 2 functions"),
    ("Slater exponent of 1e200", {"mol.xyz": H2.encode()}, ["--zeta", "H=1e200"], 2, "the exponent must be positive and at most 1000"),
    # basis files (--basis-file b.json)
    ("basis: element missing", {"mol.xyz": b"2\n\nO 0 0 0\nH 0 0 0.97\n", "b.json": basis_document({"H": [H_SHELL]})},
     ["--basis-file", "b.json", "--charge", "-1"], 3, "mol.xyz:3: basis mine does not cover element O"),
    ("basis: empty shell list", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": []})}, ["--basis-file", "b.json"], 3,
     "the shell list must be a non-empty list"),
    ("basis: negative exponent", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [shell(0, ["-1.2"], [["1"]])]})},
     ["--basis-file", "b.json"], 3, "b.json: H shell 1: exponent -1.2 is not positive"),
    ("basis: NaN exponent", {"mol.xyz": H2.encode(), "b.json": b'{"elements": {"H": [{"l": 0, "exponents": [NaN], "coefficients": [[1]]}]}}'},
     ["--basis-file", "b.json"], 3, "exponent nan is not finite"),
    ("basis: exponent overflowing to infinity", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [shell(0, ["1e400"], [["1"]])]})},
     ["--basis-file", "b.json"], 3, "exponent '1e400' is not finite"),
    ("basis: huge exponent", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [shell(0, ["1e13"], [["1"]])]})},
     ["--basis-file", "b.json"], 3, "H shell 1: exponent 1e+13 is outside the accepted range 1e-08 to 1e+10"),
    ("basis: huge integer exponent", {"mol.xyz": H2.encode(), "b.json": b'{"elements": {"H": [{"l": 0, "exponents": [1' + b"0" * 400 + b'], "coefficients": [[1]]}]}}'},
     ["--basis-file", "b.json"], 3, "is not a number"),
    ("basis: infinite coefficient", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [shell(0, ["1.0"], [["-Infinity"]])]})},
     ["--basis-file", "b.json"], 3, "coefficient '-Infinity' is not finite"),
    ("basis: angular momentum beyond h", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [H_SHELL, shell(6, ["1.0"], [["1"]])]})},
     ["--basis-file", "b.json"], 3, "angular momentum 6 is not supported (s..h)"),
    ("basis: h shell with a negative exponent", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [H_SHELL, shell(5, ["1.0", "-0.5"], [["1", "1"]])]})},
     ["--basis-file", "b.json"], 3, "b.json: H shell 2: exponent -0.5 is not positive"),
    ("basis: h shell with too few coefficients", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [H_SHELL, shell(5, ["1.0", "0.5"], [["1"]])]})},
     ["--basis-file", "b.json"], 3, "b.json: H shell 2: 2 exponents but 1 coefficients in contraction 1"),
    ("basis: cancelling contraction", {"mol.xyz": H2.encode(), "b.json": basis_document({"H": [shell(0, ["1.0", "1.0"], [["1", "-1"]])]})},
     ["--basis-file", "b.json"], 3, "contraction 1 has zero norm"),
    ("basis: binary file", {"mol.xyz": H2.encode(), "b.json": b"\xff\xfe\x00{"}, ["--basis-file", "b.json"], 3, "b.json: not a text file"),
    ("basis: deeply nested JSON", {"mol.xyz": H2.encode(), "b.json": b"[" * 100_000 + b"]" * 100_000}, ["--basis-file", "b.json"], 3,
     "nested too deeply"),
    ("basis: a directory", {"mol.xyz": H2.encode(), "b.json": None}, ["--basis-file", "b.json"], 3, "b.json: cannot read basis file"),
    ("basis: not JSON", {"mol.xyz": H2.encode(), "b.json": b"H 0\n 3 1.00\n 3.425 0.154\n"}, ["--basis-file", "b.json"], 3,
     "b.json:1: invalid JSON"),
]


def _materialise(tmp_path, files):
    for name, content in files.items():
        if content is None:
            (tmp_path / name).mkdir()
        else:
            (tmp_path / name).write_bytes(content)


@pytest.mark.parametrize(("files", "args", "code", "fragment"), [c[1:] for c in REFUSED], ids=[c[0] for c in REFUSED])
def test_refused_input_exits_with_its_code_and_one_line(tmp_path, files, args, code, fragment):
    _materialise(tmp_path, files)
    proc = cli_result("energy", "mol.xyz", *args, "--json", "out.json", "--quiet", cwd=tmp_path)
    assert_one_line_error(proc, code, fragment)
    assert only_inputs_left(tmp_path, *files)


# (id, geometry file bytes, extra arguments, symbols, coordinates in bohr); every accepted form spells H2 at 0.74 Å.
ACCEPTED = [
    ("byte-order mark", b"\xef\xbb\xbf" + H2.encode(), [], ["H", "H"], H2_BOHR),
    ("CRLF line ends", H2.replace("\n", "\r\n").encode(), [], ["H", "H"], H2_BOHR),
    ("CR line ends", H2.replace("\n", "\r").encode(), [], ["H", "H"], H2_BOHR),
    ("tabs between fields", b"2\nhydrogen\nH\t0\t0\t0\nH\t0.0\t0.0\t0.74\n", [], ["H", "H"], H2_BOHR),
    ("Fortran D exponents", b"2\nhydrogen\nH 0.0D+00 0.0D+00 0.0D+00\nH 0.0d0 0.0d0 7.4D-01\n", [], ["H", "H"], H2_BOHR),
    ("lower and upper case symbols", b"2\n\nh 0 0 0\nH 0 0 0.74\n", [], ["H", "H"], H2_BOHR),
    ("atomic numbers for symbols", b"2\n\n1 0 0 0\n1 0 0 0.74\n", [], ["H", "H"], H2_BOHR),
    ("extra columns and trailing blank lines", b"2\n\nH 0 0 0 0.1 label\nH 0 0 0.74 -0.2\n\n\n", [], ["H", "H"], H2_BOHR),
    ("no final newline", H2.rstrip("\n").encode(), [], ["H", "H"], H2_BOHR),
    ("bohr units", b"2\n\nH 0 0 0\nH 0 0 1.4\n", ["--units", "bohr"], ["H", "H"], [[0, 0, 0], [0, 0, 1.4]]),
    ("coordinate at the 1e4 Å limit", b"2\n\nH 0 0 -10000\nH 0 0 -9999.26\n", [], ["H", "H"],
     [[0, 0, -10000 / BOHR_ANGSTROM], [0, 0, -9999.26 / BOHR_ANGSTROM]]),
]


@pytest.mark.parametrize(("data", "args", "symbols", "bohr"), [c[1:] for c in ACCEPTED], ids=[c[0] for c in ACCEPTED])
def test_accepted_form_gives_the_molecule_it_spells(tmp_path, data, args, symbols, bohr):
    (tmp_path / "mol.xyz").write_bytes(data)
    proc = cli_result("energy", "mol.xyz", "--basis", "sto-3g", *args, "--json", "-", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    record = json.loads(proc.stdout)
    assert record["molecule"]["symbols"] == symbols
    np.testing.assert_allclose(record["molecule"]["coordinates_bohr"], bohr, rtol=1e-8, atol=1e-12)
    assert record["scf"]["converged"] is True


def test_basis_left_too_small_by_linear_dependence_is_refused_after_the_overlap(tmp_path):
    # Two s functions with exponents 1 and 1.0000001 overlap by 1 - 2e-15 (exact property of
    # normalised Gaussians, S = (2 sqrt(ab) / (a + b))^(3/2)): one combination is dropped, so
    # beryllium's two occupied orbitals do not fit. Found only once S is known, so the
    # molecule and basis sections of the report may precede the error line.
    (tmp_path / "mol.xyz").write_text("1\nberyllium\nBe 0 0 0\n")
    (tmp_path / "b.json").write_bytes(basis_document({"Be": [shell(0, ["1.0"], [["1"]]), shell(0, ["1.0000001"], [["1"]])]}))
    proc = cli_result("energy", "mol.xyz", "--basis-file", "b.json", "--json", "out.json", cwd=tmp_path)
    assert proc.returncode == 3
    assert proc.stderr.splitlines() == [
        "hfcore: error: 4 electrons need 2 orbitals but the basis leaves only 1 after dropping 1 near-linearly "
        "dependent combinations (overlap eigenvalues below 1e-07)"
    ]
    assert only_inputs_left(tmp_path, "mol.xyz", "b.json")


def test_basis_file_with_a_byte_order_mark_is_accepted(tmp_path):
    (tmp_path / "mol.xyz").write_text(H2)
    (tmp_path / "b.json").write_bytes(b"\xef\xbb\xbf" + basis_document({"H": [H_SHELL]}))
    proc = cli_result("energy", "mol.xyz", "--basis-file", "b.json", "--json", "-", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    record = json.loads(proc.stdout)
    # source: common practice — one contracted s function per hydrogen
    assert record["basis"]["name"] == "mine" and record["basis"]["n_functions"] == 2


def test_the_1e200_coordinate_is_refused_by_the_real_process(tmp_path):
    # The case that escaped before (issue 8): numpy overflow warnings, then a LinAlgError traceback.
    (tmp_path / "mol.xyz").write_text("3\n\nO 0 0 1e200\nH 0 0.75 -0.5\nH 0 -0.75 -0.5\n")
    proc = cli_result("energy", "mol.xyz", "--json", "out.json", cwd=tmp_path, via="process")
    assert_one_line_error(proc, 2, "out of range")
    assert "Warning" not in proc.stderr
    assert only_inputs_left(tmp_path, "mol.xyz")


@pytest.mark.parametrize(
    "failure",
    [
        pytest.param(lambda: np.exp(np.array([1000.0])), id="overflow warning"),
        pytest.param(lambda: np.array([0.0]) / np.array([0.0]), id="invalid value warning"),
        pytest.param(lambda: np.linalg.cholesky(-np.eye(2)), id="linear algebra failure"),
    ],
)
def test_a_floating_point_problem_past_validation_is_one_line_with_exit_6(monkeypatch, water_file, failure):
    import hfcore.runs as runs

    def broken(*args, **kwargs):
        failure()
        raise AssertionError("the floating-point problem should have stopped the run")

    monkeypatch.setattr(runs, "read_molecule", broken)
    proc = cli_result("energy", water_file.name, "--json", "out.json", cwd=water_file.parent)
    assert_one_line_error(proc, 6, "numerical failure")
    assert only_inputs_left(water_file.parent, water_file.name)
