"""``hfcore energy``: one single-point run with a human report, JSON and .npz exports."""

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
    add_scf_arguments,
    finite_float,
    run_request,
)
from .console import Console, IntegralProgress, process_seconds
from .paths import output_paths, report_written


#: The report's title line per SCF method.
METHOD_TITLES: dict[str, str] = {
    "rhf": "restricted Hartree–Fock",
    "uhf": "unrestricted Hartree–Fock",
    "rohf": "restricted open-shell Hartree–Fock",
}


def add_parser(sub: Any) -> argparse.ArgumentParser:
    """Register ``hfcore energy`` on the subcommand set ``sub``; returns its parser (batch copies its options)."""
    energy = sub.add_parser("energy", help=command_help("energy"))
    add_geometry_arguments(energy)
    energy.add_argument("--basis", default="sto-3g", help="basis set name (default sto-3g; see 'hfcore bases')")
    energy.add_argument("--basis-file", metavar="FILE.json", help="basis set file in hfcore's JSON format (replaces --basis)")
    energy.add_argument(
        "--basis-for",
        action="extend",
        nargs="+",
        default=[],
        metavar="EL=NAME",
        help="another basis for an element, e.g. H=cc-pvdz; several items or repeated flags are fine "
        "(the items end at the first one that is not EL=NAME)",
    )
    energy.add_argument(
        "--zeta",
        action="extend",
        nargs="+",
        default=[],
        metavar="EL=VALUE",
        help="Slater exponent in a fitted STO-nG set: He=2.0925 (all shells of He) or C:2sp=1.80 (one shell); "
        "several items or repeated flags are fine (the items end at the first one that is not EL=VALUE)",
    )
    add_scf_arguments(energy)
    add_fit_argument(energy)
    energy.add_argument("--guess", choices=("sad", "core"), default="sad", help="starting density (default sad)")
    energy.add_argument(
        "--ghost",
        metavar="ATOMS",
        help="atoms (1-based ranges in file order, e.g. 4-6 or 1,3) that keep their basis functions "
        "but have no nucleus and no electrons",
    )
    energy.add_argument(
        "--atoms",
        metavar="ATOMS",
        help="run only these atoms of the file (1-based ranges in file order, e.g. 1-3): one fragment of a complex",
    )
    add_json_argument(energy)
    energy.add_argument(
        "--npz",
        metavar="PATH",
        help="save arrays (overlap, core Hamiltonian, orbitals, density, Fock, geometry; the dense ERI "
        f"tensor too when there are at most {export.ERI_NPZ_MAX_FUNCTIONS} basis functions) as .npz",
    )
    energy.add_argument("--quiet", action="store_true", help="no live iteration table; the final report only")
    post = energy.add_argument_group("after the SCF")
    post.add_argument("--mp2", action="store_true", help="add the MP2 and SCS-MP2 correlation energies")
    post.add_argument(
        "--frozen-core", action="store_true",
        help="with --mp2: leave the noble-gas core orbitals (1s of Li-Ne, 1s-2p of Na-Ar) uncorrelated "
        "(default: all electrons correlated)",
    )
    post.add_argument(
        "--mp2-fit-basis", metavar="NAME",
        help="with --mp2: density-fitted MP2 with this MP2 fitting set (e.g. cc-pVTZ-RIFIT, def2-SVP-RIFIT), or auto: "
        "cc-pVXZ-RIFIT for (aug-)cc-pVXZ, def2-SVP-RIFIT for def2-SVP, def2-TZVP-RIFIT otherwise "
        "(default: exact integrals; see 'hfcore bases')",
    )
    post.add_argument(
        "--origin", nargs=3, type=finite_float, metavar=("X", "Y", "Z"),
        help="origin of the dipole and quadrupole, in the units of --units (default: the centre of mass)",
    )
    energy.set_defaults(handler=run)
    return energy


def run(args: argparse.Namespace, console: Console) -> int:
    """``hfcore energy``: run the request of the arguments and report it."""
    from ..runs import RunProgress, run_single

    paths = output_paths(args, "json", "npz")
    request = run_request(args)
    live = not (console.json_to_stdout or console.quiet)
    previous: list[Any] = [None]

    def prepared(molecule: Any, basis: Any, plan: Any) -> None:
        from ..runs import scf_method

        console.report(f"hfcore {__version__} · {METHOD_TITLES[scf_method(request, molecule)]}")
        console.report(report.format_molecule(molecule))
        console.report(report.format_basis(basis, plan))
        console.live(report.history_header())

    def show(rec: Any) -> None:
        last = previous[0]
        if rec.solution and rec.iteration == 1:
            console.live(report.format_new_solution(rec))
        elif last is not None and rec.aid and last.aid and rec.aid != last.aid:
            console.live(report.format_aid_switch(rec))
        console.live(report.format_iteration(rec))
        previous[0] = rec

    progress = RunProgress(
        prepared=prepared, iteration=show,
        integrals=IntegralProgress(console.stderr) if live else None,
        mp2=IntegralProgress(console.stderr, "MP2") if live else None,
    )
    outcome = run_single(request, progress)
    warn_about_solution(console, outcome.result)
    record = outcome.record
    files: dict[str, bytes] = {}
    if "json" in paths:
        files[paths["json"]] = export.to_json(record).encode("utf-8")
    if "npz" in paths:
        files[paths["npz"]] = export.npz_bytes(outcome.arrays())
    export.write_files_atomically(files)
    if args.json == "-":
        console.data(export.to_json(record))
    else:
        _report_energy(console, outcome)
        report_written(console, files)
    return 0


def warn_about_solution(console: Console, result: Any, label: str = "") -> None:
    """One stderr line for each finding on the solution (unstable, not aufbau, a lower unrestricted one), in every output mode."""
    where = f"{label}: " if label else ""
    st = result.stability
    method = result.method
    if st is not None and not st.stable:
        hint = " (rerun with --stability descend)" if st.mode == "report" else ""
        console.warn(
            f"{where}the {method} solution is unstable: the orbital Hessian has eigenvalue {st.lowest_eigenvalue:.6f} Eh, "
            f"so a lower {method} solution exists{hint}"
        )
    for warning in result.warnings:
        console.warn(f"{where}{warning}")
    if not getattr(result, "aufbau", True):
        console.warn(
            f"{where}the occupation is not aufbau: a virtual orbital lies {-result.aufbau_gap:.6f} Eh "
            "below an occupied one"
        )


def _report_energy(console: Console, outcome: Any) -> None:
    from ..units import DEBYE_ANGSTROM_PER_AU, DEBYE_PER_AU

    result, record, mp2 = outcome.result, outcome.record, outcome.mp2
    analysis = record["analysis"]
    molecule = result.molecule
    if console.quiet:
        console.report(report.heading("SCF"))
    console.report(report.format_convergence(result))
    console.report(report.format_linear_dependence(result.n_dropped, result.options.lindep_threshold))
    console.report(report.format_stability(result))
    console.report(report.format_energies(result))
    if result.method != "RHF":
        console.report(report.format_spin(result))
    if mp2 is not None:
        console.report(report.format_mp2(mp2))
    console.report(report.format_orbitals(result))
    console.report(report.format_properties(analysis))
    console.report(report.format_charges(molecule.symbols, analysis["mulliken_charges"], molecule.ghosts,
                                         analysis["lowdin_charges"]))
    console.report(report.format_dipole(analysis["dipole_au"], DEBYE_PER_AU, molecule.charge != 0,
                                        analysis["origin_is_centre_of_mass"]))
    console.report(report.format_quadrupole(analysis["quadrupole_au"], DEBYE_ANGSTROM_PER_AU))
    console.report(report.format_timings(record["timings"], *process_seconds()))


__all__ = ["add_parser", "run", "warn_about_solution"]
