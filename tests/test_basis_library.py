"""Specification of the published-set library, name matching and user basis files."""

from __future__ import annotations

import importlib.util
import json
import sys
from collections import defaultdict
from functools import lru_cache
from pathlib import Path

import basis_set_exchange as bse
import numpy as np
import pytest

from hfcore import elements
from hfcore.basis import build_basis, library
from hfcore.basis.library import (
    BSEFamily,
    LibraryFamily,
    available_basis_sets,
    find_family,
    load_basis_file,
    shells_from_published,
)
from hfcore.errors import BasisError

DATA_DIR = Path(library.__file__).parent / "data"
SHIPPED = [
    "3-21G", "6-31G", "6-31G*", "6-31G**", "6-31+G*", "6-311G**",
    "cc-pVDZ", "cc-pVTZ", "cc-pVQZ", "aug-cc-pVDZ", "cc-pV5Z", "aug-cc-pVTZ", "aug-cc-pVQZ", "aug-cc-pV5Z",
    "def2-SVP", "def2-TZVP",
    "def2-universal-JKFIT", "cc-pVTZ-JKFIT", "cc-pVQZ-JKFIT", "cc-pV5Z-JKFIT",
    "cc-pVDZ-RIFIT", "cc-pVTZ-RIFIT", "cc-pVQZ-RIFIT", "def2-SVP-RIFIT", "def2-TZVP-RIFIT",
]  # fmt: skip


@lru_cache(maxsize=None)
def _published_elements(name: str) -> dict:
    # The fitting sets leave some of H-Ar out; ask only for those the set defines.
    meta = bse.get_metadata()[bse.misc.transform_basis_name(name)]
    defined = [int(z) for z in meta["versions"][meta["latest_version"]]["elements"] if int(z) <= 18]
    return bse.get_basis(name, elements=defined, header=False)["elements"]


def _published_shells(name: str, z: int) -> list[dict]:
    return _published_elements(name)[str(z)]["electron_shells"]


def _published_contractions(name: str, z: int) -> dict[int, list[dict[float, float]]]:
    """Every contraction of element z, per l, as {exponent: coefficient} over non-zero terms."""
    shells = _published_shells(name, z)
    out: dict[int, list[dict[float, float]]] = defaultdict(list)
    for shell in shells:
        ams = shell["angular_momentum"]
        for i, row in enumerate(shell["coefficients"]):
            l = ams[i] if len(ams) > 1 else ams[0]
            out[l].append({float(e): float(c) for e, c in zip(shell["exponents"], row) if float(c) != 0.0})
    return out


def _our_contractions(shells) -> dict[int, list[dict[float, float]]]:
    out: dict[int, list[dict[float, float]]] = defaultdict(list)
    for s in shells:
        for row in s.coefficients:
            out[s.l].append({float(e): float(c) for e, c in zip(s.exponents, row) if c != 0.0})
    return out


def _canonical(contractions: dict[int, list[dict[float, float]]]) -> dict[int, list]:
    return {l: sorted(sorted(d.items()) for d in rows) for l, rows in contractions.items()}


# ---------------------------------------------------------------------------
# Shipped data against the published tables


def test_library_lists_every_shipped_set():
    assert available_basis_sets() == SHIPPED


@pytest.mark.parametrize("name", SHIPPED)
def test_every_element_h_to_ar_that_the_set_defines_is_shipped(name):
    meta = bse.get_metadata()[bse.misc.transform_basis_name(name)]
    # source: basis-set-exchange package (elements the set defines)
    published = {int(z) for z in meta["versions"][meta["latest_version"]]["elements"] if int(z) <= 18}
    assert find_family(name).elements() == frozenset(published)


@pytest.mark.parametrize("name", SHIPPED)
def test_every_exponent_and_coefficient_matches_the_published_table(name):
    family = find_family(name)
    for z in sorted(family.elements()):
        # source: basis-set-exchange package, full contraction matrices per l
        expected = _canonical(_published_contractions(name, z))
        assert _canonical(_our_contractions(family.element_shells(z))) == expected, elements.symbol(z)


@pytest.mark.parametrize("name", SHIPPED)
def test_shipped_files_keep_the_published_digits(name):
    entry = next(e for e in json.loads((DATA_DIR / "index.json").read_text())["sets"] if e["name"] == name)
    document = json.loads((DATA_DIR / entry["file"]).read_text())
    for symbol, records in document["elements"].items():
        z = elements.atomic_number(symbol)
        shells = _published_shells(name, z)
        published_exponents = {e for s in shells for e in s["exponents"]}
        published_coefficients = {c for s in shells for row in s["coefficients"] for c in row}
        for r in records:
            # source: basis-set-exchange package (decimal strings as published)
            assert set(r["exponents"]) <= published_exponents
            assert {c for row in r["coefficients"] for c in row} <= published_coefficients


@pytest.mark.parametrize("name", SHIPPED)
def test_no_shipped_shell_carries_a_needless_primitive(name):
    family = find_family(name)
    for z in family.elements():
        for s in family.element_shells(z):
            # exact property of the documented conversion: no all-zero exponent column,
            # and uncontracted functions stand alone
            assert np.all(np.any(s.coefficients != 0.0, axis=0))
            if s.n_contractions > 1:
                assert np.all(np.count_nonzero(s.coefficients, axis=1) > 1)


def test_citations_carry_the_published_doi():
    # source: basis-set-exchange package reference record for cc-pVDZ H, B-Ne
    assert "10.1063/1.456153" in find_family("cc-pVDZ").citation


# ---------------------------------------------------------------------------
# The conversion of published shells


def test_sp_shell_becomes_an_s_and_a_p_shell_with_the_same_exponents():
    sp = {"angular_momentum": [0, 1], "exponents": ["3.0", "0.5"], "coefficients": [["0.1", "0.9"], ["0.2", "0.8"]]}
    assert shells_from_published([sp]) == [
        {"l": 0, "exponents": ["3.0", "0.5"], "coefficients": [["0.1", "0.9"]]},
        {"l": 1, "exponents": ["3.0", "0.5"], "coefficients": [["0.2", "0.8"]]},
    ]


def test_general_contraction_splits_uncontracted_columns_and_drops_zero_exponents():
    shell = {
        "angular_momentum": [0],
        "exponents": ["100.0", "10.0", "1.0", "0.1"],
        "coefficients": [["0.3", "0.7", "0.0", "0.0"], ["0.0", "0.0", "0.0", "1.0"], ["-0.1", "-0.2", "0.0", "0.0"]],
    }
    assert shells_from_published([shell]) == [
        {"l": 0, "exponents": ["100.0", "10.0"], "coefficients": [["0.3", "0.7"], ["-0.1", "-0.2"]]},
        {"l": 0, "exponents": ["0.1"], "coefficients": [["1.0"]]},
    ]


def test_sp_shell_with_wrong_number_of_contractions_is_rejected():
    bad = {"angular_momentum": [0, 1], "exponents": ["1.0"], "coefficients": [["1.0"]]}
    with pytest.raises(BasisError, match="one per angular momentum"):
        shells_from_published([bad])


# ---------------------------------------------------------------------------
# Names and conventions


@pytest.mark.parametrize(
    "spelling, canonical",
    [
        ("6-31g*", "6-31G*"),
        ("6-31G(d)", "6-31G*"),
        ("6-31g**", "6-31G**"),
        ("6-31G(d,p)", "6-31G**"),
        ("6-31+g*", "6-31+G*"),
        ("6-31+G(d)", "6-31+G*"),
        ("6-311g(d,p)", "6-311G**"),
        ("ccpvdz", "cc-pVDZ"),
        ("cc-pvdz", "cc-pVDZ"),
        ("CC-PVTZ", "cc-pVTZ"),
        ("aug-cc-pvdz", "aug-cc-pVDZ"),
        ("def2svp", "def2-SVP"),
        ("def2-tzvp", "def2-TZVP"),
        ("3-21g", "3-21G"),
    ],
)
def test_usual_spellings_find_the_shipped_set(spelling, canonical):
    family = find_family(spelling)
    assert isinstance(family, LibraryFamily)
    assert family.name == canonical


@pytest.mark.parametrize("name", ["3-21G", "6-31G", "6-31G*", "6-31G**", "6-31+G*", "6-311G**"])
def test_pople_sets_default_to_cartesian_d(name):
    # common practice: Pople sets are used with six Cartesian d functions
    assert find_family(name).default_spherical is False


@pytest.mark.parametrize("name", ["cc-pVDZ", "cc-pVTZ", "cc-pVQZ", "aug-cc-pVDZ", "aug-cc-pVTZ", "def2-SVP", "def2-TZVP"])
def test_correlation_consistent_and_karlsruhe_sets_default_to_spherical(name):
    # common practice: these sets are defined with real spherical functions
    assert find_family(name).default_spherical is True


def test_library_families_are_cached_per_process():
    assert find_family("cc-pvdz") is find_family("cc-pVDZ")


# ---------------------------------------------------------------------------
# Sets not shipped


@pytest.mark.parametrize("name, cartesian", [("pcseg-1", False), ("6-31++G**", True)])
def test_unshipped_set_is_looked_up_in_the_basis_set_exchange_package(name, cartesian):
    family = find_family(name)
    assert isinstance(family, BSEFamily)
    # source: basis-set-exchange package (function type of the set)
    assert family.default_spherical is not cartesian
    for z in (1, 8, 17):
        # source: basis-set-exchange package, full contraction matrices per l
        expected = _canonical(_published_contractions(name, z))
        assert _canonical(_our_contractions(family.element_shells(z))) == expected


@pytest.mark.parametrize("name", ["cc-pV5Z", "aug-cc-pV5Z"])
def test_shipped_set_with_h_functions_is_read_with_them(name):
    family = find_family(name)
    assert isinstance(family, LibraryFamily)
    shells = family.element_shells(8)
    # source: basis-set-exchange package (the set gives oxygen h functions), full contraction matrices per l
    assert max(es.l for es in shells) == 5
    assert _canonical(_our_contractions(shells)) == _canonical(_published_contractions(name, 8))


def test_name_unknown_everywhere_lists_close_names():
    with pytest.raises(BasisError, match=r"unknown .*close names: cc-pVDZ") as info:
        find_family("cc-pvdzz")
    assert "\n" not in str(info.value)


def test_without_the_package_an_unknown_name_says_how_to_install_it(monkeypatch):
    # A None entry in sys.modules makes the import fail as if the package were absent.
    monkeypatch.setitem(sys.modules, "basis_set_exchange", None)
    with pytest.raises(BasisError) as info:
        find_family("6-31G(2df)")
    message = str(info.value)
    assert "unknown to hfcore's library" in message
    assert "pip install 'hfcore[bse]'" in message
    assert "6-31G" in message.split("close names:")[1]
    assert "\n" not in message


# ---------------------------------------------------------------------------
# Mixed basis sets


def test_per_element_basis_mixes_shipped_sets(water_molecule):
    mixed = build_basis(water_molecule, "6-31G*", per_element={"H": "cc-pVDZ"})
    # exact property: O in 6-31G* has 3s2p1d (15 Cartesian functions), H in cc-pVDZ has 2s1p (5)
    assert mixed.n_functions == 15 + 2 * 5
    assert mixed.spherical is False
    assert "H: cc-pVDZ" in mixed.name


def test_per_element_basis_accepts_a_user_file(tmp_path, water_molecule):
    path = _write(tmp_path, {"name": "tiny-h", "elements": {"H": [_shell(0, ["1.0"], [["1.0"]])]}})
    mixed = build_basis(water_molecule, "cc-pVDZ", per_element={"H": load_basis_file(path)})
    # source: common practice — cc-pVDZ O is 3s2p1d, 14 spherical functions; the file gives H one s
    assert mixed.n_functions == 14 + 2 * 1
    assert mixed.spherical is True


# ---------------------------------------------------------------------------
# User basis files


def _shell(l, exponents, coefficients):
    return {"l": l, "exponents": exponents, "coefficients": coefficients}


def _write(tmp_path: Path, document, name: str = "my.json") -> Path:
    path = tmp_path / name
    path.write_text(document if isinstance(document, str) else json.dumps(document, indent=1))
    return path


def test_user_file_gives_the_shells_it_lists(tmp_path):
    o_shells = [_shell(0, ["10.0", 2.0], [["0.4", "0.7"], ["-0.1", "1.0"]]), _shell(1, [1.5], [[1.0]])]
    path = _write(tmp_path, {"name": "toy", "default_spherical": False, "elements": {"O": o_shells}})
    family = load_basis_file(path)
    assert family.name == "toy"
    assert family.default_spherical is False
    assert family.elements() == frozenset({8})
    s, p = family.element_shells(8)
    np.testing.assert_array_equal(s.exponents, [10.0, 2.0])
    np.testing.assert_array_equal(s.coefficients, [[0.4, 0.7], [-0.1, 1.0]])
    assert p.l == 1


def test_user_file_name_defaults_to_the_file_stem(tmp_path):
    path = _write(tmp_path, {"elements": {"H": [_shell(0, ["1.0"], [["1.0"]])]}}, "mine.json")
    assert load_basis_file(path).name == "mine"


def test_the_documented_example_is_a_valid_user_file(tmp_path):
    text = (Path(__file__).parents[1] / "docs" / "basis-format.md").read_text(encoding="utf-8")
    example = text.split("```json\n", 1)[1].split("```", 1)[0]
    family = load_basis_file(_write(tmp_path, example))
    assert family.name == "my-dz"
    assert family.elements() == frozenset({1, 8})


def test_shipped_file_loads_as_a_user_file():
    family = load_basis_file(DATA_DIR / "cc-pvdz.json")
    assert family.name == "cc-pVDZ"
    # source: basis-set-exchange package, full contraction matrices per l
    assert _canonical(_our_contractions(family.element_shells(8))) == _canonical(_published_contractions("cc-pVDZ", 8))


@pytest.mark.parametrize(
    "elements_table, message",
    [
        ({"Xx": [_shell(0, ["1.0"], [["1.0"]])]}, "my.json: element 'Xx': unknown element"),
        (
            {"O": [_shell(0, ["1.0"], [["1.0"]]), _shell(0, ["1.0"], [["1.0"]]), _shell(1, ["-1.2"], [["1.0"]])]},
            "my.json: O shell 3: exponent -1.2 is not positive",
        ),
        (
            {"O": [_shell(0, ["3.0", "2.0", "1.0", "0.5"], [["1", "1", "1", "1"], ["1", "1", "1"]])]},
            "my.json: O shell 1: 4 exponents but 3 coefficients in contraction 2",
        ),
        ({"O": [_shell(6, ["1.0"], [["1.0"]])]}, r"my.json: O shell 1: angular momentum 6 is not supported \(s..h\)"),
        ({"O": [_shell(0, ["abc"], [["1.0"]])]}, "my.json: O shell 1: exponent 'abc' is not a number"),
        ({"O": [_shell(0, ["1.0"], [["0.0"]])]}, "my.json: O shell 1: contraction 1 has only zero coefficients"),
        ({"O": [{"l": 0, "exponents": ["1.0"]}]}, "my.json: O shell 1: missing 'coefficients'"),
        ({"O": []}, "my.json: element 'O': the shell list must be a non-empty list"),
        ({"O": [_shell(0, ["1.0"], [["1.0"]])], "o": [_shell(0, ["1.0"], [["1.0"]])]}, "my.json: element 'o': given twice"),
    ],
)
def test_bad_user_file_entry_gives_a_one_line_error_naming_file_and_entry(tmp_path, elements_table, message):
    path = _write(tmp_path, {"name": "bad", "elements": elements_table})
    with pytest.raises(BasisError, match=message.replace("my.json", str(path))) as info:
        load_basis_file(path)
    assert "\n" not in str(info.value)


def test_invalid_json_reports_the_line(tmp_path):
    path = _write(tmp_path, '{\n  "name": "x",\n  "elements": {"H": [}\n}\n')
    with pytest.raises(BasisError, match=rf"^{path}:3: invalid JSON"):
        load_basis_file(path)


def test_missing_elements_table_is_an_error(tmp_path):
    path = _write(tmp_path, {"name": "x"})
    with pytest.raises(BasisError, match="'elements' must be a non-empty object"):
        load_basis_file(path)


def test_wrong_format_tag_is_an_error(tmp_path):
    path = _write(tmp_path, {"format": "other/2", "elements": {"H": [_shell(0, ["1.0"], [["1.0"]])]}})
    with pytest.raises(BasisError, match="format 'other/2'"):
        load_basis_file(path)


def test_missing_user_file_is_an_error(tmp_path):
    with pytest.raises(BasisError, match="cannot read basis file"):
        load_basis_file(tmp_path / "absent.json")


# ---------------------------------------------------------------------------
# The generator and the index


@lru_cache(maxsize=None)
def _generator():
    spec = importlib.util.spec_from_file_location("make_basis_library", Path(__file__).parents[1] / "scripts" / "make_basis_library.py")
    module = importlib.util.module_from_spec(spec)
    # Dataclasses look their module up in sys.modules while the class is created.
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("name", ["6-31G**", "cc-pVTZ", "def2-SVP"])
def test_shipped_file_is_what_the_generator_writes(name):
    generator = _generator()
    spec = next(s for s in generator.SETS if s.name == name)
    # source: basis-set-exchange package, through the documented conversion
    assert generator.render(generator.build_document(spec)) == (DATA_DIR / spec.file).read_text(encoding="utf-8")


@pytest.mark.parametrize("entry", json.loads((DATA_DIR / "index.json").read_text())["sets"], ids=lambda e: e["name"])
def test_index_entry_agrees_with_its_file(entry):
    document = json.loads((DATA_DIR / entry["file"]).read_text())
    assert (document["name"], document["aliases"], document["default_spherical"]) == (
        entry["name"],
        entry["aliases"],
        entry["default_spherical"],
    )
    assert list(document["elements"]) == entry["elements"]
