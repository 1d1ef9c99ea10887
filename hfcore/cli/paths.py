"""Output files of a command: checked before any work, and listed after it."""

from __future__ import annotations

import argparse
from collections.abc import Iterable

from .. import export
from ..errors import InputError
from .console import Console


def output_paths(args: argparse.Namespace, *names: str) -> dict[str, str]:
    """The output paths among ``names`` that were given, each checked to be writable and distinct.

    Checked before any computation so a typo in a path costs no SCF time;
    ``--json -`` (stdout) is left out.
    """
    paths: dict[str, str] = {}
    for name in names:
        value = getattr(args, name, None)
        if value is None or (name == "json" and value == "-"):
            continue
        path = export.check_output_path(value)
        if path in paths.values():
            raise InputError(f"{path}: given for two outputs; use different files")
        paths[name] = path
    return paths


def report_written(console: Console, paths: Iterable[str]) -> None:
    """The closing lines of a report: each file written."""
    written = [f"  wrote {path}" for path in paths]
    if written:
        console.report("\n" + "\n".join(written))


__all__ = ["output_paths", "report_written"]
