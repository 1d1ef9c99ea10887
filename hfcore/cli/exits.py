"""Exit codes and the turning of errors into one line on stderr."""

from __future__ import annotations

import contextlib
import os
import typing
import warnings
from typing import TextIO

import numpy as np

from ..errors import NumericalError

#: Exit code after Ctrl-C (128 + SIGINT), the shell convention.
EXIT_INTERRUPTED: int = 130
#: Exit code when the reader of stdout went away (128 + SIGPIPE), the shell convention.
EXIT_BROKEN_PIPE: int = 141
#: Exit code when the batch ran but at least one job failed (its line says why).
EXIT_JOBS_FAILED: int = 10
#: Exit code after SIGTERM (128 + 15), the shell convention.
EXIT_TERMINATED: int = 143

#: The epilog every ``--help`` of the root command ends with.
EXIT_CODES_TEXT: str = (
    "Exit codes: 0 success, 2 bad input, 3 basis problem, 4 SCF not converged, "
    "5 not enough memory, 6 numerical failure, 10 some batch jobs failed, 11 batch results file unusable, "
    "12 no Dask scheduler answered, 130 interrupted, 141 output pipe closed, 143 terminated."
)


def detach(stream: TextIO) -> None:
    """Point a closed pipe's file descriptor at the null device.

    Otherwise the interpreter's final flush of the stream fails once more
    and prints a message of its own.
    """
    try:
        fd = stream.fileno()
    except (AttributeError, OSError, ValueError):
        return  # an in-memory stream: nothing to flush at exit
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, fd)
    os.close(devnull)


@contextlib.contextmanager
def floating_point_errors_as_exceptions() -> typing.Iterator[None]:
    """Run the work with numpy's floating-point problems raised, never printed.

    Overflow, division by zero and invalid values (underflow is normal in
    Gaussian integrals and stays silent) become exceptions, and so do the
    numerical warnings of numpy and scipy; :func:`hfcore.cli.main` turns them
    into a :class:`~hfcore.errors.NumericalError`. The warning filters are
    global, so they also hold in worker threads, where numpy's error state
    is the default ("warn").
    """
    with np.errstate(over="warn", divide="warn", invalid="warn", under="ignore"), warnings.catch_warnings():
        warnings.filterwarnings("error", message=r"(overflow|divide by zero|invalid value) encountered", category=RuntimeWarning)
        warnings.filterwarnings("error", category=RuntimeWarning, module=r"(numpy|scipy)(\.|$)")
        yield


def numerical_failure(exc: BaseException) -> NumericalError:
    what = str(exc).strip() or type(exc).__name__
    return NumericalError(
        f"numerical failure ({what}); the input passed validation, so please report it with the input files"
    )


def fail(err: TextIO, message: str, code: int) -> int:
    """Print ``hfcore: error: MESSAGE`` as one line and return ``code``."""
    one_line = " ".join(message.split())
    print(f"hfcore: error: {one_line}", file=err, flush=True)
    return code


__all__ = ["EXIT_INTERRUPTED", "EXIT_BROKEN_PIPE", "EXIT_JOBS_FAILED", "EXIT_TERMINATED", "EXIT_CODES_TEXT",
           "detach", "floating_point_errors_as_exceptions", "numerical_failure", "fail"]
