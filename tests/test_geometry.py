"""The XYZ reader: what it accepts, how it converts units, and how it rejects bad input."""

from __future__ import annotations

import re

import numpy as np
import pytest
from conftest import INPUTS

from hfcore.errors import InputError
from hfcore.geometry import ANGSTROM_IN_BOHR, BOHR_IN_ANGSTROM, Molecule, parse_xyz, read_xyz

WATER = """3
water, neutral
O   0.000000   0.000000   0.117300
H   0.000000   0.757200  -0.469200
H   0.000000  -0.757200  -0.469200
"""


def write(tmp_path, text, name="mol.xyz"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def error_of(tmp_path, text, **kwargs) -> str:
    path = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        read_xyz(path, **kwargs)
    return str(info.value)


# --- what a good file gives ---------------------------------------------------


def test_reads_symbols_numbers_comment_and_charge(tmp_path):
    mol = read_xyz(write(tmp_path, WATER), charge=0)
    assert mol.symbols == ["O", "H", "H"]
    assert mol.atomic_numbers.tolist() == [8, 1, 1]
    assert mol.comment == "water, neutral"
    assert mol.n_electrons == 10
    assert mol.source.endswith("mol.xyz")


def test_coordinates_are_stored_in_bohr_float64_c_ordered(tmp_path):
    mol = read_xyz(write(tmp_path, WATER))
    assert mol.coordinates.dtype == np.float64 and mol.coordinates.flags.c_contiguous
    assert mol.coordinates.shape == (3, 3)
    # source: from memory — CODATA 2018 Bohr radius 0.529177210903 Å (CODATA 2022 differs by 7e-10 relative)
    assert mol.coordinates[1, 1] == pytest.approx(0.7572 / 0.529177210903, rel=2e-9)


def test_conversion_factors_are_codata_reciprocals():
    # source: common practice — CODATA Bohr radius 0.529177210903(80) Å (CODATA 2018) via scipy.constants
    assert BOHR_IN_ANGSTROM == pytest.approx(0.529177210903, rel=1e-9)
    assert ANGSTROM_IN_BOHR == pytest.approx(1.0 / 0.529177210903, rel=1e-9)


def test_bohr_units_are_taken_as_is(tmp_path):
    mol = read_xyz(write(tmp_path, "2\nH2\nH 0 0 0\nH 0 0 1.4\n"), units="bohr")
    assert mol.coordinates[1, 2] == 1.4


def test_angstrom_and_bohr_files_give_the_same_molecule(tmp_path):
    ang = read_xyz(write(tmp_path, WATER, "a.xyz"))
    lines = WATER.splitlines()
    body = []
    for line in lines[2:]:
        sym, *xyz = line.split()
        # source: from memory — CODATA 2018 Bohr radius 0.529177210903 Å, not the factor hfcore uses
        body.append(sym + " " + " ".join(repr(float(v) / 0.529177210903) for v in xyz))
    bohr = read_xyz(write(tmp_path, "\n".join(lines[:2] + body) + "\n", "b.xyz"), units="bohr")
    np.testing.assert_allclose(bohr.coordinates, ang.coordinates, rtol=2e-9, atol=1e-12)


def test_symbols_in_any_case_and_atomic_numbers_are_accepted(tmp_path):
    mol = read_xyz(write(tmp_path, "3\n\ncl 0 0 0\nNA 0 0 3\n1 0 0 -1.3\n"))
    assert mol.atomic_numbers.tolist() == [17, 11, 1]


def test_extra_columns_and_trailing_blank_lines_are_allowed(tmp_path):
    mol = read_xyz(write(tmp_path, "2\n\nH 0 0 0 0.1 extra\nH 0 0 0.74\n\n\n"))
    assert mol.n_atoms == 2


def test_fortran_exponent_letters_are_read(tmp_path):
    mol = read_xyz(write(tmp_path, "2\n\nH 0 0 0\nH 0 0 7.4D-1\n"))
    assert mol.coordinates_angstrom()[1, 2] == pytest.approx(0.74, rel=1e-14)


def test_byte_order_mark_and_windows_line_ends_are_accepted(tmp_path):
    path = tmp_path / "mol.xyz"
    path.write_bytes(b"\xef\xbb\xbf2\r\nH2\r\nH 0 0 0\r\nH 0 0 0.74\r\n")
    mol = read_xyz(path)
    assert mol.n_atoms == 2 and mol.comment == "H2"


def test_charge_changes_electron_count_only(tmp_path):
    mol = read_xyz(write(tmp_path, "5\nammonium\nN 0 0 0\nH 0.59 0.59 0.59\nH -0.59 -0.59 0.59\nH -0.59 0.59 -0.59\nH 0.59 -0.59 -0.59\n"), charge=1)
    assert mol.charge == 1 and mol.n_electrons == 10
    mol.require_closed_shell()


def test_comment_line_never_sets_the_charge(tmp_path):
    mol = read_xyz(write(tmp_path, "2\ncharge=-1\nO 0 0 0\nH 0 0 0.96\n"))
    assert mol.charge == 0


def test_nuclear_repulsion_of_h2_at_1p4_bohr(tmp_path):
    mol = read_xyz(write(tmp_path, "2\n\nH 0 0 0\nH 0 0 1.4\n"), units="bohr")
    # source: exact property — Z_A Z_B / R = 1 / 1.4 hartree
    assert mol.nuclear_repulsion() == pytest.approx(1 / 1.4, rel=1e-15)


def test_line_of_reports_file_lines(tmp_path):
    mol = read_xyz(write(tmp_path, WATER))
    assert [mol.line_of(k) for k in range(3)] == [3, 4, 5]


def test_molecule_arrays_are_read_only(tmp_path):
    mol = read_xyz(write(tmp_path, WATER))
    with pytest.raises(ValueError):
        mol.coordinates[0, 0] = 1.0


def test_shipped_demo_inputs_parse(tmp_path):
    files = sorted(INPUTS.glob("*.xyz"))
    assert len(files) >= 20
    # The open-shell demo species (inputs/README.md) with their ground-state multiplicities.
    open_shells = {"h.xyz": 2, "c.xyz": 3, "n.xyz": 4, "o.xyz": 3, "f.xyz": 2, "oh.xyz": 2, "nh2.xyz": 2,
                   "ch3.xyz": 2, "o2.xyz": 3, "ch2.xyz": 3}
    for path in files:
        charge = {"ammonium.xyz": 1, "hydroxide.xyz": -1}.get(path.name, 0)
        if path.name in open_shells:
            assert read_xyz(path, multiplicity=open_shells[path.name]).spin_multiplicity == open_shells[path.name]
            continue
        read_xyz(path, charge=charge).require_closed_shell()


# --- every bad input raises InputError naming file and line ----------------------


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.xyz: no such file"):
        read_xyz(tmp_path / "nothere.xyz")


def test_directory_instead_of_file(tmp_path):
    with pytest.raises(InputError, match="is a directory"):
        read_xyz(tmp_path)


@pytest.mark.parametrize("text", ["", "\n\n  \n"])
def test_empty_file(tmp_path, text):
    assert re.search(r"mol\.xyz:1: the file is empty", error_of(tmp_path, text))


@pytest.mark.parametrize("head", ["three", "2.5", "2 atoms", "H 0 0 0"])
def test_count_line_not_an_integer(tmp_path, head):
    message = error_of(tmp_path, f"{head}\n\nH 0 0 0\nH 0 0 0.74\n")
    assert re.search(r"mol\.xyz:1: expected the number of atoms", message)


@pytest.mark.parametrize("count", ["0", "-2"])
def test_count_must_be_positive(tmp_path, count):
    assert "mol.xyz:1: the atom count must be positive" in error_of(tmp_path, f"{count}\n\nH 0 0 0\n")


@pytest.mark.parametrize("count", [1, 3])
def test_count_not_matching_the_atoms(tmp_path, count):
    message = error_of(tmp_path, f"{count}\n\nH 0 0 0\nH 0 0 0.74\n")
    assert f"mol.xyz:1: the count line says {count} atoms but 2 atom lines follow" in message


def test_blank_line_among_atoms(tmp_path):
    assert "mol.xyz:4: blank line among the atom lines" in error_of(tmp_path, "2\n\nH 0 0 0\n\nH 0 0 0.74\n")


def test_too_few_columns(tmp_path):
    assert "mol.xyz:4: expected 'symbol x y z'" in error_of(tmp_path, "2\n\nH 0 0 0\nH 0 0.74\n")


@pytest.mark.parametrize("symbol", ["Xx", "Q", "0", "200", "H1"])
def test_unknown_element(tmp_path, symbol):
    assert f"mol.xyz:4: unknown element {symbol!r}" in error_of(tmp_path, f"2\n\nH 0 0 0\n{symbol} 0 0 0.74\n")


@pytest.mark.parametrize("token", ["nan", "inf", "-Infinity", "1e999", "0.7.4", "abc"])
def test_coordinate_not_a_finite_number(tmp_path, token):
    message = error_of(tmp_path, f"2\n\nH 0 0 0\nH 0 {token} 0.74\n")
    assert f"mol.xyz:4: the y coordinate {token!r} is not a finite number" in message


def test_atoms_closer_than_a_tenth_of_an_angstrom(tmp_path):
    message = error_of(tmp_path, "3\n\nO 0 0 0\nH 0 0 0.96\nH 0 0.05 0.96\n")
    assert "mol.xyz:5: atom 3 is 0.05 Å from atom 2 (line 4)" in message


def test_close_atoms_judged_in_angstrom_for_bohr_input(tmp_path):
    # 0.15 bohr is 0.079 Å: too close, although the number is above 0.1
    message = error_of(tmp_path, "2\n\nH 0 0 0\nH 0 0 0.15\n", units="bohr")
    assert "mol.xyz:4: atom 2 is 0.0794 Å from atom 1" in message


def test_unknown_units():
    with pytest.raises(InputError, match="unknown length unit 'nm'"):
        parse_xyz("1\n\nH 0 0 0\n", units="nm")


def test_not_utf8(tmp_path):
    path = tmp_path / "mol.xyz"
    path.write_bytes(b"1\n\xff\xfe\nH 0 0 0\n")
    with pytest.raises(InputError, match="not a text file"):
        read_xyz(path)


@pytest.mark.parametrize(
    ("charge", "suggest"),
    [(0, "try --charge 1 or --charge -1"), (2, "try --charge 3 or --charge 1")],
)
def test_odd_electron_count_needs_a_closed_shell(tmp_path, charge, suggest):
    mol = read_xyz(write(tmp_path, "2\nOH\nO 0 0 0\nH 0 0 0.97\n"), charge=charge)
    with pytest.raises(InputError) as info:
        mol.require_closed_shell()
    message = str(info.value)
    assert "RHF needs an even number" in message and "closed shell" in message and suggest in message


def test_no_electrons_left(tmp_path):
    mol = read_xyz(write(tmp_path, "1\n\nH 0 0 0\n"), charge=1)
    with pytest.raises(InputError, match="leaves 0 electrons"):
        mol.require_closed_shell()


def test_molecule_rejects_mismatched_arrays():
    with pytest.raises(InputError, match="2 atomic numbers but 1 positions"):
        Molecule(np.array([1, 1]), np.zeros((1, 3)))


# --- multiplicity (open shells) -------------------------------------------------


def test_default_multiplicity_is_singlet_for_even_and_doublet_for_odd_counts():
    # common practice: the lowest multiplicity the electron count allows
    from hfcore.geometry import Molecule

    water = Molecule(np.array([8, 1, 1]), np.array([[0.0, 0, 0], [0, 1.4, 1.1], [0, -1.4, 1.1]]))
    assert water.spin_multiplicity == 1 and (water.n_alpha, water.n_beta) == (5, 5)
    cation = water.with_charge(1)
    assert cation.spin_multiplicity == 2 and (cation.n_alpha, cation.n_beta) == (5, 4)


def test_a_triplet_has_two_more_alpha_than_beta_electrons():
    from hfcore.geometry import Molecule

    oxygen = Molecule(np.array([8]), np.zeros((1, 3)), multiplicity=3)
    assert (oxygen.n_alpha, oxygen.n_beta) == (5, 3)


@pytest.mark.parametrize(
    "z, charge, multiplicity, words",
    [(8, 0, 2, "does not fit 8 electrons"), (8, 0, 11, "needs 10 unpaired"), (1, 0, 3, "needs 2 unpaired"),
     (8, 0, 0, "impossible"), (7, 0, 1, "does not fit 7")],
)
def test_impossible_multiplicities_are_refused_in_one_line(z, charge, multiplicity, words):
    from hfcore.errors import InputError
    from hfcore.geometry import Molecule

    with pytest.raises(InputError, match=words) as info:
        Molecule(np.array([z]), np.zeros((1, 3)), charge, source="atom.xyz", multiplicity=multiplicity)
    assert "\n" not in str(info.value) and str(info.value).startswith("atom.xyz:")


def test_read_xyz_takes_the_multiplicity(tmp_path):
    from hfcore.errors import InputError
    from hfcore.geometry import read_xyz

    path = tmp_path / "o.xyz"
    path.write_text("1\noxygen atom\nO 0 0 0\n")
    assert read_xyz(path, multiplicity=3).spin_multiplicity == 3
    with pytest.raises(InputError, match="multiplicity 2"):
        read_xyz(path, multiplicity=2)


def test_ghost_atoms_bring_no_electrons_to_the_spin_count():
    from hfcore.geometry import Molecule

    pair = Molecule(np.array([1, 1]), np.array([[0.0, 0, 0], [0, 0, 1.4]]))
    ghosted = pair.with_ghosts([1])
    assert ghosted.n_electrons == 1 and ghosted.spin_multiplicity == 2
