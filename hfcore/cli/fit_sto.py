"""``hfcore fit-sto``: a least-squares Gaussian expansion of a Slater function."""

from __future__ import annotations

import argparse
from typing import Any

from .. import export
from .commands import command_help
from . import report
from .arguments import add_json_argument, positive_float, positive_int
from .console import Console
from .paths import output_paths, report_written


#: The shells named in ``--help`` (those of :data:`hfcore.basis.sto.SLATER_SHELLS`).
SHELLS_IN_HELP: tuple[str, ...] = ("1s", "2p", "2sp", "3sp", "3d")


def add_parser(sub: Any) -> None:
    """Register ``hfcore fit-sto`` on the subcommand set ``sub``."""
    fit = sub.add_parser("fit-sto", help=command_help("fit-sto"))
    # The fitter validates shell and count itself, so its (heavier) module is
    # imported only when a fit is asked for; a test holds this list to its table.
    fit.add_argument("--shell", required=True, metavar="SHELL",
                     help=f"Slater shell to fit: {', '.join(SHELLS_IN_HELP)}")
    fit.add_argument("--gaussians", required=True, type=positive_int, metavar="N", help="number of Gaussians, 1 to 6")
    fit.add_argument("--zeta", type=positive_float, default=1.0, metavar="Z", help="Slater exponent (default 1)")
    add_json_argument(fit)
    fit.add_argument("--plot", metavar="PNG", help="plot the Slater function, the fit and their difference")
    fit.set_defaults(handler=run)


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore fit-sto``: fit, then report, write JSON and plot."""
    from ..basis.sto import fit_sto

    paths = output_paths(args, "json", "plot")
    fit = fit_sto(args.shell, args.gaussians, args.zeta)
    record = export.sto_fit_record(fit)
    # The plot goes first: it is the step that can fail (no matplotlib), and
    # a failed run must leave no file behind.
    if "plot" in paths:
        from ..plots import plot_sto_fit

        plot_sto_fit([fit], paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    console.report(report.format_sto_fit(fit))
    report_written(console, paths.values())
    return 0


__all__ = ["add_parser", "run"]
