"""``hfcore interaction``: raw and counterpoise-corrected interaction energies of a complex."""

from __future__ import annotations

import argparse
from typing import Any

from .. import export
from .._version import __version__
from ..errors import InputError
from .commands import command_help
from . import report
from .arguments import (
    add_fit_argument,
    add_geometry_arguments,
    add_json_argument,
    add_scf_arguments,
    basis_names,
    check_study_spin,
    scf_options,
)
from .console import Console
from .paths import output_paths, report_written
from .pieces import add_batch_arguments, job_request, run_jobs


def add_parser(sub: Any) -> None:
    """Register ``hfcore interaction`` on the subcommand set ``sub``."""
    interaction = sub.add_parser("interaction", help=command_help("interaction"))
    add_geometry_arguments(
        interaction, charge_option=False,
        multiplicity_help="spin multiplicity 2S+1 of the complex (default: the high-spin coupling of the fragments' "
        "multiplicities, 1 + Σ (M_i − 1))",
    )
    interaction.add_argument(
        "--fragments", required=True, metavar="RANGES",
        help="the fragments as 1-based atom ranges in file order, one per comma, e.g. 1-3,4-6 "
        "(join the parts of a fragment with '+', e.g. 1-2+7,3-6)",
    )
    interaction.add_argument(
        "--fragment-charges", metavar="Q,Q",
        help="charge of each fragment, e.g. --fragment-charges=1,-1 (default all 0; a list that starts with '-' "
        "must be attached with '=': --fragment-charges=-1,1)",
    )
    interaction.add_argument(
        "--fragment-multiplicities", metavar="M,M",
        help="spin multiplicity 2S+1 of each fragment, e.g. --fragment-multiplicities=2,2 (default: 1 for an even, "
        "2 for an odd electron count); the complex takes --multiplicity, or by default the high-spin coupling "
        "M = 1 + Σ (M_i − 1)",
    )
    interaction.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. sto-3g,6-31g,cc-pvdz"
    )
    add_scf_arguments(interaction)
    add_fit_argument(interaction)
    add_json_argument(interaction)
    interaction.add_argument("--plot", metavar="PNG", help="plot the interaction energies against basis size")
    add_batch_arguments(interaction, "each piece (complex, fragment alone, fragment with ghosts) in each basis "
                        "as a batch job, each on its own integrals")
    interaction.set_defaults(handler=run)


def _batch_runner(args: argparse.Namespace, console: Console) -> Any:
    """A runner for :func:`interaction_energies` that sends each piece to the batch machinery.

    The complex is a job of the whole file, a fragment alone one with
    ``atoms``, a fragment in the full basis one with ``ghost``; each
    computes its own integrals.
    """
    from ..batch import GeometryEntry, make_jobs
    from ..scf.spin import resolve_method
    from ..studies.pieces import PieceOutcome
    from .report import atom_ranges

    def run(pieces: Any) -> dict[tuple, tuple[float, float]]:
        bases = list(dict.fromkeys(p.basis for p in pieces))
        jobs, where = [], {}
        for piece in (p for p in pieces if p.basis == bases[0]):
            extra = {"atoms": atom_ranges(piece.atoms)} if piece.kind == "own basis" else {}
            if piece.kind == "full basis":
                extra = {"ghost": atom_ranges(piece.ghosts)}
            # A singlet keeps the request's default multiplicity, so closed-shell jobs keep their keys.
            spin = piece.multiplicity if piece.multiplicity not in (None, 1) else None
            made, _ = make_jobs([GeometryEntry(args.geometry, piece.charge, "interaction", spin)], bases, 0,
                                job_request(args, multiplicity=spin, method=piece.method, **extra))
            method = resolve_method(piece.multiplicity or 1, piece.method).upper()
            for job in made:
                where[job.key] = ((bases[job.order[1]], piece.kind, piece.fragment), method)
            jobs.extend(made)
        done = run_jobs(args, console, jobs)
        return {where[key][0]: PieceOutcome(*value, method=where[key][1]) for key, value in done.items()}

    return run


def parse_fragments(text: str, natom: int) -> list[list[int]]:
    """0-based atoms of each fragment from ``--fragments`` text such as ``"1-3,4-6"`` or ``"1-2+7,3-6"``.

    Parameters
    ----------
    text : str
        One item per fragment, separated by commas; an item is 1-based
        atom numbers or ranges joined by ``+``.
    natom : int
        Atoms of the complex.

    Returns
    -------
    list of list of int

    Raises
    ------
    InputError
        For a malformed item or an atom beyond ``natom``.
    """
    from ..geometry import parse_atom_ranges

    return [parse_atom_ranges(item.replace("+", ","), natom, "--fragments") for item in text.split(",")]


def _parse_charges(text: str | None, count: int) -> list[int] | None:
    if text is None:
        return None
    try:
        charges = [int(item) for item in text.split(",")]
    except ValueError:
        raise InputError(f"--fragment-charges {text!r}: expected whole numbers separated by commas, e.g. 1,-1") from None
    if len(charges) != count:
        raise InputError(f"--fragment-charges {text!r}: {len(charges)} charges for {count} fragments")
    return charges


def _parse_multiplicities(text: str | None, count: int) -> list[int] | None:
    if text is None:
        return None
    try:
        spins = [int(item) for item in text.split(",")]
    except ValueError:
        raise InputError(f"--fragment-multiplicities {text!r}: expected whole numbers 2S+1 separated by commas, "
                         "e.g. 2,2") from None
    if len(spins) != count:
        raise InputError(f"--fragment-multiplicities {text!r}: {len(spins)} multiplicities for {count} fragments")
    if any(m < 1 for m in spins):
        raise InputError(f"--fragment-multiplicities {text!r}: a multiplicity is 2S+1, at least 1")
    return spins


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore interaction``: run the pieces, then report, write JSON and plot."""
    from ..studies.interaction import interaction_energies
    from ..geometry import read_xyz

    paths = output_paths(args, "json", "plot", "results")
    names = basis_names(args)
    if args.workers is not None and args.results is None:
        raise InputError("--workers goes with --results")
    check_study_spin(args, None, "interaction")
    molecule = read_xyz(args.geometry, units=args.units)
    fragments = parse_fragments(args.fragments, molecule.n_atoms)
    charges = _parse_charges(args.fragment_charges, len(fragments))
    spins = _parse_multiplicities(args.fragment_multiplicities, len(fragments))
    runner = _batch_runner(args, console) if args.results is not None else None
    study = interaction_energies(
        molecule, fragments, names, fragment_charges=charges, spherical=args.spherical, options=scf_options(args),
        message_progress=console.study_progress(), runner=runner, fragment_multiplicities=spins,
        multiplicity=args.multiplicity, method=args.method,
    )
    record = export.interaction_record(study)
    if "plot" in paths:
        from ..plots import plot_interaction

        plot_interaction(study, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    from .report_differences import format_interaction

    methods = " and ".join(dict.fromkeys(p.method or "RHF" for p in study.pieces)) or "RHF"
    console.report(f"hfcore {__version__} · interaction energies (Hartree–Fock: {methods})")
    console.report(report.format_molecule(
        molecule.with_charge(sum(study.fragment_charges)).with_multiplicity(study.multiplicity)))
    console.report(format_interaction(study))
    report_written(console, paths.values())
    return 0


__all__ = ["add_parser", "run", "parse_fragments"]
