"""``hfcore reaction``: reaction energies from SCF totals in several basis sets."""

from __future__ import annotations

import argparse
from typing import Any

from .. import export
from .._version import __version__
from ..errors import InputError
from .commands import command_help
from .arguments import (
    add_fit_argument,
    add_geometry_arguments,
    add_json_argument,
    add_scf_arguments,
    basis_names,
    add_method_arguments,
    check_study_spin,
    scf_options,
)
from .console import Console
from .paths import output_paths, report_written
from .pieces import add_batch_arguments, job_request, run_jobs


def add_parser(sub: Any) -> None:
    """Register ``hfcore reaction`` on the subcommand set ``sub``."""
    reaction = sub.add_parser("reaction", help=command_help("reaction"))
    reaction.add_argument(
        "reactions", nargs="+", metavar="SPEC",
        help="an equation over geometry files, e.g. 'formaldehyde.xyz + hydrogen.xyz -> methanol.xyz', "
        "'2 water.xyz -> water_dimer.xyz' or 'ammonia.xyz + water.xyz -> ammonium.xyz[+1] + hydroxide.xyz[-1]'; "
        "the spin follows the charge in the brackets: 'water.xyz -> o.xyz[triplet] + 2 h.xyz[doublet]', "
        "'h2o.xyz[+1 doublet]' (singlet ... sextet; default 1 for an even, 2 for an odd electron count); "
        "several equations share their species",
    )
    reaction.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. cc-pvdz,cc-pvtz,cc-pvqz"
    )
    add_geometry_arguments(reaction, geometry=False, charge_option=False, spin=False)
    add_method_arguments(reaction)
    add_scf_arguments(reaction)
    add_fit_argument(reaction)
    add_json_argument(reaction)
    reaction.add_argument("--plot", metavar="PNG", help="plot the reaction energies against basis size")
    add_batch_arguments(reaction, "each species in each basis as a batch job")
    reaction.set_defaults(handler=run)


def _batch_runner(args: argparse.Namespace, console: Console) -> Any:
    """A runner for :func:`reaction_energies` that sends each species × basis to the batch machinery.

    Each piece is a single-run job keyed by the geometry file's content and
    the request's fields (charge, multiplicity and method included), so a
    second run with the same results file finds the finished pieces there
    and runs only the rest.
    """
    import dataclasses

    from ..batch import GeometryEntry, make_jobs
    from ..scf.spin import resolve_method
    from ..studies.pieces import PieceOutcome

    template = job_request(args)

    def run(pieces: Any, species: Any) -> dict[tuple[int, str], PieceOutcome]:
        bases = list(dict.fromkeys(p.basis for p in pieces))
        jobs, where = [], {}
        for piece in (p for p in pieces if p.basis == bases[0]):
            s = species[piece.species]
            # Open shells name their multiplicity; a singlet keeps the request's default.
            entry = GeometryEntry(s.path, s.charge, "reaction", s.multiplicity if s.open_shell else None)
            made, _ = make_jobs([entry], bases, 0, dataclasses.replace(template, method=piece.method))
            method = resolve_method(s.multiplicity, piece.method).upper()
            for job in made:
                # two files with the same content are one job serving both species
                if job.key not in where:
                    jobs.append(job)
                where.setdefault(job.key, []).append(((piece.species, bases[job.order[1]]), method))
        done = run_jobs(args, console, jobs)
        return {target: PieceOutcome(*done[key], method=method)
                for key, targets in where.items() for target, method in targets}

    return run


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore reaction``: run every species in every basis, then report, write JSON and plot."""
    from ..studies.reaction import reaction_energies

    paths = output_paths(args, "json", "plot", "results")
    names = basis_names(args)
    if args.workers is not None and args.results is None:
        raise InputError("--workers goes with --results")
    check_study_spin(args, None, "reaction")
    runner = _batch_runner(args, console) if args.results is not None else None
    study = reaction_energies(
        args.reactions, names, units=args.units, spherical=args.spherical, options=scf_options(args),
        message_progress=console.study_progress(), runner=runner, method=args.method,
    )
    record = export.reaction_record(study)
    if "plot" in paths:
        from ..plots import plot_reactions

        plot_reactions(study, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    from .report_differences import format_reactions

    console.report(f"hfcore {__version__} · reaction energies (Hartree–Fock: {_methods(study)})")
    console.report(format_reactions(study))
    report_written(console, paths.values())
    return 0


def _methods(study: Any) -> str:
    """The methods the species ran with, in the trade's words (e.g. ``RHF and UHF``)."""
    methods = list(dict.fromkeys(study.rows[0].species_methods)) if study.rows else []
    return " and ".join(methods) if methods else "RHF"


__all__ = ["add_parser", "run"]
