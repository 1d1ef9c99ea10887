"""The ``hfcore`` command line: a thin layer over the public Python API.

One module per command: :mod:`~hfcore.cli.energy` (one single-point run
with a human report, JSON and .npz exports, through
:func:`hfcore.runs.run_single`), :mod:`~hfcore.cli.fit_sto` (a
least-squares Gaussian fit to a Slater function),
:mod:`~hfcore.cli.compare` (one molecule in several basis sets),
:mod:`~hfcore.cli.interaction` (raw and counterpoise-corrected interaction
energies), :mod:`~hfcore.cli.reaction` (reaction energies across basis
sets), :mod:`~hfcore.cli.bases` (the sets on offer) and
:mod:`~hfcore.cli.batch` (many geometries and bases, resumable). Shared
helpers: :mod:`~hfcore.cli.arguments` (options and the run request they
make), :mod:`~hfcore.cli.paths` (output files), :mod:`~hfcore.cli.exits`
(exit codes, errors as one line), :mod:`~hfcore.cli.console` (where output
goes); the human report in :mod:`~hfcore.cli.report` and
:mod:`~hfcore.cli.report_differences`. Nothing outside this package
imports it but ``hfcore.__main__``.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import sys
import time
from collections.abc import Sequence
from typing import TextIO

import numpy as np

from .._parallel import terminate_cleanly
from .._version import __version__
from ..errors import HfcoreError, ResourceError
from . import console
from .arguments import Parser, attach_element_items
from .commands import COMMANDS
from .exits import (
    EXIT_BROKEN_PIPE,
    EXIT_CODES_TEXT,
    EXIT_INTERRUPTED,
    detach,
    fail,
    floating_point_errors_as_exceptions,
    numerical_failure,
)


def _module(name: str):
    return importlib.import_module(f"{__name__}.{COMMANDS[name][0]}")


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The argument parser of the ``hfcore`` command.

    Parameters
    ----------
    command : str, optional
        Build only this command's own parser in full (and import only its
        module): every other command gets a bare entry with its one-line
        help, so the list of commands and the usage errors stay the same.
        By default every command is built.
    """
    parser = Parser(
        prog="hfcore",
        description="Restricted Hartree-Fock energies of small closed-shell molecules.",
        epilog=EXIT_CODES_TEXT,
    )
    parser.add_argument("--version", action="version", version=f"hfcore {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    # A batch copies every option of 'energy', so it needs that parser in full too.
    full = set(COMMANDS) if command is None else {command} | ({"energy"} if command == "batch" else set())
    energy_parser = None
    for name in COMMANDS:
        if name not in full:
            sub.add_parser(name, help=COMMANDS[name][1], add_help=False)
        elif name == "energy":
            energy_parser = _module(name).add_parser(sub)
        elif name == "batch":
            # Last, so that every option any command module gives 'energy'
            # reaches the batch jobs too.
            _module(name).add_batch_parser(sub, energy_parser)
        else:
            _module(name).add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None, *, stdout: TextIO | None = None, stderr: TextIO | None = None) -> int:
    """Run the ``hfcore`` command.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments after the program name (default: ``sys.argv[1:]``).
    stdout, stderr : text streams, optional
        Where to write (default: the process streams).

    Returns
    -------
    int
        The exit code: 0 on success, the error class's ``exit_code`` for an
        :class:`~hfcore.errors.HfcoreError` (6 for a floating-point failure
        that validation did not prevent), 2 for a usage error, 130 after an
        interrupt.
    """
    console.COMMAND_STARTED = time.perf_counter()
    console.FROM_PROCESS_START = argv is None
    out = sys.stdout if stdout is None else stdout
    err = sys.stderr if stderr is None else stderr
    words = attach_element_items([str(a) for a in (sys.argv[1:] if argv is None else argv)])
    # Only the command being run is built (and its module imported); --help,
    # --version and a mistyped command get every command.
    parser = build_parser(words[0] if words and words[0] in COMMANDS else None)
    Parser.argv = words
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            args = parser.parse_args(words)
    except SystemExit as exc:  # usage errors, --help and --version
        return int(exc.code or 0)
    json_to_stdout = getattr(args, "json", None) == "-"
    where = console.Console(out, err, json_to_stdout, getattr(args, "quiet", False))
    try:
        try:
            with floating_point_errors_as_exceptions(), terminate_cleanly():
                return args.handler(args, where)
        except (FloatingPointError, RuntimeWarning, np.linalg.LinAlgError) as exc:
            raise numerical_failure(exc) from None
    except HfcoreError as exc:
        return fail(err, str(exc), exc.exit_code)
    except MemoryError:
        # numpy's own allocation failures mean the same to a user as ours.
        return fail(err, "not enough memory for this run; try a smaller basis or molecule", ResourceError.exit_code)
    except KeyboardInterrupt:
        print("hfcore: interrupted", file=err, flush=True)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        # The reader stopped early (``| head``): stop too, without a message.
        detach(out)
        return EXIT_BROKEN_PIPE


__all__ = ["build_parser", "main", "EXIT_INTERRUPTED", "EXIT_BROKEN_PIPE"]
