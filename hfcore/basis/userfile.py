"""hfcore's basis-set file format: reading, validating, and user basis files.

One JSON document describes one basis set. The format is documented in
``docs/basis-format.md``; in short::

    {
      "format": "hfcore-basis/1",
      "name": "my-set",
      "default_spherical": true,
      "elements": {
        "H": [{"l": 0, "exponents": ["3.4", "0.6"], "coefficients": [["0.3", "0.8"]]}]
      }
    }

Numbers may be JSON numbers or decimal strings (strings keep published digits
exactly). Coefficients multiply *normalised* primitives, one row per
contraction. The library files shipped with hfcore use the same format and
the same reader, so a user file and a shipped set behave identically.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .. import elements
from ..errors import BasisError
from .family import BasisFamily, CachedFamily
from .components import L_LETTERS
from .shells import MAX_FIT_L, MAX_L, ElementShell

#: The value of the ``"format"`` key that marks a document as ours.
FORMAT_TAG = "hfcore-basis/1"
#: The ``family`` value of a fitting set (for density-fitted J and K), whose shells may reach MAX_FIT_L.
FITTING_FAMILY = "jk-fitting"
#: The ``family`` value of a fitting set for density-fitted MP2 (same shell limits as FITTING_FAMILY).
MP2_FITTING_FAMILY = "mp2-fitting"
#: Every family value whose shells may reach MAX_FIT_L.
FITTING_FAMILIES = (FITTING_FAMILY, MP2_FITTING_FAMILY)

#: A basis file larger than this (bytes) is refused unread; the largest
#: shipped set is about 40 kB.
MAX_FILE_BYTES: int = 64 * 2**20


def _number(value: Any, what: str, where: str) -> float:
    """Parse a JSON number or decimal string, rejecting booleans and non-finite values."""
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise BasisError(f"{where}: {what} {value!r} is not a number")
    try:
        x = float(value)
    except (ValueError, OverflowError):
        raise BasisError(f"{where}: {what} {str(value)[:40]!r} is not a number") from None
    if not math.isfinite(x):
        raise BasisError(f"{where}: {what} {value!r} is not finite")
    return x


def _require_list(value: Any, what: str, where: str) -> list:
    if not isinstance(value, list) or not value:
        raise BasisError(f"{where}: {what} must be a non-empty list")
    return value


def parse_shell(record: Any, where: str, max_l: int = MAX_L) -> ElementShell:
    """Validate one shell record and turn it into an :class:`ElementShell`.

    Parameters
    ----------
    record : mapping
        ``{"l": int, "exponents": [...], "coefficients": [[...], ...]}``.
    where : str
        Prefix for error messages, e.g. ``"my.json: O shell 3"``.
    max_l : int
        Highest angular momentum accepted: :data:`MAX_L` for orbital sets,
        :data:`MAX_FIT_L` for fitting sets.

    Returns
    -------
    ElementShell

    Raises
    ------
    BasisError
        Naming ``where`` and the offending entry.
    """
    if not isinstance(record, Mapping):
        raise BasisError(f"{where}: a shell must be a JSON object")
    for key in ("l", "exponents", "coefficients"):
        if key not in record:
            raise BasisError(f"{where}: missing {key!r}")
    l = record["l"]
    if isinstance(l, bool) or not isinstance(l, int) or l < 0:
        raise BasisError(f"{where}: angular momentum {l!r} is not a non-negative integer")
    if l > max_l:
        raise BasisError(f"{where}: angular momentum {l} is not supported (s..{L_LETTERS[max_l]})")
    raw_exponents = _require_list(record["exponents"], "'exponents'", where)
    exponents = [_number(e, "exponent", where) for e in raw_exponents]
    for raw, e in zip(raw_exponents, exponents):
        if e <= 0.0:
            raise BasisError(f"{where}: exponent {raw} is not positive")
    rows = _require_list(record["coefficients"], "'coefficients'", where)
    matrix = []
    for i, row in enumerate(rows, start=1):
        row = _require_list(row, f"contraction {i}", where)
        if len(row) != len(exponents):
            raise BasisError(f"{where}: {len(exponents)} exponents but {len(row)} coefficients in contraction {i}")
        values = [_number(c, "coefficient", where) for c in row]
        if not any(values):
            raise BasisError(f"{where}: contraction {i} has only zero coefficients")
        matrix.append(values)
    try:
        return ElementShell(l, np.array(exponents), np.array(matrix))
    except BasisError as exc:
        raise BasisError(f"{where}: {str(exc).removeprefix(f'shell {L_LETTERS[l]}: ')}") from None


def parse_element_shells(symbol: str, records: Any, source: str, max_l: int = MAX_L) -> list[ElementShell]:
    """Validate the shell list of one element.

    Parameters
    ----------
    symbol : str
        Element symbol as written in the document (for messages).
    records : list of mapping
    source : str
        File name (or other origin) for messages.
    max_l : int
        Highest angular momentum accepted, as in :func:`parse_shell`.
    """
    records = _require_list(records, f"element {symbol!r}: the shell list", source)
    return [parse_shell(r, f"{source}: {symbol} shell {i}", max_l) for i, r in enumerate(records, start=1)]


def element_keys(document: Mapping[str, Any], source: str) -> dict[int, str]:
    """Map atomic number -> key in ``document["elements"]``, checking the keys.

    Raises
    ------
    BasisError
        For a missing ``"elements"`` object, an unknown symbol, or an element
        given twice (e.g. ``"O"`` and ``"o"``).
    """
    table = document.get("elements")
    if not isinstance(table, Mapping) or not table:
        raise BasisError(f"{source}: 'elements' must be a non-empty object of element symbol -> shell list")
    out: dict[int, str] = {}
    for key in table:
        try:
            z = elements.atomic_number(str(key))
        except KeyError:
            raise BasisError(f"{source}: element {key!r}: unknown element") from None
        if z in out:
            raise BasisError(f"{source}: element {key!r}: given twice (also as {out[z]!r})")
        out[z] = key
    return out


def _header(document: Any, source: str, default_name: str) -> tuple[str, bool, str]:
    """Check the top-level keys; return (name, default_spherical, citation text)."""
    if not isinstance(document, Mapping):
        raise BasisError(f"{source}: the top level must be a JSON object")
    tag = document.get("format", FORMAT_TAG)
    if tag != FORMAT_TAG:
        raise BasisError(f"{source}: format {tag!r} is not {FORMAT_TAG!r}")
    name = document.get("name", default_name)
    if not isinstance(name, str) or not name.strip():
        raise BasisError(f"{source}: 'name' must be a non-empty string")
    spherical = document.get("default_spherical", True)
    if not isinstance(spherical, bool):
        raise BasisError(f"{source}: 'default_spherical' must be true or false")
    citations = document.get("citations", [])
    if not isinstance(citations, list) or not all(isinstance(c, Mapping) and isinstance(c.get("text"), str) for c in citations):
        raise BasisError(f"{source}: 'citations' must be a list of objects with a 'text' string")
    return name, spherical, citation_text(citations)


def citation_text(citations: Sequence[Mapping[str, Any]]) -> str:
    """One string from a document's citation list: text and DOI, joined by ``"; "``."""
    parts = []
    for c in citations:
        doi = c.get("doi")
        parts.append(f"{c['text']}, doi:{doi}" if doi else c["text"])
    return "; ".join(parts)


class DocumentFamily(CachedFamily):
    """A basis family held in one document of hfcore's format.

    Element shells are validated on first use and cached.

    Parameters
    ----------
    document : mapping
        The parsed JSON document.
    source : str
        Where it came from (file name), used in every error message.
    default_name : str
        Name when the document has no ``"name"``.
    """

    def __init__(self, document: Mapping[str, Any], source: str, default_name: str = "") -> None:
        super().__init__()
        self.name, self.default_spherical, self.citation = _header(document, source, default_name or source)
        self.description = str(document.get("description", ""))
        self.source = source
        self.origin = f"{source}: "
        self._document = document
        self._keys = element_keys(document, source)
        # Fitting sets reach higher angular momentum than orbital sets.
        self.max_l = MAX_FIT_L if document.get("family") in FITTING_FAMILIES else MAX_L

    def elements(self) -> frozenset[int]:
        return frozenset(self._keys)

    def _read_element_shells(self, z: int) -> list[ElementShell]:
        key = self._keys[z]
        return parse_element_shells(key, self._document["elements"][key], self.source, self.max_l)

    def validate(self) -> None:
        """Parse every element now, so a bad entry fails at load time."""
        for z in self._keys:
            self.element_shells(z)


def read_document(path: str | Path) -> Any:
    """Read a JSON file, turning syntax errors into a one-line :class:`BasisError`."""
    source = str(path)
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise BasisError(f"{source}: cannot read basis file ({exc.strerror or exc})") from None
    if len(data) > MAX_FILE_BYTES:
        raise BasisError(f"{source}: larger than {MAX_FILE_BYTES // 2**20} MiB; not a basis file hfcore can read")
    try:
        # utf-8-sig: a leading byte-order mark is accepted, as in geometry files.
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise BasisError(f"{source}: not a text file (cannot decode as UTF-8)") from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise BasisError(f"{source}:{exc.lineno}: invalid JSON at column {exc.colno}: {exc.msg}") from None
    except RecursionError:
        raise BasisError(f"{source}: JSON nested too deeply to be a basis file") from None


def load_basis_file(path: str | Path) -> BasisFamily:
    """Load a user basis file in hfcore's format.

    Every element and shell is checked at once, so a bad file fails here,
    not half-way through building a basis.

    Parameters
    ----------
    path : str or Path
        A JSON file (format in ``docs/basis-format.md``). The family name
        defaults to the file name without its extension.

    Returns
    -------
    BasisFamily

    Raises
    ------
    BasisError
        One line naming the file and the offending entry, e.g.
        ``my.json: O shell 3: exponent -1.2 is not positive``.
    """
    family = DocumentFamily(read_document(path), str(path), Path(path).stem)
    family.validate()
    return family


__all__ = ["FORMAT_TAG", "FITTING_FAMILY", "MP2_FITTING_FAMILY", "FITTING_FAMILIES", "DocumentFamily", "load_basis_file", "parse_shell", "parse_element_shells", "read_document", "citation_text"]
