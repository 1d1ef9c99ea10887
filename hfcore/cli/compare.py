"""``hfcore compare``: one molecule in several basis sets, with basis-limit estimates."""

from __future__ import annotations

import argparse
from typing import Any

from .. import export
from .._version import __version__
from .commands import command_help
from . import report
from .arguments import (
    add_fit_argument,
    add_geometry_arguments,
    add_json_argument,
    add_stability_argument,
    add_threads_argument,
    basis_names,
    check_study_spin,
    run_request,
)
from .console import Console
from .paths import output_paths, report_written


def add_parser(sub: Any) -> None:
    """Register ``hfcore compare`` on the subcommand set ``sub``."""
    compare = sub.add_parser("compare", help=command_help("compare"))
    add_geometry_arguments(compare)  # with --multiplicity and --uhf | --rohf
    compare.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. sto-3g,6-31g*,cc-pvdz"
    )
    add_fit_argument(compare)
    add_stability_argument(compare)
    add_json_argument(compare)
    compare.add_argument("--plot", metavar="PNG", help="plot energy against the number of basis functions")
    add_threads_argument(compare)
    compare.set_defaults(handler=run)


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore compare``: run every basis, then report, write JSON and plot."""
    from ..studies import compare_bases
    from ..runs import read_molecule

    paths = output_paths(args, "json", "plot")
    names = basis_names(args)
    molecule = read_molecule(run_request(args))
    molecule = check_study_spin(args, molecule, "compare")
    options = run_request(args).scf_options()
    comparison = compare_bases(
        molecule, names, spherical=args.spherical, options=options, message_progress=console.study_progress(),
        method=args.method,
    )
    for row in comparison.rows:
        if row.stable is False:
            hint = " (rerun with --stability descend)" if options.stability == "report" else ""
            console.warn(f"{row.basis}: the {row.method or 'RHF'} solution is unstable, so a lower solution exists"
                         f"{hint}")
    record = export.comparison_record(comparison)
    if "plot" in paths:
        from ..plots import plot_comparison

        plot_comparison(comparison, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    # The report comes whole after the runs, so a bad name or an open shell
    # found by compare_bases leaves stdout empty, as for every other error.
    methods = " and ".join(dict.fromkeys(row.method or "RHF" for row in comparison.rows))
    console.report(f"hfcore {__version__} · basis comparison (Hartree–Fock: {methods})")
    console.report(report.format_molecule(molecule))
    console.report(report.format_comparison(comparison))
    if args.fit_basis is not None:
        console.report(f"  note: J and K density-fitted in every basis (--fit-basis {args.fit_basis})")
    report_written(console, paths.values())
    return 0


__all__ = ["add_parser", "run"]
