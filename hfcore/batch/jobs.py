"""Job lists: which (geometry, basis) pairs a batch runs, and the key that names each.

A geometry argument is one of

* a file (any name; read as XYZ when the job runs),
* a directory: every ``*.xyz`` file directly inside it, in sorted order,
* a list file, written ``@PATH``: one geometry path per line, optionally
  followed by ``charge=N``; blank lines and text after ``#`` are ignored,
  and relative paths are taken from the list file's directory.

A job's key is a SHA-256 digest of the geometry file's *content*, the
charge, the basis name and the per-job options, so that a results file
recognises a finished job even when the file has been moved or renamed,
and does not mistake an edited file for a finished one.
"""

from __future__ import annotations

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

_CHARGE_FIELD = re.compile(r"^charge=([+-]?\d+)$")


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
    """

    path: str
    charge: int | None = None
    origin: str = ""


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
        The other ``energy`` options (SCF settings, basis flags, ...), by
        option name, as plain JSON values.
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
        charge = None
        parts = text.rsplit(None, 1)
        if "=" in parts[-1]:
            match = _CHARGE_FIELD.match(parts[-1])
            if len(parts) < 2 or not match:
                raise InputError(f"{path}:{number}: expected 'PATH [charge=N]', found {text!r}")
            charge = int(match.group(1))
            text = parts[0]
        entry = text if os.path.isabs(text) else os.path.join(base, text)
        entries.append(GeometryEntry(entry, charge, f"{path}:{number}"))
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
    """The identity of a job in a results file.

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
        The per-job options (plain JSON values).

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


def make_jobs(
    entries: Sequence[GeometryEntry], bases: Sequence[str], default_charge: int, options: Mapping[str, Any]
) -> tuple[list[Job], int]:
    """Every (geometry, basis) pair, each once.

    Parameters
    ----------
    entries : sequence of GeometryEntry
    bases : sequence of str
        Basis names. Ignored when ``options`` has a ``basis_file`` (which
        replaces the basis, as in ``hfcore energy``): each geometry then
        gets one job whose ``basis`` is that file's path.
    default_charge : int
        The charge of entries that give none.
    options : mapping
        The per-job ``energy`` options by option name (the argparse dest,
        e.g. ``{"energy_tol": 1e-9, "spherical": True}``); the others keep
        their defaults.

    Returns
    -------
    jobs : list of Job
        Geometry-major order (all bases of the first geometry, then the next).
    duplicates : int
        How many pairs were dropped because an identical job came earlier.

    Raises
    ------
    InputError
        For an option name that ``hfcore energy`` does not have.
    """
    from .command import job_option_defaults

    defaults = job_option_defaults()
    unknown = sorted(set(options) - set(defaults))
    if unknown:
        raise InputError(f"batch: unknown job option(s) {', '.join(unknown)}; known: {', '.join(defaults)}")
    # Options left out take their defaults, so a job is the same job whether
    # it was made from the command line or in Python.
    options = {**defaults, **options}
    if options.get("basis_file"):
        # The file is what the job uses, so the job and its results line say so.
        bases = [str(options["basis_file"])]
    digests: dict[str, str | None] = {}
    jobs: list[Job] = []
    seen: set[str] = set()
    duplicates = 0
    for position, entry in enumerate(entries):
        if entry.path not in digests:
            digests[entry.path] = file_digest(entry.path)
        digest = digests[entry.path]
        charge = default_charge if entry.charge is None else entry.charge
        for column, basis in enumerate(bases):
            key = job_key(digest, entry.path, charge, basis, options)
            if key in seen:
                duplicates += 1
                continue
            seen.add(key)
            jobs.append(Job(entry.path, basis, charge, dict(options), digest, key, entry.origin, (position, column)))
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
    "make_jobs",
    "parse_basis_list",
    "largest_first",
]
