"""``hfcore bases``: the basis sets on offer, orbital and fitting sets apart."""

from __future__ import annotations

import argparse
from typing import Any

from .._version import __version__
from .commands import command_help
from . import report
from .console import Console


def add_parser(sub: Any) -> None:
    """Register ``hfcore bases`` on the subcommand set ``sub``."""
    bases = sub.add_parser("bases", help=command_help("bases"))
    bases.set_defaults(handler=run)


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore bases``: list the shipped sets and the fitted STO-nG sets."""
    from ..basis.library import available_basis_sets, find_family
    from ..basis.sto import MAX_GAUSSIANS

    fitted = [f"STO-{n}G" for n in range(1, MAX_GAUSSIANS + 1)]
    console.report(f"hfcore {__version__} · basis sets")
    console.report(report.format_basis_list([find_family(n) for n in available_basis_sets()], fitted))
    return 0


__all__ = ["add_parser", "run"]
