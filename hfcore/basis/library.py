"""The published basis sets shipped with hfcore, and other published sets by name.

Shipped sets live in ``hfcore/basis/data/``, one JSON file per set in
hfcore's own format (``docs/basis-format.md``), with ``index.json`` listing
names, aliases, files and elements so that finding a set reads no shell data.
A set's file is read on first use and kept for the life of the process.

A name hfcore does not ship is looked up, in memory, in the optional
``basis_set_exchange`` package (``pip install 'hfcore[bse]'``) and its shells
are converted by :func:`shells_from_published`, the same function the data
generator (``scripts/make_basis_library.py``) uses.

Conversion of published shells (:func:`shells_from_published`)
---------------------------------------------------------------
* A shell listing several angular momenta with one contraction each (the
  sp shells of the Pople sets) becomes one shell per angular momentum, with
  the same exponents, in the listed order (s, then p).
* In a generally contracted shell, each contraction with exactly one
  non-zero coefficient (an uncontracted primitive) becomes its own
  one-primitive shell. The remaining contractions stay together as one
  generally contracted shell, first, followed by the one-primitive shells in
  the published order.
* Exponents whose coefficient is zero in every remaining contraction are
  dropped from that shell, so no integral is computed for a primitive that
  contributes nothing.
The numbers themselves are kept exactly as published (decimal strings).
"""

from __future__ import annotations

import difflib
import json
from collections.abc import Mapping, Sequence
from functools import lru_cache
from pathlib import Path
from typing import Any

from .. import elements
from ..errors import BasisError
from .family import BasisFamily, CachedFamily
from .shells import MAX_FIT_L, MAX_L, ElementShell
from .userfile import DocumentFamily, citation_text, load_basis_file, parse_element_shells

_INDEX_FILE = "index.json"
_INSTALL_HINT = "pip install 'hfcore[bse]'"


def name_key(name: str) -> str:
    """The form in which basis names are compared.

    Letter case, spaces, hyphens and underscores do not matter, and the
    polarisation spellings ``(d)`` / ``(d,p)`` equal ``*`` / ``**``:
    ``"6-31G(d,p)"``, ``"6-31g**"`` and ``"631G**"`` share one key, as do
    ``"cc-pVDZ"`` and ``"ccpvdz"``.
    """
    key = "".join(ch for ch in name.strip().lower() if ch not in " -_")
    return key.replace("(d,p)", "**").replace("(d)", "*")


# ----------------------------------------------------------------------------
# Conversion of published shell tables


def _split_contractions(l: int, exponents: Sequence[str], rows: Sequence[Sequence[str]]) -> list[dict[str, Any]]:
    """Apply the documented splitting to one angular momentum of a published shell."""
    contracted, single = [], []
    for row in rows:
        nonzero = [k for k, c in enumerate(row) if float(c) != 0.0]
        if not nonzero:
            continue
        if len(nonzero) == 1 and len(rows) > 1:
            single.append((nonzero[0], row[nonzero[0]]))
        else:
            contracted.append(row)
    out = []
    if contracted:
        keep = [k for k in range(len(exponents)) if any(float(r[k]) != 0.0 for r in contracted)]
        out.append(
            {
                "l": l,
                "exponents": [exponents[k] for k in keep],
                "coefficients": [[r[k] for k in keep] for r in contracted],
            }
        )
    out.extend({"l": l, "exponents": [exponents[k]], "coefficients": [[c]]} for k, c in single)
    return out


def shells_from_published(electron_shells: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """Convert published shells to hfcore shell records (see the module notes).

    Parameters
    ----------
    electron_shells : sequence of mapping
        Each with ``"angular_momentum"`` (list of int), ``"exponents"``
        (list of decimal strings) and ``"coefficients"`` (one list per
        contraction, or per angular momentum for an sp shell), as the
        ``basis_set_exchange`` package returns them.

    Returns
    -------
    list of dict
        ``{"l": int, "exponents": [str], "coefficients": [[str]]}`` records,
        numbers as published, in hfcore's shell order.

    Raises
    ------
    BasisError
        If a shell with several angular momenta does not give exactly one
        contraction per angular momentum.
    """
    out: list[dict[str, Any]] = []
    for shell in electron_shells:
        ams = [int(l) for l in shell["angular_momentum"]]
        exponents = [str(e) for e in shell["exponents"]]
        rows = [[str(c) for c in row] for row in shell["coefficients"]]
        if len(ams) == 1:
            out.extend(_split_contractions(ams[0], exponents, rows))
        elif len(ams) == len(rows):
            for l, row in zip(ams, rows):
                out.extend(_split_contractions(l, exponents, [row]))
        else:
            raise BasisError(f"a shell with angular momenta {ams} has {len(rows)} contractions; expected one per angular momentum")
    return out


# ----------------------------------------------------------------------------
# The shipped library


_DATA_DIR = Path(__file__).resolve().parent / "data"


def _data_text(filename: str) -> str:
    """A shipped data file's text: read from the package directory, as installs unpack it.

    ``importlib.resources`` (for a package kept in a zip archive) is imported
    only when the file is not on disk: its import costs a small run more
    than reading every shipped set.
    """
    path = _DATA_DIR / filename
    if path.is_file():
        return path.read_text(encoding="utf-8")
    from importlib import resources

    return resources.files("hfcore.basis").joinpath("data", filename).read_text(encoding="utf-8")


@lru_cache(maxsize=None)
def _index() -> tuple[dict[str, Any], ...]:
    return tuple(json.loads(_data_text(_INDEX_FILE))["sets"])


@lru_cache(maxsize=None)
def _index_by_key() -> dict[str, dict[str, Any]]:
    table = {}
    for entry in _index():
        for spelling in [entry["name"], *entry["aliases"]]:
            table[name_key(spelling)] = entry
    return table


class LibraryFamily(BasisFamily):
    """A published basis set shipped with hfcore.

    The set's file is read on the first call that needs shells or the
    citation; which elements it covers comes from the index alone.

    Attributes
    ----------
    name : str
        Canonical name (e.g. ``"6-31G*"``).
    aliases : tuple of str
        Other accepted spellings.
    family : str
        The set's lineage: ``"pople"``, ``"correlation-consistent"`` or
        ``"karlsruhe"``.
    default_spherical : bool
        False (Cartesian d) for the Pople sets, True for the others, as
        common practice uses them.
    """

    def __init__(self, entry: Mapping[str, Any]) -> None:
        self.name = entry["name"]
        self.aliases = tuple(entry["aliases"])
        self.family = entry["family"]
        self.default_spherical = bool(entry["default_spherical"])
        self._file = entry["file"]
        self._elements = frozenset(elements.atomic_number(s) for s in entry["elements"])

    @property
    def _document(self) -> DocumentFamily:
        return _library_document(self._file)

    @property
    def citation(self) -> str:  # type: ignore[override]
        return self._document.citation

    @property
    def description(self) -> str:
        return self._document.description

    def elements(self) -> frozenset[int]:
        return self._elements

    def element_shells(self, z: int) -> list[ElementShell]:
        if z not in self._elements:
            raise BasisError(f"basis {self.name} does not define element {elements.symbol(z)}")
        return self._document.element_shells(z)


@lru_cache(maxsize=None)
def _library_document(filename: str) -> DocumentFamily:
    return DocumentFamily(json.loads(_data_text(filename)), filename)


@lru_cache(maxsize=None)
def _library_family(canonical: str) -> LibraryFamily:
    return LibraryFamily(_index_by_key()[name_key(canonical)])


def available_basis_sets() -> list[str]:
    """Canonical names of the published sets shipped with hfcore, in index order.

    The fitted STO-nG sets are not listed here (see :mod:`hfcore.basis.sto`).
    """
    return [entry["name"] for entry in _index()]


# ----------------------------------------------------------------------------
# Sets looked up in the optional basis_set_exchange package


def _reference_text(info: Mapping[str, Any]) -> tuple[str, str]:
    """(text, doi) of one published reference record."""
    authors = " and ".join(info.get("authors", []))
    venue = " ".join(str(info[k]) for k in ("journal", "volume") if info.get(k))
    if info.get("pages"):
        venue += f", {info['pages']}"
    year = f" ({info['year']})" if info.get("year") else ""
    parts = [p for p in (authors, info.get("title", ""), venue + year) if p]
    return ", ".join(parts), info.get("doi", "")


def published_citations(references: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """Flatten the reference records of a published set into hfcore citations.

    Parameters
    ----------
    references : sequence of mapping
        As ``basis_set_exchange.get_references(name, elements)`` returns them.

    Returns
    -------
    list of dict
        ``{"text": str, "doi": str, "elements": [symbols]}``, one per distinct
        journal article, in first-seen order. Records of other kinds (a
        software manual standing in for a paper) are left out: hfcore cites
        publications only.
    """
    by_key: dict[str, dict[str, Any]] = {}
    for group in references:
        symbols = [elements.symbol(int(z)) for z in group["elements"]]
        for info in group["reference_info"]:
            for key, data in info["reference_data"]:
                if data.get("_entry_type", "article") != "article":
                    continue
                if key not in by_key:
                    text, doi = _reference_text(data)
                    by_key[key] = {"text": text, "doi": doi, "elements": []}
                by_key[key]["elements"].extend(s for s in symbols if s not in by_key[key]["elements"])
    return list(by_key.values())


class BSEFamily(CachedFamily):
    """A published set looked up in the installed ``basis_set_exchange`` package.

    Shells are fetched per element on first use, converted by
    :func:`shells_from_published`, and cached.

    Parameters
    ----------
    module : module
        The imported ``basis_set_exchange`` package.
    name : str
        A name the package knows.
    """

    def __init__(self, module: Any, name: str) -> None:
        super().__init__()
        self._bse = module
        meta = module.get_metadata()[module.misc.transform_basis_name(name)]
        self.name = meta["display_name"]
        self.default_spherical = "gto_cartesian" not in meta["function_types"]
        self._bse_name = name
        zs = (int(z) for z in meta["versions"][meta["latest_version"]]["elements"])
        self._elements = frozenset(z for z in zs if z <= elements.MAX_Z)
        self._citation: str | None = None
        self.max_l = MAX_FIT_L if meta.get("role", "orbital") != "orbital" else MAX_L

    @property
    def citation(self) -> str:  # type: ignore[override]
        if self._citation is None:
            refs = self._bse.get_references(self._bse_name, elements=sorted(self._elements))
            self._citation = citation_text(published_citations(refs))
        return self._citation

    def elements(self) -> frozenset[int]:
        return self._elements

    def _read_element_shells(self, z: int) -> list[ElementShell]:
        symbol = elements.symbol(z)
        data = self._bse.get_basis(self._bse_name, elements=[z], header=False)["elements"][str(z)]
        if data.get("ecp_potentials"):
            raise BasisError(f"basis {self.name} uses an effective core potential for {symbol}, which hfcore does not support")
        return parse_element_shells(symbol, shells_from_published(data.get("electron_shells", [])), f"basis {self.name}", self.max_l)


def _close_names(name: str, candidates: Sequence[str]) -> str:
    by_key = {name_key(c): c for c in candidates}
    close = difflib.get_close_matches(name_key(name), list(by_key), n=4, cutoff=0.6)
    return f" (close names: {', '.join(by_key[k] for k in close)})" if close else ""


def find_family(name: str) -> BasisFamily:
    """Find a published basis set by name.

    Parameters
    ----------
    name : str
        Any usual spelling (see :func:`name_key`).

    Returns
    -------
    BasisFamily
        A :class:`LibraryFamily` for a shipped set, else a :class:`BSEFamily`
        when the optional ``basis_set_exchange`` package knows the name.

    Raises
    ------
    BasisError
        If neither knows the name; the message lists close names and, when
        the package is not installed, how to install it.
    """
    key = name_key(name)
    if key in _index_by_key():
        return _library_family(_index_by_key()[key]["name"])
    try:
        import basis_set_exchange as bse
    except ImportError:
        raise BasisError(
            f"basis {name!r} is unknown to hfcore's library; {_INSTALL_HINT} makes every published set available"
            + _close_names(name, available_basis_sets())
        ) from None
    metadata = bse.get_metadata()
    if bse.misc.transform_basis_name(name) not in metadata:
        # hfcore's own sets first: a published name that is merely close in
        # spelling (cc-pV9Z covers neon alone) is offered only when none is.
        hint = _close_names(name, available_basis_sets()) or _close_names(name, [m["display_name"] for m in metadata.values()])
        raise BasisError(f"basis {name!r} is unknown to hfcore's library and to the basis-set-exchange package" + hint)
    return _bse_family(name)


@lru_cache(maxsize=None)
def _bse_family(name: str) -> BSEFamily:
    import basis_set_exchange as bse

    return BSEFamily(bse, name)


__all__ = [
    "find_family",
    "available_basis_sets",
    "load_basis_file",
    "name_key",
    "shells_from_published",
    "published_citations",
    "LibraryFamily",
    "BSEFamily",
]
