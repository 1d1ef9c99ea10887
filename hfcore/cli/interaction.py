"""The ``interaction`` and ``reaction`` subcommands: energy differences across basis sets.

Registered by :func:`hfcore.cli.build_parser`; they share its helpers
(geometry, SCF and JSON options, output paths, progress on stderr) and its
error handling, and live here so that :mod:`hfcore.cli` stays one room.
"""

from __future__ import annotations

import argparse
from typing import Any

from . import cli, export, report
from .errors import InputError


def add_difference_commands(sub: Any) -> None:
    """Add the ``interaction`` and ``reaction`` parsers to the subcommand set ``sub``."""
    interaction = sub.add_parser(
        "interaction", help="interaction energy of a complex, raw and counterpoise-corrected, in several basis sets"
    )
    cli._add_geometry_arguments(interaction, charge=False)
    interaction.add_argument(
        "--fragments", required=True, metavar="RANGES",
        help="the fragments as 1-based atom ranges in file order, one per comma, e.g. 1-3,4-6 "
        "(join the parts of a fragment with '+', e.g. 1-2+7,3-6)",
    )
    interaction.add_argument(
        "--fragment-charges", metavar="Q,Q", help="charge of each fragment, e.g. --fragment-charges=1,-1 (default all 0)"
    )
    interaction.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. sto-3g,6-31g,cc-pvdz"
    )
    cli._add_scf_arguments(interaction)
    cli._add_fit_argument(interaction)
    cli._add_json_argument(interaction)
    interaction.add_argument("--plot", metavar="PNG", help="plot the interaction energies against basis size")
    _add_batch_arguments(interaction, "each piece (complex, fragment alone, fragment with ghosts) in each basis "
                         "as a batch job, each on its own integrals")
    interaction.set_defaults(handler=_run_interaction)

    reaction = sub.add_parser("reaction", help="reaction energies from RHF totals in several basis sets")
    reaction.add_argument(
        "reactions", nargs="+", metavar="SPEC",
        help="an equation over geometry files, e.g. 'formaldehyde.xyz + hydrogen.xyz -> methanol.xyz', "
        "'2 water.xyz -> water_dimer.xyz' or 'ammonia.xyz + water.xyz -> ammonium.xyz[+1] + hydroxide.xyz[-1]'; "
        "several equations share their species",
    )
    reaction.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. cc-pvdz,cc-pvtz,cc-pvqz"
    )
    cli._add_geometry_arguments(reaction, geometry=False, charge=False)
    cli._add_scf_arguments(reaction)
    cli._add_fit_argument(reaction)
    cli._add_json_argument(reaction)
    reaction.add_argument("--plot", metavar="PNG", help="plot the reaction energies against basis size")
    _add_batch_arguments(reaction, "each species in each basis as a batch job")
    reaction.set_defaults(handler=_run_reaction)


def _add_batch_arguments(parser: argparse.ArgumentParser, what: str) -> None:
    pieces = parser.add_argument_group("running the pieces as a batch (resumable; see 'hfcore batch')")
    pieces.add_argument("--results", metavar="FILE.jsonl",
                        help=f"run {what}, recorded in FILE.jsonl; running again reuses the jobs already there")
    pieces.add_argument("--workers", type=cli._positive_int, metavar="N",
                        help="local worker processes for --results (default: the usable cores)")


def _job_options(args: argparse.Namespace) -> dict[str, Any]:
    """The options of this command that its batch jobs carry: every per-job ``energy`` option it has."""
    from .batch.command import job_option_defaults

    return {k: getattr(args, k) for k in job_option_defaults() if k not in {"atoms", "ghost"}
            and getattr(args, k, None) is not None}


def _batch_runner(args: argparse.Namespace, console: Any) -> Any:
    """A runner for :func:`reaction_energies` that sends each species × basis to the batch machinery.

    Each piece is an ``hfcore energy`` job keyed by the geometry file's
    content, charge, basis and options, so a second run with the same
    results file finds the finished pieces there and runs only the rest.
    """
    from .batch import GeometryEntry, make_jobs

    options = _job_options(args)

    def run(pieces: Any, species: Any) -> dict[tuple[int, str], tuple[float, float]]:
        bases = list(dict.fromkeys(p.basis for p in pieces))
        entries = [GeometryEntry(s.path, s.charge, "reaction") for s in species]
        jobs, _ = make_jobs(entries, bases, 0, options)
        done = _run_jobs(args, console, jobs)
        return {(job.order[0], bases[job.order[1]]): done[job.key] for job in jobs}

    return run


def _interaction_runner(args: argparse.Namespace, console: Any, fragments: list[list[int]]) -> Any:
    """A runner for :func:`interaction_energies` that sends each piece to the batch machinery.

    The complex is an ``energy`` job of the whole file, a fragment alone one
    with ``--atoms``, a fragment in the full basis one with ``--ghost``; each
    computes its own integrals.
    """
    from .batch import GeometryEntry, make_jobs
    from .report import atom_ranges

    options = _job_options(args)

    def run(pieces: Any) -> dict[tuple, tuple[float, float]]:
        bases = list(dict.fromkeys(p.basis for p in pieces))
        jobs, where = [], {}
        for piece in (p for p in pieces if p.basis == bases[0]):
            extra = {"atoms": atom_ranges(piece.atoms)} if piece.kind == "own basis" else {}
            if piece.kind == "full basis":
                extra = {"ghost": atom_ranges(piece.ghosts)}
            made, _ = make_jobs([GeometryEntry(args.geometry, piece.charge, "interaction")], bases, 0,
                                {**options, **extra})
            for job in made:
                where[job.key] = (bases[job.order[1]], piece.kind, piece.fragment)
            jobs.extend(made)
        done = _run_jobs(args, console, jobs)
        return {where[key]: value for key, value in done.items()}

    return run


def _run_jobs(args: argparse.Namespace, console: Any, jobs: list) -> dict[str, tuple[float, float]]:
    """Run batch jobs into ``--results``: (energy / Eh, wall seconds) by job key; the first failure is raised."""
    from .batch import run_batch, usable_cores
    from .errors import HfcoreError

    path = cli._output_paths(args, "results")["results"]
    say = cli._stderr_progress(console)

    def on_record(record: dict) -> None:
        if say is not None:
            job = record["job"]
            state = f"E = {record['energy']['total']:.10f} Eh" if record["status"] == "ok" else "failed"
            label = " ".join(f"--{k} {job['options'][k]}" for k in ("atoms", "ghost") if job["options"].get(k))
            say(f"batch job {job['geometry']} {label + ' ' if label else ''}in {job['basis']}: {state}")

    workers = min(args.workers or usable_cores(), len(jobs))
    outcome = run_batch(jobs, path, workers=workers, threads=args.threads or 1, on_record=on_record)
    out = {}
    for job in jobs:
        record = outcome.records.get(job.key)
        if record is None or record["status"] != "ok":
            error = (record or {}).get("error", {"message": "the job did not finish", "exit_code": 1})
            failure = HfcoreError(f"{job.geometry} in {job.basis}: {error['message']} (batch results in {path})")
            failure.exit_code = int(error["exit_code"])
            raise failure
        out[job.key] = (record["energy"]["total"], record["batch"]["wall_seconds"] or 0.0)
    return out


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
    from .geometry import parse_atom_ranges

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


def _run_interaction(args: argparse.Namespace, console: Any) -> int:
    from .analysis.interaction import interaction_energies
    from .geometry import read_xyz

    paths = cli._output_paths(args, "json", "plot", "results")
    names = cli._basis_names(args)
    if args.workers is not None and args.results is None:
        raise InputError("--workers goes with --results")
    molecule = read_xyz(args.geometry, units=args.units)
    fragments = parse_fragments(args.fragments, molecule.natom)
    charges = _parse_charges(args.fragment_charges, len(fragments))
    runner = _interaction_runner(args, console, fragments) if args.results is not None else None
    study = interaction_energies(
        molecule, fragments, names, fragment_charges=charges, spherical=args.spherical, options=cli._scf_options(args),
        progress=cli._stderr_progress(console), runner=runner,
    )
    record = export.interaction_record(study)
    if "plot" in paths:
        from .plots import plot_interaction

        plot_interaction(study, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    from .report_differences import format_interaction

    console.report(report.format_molecule(molecule.with_charge(sum(study.fragment_charges))))
    console.report(format_interaction(study))
    cli._report_written(console, paths.values())
    return 0


def _run_reaction(args: argparse.Namespace, console: Any) -> int:
    from .analysis.reactions import reaction_energies

    paths = cli._output_paths(args, "json", "plot", "results")
    names = cli._basis_names(args)
    if args.workers is not None and args.results is None:
        raise InputError("--workers goes with --results")
    runner = _batch_runner(args, console) if args.results is not None else None
    study = reaction_energies(
        args.reactions, names, units=args.units, spherical=args.spherical, options=cli._scf_options(args),
        progress=cli._stderr_progress(console), runner=runner,
    )
    record = export.reaction_record(study)
    if "plot" in paths:
        from .plots import plot_reactions

        plot_reactions(study, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    from .report_differences import format_reactions

    console.report(format_reactions(study))
    cli._report_written(console, paths.values())
    return 0


__all__ = ["add_difference_commands", "parse_fragments"]
