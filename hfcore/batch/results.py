"""The results file of a batch: one JSON line per finished job, appended whole.

Layout (JSON Lines, UTF-8):

* line 1, the header: ``{"hfcore_batch_results": FORMAT, "hfcore_version": "..."}``;
  a file whose header names an unknown format or another hfcore version is
  refused, so results of different programs never mix. The format number
  says which rule made the job keys: 2 (written now) keys a job by its run
  request's fields, 1 by the command's option names; a file of format 1
  still resumes, its jobs found by their rule-1 keys
  (:attr:`hfcore.batch.jobs.Job.legacy_key`), and lines added to it keep
  the file's own header;
* then one line per finished job, ``{"job": {...}, "status": "ok" | "failed", ...}``.

Every line is written with a single ``os.write`` on a descriptor opened
with ``O_APPEND`` and then ``fsync``-ed, so a crash, SIGTERM or SIGKILL
leaves either the whole line or none of it, and a reader can follow the
file while the batch runs. A trailing line without its newline can only
come from a failure of the machine or the disk mid-write; on resume it is
cut off (and the user told). When a job appears more than once (a failed
job rerun with ``--retry-failed``) the last line counts.

A writer holds an exclusive ``flock`` on ``FILE.lock`` for as long as it
runs, so a second batch on the same file is refused instead of
interleaving lines. The lock file is left in place: deleting it would let
two writers lock two different files.
"""

from __future__ import annotations

import fcntl
import json
import os
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any

from ..errors import ResultsFileError

#: The version of the results-file layout (and of the job-key rule); bumped on any incompatible change.
RESULTS_FORMAT: int = 2
#: Formats this hfcore reads and resumes (1: jobs keyed by the command's option names).
READABLE_FORMATS: tuple[int, ...] = (1, 2)

_HEADER_KEY = "hfcore_batch_results"


def header_record() -> dict[str, Any]:
    """The first line of a results file written by this hfcore."""
    from .._version import __version__

    return {_HEADER_KEY: RESULTS_FORMAT, "hfcore_version": __version__}


def encode_line(record: Mapping[str, Any]) -> bytes:
    """One compact JSON line (NaN and infinity become ``null``), with its newline."""
    from ..export import plain_values

    text = json.dumps(plain_values(record), separators=(",", ":"), allow_nan=False)
    return (text + "\n").encode("utf-8")


@dataclass
class ResultsContents:
    """What a results file holds.

    Attributes
    ----------
    records : list of dict
        The job lines in file order.
    partial_bytes : int
        Length of a trailing line without newline (0 if none).
    valid_length : int
        Bytes up to and including the last complete line.
    format : int
        The results format in the header (the key rule of the file's lines);
        :data:`RESULTS_FORMAT` for a new file.
    """

    records: list[dict[str, Any]]
    partial_bytes: int
    valid_length: int
    format: int = RESULTS_FORMAT

    def latest(self) -> dict[str, dict[str, Any]]:
        """The last line of each job, by job key."""
        return {r["job"]["key"]: r for r in self.records}

    def latest_for(self, jobs: Iterable[Any]) -> dict[str, dict[str, Any]]:
        """The last line of each of ``jobs`` the file holds, by the job's (current) key.

        In a file of format 1 a job is also found by its rule-1 key
        (``job.legacy_key``); the later line counts when both are there.
        """
        latest = self.latest()
        position = {id(r): k for k, r in enumerate(self.records)}
        found = {}
        for job in jobs:
            lines = [latest.get(job.key)]
            if self.format == 1 and getattr(job, "legacy_key", None):
                lines.append(latest.get(job.legacy_key))
            lines = [r for r in lines if r is not None]
            if lines:
                found[job.key] = max(lines, key=lambda r: position[id(r)])
        return found


def _check_header(path: str, line: bytes) -> int:
    try:
        header = json.loads(line)
    except ValueError:
        header = None
    if not isinstance(header, dict) or _HEADER_KEY not in header:
        raise ResultsFileError(f"{path}: not an hfcore batch results file (no header line)")
    ours = header_record()
    if header.get(_HEADER_KEY) not in READABLE_FORMATS or header.get("hfcore_version") != ours["hfcore_version"]:
        raise ResultsFileError(
            f"{path}: written by hfcore {header.get('hfcore_version')} (results format "
            f"{header.get(_HEADER_KEY)}), this is hfcore {ours['hfcore_version']} (format {RESULTS_FORMAT}); "
            "use a new results file"
        )
    return int(header[_HEADER_KEY])


def read_results(path: str) -> ResultsContents:
    """Read and check a results file.

    Parameters
    ----------
    path : str

    Returns
    -------
    ResultsContents
        Empty (no records) if the file does not exist or is empty.

    Raises
    ------
    ResultsFileError
        If the file cannot be read, has no valid header, comes from another
        version, or holds a complete line that is not a job record
        (``path:line: ...``).
    """
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except FileNotFoundError:
        return ResultsContents([], 0, 0)
    except IsADirectoryError:
        raise ResultsFileError(f"{path}: is a directory, not a results file") from None
    except OSError as exc:
        raise ResultsFileError(f"{path}: cannot read the results file ({exc.strerror})") from None
    if not data:
        return ResultsContents([], 0, 0)
    end = data.rfind(b"\n") + 1
    partial = len(data) - end
    lines = data[:end].split(b"\n")[:-1]
    if not lines:
        raise ResultsFileError(f"{path}: not an hfcore batch results file (no complete header line)")
    file_format = _check_header(path, lines[0])
    records = []
    for number, line in enumerate(lines[1:], start=2):
        try:
            record = json.loads(line)
            ok = isinstance(record, dict) and isinstance(record["job"]["key"], str) and "status" in record
        except (ValueError, KeyError, TypeError):
            ok = False
        if not ok:
            raise ResultsFileError(f"{path}:{number}: not a batch job record")
        records.append(record)
    return ResultsContents(records, partial, end, file_format)


class ResultsWriter:
    """Exclusive appender to a results file (a context manager).

    On entry it takes the lock, reads what is there and cuts off a partial
    last line; :meth:`append` writes one job line whole and makes it
    durable (the first one creates the file with its header).

    Parameters
    ----------
    path : str
        The results file (created if missing).

    Attributes
    ----------
    contents : ResultsContents
        What the file held when it was opened.
    truncated_bytes : int
        Size of the partial last line that was cut off (0 if none).
    """

    def __init__(self, path: str) -> None:
        self.path = path
        self.contents = ResultsContents([], 0, 0)
        self.truncated_bytes = 0
        self._lock_fd: int | None = None
        self._fd: int | None = None
        self._written: set[str] = set()

    def __enter__(self) -> ResultsWriter:
        lock_path = self.path + ".lock"
        try:
            self._lock_fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o666)
        except OSError as exc:
            raise ResultsFileError(f"{lock_path}: cannot create the lock file ({exc.strerror})") from None
        try:
            fcntl.flock(self._lock_fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            self._release()
            raise ResultsFileError(
                f"{self.path}: another batch is writing this results file (lock {lock_path} is held)"
            ) from None
        try:
            self.contents = read_results(self.path)
            if self.contents.partial_bytes:
                os.truncate(self.path, self.contents.valid_length)
                self.truncated_bytes = self.contents.partial_bytes
        except OSError as exc:
            self._release()
            raise ResultsFileError(f"{self.path}: cannot write the results file ({exc.strerror})") from None
        except BaseException:
            self._release()
            raise
        return self

    def __exit__(self, *exc: object) -> None:
        self._release()

    def _release(self) -> None:
        for name in ("_fd", "_lock_fd"):
            fd = getattr(self, name)
            if fd is not None:
                os.close(fd)  # closing the lock descriptor releases the flock
                setattr(self, name, None)

    def _write(self, line: bytes) -> None:
        if self._fd is None:
            # Opened at the first line, so a batch that fails before any job
            # finishes (e.g. no scheduler) leaves no file behind.
            self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o666)
            if os.fstat(self._fd).st_size == 0:
                self._write(encode_line(header_record()))
        view = memoryview(line)
        while view:  # a regular file takes the whole line at once; the loop is for safety only
            done = os.write(self._fd, view)
            view = view[done:]
        os.fsync(self._fd)

    def append(self, record: Mapping[str, Any]) -> bool:
        """Write one job line, unless this writer already wrote that job.

        Parameters
        ----------
        record : mapping
            A job record with ``record["job"]["key"]``.

        Returns
        -------
        bool
            ``False`` if the job was already written by this writer (a
            result delivered twice, e.g. by a retried Dask task).
        """
        key = record["job"]["key"]
        if key in self._written:
            return False
        try:
            self._write(encode_line(record))
        except OSError as exc:
            raise ResultsFileError(f"{self.path}: cannot write the results file ({exc.strerror})") from None
        self._written.add(key)
        return True


def iter_job_records(path: str) -> Iterator[dict[str, Any]]:
    """The latest line of every job in a results file, in order of first appearance.

    A partial last line is ignored. Raises :class:`ResultsFileError` like
    :func:`read_results`, and also when the file does not exist.
    """
    if not os.path.exists(path):
        raise ResultsFileError(f"{path}: results file not found")
    contents = read_results(path)
    latest = contents.latest()
    first_seen = dict.fromkeys(r["job"]["key"] for r in contents.records)
    for key in first_seen:
        yield latest[key]


__all__ = [
    "RESULTS_FORMAT",
    "READABLE_FORMATS",
    "header_record",
    "encode_line",
    "ResultsContents",
    "read_results",
    "ResultsWriter",
    "iter_job_records",
]
