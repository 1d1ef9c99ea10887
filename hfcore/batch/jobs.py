"""Job lists: which (geometry, basis) pairs a batch runs, and the key that names each.

A geometry argument is one of

* a file (any name; read as XYZ when the job runs),
* a directory: every ``*.xyz`` file directly inside it, in sorted order,
* a list file, written ``@PATH``: one geometry path per line, optionally
  followed by ``charge=N`` and ``multiplicity=M`` (in either order); blank
  lines and text after ``#`` are ignored, and relative paths are taken from
  the list file's directory.

Each job is one :class:`~hfcore.runs.RunRequest`. Its key is a SHA-256
digest of the geometry file's *content* and the request's canonical fields
(:meth:`~hfcore.runs.RunRequest.key_fields`), so that a results file
recognises a finished job even when the file has been moved or renamed,
does not mistake an edited file for a finished one, and keeps its keys when
a command-line flag is renamed. That is key rule 2 (results format 2);
files of format 1 keyed jobs by the command's option names
(:func:`job_key`), and their jobs are still recognised by that rule
(:attr:`Job.legacy_key`).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from ..errors import InputError

#: The prefix that marks a geometry argument as a list file.
LIST_PREFIX: str = "@"

_LIST_FIELDS = {"charge": re.compile(r"^charge=([+-]?\d+)$"), "multiplicity": re.compile(r"^multiplicity=(\d+)$")}

#: The per-job options of key rule 1 (results format 1) at their defaults, by the option names of that
#: time: what a format-1 file's keys were made of. Frozen: never changes with the command line.
FORMAT1_OPTION_DEFAULTS: dict[str, Any] = {
    "units": "angstrom", "spherical": None, "basis_file": None, "basis_for": [], "zeta": [], "energy_tol": None,
    "gradient_tol": None, "max_iterations": None, "max_diis_size": None, "lindep_threshold": None,
    "stability": "follow", "direct": None, "memory": None, "fit_basis": None, "guess": "sad", "ghost": None,
    "atoms": None, "mp2": False, "frozen_core": False, "mp2_fit_basis": None, "origin": None,
}
_FORMAT1_STABILITY = {"skip": "off", "report": "check", "descend": "follow"}


@dataclass(frozen=True)
class GeometryEntry:
    """One geometry named on the command line or in a list file.

    Attributes
    ----------
    path : str
        The path as given (joined with the list file's directory for a
        relative list entry).
    charge : int or None
        The charge from the list file, or ``None`` for the batch default.
    origin : str
        Where the entry came from, e.g. ``"scan.list:4"``, for messages.
    multiplicity : int or None
        The multiplicity from the list file, or ``None`` for the batch default.
    """

    path: str
    charge: int | None = None
    origin: str = ""
    multiplicity: int | None = None


@dataclass(frozen=True)
class Job:
    """One (geometry, basis) calculation of a batch.

    Attributes
    ----------
    geometry : str
        The geometry path as given.
    basis : str
        The basis-set name, or the path of the ``--basis-file`` used instead.
    charge : int
        The total charge of the molecule.
    options : dict
        The other fields of the job's :class:`~hfcore.runs.RunRequest`
        (SCF settings, basis choices, ...), by request field name, as plain
        JSON values (no ``threads``: that is the batch's).
    geometry_sha256 : str or None
        Digest of the geometry file's bytes; ``None`` if it cannot be read.
    key : str
        The identity of the job in a results file (see the module notes).
    origin : str
        Where the geometry was named, for messages.
    order : tuple of int
        Position of the geometry and of the basis in the batch as given,
        so a summary can list them in that order whatever order the jobs
        finished in.
    size : int
        Estimated number of basis functions (0 if unknown); larger jobs
        start first.
    legacy_key : str or None
        The key the same job had under key rule 1 (results format 1), or
        ``None`` when rule 1 could not express it (e.g. a multiplicity).
    """

    geometry: str
    basis: str
    charge: int
    options: dict[str, Any]
    geometry_sha256: str | None
    key: str
    origin: str = ""
    order: tuple[int, int] = (0, 0)
    size: int = field(default=0, compare=False)
    legacy_key: str | None = field(default=None, compare=False)

    def request(self) -> Any:
        """The :class:`~hfcore.runs.RunRequest` this job runs (``threads`` left to the batch)."""
        from ..runs import RunRequest

        return RunRequest.from_dict(self.geometry, {**self.options, "basis": self.basis, "charge": self.charge})

    def record(self) -> dict[str, Any]:
        """The ``job`` part of a results line."""
        return {
            "key": self.key,
            "geometry": self.geometry,
            "basis": self.basis,
            "charge": self.charge,
            "geometry_sha256": self.geometry_sha256,
            "origin": self.origin,
            "order": list(self.order),
            "options": self.options,
        }


def read_list_file(path: str) -> list[GeometryEntry]:
    """The geometries named in a list file.

    Parameters
    ----------
    path : str
        The list file (without the ``@``).

    Returns
    -------
    list of GeometryEntry

    Raises
    ------
    InputError
        If the list file cannot be read, or a line has a malformed field
        (``path:line: what is wrong``). Missing geometry files are *not* an
        error here: each becomes a failed job, and the rest still run.
    """
    try:
        with open(path, encoding="utf-8") as handle:
            lines = handle.read().splitlines()
    except FileNotFoundError:
        raise InputError(f"{path}: list file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the list file ({getattr(exc, 'strerror', None) or exc})") from None
    base = os.path.dirname(path)
    entries = []
    for number, line in enumerate(lines, start=1):
        text = line.split("#", 1)[0].strip()
        if not text:
            continue
        found: dict[str, int] = {}
        while True:
            parts = text.rsplit(None, 1)
            if "=" not in parts[-1]:
                break
            name = parts[-1].partition("=")[0]
            match = _LIST_FIELDS[name].match(parts[-1]) if name in _LIST_FIELDS else None
            if len(parts) < 2 or not match or name in found:
                raise InputError(f"{path}:{number}: expected 'PATH [charge=N] [multiplicity=M]', found {line.strip()!r}")
            found[name] = int(match.group(1))
            text = parts[0]
        charge, multiplicity = found.get("charge"), found.get("multiplicity")
        entry = text if os.path.isabs(text) else os.path.join(base, text)
        entries.append(GeometryEntry(entry, charge, f"{path}:{number}", multiplicity))
    if not entries:
        raise InputError(f"{path}: the list file names no geometry")
    return entries


def expand_geometries(arguments: Iterable[str]) -> list[GeometryEntry]:
    """Turn geometry arguments (files, directories, ``@list`` files) into entries.

    Parameters
    ----------
    arguments : iterable of str
        As given on the command line.

    Returns
    -------
    list of GeometryEntry
        In argument order; a directory contributes its ``.xyz`` files
        sorted by name.

    Raises
    ------
    InputError
        For a directory without ``.xyz`` files or a bad list file.
    """
    entries: list[GeometryEntry] = []
    for argument in arguments:
        if argument.startswith(LIST_PREFIX):
            entries.extend(read_list_file(argument[len(LIST_PREFIX):]))
        elif os.path.isdir(argument):
            names = sorted(n for n in os.listdir(argument) if n.endswith(".xyz"))
            if not names:
                raise InputError(f"{argument}: the directory holds no .xyz file")
            entries.extend(GeometryEntry(os.path.join(argument, n), None, argument) for n in names)
        else:
            entries.append(GeometryEntry(argument, None, "command line"))
    if not entries:
        raise InputError("batch: give at least one geometry (a file, a directory or @LIST)")
    return entries


def file_digest(path: str) -> str | None:
    """SHA-256 of a file's bytes as hex, or ``None`` if it cannot be read."""
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    except OSError:
        return None
    return digest.hexdigest()


def job_key(geometry_sha256: str | None, geometry: str, charge: int, basis: str, options: Mapping[str, Any]) -> str:
    """The identity of a job under key rule 1 (results format 1): the command's option names.

    Kept so that results files of format 1 still resume; new files use
    :func:`request_key`.

    Parameters
    ----------
    geometry_sha256 : str or None
        Digest of the geometry file; when ``None`` (unreadable file) the
        absolute path stands in, so the failed job can still be recognised.
    geometry : str
        The path, used only when there is no digest.
    charge : int
    basis : str
        Compared without regard to case and surrounding spaces.
    options : mapping
        The per-job options by the option names of format 1
        (:data:`FORMAT1_OPTION_DEFAULTS`), as plain JSON values.

    Returns
    -------
    str
        A 64-character hex digest.
    """
    identity = {
        "geometry": geometry_sha256 or f"unreadable:{os.path.abspath(geometry)}",
        "charge": int(charge),
        "basis": basis.strip().lower(),
        "options": dict(options),
    }
    text = json.dumps(identity, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def request_key(geometry_sha256: str | None, request: Any) -> str:
    """The identity of a job under key rule 2 (results format 2): the request's canonical fields.

    Parameters
    ----------
    geometry_sha256 : str or None
        Digest of the geometry file; when ``None`` (unreadable file) the
        absolute path stands in.
    request : RunRequest
        Its :meth:`~hfcore.runs.RunRequest.key_fields` (everything but the
        geometry and the thread count) make the rest of the identity.

    Returns
    -------
    str
        A 64-character hex digest.
    """
    geometry = geometry_sha256 or f"unreadable:{os.path.abspath(os.fspath(request.geometry))}"
    identity = {"geometry": geometry, "run": request.key_fields()}
    text = json.dumps(identity, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def format1_key(geometry_sha256: str | None, request: Any) -> str | None:
    """The key the job of ``request`` had under rule 1, or ``None`` if rule 1 cannot express it.

    Rule 1 knew no multiplicity and no method, and named the stability
    settings ``off``, ``check``, ``follow`` and the memory option ``memory``.
    """
    if request.multiplicity is not None or request.method is not None:
        return None
    fields = request.to_dict()
    options = {name: fields.get(name, default) for name, default in FORMAT1_OPTION_DEFAULTS.items()}
    options["memory"] = fields["memory_mib"]
    options["stability"] = _FORMAT1_STABILITY[request.stability]
    options["basis_for"] = [f"{el}={name}" for el, name in request.basis_for]
    options["zeta"] = list(request.zeta)
    options["origin"] = None if request.origin is None else list(request.origin)
    return job_key(geometry_sha256, os.fspath(request.geometry), request.charge, request.basis, options)


def _template(options: Any) -> Any:
    """A request template from a RunRequest or a mapping of request fields."""
    from ..runs import RunRequest

    if isinstance(options, RunRequest):
        return options
    known = {f.name for f in dataclasses.fields(RunRequest)} - {"geometry"}
    unknown = sorted(set(options) - known)
    if unknown:
        raise InputError(f"batch: unknown job option(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}")
    return RunRequest("", **options)


def make_jobs(
    entries: Sequence[GeometryEntry], bases: Sequence[str], default_charge: int, options: Any = None,
    default_multiplicity: int | None = None,
) -> tuple[list[Job], int]:
    """Every (geometry, basis) pair, each once.

    Parameters
    ----------
    entries : sequence of GeometryEntry
    bases : sequence of str
        Basis names. Ignored when the request has a ``basis_file`` (which
        replaces the basis, as in ``hfcore energy``): each geometry then
        gets one job whose ``basis`` is that file's path.
    default_charge : int
        The charge of entries that give none.
    options : RunRequest or mapping, optional
        The request every job starts from (its geometry, basis and charge
        are set per job), or its fields by name, e.g.
        ``{"energy_tol": 1e-9, "spherical": True}``; the others keep their
        defaults. ``threads`` is ignored (it is the batch's).
    default_multiplicity : int, optional
        The multiplicity of entries that give none (default: the request's).

    Returns
    -------
    jobs : list of Job
        Geometry-major order (all bases of the first geometry, then the next).
    duplicates : int
        How many pairs were dropped because an identical job came earlier.

    Raises
    ------
    InputError
        For a field name that :class:`~hfcore.runs.RunRequest` does not have.
    """
    template = dataclasses.replace(_template(options or {}), threads=None)
    if default_multiplicity is None:
        default_multiplicity = template.multiplicity
    if template.basis_file:
        # The file is what the job uses, so the job and its results line say so.
        bases = [str(template.basis_file)]
    digests: dict[str, str | None] = {}
    jobs: list[Job] = []
    seen: set[str] = set()
    duplicates = 0
    for position, entry in enumerate(entries):
        if entry.path not in digests:
            digests[entry.path] = file_digest(entry.path)
        digest = digests[entry.path]
        charge = default_charge if entry.charge is None else entry.charge
        multiplicity = default_multiplicity if entry.multiplicity is None else entry.multiplicity
        for column, basis in enumerate(bases):
            request = dataclasses.replace(template, geometry=entry.path, basis=basis, charge=charge,
                                          multiplicity=multiplicity)
            key = request_key(digest, request)
            if key in seen:
                duplicates += 1
                continue
            seen.add(key)
            fields = {k: v for k, v in request.to_dict().items() if k not in {"basis", "charge", "threads"}}
            jobs.append(Job(entry.path, basis, charge, fields, digest, key, entry.origin, (position, column),
                            legacy_key=format1_key(digest, request)))
    return jobs, duplicates


def parse_basis_list(text: str) -> list[str]:
    """Basis names from a comma-separated list.

    Raises
    ------
    InputError
        If the list names no basis.
    """
    names = [n.strip() for n in text.split(",") if n.strip()]
    if not names:
        raise InputError("--basis: give at least one basis name, e.g. sto-3g,6-31g")
    return names


def largest_first(jobs: Sequence[Job]) -> list[Job]:
    """Jobs by decreasing estimated size, ties in their given order.

    Starting the big jobs first keeps every worker busy to the end instead
    of leaving one long job running alone.
    """
    return sorted(jobs, key=lambda job: -job.size)


__all__ = [
    "LIST_PREFIX",
    "GeometryEntry",
    "Job",
    "read_list_file",
    "expand_geometries",
    "file_digest",
    "job_key",
    "request_key",
    "format1_key",
    "FORMAT1_OPTION_DEFAULTS",
    "make_jobs",
    "parse_basis_list",
    "largest_first",
]
