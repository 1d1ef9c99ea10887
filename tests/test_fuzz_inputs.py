"""Property-based tests: the XYZ reader, the basis-file reader and the Molecule record on random and mutated input.

The contract (issue 8, part 4): whatever the bytes, a reader returns a parsed
record or raises hfcore's own error (InputError; BasisError is one), never
another exception, never a warning (every warning is an error here, numpy's
floating-point problems included) and never hangs (an alarm stops any single
read after a few seconds). Mutations start from real files: the demo
geometries in ``inputs/`` and the shipped 6-31G basis file.

The examples are derandomised (the same ones on every run, no example
database), so CI is deterministic; the counts add up to 2,300.
"""

from __future__ import annotations

import contextlib
import json
import signal
import warnings
from datetime import timedelta
from pathlib import Path

import numpy as np
import pytest
from conftest import INPUTS
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from hfcore import integrals
from hfcore.basis import build_basis
from hfcore.basis.library import load_basis_file
from hfcore.basis.userfile import FORMAT_TAG
from hfcore.errors import BasisError, InputError
from hfcore.geometry import MAX_COORDINATE_ANGSTROM, Molecule, parse_xyz, read_xyz

BASIS_DATA = Path(__file__).resolve().parents[1] / "hfcore" / "basis" / "data"

#: Settings shared by every property here: a fixed example sequence, an
#: explicit per-example deadline that only a pathological input could reach.
FUZZ = dict(
    derandomize=True,
    database=None,
    deadline=timedelta(seconds=5),
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)

SEED_GEOMETRIES = [
    (INPUTS / name).read_bytes()
    for name in ("water.xyz", "ammonia.xyz", "hydroxide.xyz", "methanol.xyz", "hydrogen_chloride.xyz")
]

#: Tokens that have tripped parsers before: non-finite and out-of-range
#: numbers, Fortran exponents, odd digits, charged and dummy symbols, controls.
ODD_TOKENS = [
    "nan", "NaN", "inf", "-inf", "Infinity", "1e400", "-1e400", "1e200", "1e-400", "1D+00", "1.0d-3", "0x10",
    "1_000", "10000.0001", "-0.0", "+3", "²", "١", "٣", "X", "x", "Xx", "O-", "Na+", "H1", "0", "37", "999", "-1",
    "", " ", "\t", "\x00", "\x0c", "\ufeff", "\u2028", "\r", "\\", "'", '"', "é", "💥", "1e4", "1e-300", "99999999999999999999",
]


@contextlib.contextmanager
def strict(seconds: int = 10):
    """Every warning raised as an error, numpy floating-point problems raised, and an alarm against a hang."""

    def hung(signum, frame):
        raise TimeoutError(f"a reader took more than {seconds} s")

    alarm = hasattr(signal, "SIGALRM")  # POSIX; elsewhere the hypothesis deadline remains
    previous = signal.signal(signal.SIGALRM, hung) if alarm else None
    if alarm:
        signal.alarm(seconds)
    try:
        with warnings.catch_warnings(), np.errstate(over="raise", divide="raise", invalid="raise", under="ignore"):
            warnings.simplefilter("error")
            yield
    finally:
        if alarm:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, previous)


def assert_well_formed(mol: Molecule) -> None:
    """What every accepted geometry must satisfy (the reader's stated rules)."""
    assert mol.n_atoms >= 1
    assert mol.coordinates.shape == (mol.n_atoms, 3)
    assert np.all(np.isfinite(mol.coordinates))
    assert np.all(np.abs(mol.coordinates_angstrom()) <= MAX_COORDINATE_ANGSTROM * (1 + 1e-12))
    assert np.all((mol.atomic_numbers >= 1) & (mol.atomic_numbers <= 36))


# --- mutations -----------------------------------------------------------------------


@st.composite
def mutated_bytes(draw, seeds: list[bytes]) -> bytes:
    """A seed file with a few byte-, line- or token-level mutations."""
    data = bytearray(draw(st.sampled_from(seeds)))
    for _ in range(draw(st.integers(1, 4))):
        kind = draw(st.sampled_from(["flip", "insert", "delete", "line", "token", "truncate"]))
        if kind == "flip" and data:
            i = draw(st.integers(0, len(data) - 1))
            data[i] = draw(st.integers(0, 255))
        elif kind == "insert":
            i = draw(st.integers(0, len(data)))
            data[i:i] = draw(st.binary(min_size=1, max_size=8))
        elif kind == "delete" and data:
            i = draw(st.integers(0, len(data) - 1))
            del data[i : i + draw(st.integers(1, 8))]
        elif kind == "truncate":
            del data[draw(st.integers(0, len(data))) :]
        elif kind == "line":
            lines = bytes(data).split(b"\n")
            i = draw(st.integers(0, len(lines) - 1))
            action = draw(st.sampled_from(["duplicate", "drop", "swap", "blank"]))
            if action == "duplicate":
                lines.insert(i, lines[i])
            elif action == "drop":
                del lines[i]
            elif action == "swap":
                j = draw(st.integers(0, len(lines) - 1))
                lines[i], lines[j] = lines[j], lines[i]
            else:
                lines[i] = b""
            data = bytearray(b"\n".join(lines))
        elif kind == "token":
            tokens = bytes(data).split(b" ")
            i = draw(st.integers(0, len(tokens) - 1))
            tokens[i] = draw(st.sampled_from(ODD_TOKENS)).encode("utf-8")
            data = bytearray(b" ".join(tokens))
    return bytes(data)


#: Lines that look like XYZ content, for texts built from scratch.
xyz_token = st.one_of(
    st.sampled_from(ODD_TOKENS + ["H", "O", "c", "CL", "He", "8", "1", "0.74", "-1.2", "3", "2", "1e4"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-(10**30), 10**30).map(str),
)
xyz_line = st.lists(xyz_token, max_size=6).map(" ".join)
coordinate = st.one_of(st.floats(-2e4, 2e4).map(repr), st.sampled_from(ODD_TOKENS), st.floats().map(lambda x: f"{x:.3E}".replace("E", "D")))
atom_line = st.tuples(st.sampled_from(["H", "o", "He", "8", "X", "O-", "Zz"]), coordinate, coordinate, coordinate).map(" ".join)


@st.composite
def well_shaped_xyz(draw) -> str:
    """A count that matches the atom lines (mostly), so the values are what gets tested."""
    atoms = draw(st.lists(atom_line, min_size=1, max_size=4))
    count = draw(st.sampled_from([str(len(atoms)), str(len(atoms)), str(len(atoms) + 1), "0"]))
    newline = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    return newline.join([count, "comment", *atoms]) + newline


xyz_text = st.one_of(
    well_shaped_xyz(),
    st.lists(xyz_line, max_size=8).map("\n".join),
    st.text(max_size=200),
)


# --- the XYZ reader --------------------------------------------------------------------


@settings(max_examples=500, **FUZZ)
@given(text=xyz_text, units=st.sampled_from(["angstrom", "bohr"]), charge=st.integers(-5, 5))
def test_xyz_parser_on_random_text_returns_a_molecule_or_raises_input_error(text, units, charge):
    with strict():
        try:
            mol = parse_xyz(text, source="fuzz.xyz", units=units, charge=charge)
        except InputError as exc:
            assert str(exc).startswith("fuzz.xyz")
            return
    assert_well_formed(mol)


@pytest.fixture(scope="module")
def scratch(tmp_path_factory) -> Path:
    """One directory for the module: each example overwrites its file there."""
    return tmp_path_factory.mktemp("fuzz")


@settings(max_examples=700, **FUZZ)
@given(data=mutated_bytes(SEED_GEOMETRIES))
def test_xyz_reader_on_mutated_files_returns_a_molecule_or_raises_input_error(scratch, data):
    path = scratch / "mutated.xyz"
    path.write_bytes(data)
    with strict():
        try:
            mol = read_xyz(path)
        except InputError as exc:
            assert str(exc).startswith(str(path))
            assert "\n" not in str(exc)
            return
    assert_well_formed(mol)


# --- the basis-file reader -------------------------------------------------------------


def _seed_basis() -> dict:
    """The shipped 6-31G file cut to H and O, the elements of water."""
    document = json.loads((BASIS_DATA / "6-31g.json").read_text())
    document["elements"] = {k: document["elements"][k] for k in ("H", "O")}
    return document


SEED_BASIS = _seed_basis()
WATER = read_xyz(INPUTS / "water.xyz")

json_scalar = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**400), 10**400),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(ODD_TOKENS + ["1e-9", "1e11", "0", "-1", "7", "4", "5", "1e-8", "1e10", "1e6", "1e7"]),
    st.text(max_size=10),
)
json_value = st.recursive(json_scalar, lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=4), inner, max_size=3), max_leaves=8)


def _paths(node, prefix=()):
    """Every (path, value) inside a JSON document."""
    yield prefix, node
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _paths(value, prefix + (key,))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _paths(value, prefix + (index,))


@st.composite
def mutated_document(draw) -> dict:
    """The seed basis with a few values replaced, keys dropped, or lists emptied or shortened."""
    document = json.loads(json.dumps(SEED_BASIS))
    for _ in range(draw(st.integers(1, 3))):
        paths = [p for p, _ in _paths(document) if p]
        # Most mutations go into the shells, where the numbers are.
        inside = [p for p in paths if p[0] == "elements"]
        path = draw(st.sampled_from(inside if inside and draw(st.integers(0, 4)) else paths))
        parent = document
        for key in path[:-1]:
            parent = parent[key]
        action = draw(st.sampled_from(["replace", "replace", "replace", "drop", "empty", "shrink"]))
        last = path[-1]
        if action == "replace":
            parent[last] = draw(json_value)
        elif action == "drop":
            del parent[last]
        elif action == "empty" and isinstance(parent[last], (list, dict)):
            parent[last] = type(parent[last])()
        elif action == "shrink" and isinstance(parent[last], list) and parent[last]:
            parent[last].pop()
    return document


def _check_basis_file(path: Path) -> None:
    """Load; when accepted, every function placed on water is finite and normalised."""
    with strict():
        try:
            family = load_basis_file(path)
        except BasisError as exc:
            assert str(exc).startswith(str(path)) and "\n" not in str(exc)
            return
        try:
            basis = build_basis(WATER, family)
        except BasisError as exc:  # an element dropped from the document
            assert "does not cover" in str(exc)
            return
        overlap = integrals.overlap(basis)
    # source: exact property — hfcore normalises every basis function to one (README, Conventions)
    np.testing.assert_allclose(np.diag(overlap), 1.0, rtol=0, atol=1e-8)


@settings(max_examples=500, **FUZZ)
@given(document=mutated_document())
def test_basis_reader_on_mutated_documents_returns_a_family_or_raises_basis_error(scratch, document):
    path = scratch / "mutated.json"
    path.write_text(json.dumps(document, allow_nan=True))
    _check_basis_file(path)


@settings(max_examples=400, **FUZZ)
@given(data=mutated_bytes([json.dumps(SEED_BASIS, indent=1).encode(), json.dumps({"format": FORMAT_TAG, "elements": SEED_BASIS["elements"]}).encode()]))
def test_basis_reader_on_mutated_bytes_returns_a_family_or_raises_basis_error(scratch, data):
    path = scratch / "mutated.json"
    path.write_bytes(data)
    _check_basis_file(path)


# --- the Molecule record itself (the API boundary) --------------------------------------

number = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-(10**6), 10**6), st.sampled_from([1e200, -1e200, 18897.0, 18898.0]))


@settings(max_examples=200, **FUZZ)
@given(
    z=st.lists(st.one_of(st.integers(-3, 40), st.floats(0, 40), st.sampled_from(["8", "O", None])), max_size=4),
    xyz=st.lists(st.lists(number, min_size=2, max_size=4), max_size=4),
    charge=st.one_of(st.integers(-(10**3), 10**3), st.floats(allow_nan=True, allow_infinity=True), st.booleans(), st.none()),
)
def test_molecule_from_arrays_is_well_formed_or_refused_with_input_error(z, xyz, charge):
    with strict():
        try:
            mol = Molecule(z, xyz, charge)
        except InputError:
            return
    assert_well_formed(mol)
    assert isinstance(mol.charge, int)
