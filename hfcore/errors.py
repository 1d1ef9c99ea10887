"""The exception hierarchy of hfcore.

The API raises these; the command line turns each into a one-line message
and the exit code carried by its class (documented in the README).
"""

from __future__ import annotations


class HfcoreError(Exception):
    """Base class of every error hfcore raises on purpose.

    Attributes
    ----------
    exit_code : int
        The process exit code the command line uses for this error.
    """

    exit_code: int = 1


class InputError(HfcoreError):
    """Bad user input: a geometry file, a flag value, an option combination.

    The message names the file and line where one applies, in the form
    ``path:line: what is wrong``.
    """

    exit_code = 2


class BasisError(InputError):
    """A basis set that cannot be used: unknown name, element not covered,
    malformed basis file, unsupported angular momentum."""

    exit_code = 3


class ConvergenceError(HfcoreError):
    """The SCF did not converge within the allowed iterations.

    Attributes
    ----------
    result : object or None
        The last (unconverged) result record, so a caller can inspect the
        history. ``None`` if none was produced.
    """

    exit_code = 4

    def __init__(self, message: str, result: object | None = None) -> None:
        super().__init__(message)
        self.result = result


class ResourceError(HfcoreError):
    """A run would need more memory (or another resource) than allowed."""

    exit_code = 5


class NumericalError(HfcoreError):
    """A floating-point failure that input validation did not prevent.

    Overflow, an invalid value (NaN) or a linear-algebra routine that did not
    converge. Validated input should never lead here; the command line turns
    such a failure into this error instead of a numpy warning or traceback.
    """

    exit_code = 6


class ResultsFileError(InputError):
    """A batch results file that cannot be used: unreadable, not a results
    file, written by another version of hfcore, or held by another batch."""

    exit_code = 11


class SchedulerError(HfcoreError):
    """A Dask scheduler that does not answer (or the Dask extra is missing)."""

    exit_code = 12


__all__ = [
    "HfcoreError",
    "InputError",
    "BasisError",
    "ConvergenceError",
    "ResourceError",
    "NumericalError",
    "ResultsFileError",
    "SchedulerError",
]
