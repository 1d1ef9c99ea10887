"""The ``hfcore`` command line: a thin layer over the public Python API.

Subcommands: ``energy`` (one RHF run with a human report, JSON and .npz
exports), ``fit-sto`` (a least-squares Gaussian fit to a Slater function),
``compare`` (one molecule in several basis sets), ``interaction`` (raw and
counterpoise-corrected interaction energies), ``reaction`` (reaction
energies across basis sets), ``bases`` (the sets on offer) and ``batch``
(many geometries and bases, resumable; registered from
:mod:`hfcore.batch.command`). Errors
hfcore raises on purpose become one line on stderr and the exit code of
their class; see the README for the table.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
import time
import typing
import warnings
from collections.abc import Callable, Iterable, Sequence
from typing import Any, TextIO

import numpy as np

from . import __version__, elements, export, report
from .errors import HfcoreError, InputError, NumericalError, ResourceError
from .units import BOHR_IN_ANGSTROM

#: Exit code after Ctrl-C (128 + SIGINT), the shell convention.
EXIT_INTERRUPTED: int = 130
#: Exit code when the reader of stdout went away (128 + SIGPIPE), the shell convention.
EXIT_BROKEN_PIPE: int = 141


# ----------------------------------------------------------------------------
# argument parsing
# ----------------------------------------------------------------------------


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, found {text!r}") from None
    if value <= 0:
        raise argparse.ArgumentTypeError(f"must be positive, found {value}")
    return value


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, found {text!r}") from None
    if not value > 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be a positive finite number, found {text}")
    return value


def _charge(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"the charge must be a whole number, found {text!r}") from None


class _Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line, like every other error."""

    def error(self, message: str) -> typing.NoReturn:
        command = self.prog.partition(" ")[2]
        where = f"{command}: " if command else ""
        self.exit(2, f"hfcore: error: {where}{message} (see '{self.prog} --help')\n")


def _add_geometry_arguments(parser: argparse.ArgumentParser, *, geometry: bool = True, charge: bool = True) -> None:
    if geometry:
        parser.add_argument("geometry", metavar="GEOMETRY", help="XYZ file (atom count, comment, then 'symbol x y z' lines)")
    parser.add_argument(
        "--units", choices=("angstrom", "bohr"), default="angstrom", help="units of the XYZ coordinates (default angstrom)"
    )
    if charge:
        parser.add_argument(
            "--charge", type=_charge, default=0, help="total molecular charge (default 0; never read from the file)"
        )
    form = parser.add_mutually_exclusive_group()
    form.add_argument("--cartesian", dest="spherical", action="store_false", default=None, help="Cartesian d, f, ... functions")
    form.add_argument("--spherical", dest="spherical", action="store_true", help="real spherical d, f, ... functions")


class _DeprecatedOption(argparse.Action):
    """Store like the option's new name, with a one-line warning on stderr (hidden from ``--help``)."""

    def __init__(self, option_strings: Sequence[str], dest: str, new_name: str, **kwargs: Any) -> None:
        super().__init__(option_strings, dest, **kwargs)
        self.new_name = new_name

    def __call__(self, parser: argparse.ArgumentParser, namespace: argparse.Namespace, values: Any,
                 option_string: str | None = None) -> None:
        print(f"hfcore: warning: {option_string} is deprecated; use {self.new_name}", file=sys.stderr, flush=True)
        setattr(namespace, self.dest, values)


def _add_scf_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("SCF convergence (defaults: see hfcore.scf.SCFOptions)")
    group.add_argument("--energy-tol", type=_positive_float, metavar="X", help="energy change threshold in Eh (1e-10)")
    group.add_argument(
        "--gradient-tol", type=_positive_float, metavar="X", help="largest orbital-gradient element threshold (1e-7)"
    )
    group.add_argument("--max-iterations", type=_positive_int, metavar="N", help="iteration limit (100)")
    group.add_argument("--max-diis-size", type=_positive_int, metavar="N", help="most Fock matrices DIIS keeps (8)")
    group.add_argument(
        "--diis-space", dest="max_diis_size", type=_positive_int, metavar="N", help=argparse.SUPPRESS,
        action=_DeprecatedOption, new_name="--max-diis-size",
    )
    group.add_argument(
        "--lindep-threshold",
        type=_positive_float,
        metavar="X",
        help="drop overlap eigenvectors with eigenvalue below X (1e-7)",
    )
    _add_stability_argument(group)
    memory = parser.add_argument_group("two-electron integrals (default: stored if they fit in --memory, else direct)")
    mode = memory.add_mutually_exclusive_group()
    mode.add_argument("--direct", dest="direct", action="store_const", const=True, default=None,
                      help="recompute the integrals every iteration instead of storing them")
    mode.add_argument("--stored", dest="direct", action="store_const", const=False,
                      help="store the integrals; fail up front if they exceed --memory")
    memory.add_argument("--memory", type=_positive_float, metavar="MIB",
                        help="memory the stored integrals may use, in MiB (default: half of the available memory)")
    _add_threads_argument(memory)


def _add_threads_argument(parser: Any) -> None:
    parser.add_argument("--threads", type=_positive_int, metavar="N",
                        help="threads for the integral passes and linear algebra "
                        "(default: the cores this process may use); the energy does not depend on N beyond ~1e-13 Eh")


def _add_stability_argument(parser: Any) -> None:
    parser.add_argument(
        "--stability",
        choices=("off", "check", "follow"),
        default="follow",
        help="after convergence, check that no orbital rotation lowers the energy; 'follow' (default) moves "
        "to the lower solution if one does, 'check' only warns, 'off' skips the analysis",
    )


def _add_fit_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--fit-basis",
        metavar="NAME",
        help="density-fitted J and K with this fitting set (e.g. cc-pvtz-jkfit, def2-universal-jkfit); "
        "'auto' takes the set made for the orbital basis, else def2-universal-JKFIT",
    )


def _add_json_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--json",
        metavar="PATH",
        help="write the results as JSON to PATH; '-' writes JSON to stdout and nothing else goes there",
    )


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``hfcore`` command."""
    parser = _Parser(
        prog="hfcore",
        description="Restricted Hartree-Fock energies of small closed-shell molecules.",
        epilog="Exit codes: 0 success, 2 bad input, 3 basis problem, 4 SCF not converged, "
        "5 not enough memory, 6 numerical failure, 10 some batch jobs failed, 11 batch results file unusable, "
        "12 no Dask scheduler answered, 130 interrupted, 141 output pipe closed, 143 terminated.",
    )
    parser.add_argument("--version", action="version", version=f"hfcore {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)

    energy = sub.add_parser("energy", help="RHF energy, orbitals and populations of one molecule")
    _add_geometry_arguments(energy)
    energy.add_argument("--basis", default="sto-3g", help="basis set name (default sto-3g; see 'hfcore bases')")
    energy.add_argument("--basis-file", metavar="FILE.json", help="basis set file in hfcore's JSON format (replaces --basis)")
    energy.add_argument(
        "--basis-for",
        action="extend",
        nargs="+",
        default=[],
        metavar="EL=NAME",
        help="another basis for an element, e.g. H=cc-pvdz; several items or repeated flags are fine",
    )
    energy.add_argument(
        "--zeta",
        action="extend",
        nargs="+",
        default=[],
        metavar="EL=VALUE",
        help="Slater exponent in a fitted STO-nG set: He=2.0925 (all shells of He) or C:2sp=1.80 (one shell); "
        "several items or repeated flags are fine",
    )
    _add_scf_arguments(energy)
    _add_fit_argument(energy)
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
    _add_json_argument(energy)
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
        help="with --mp2: density-fitted MP2 with this RI fitting set (e.g. cc-pvtz-ri, def2-svp-ri), or auto: "
        "cc-pVXZ-RI for (aug-)cc-pVXZ, def2-SVP-RI for def2-SVP, def2-TZVP-RI otherwise (default: exact integrals)",
    )
    post.add_argument(
        "--origin", nargs=3, type=float, metavar=("X", "Y", "Z"),
        help="origin of the dipole and quadrupole, in the units of --units (default: the centre of mass)",
    )
    energy.set_defaults(handler=_run_energy)

    fit = sub.add_parser("fit-sto", help="least-squares Gaussian expansion of a Slater function")
    # The fitter validates shell and count itself, so its (heavier) module is
    # imported only when a fit is asked for.
    fit.add_argument("--shell", required=True, metavar="SHELL", help="Slater shell to fit, e.g. 1s, 2sp or 3sp")
    fit.add_argument("--gaussians", required=True, type=_positive_int, metavar="N", help="number of Gaussians, 1 to 6")
    fit.add_argument("--zeta", type=_positive_float, default=1.0, metavar="Z", help="Slater exponent (default 1)")
    _add_json_argument(fit)
    fit.add_argument("--plot", metavar="PNG", help="plot the Slater function, the fit and their difference")
    fit.set_defaults(handler=_run_fit_sto)

    compare = sub.add_parser("compare", help="one molecule in several basis sets, with basis-limit estimates")
    _add_geometry_arguments(compare)
    compare.add_argument(
        "--basis", required=True, metavar="NAMES", help="comma-separated basis names, e.g. sto-3g,6-31g*,cc-pvdz"
    )
    _add_fit_argument(compare)
    _add_stability_argument(compare)
    _add_json_argument(compare)
    compare.add_argument("--plot", metavar="PNG", help="plot energy against the number of basis functions")
    _add_threads_argument(compare)
    compare.set_defaults(handler=_run_compare)

    from .cli_differences import add_difference_commands

    add_difference_commands(sub)

    bases = sub.add_parser("bases", help="list the basis sets on offer")
    bases.set_defaults(handler=_run_bases)

    # Last, so that every option any part of build_parser gives 'energy'
    # reaches the batch jobs too.
    from .batch.command import add_batch_parser

    add_batch_parser(sub, energy)
    return parser


# ----------------------------------------------------------------------------
# shared steps
# ----------------------------------------------------------------------------


class _Console:
    """Where the report goes: stdout for humans, stderr for progress in JSON mode."""

    def __init__(self, stdout: TextIO, stderr: TextIO, json_to_stdout: bool, quiet: bool) -> None:
        self.stdout = stdout
        self.stderr = stderr
        self.json_to_stdout = json_to_stdout
        self.quiet = quiet

    def report(self, text: str) -> None:
        """A section of the human report (suppressed when stdout carries JSON)."""
        if not self.json_to_stdout:
            print(text, file=self.stdout, flush=True)

    def live(self, text: str) -> None:
        """A progress line, shown only in human mode without --quiet."""
        if not (self.json_to_stdout or self.quiet):
            print(text, file=self.stdout, flush=True)

    def warn(self, text: str) -> None:
        """A one-line warning on stderr, shown in every mode."""
        print(f"hfcore: warning: {text}", file=self.stderr, flush=True)

    def data(self, text: str) -> None:
        """The JSON document on stdout."""
        self.stdout.write(text)
        self.stdout.flush()


def _output_paths(args: argparse.Namespace, *names: str) -> dict[str, str]:
    # Checked before any computation so a typo in a path costs no SCF time.
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


def _read_molecule(args: argparse.Namespace) -> Any:
    from .geometry import parse_atom_ranges, read_xyz

    molecule = read_xyz(args.geometry, units=args.units, charge=args.charge)
    if getattr(args, "ghost", None):
        ghosts = parse_atom_ranges(args.ghost, molecule.natom, "--ghost")
        if len(ghosts) == molecule.natom:
            raise InputError(f"--ghost {args.ghost}: every atom would be a ghost; keep at least one real atom")
        molecule = molecule.with_ghosts(ghosts)
    if getattr(args, "atoms", None):
        keep = parse_atom_ranges(args.atoms, molecule.natom, "--atoms")
        if molecule.ghosts[keep].all():
            raise InputError(f"--atoms {args.atoms}: every atom kept is a ghost; keep at least one real atom")
        molecule = molecule.subset(keep, molecule.charge)
    molecule.require_closed_shell()
    return molecule


def parse_basis_for(items: Sequence[str]) -> dict[str, str]:
    """Per-element basis choices from ``EL=NAME`` strings.

    Parameters
    ----------
    items : sequence of str
        E.g. ``["H=cc-pvdz", "O=aug-cc-pvdz"]``.

    Returns
    -------
    dict of str to str
        Element symbol (canonical case) -> basis name.

    Raises
    ------
    InputError
        Naming the bad item: no ``=``, an empty name, an unknown element, or
        an element given twice.
    """
    out: dict[str, str] = {}
    for item in items:
        key, sep, name = item.partition("=")
        if not sep or not key.strip() or not name.strip():
            raise InputError(f"--basis-for {item!r}: expected EL=NAME, e.g. H=cc-pvdz")
        try:
            symbol = elements.symbol(elements.atomic_number(key.strip()))
        except KeyError:
            raise InputError(f"--basis-for {item!r}: unknown element {key.strip()!r}") from None
        if symbol in out:
            raise InputError(f"--basis-for {item!r}: element {symbol} given twice")
        out[symbol] = name.strip()
    return out


def _build_basis(args: argparse.Namespace, molecule: Any) -> Any:
    from .basis import build_basis, require_room_for
    from .basis.sto import parse_zeta_overrides

    zeta = parse_zeta_overrides(args.zeta) if args.zeta else None
    per_element = parse_basis_for(args.basis_for)
    main: Any = args.basis
    if args.basis_file:
        from .basis.library import load_basis_file

        main = load_basis_file(args.basis_file)
        if zeta:
            raise InputError("--zeta applies only to the fitted STO-nG sets, not to a --basis-file")
    basis = build_basis(molecule, main, spherical=args.spherical, zeta=zeta, per_element=per_element)
    require_room_for(molecule, basis)
    return basis


def _scf_options(args: argparse.Namespace) -> Any:
    from .scf import SCFOptions

    names = (
        "energy_tol", "gradient_tol", "max_iterations", "max_diis_size", "lindep_threshold", "direct", "threads",
        "stability",
    )
    given = {name: getattr(args, name) for name in names if getattr(args, name, None) is not None}
    if getattr(args, "memory", None) is not None:
        given["memory_limit"] = args.memory
    if getattr(args, "fit_basis", None) is not None:
        given["fit_basis"] = args.fit_basis
    return SCFOptions(**given)


def _analysis(result: Any, origin: np.ndarray | None = None) -> dict[str, Any]:
    """Charges, orbital properties and multipoles, in the units the JSON record states."""
    from .analysis import (
        DEBYE_ANGSTROM_PER_AU,
        DEBYE_PER_AU,
        centre_of_mass,
        dipole_moment,
        lowdin_charges,
        mulliken_charges,
        orbital_properties,
        quadrupole_moment,
    )

    o = centre_of_mass(result.molecule) if origin is None else np.asarray(origin, dtype=np.float64)
    dipole = dipole_moment(result, o)
    quadrupole = quadrupole_moment(result, o)
    return {
        "mulliken_charges": mulliken_charges(result),
        "lowdin_charges": lowdin_charges(result),
        **orbital_properties(result).to_dict(),
        "origin_bohr": o,
        "origin_is_centre_of_mass": origin is None,
        "dipole_au": dipole,
        "dipole_debye": dipole * DEBYE_PER_AU,
        "dipole_magnitude_debye": float(np.linalg.norm(dipole)) * DEBYE_PER_AU,
        "quadrupole_au": quadrupole,
        "quadrupole_debye_angstrom": quadrupole * DEBYE_ANGSTROM_PER_AU,
    }


def _mp2(args: argparse.Namespace, result: Any, console: _Console, eri: Any = None, fit: Any = None) -> Any:
    """The MP2 record when --mp2 was given, else None (density-fitted with the placed set ``fit``, if any)."""
    if not args.mp2:
        return None
    from .analysis import core_orbital_count, mp2_energy

    progress = None if console.json_to_stdout or console.quiet else _IntegralProgress(console.stderr, "MP2")
    frozen = core_orbital_count(result.molecule) if args.frozen_core else 0
    if fit is not None:
        return mp2_energy(result, frozen_core=frozen, fit_basis=fit.basis, progress=progress)
    return mp2_energy(result, frozen_core=frozen, eri=eri, progress=progress)


# ----------------------------------------------------------------------------
# subcommands
# ----------------------------------------------------------------------------


class _IntegralProgress:
    """Progress of the stored-integral pass on stderr, once it has taken a while.

    On a terminal one line is rewritten in place; elsewhere (a log file) a
    plain line is written at each quarter so the log stays short.
    """

    DELAY_S = 1.0

    def __init__(self, stream: TextIO, label: str = "two-electron integrals") -> None:
        self.stream = stream
        self.label = label
        self.tty = bool(getattr(stream, "isatty", lambda: False)())
        self.started = time.perf_counter()
        self.shown = 0.0

    def __call__(self, fraction: float) -> None:
        if time.perf_counter() - self.started < self.DELAY_S and fraction < 1.0:
            return
        if fraction <= self.shown or (self.shown == 0.0 and fraction >= 1.0):
            return  # nothing new, or a pass that ended before the first report needs none
        if self.tty:
            end = "\n" if fraction >= 1.0 else ""
            print(f"\rhfcore: {self.label} {100 * fraction:5.1f} %", end=end, file=self.stream, flush=True)
            self.shown = fraction
        elif fraction - self.shown >= 0.25 or fraction >= 1.0:
            print(f"hfcore: {self.label} {100 * fraction:5.1f} % done", file=self.stream, flush=True)
            self.shown = fraction


def _run_energy(args: argparse.Namespace, console: _Console) -> int:
    from .scf import plan_jk, prepare_integrals, run_rhf

    started = time.perf_counter()
    paths = _output_paths(args, "json", "npz")
    molecule = _read_molecule(args)
    basis = _build_basis(args, molecule)
    options = _scf_options(args)
    fitting = None
    if options.fit_basis is not None:
        from .basis.fitting import fitting_basis

        fitting = fitting_basis(molecule, basis, options.fit_basis)
    # A forced store, or a fitting set, that cannot fit fails before any output.
    plan = plan_jk(basis, options, fitting=fitting, n_occupied=molecule.n_electrons // 2)
    if args.frozen_core and not args.mp2:
        raise InputError("--frozen-core applies to the MP2 energy only; add --mp2")
    if args.mp2_fit_basis is not None and not args.mp2:
        raise InputError("--mp2-fit-basis applies to the MP2 energy only; add --mp2")
    mp2_fit = None
    if args.mp2_fit_basis is not None:
        from .basis.fitting import mp2_fitting_basis

        # An unknown set or a missing element fails here, before the SCF.
        mp2_fit = mp2_fitting_basis(molecule, basis, args.mp2_fit_basis)
    origin = None if args.origin is None else np.asarray(args.origin) / (BOHR_IN_ANGSTROM if args.units == "angstrom" else 1.0)
    console.report(f"hfcore {__version__} · restricted Hartree–Fock")
    console.report(report.format_molecule(molecule))
    console.report(report.format_basis(basis, plan))
    integral_progress = None if console.json_to_stdout or console.quiet else _IntegralProgress(console.stderr)
    console.live(report.history_header())

    previous: list[Any] = [None]

    def show(rec: Any) -> None:
        last = previous[0]
        if rec.solution and rec.iteration == 1:
            console.live(report.format_new_solution(rec))
        elif last is not None and rec.aid and last.aid and rec.aid != last.aid:
            console.live(report.format_aid_switch(rec))
        console.live(report.format_iteration(rec))
        previous[0] = rec

    # MP2 reads the SCF's own stored integrals rather than computing them again.
    exact_mp2 = args.mp2 and mp2_fit is None
    shared = prepare_integrals(basis, options, integral_progress) if exact_mp2 and plan.mode != "direct" else None
    result = run_rhf(molecule, basis, options, guess=args.guess, progress=show, integral_progress=integral_progress,
                     shared=shared)
    _warn_about_solution(console, result)
    mp2_started = time.perf_counter()
    mp2 = _mp2(args, result, console, None if shared is None else shared.engine, mp2_fit)
    record = export.result_record(result, _analysis(result, origin))
    if shared is not None:
        for stage in ("integrals", "total"):
            record["timings"][stage] += shared.seconds
    if mp2 is not None:
        record["mp2"] = mp2.to_dict()
        record["timings"]["mp2"] = time.perf_counter() - mp2_started
    files: dict[str, bytes] = {}
    if "json" in paths:
        files[paths["json"]] = export.to_json(record).encode("utf-8")
    if "npz" in paths:
        files[paths["npz"]] = export.npz_bytes(export.result_arrays(result))
    export.write_files_atomically(files)
    if args.json == "-":
        console.data(export.to_json(record))
    else:
        _report_energy(console, result, record, time.perf_counter() - started, mp2)
        _report_written(console, files)
    return 0


def _warn_about_solution(console: _Console, result: Any, label: str = "") -> None:
    """One stderr line for an unstable solution or a broken aufbau occupation, in every output mode."""
    where = f"{label}: " if label else ""
    st = result.stability
    if st is not None and not st.stable:
        hint = " (rerun with --stability follow)" if st.mode == "check" else ""
        console.warn(
            f"{where}the RHF solution is unstable: the orbital Hessian has eigenvalue {st.lowest_eigenvalue:.6f} Eh, "
            f"so a lower RHF solution exists{hint}"
        )
    if not result.aufbau:
        console.warn(
            f"{where}the occupation is not aufbau: a virtual orbital lies {-result.aufbau_gap:.6f} Eh "
            "below an occupied one"
        )


def _report_energy(console: _Console, result: Any, record: dict[str, Any], wall: float, mp2: Any = None) -> None:
    from .units import DEBYE_ANGSTROM_PER_AU, DEBYE_PER_AU

    analysis = record["analysis"]
    molecule = result.molecule
    if console.quiet:
        console.report(report.heading("SCF"))
    console.report(report.format_convergence(result))
    console.report(report.format_linear_dependence(result.n_dropped, result.options.lindep_threshold))
    console.report(report.format_stability(result))
    console.report(report.format_energies(result))
    if mp2 is not None:
        console.report(report.format_mp2(mp2))
    console.report(report.format_orbitals(result))
    console.report(report.format_properties(analysis))
    console.report(report.format_charges(molecule.symbols, analysis["mulliken_charges"], molecule.ghosts,
                                         analysis["lowdin_charges"]))
    console.report(report.format_dipole(analysis["dipole_au"], DEBYE_PER_AU, molecule.charge != 0,
                                        analysis["origin_is_centre_of_mass"]))
    console.report(report.format_quadrupole(analysis["quadrupole_au"], DEBYE_ANGSTROM_PER_AU))
    console.report(report.format_timings(record["timings"], wall))


def energy_record(args: argparse.Namespace) -> dict[str, Any]:
    """The record ``hfcore energy --json -`` prints, for parsed ``energy`` arguments.

    Used by the batch workers, so a job is exactly the single run.

    Parameters
    ----------
    args : argparse.Namespace
        Every ``energy`` option (``json`` and ``npz`` are ignored).

    Returns
    -------
    dict
        The JSON record, as plain values.

    Raises
    ------
    HfcoreError
        As the single run would.
    """
    import io
    import json

    out = io.StringIO()
    job_args = argparse.Namespace(**{**vars(args), "json": "-", "npz": None, "quiet": True})
    _run_energy(job_args, _Console(out, io.StringIO(), json_to_stdout=True, quiet=True))
    return json.loads(out.getvalue())


def basis_function_count(args: argparse.Namespace) -> int:
    """Number of basis functions an ``energy`` run with these arguments would use.

    Raises
    ------
    HfcoreError
        If the geometry or basis cannot be used.
    """
    return int(_build_basis(args, _read_molecule(args)).n_functions)


def _run_fit_sto(args: argparse.Namespace, console: _Console) -> int:
    from .basis.sto import fit_sto

    paths = _output_paths(args, "json", "plot")
    fit = fit_sto(args.shell, args.gaussians, args.zeta)
    record = export.sto_fit_record(fit)
    # The plot goes first: it is the step that can fail (no matplotlib), and
    # a failed run must leave no file behind.
    if "plot" in paths:
        from .plots import plot_sto_fit

        plot_sto_fit([fit], paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    console.report(report.format_sto_fit(fit))
    _report_written(console, paths.values())
    return 0


def _run_compare(args: argparse.Namespace, console: _Console) -> int:
    from .analysis import compare_bases
    from .scf import SCFOptions

    paths = _output_paths(args, "json", "plot")
    names = _basis_names(args)
    molecule = _read_molecule(args)
    options = SCFOptions(stability=args.stability, threads=args.threads, fit_basis=args.fit_basis)
    comparison = compare_bases(
        molecule, names, spherical=args.spherical, options=options, progress=_stderr_progress(console)
    )
    for row in comparison.rows:
        if row.stable is False:
            hint = " (rerun with --stability follow)" if args.stability == "check" else ""
            console.warn(f"{row.basis}: the RHF solution is unstable, so a lower RHF solution exists{hint}")
    record = export.comparison_record(comparison)
    if "plot" in paths:
        from .plots import plot_comparison

        plot_comparison(comparison, paths["plot"])
    if "json" in paths:
        export.write_file_atomically(paths["json"], export.to_json(record))
    if args.json == "-":
        console.data(export.to_json(record))
        return 0
    # The report comes whole after the runs, so a bad name or an open shell
    # found by compare_bases leaves stdout empty, as for every other error.
    console.report(report.format_molecule(molecule))
    console.report(report.format_comparison(comparison))
    if args.fit_basis is not None:
        console.report(f"  note: J and K density-fitted in every basis (--fit-basis {args.fit_basis})")
    _report_written(console, paths.values())
    return 0


def _basis_names(args: argparse.Namespace) -> list[str]:
    names = [n.strip() for n in args.basis.split(",") if n.strip()]
    if not names:
        raise InputError("--basis: give at least one basis name, e.g. sto-3g,cc-pvdz")
    return names


def _report_written(console: _Console, paths: Iterable[str]) -> None:
    written = [f"  wrote {path}" for path in paths]
    if written:
        console.report("\n" + "\n".join(written))


def _stderr_progress(console: _Console) -> Callable[[str], None] | None:
    # Several SCF runs take a while; say which one is running, on stderr so
    # that stdout holds only the report (or the JSON).
    if console.json_to_stdout:
        return None
    return lambda message: print(f"hfcore: {message}", file=console.stderr, flush=True)


def _run_bases(args: argparse.Namespace, console: _Console) -> int:
    from .basis.library import available_basis_sets, find_family
    from .basis.sto import MAX_GAUSSIANS

    fitted = [f"STO-{n}G" for n in range(1, MAX_GAUSSIANS + 1)]
    console.report(report.format_basis_list([find_family(n) for n in available_basis_sets()], fitted))
    return 0


# ----------------------------------------------------------------------------
# entry point
# ----------------------------------------------------------------------------


def _detach(stream: TextIO) -> None:
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
def _floating_point_errors_as_exceptions() -> typing.Iterator[None]:
    """Run the work with numpy's floating-point problems raised, never printed.

    Overflow, division by zero and invalid values (underflow is normal in
    Gaussian integrals and stays silent) become exceptions, and so do the
    numerical warnings of numpy and scipy; :func:`main` turns them into a
    :class:`~hfcore.errors.NumericalError`. The warning filters are global,
    so they also hold in worker threads, where numpy's error state is the
    default ("warn").
    """
    with np.errstate(over="warn", divide="warn", invalid="warn", under="ignore"), warnings.catch_warnings():
        warnings.filterwarnings("error", message=r"(overflow|divide by zero|invalid value) encountered", category=RuntimeWarning)
        warnings.filterwarnings("error", category=RuntimeWarning, module=r"(numpy|scipy)(\.|$)")
        yield


def _numerical_failure(exc: BaseException) -> NumericalError:
    what = str(exc).strip() or type(exc).__name__
    return NumericalError(
        f"numerical failure ({what}); the input passed validation, so please report it with the input files"
    )


def _fail(err: TextIO, message: str, code: int) -> int:
    one_line = " ".join(message.split())
    print(f"hfcore: error: {one_line}", file=err, flush=True)
    return code


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
    out = sys.stdout if stdout is None else stdout
    err = sys.stderr if stderr is None else stderr
    parser = build_parser()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            args = parser.parse_args(argv)
    except SystemExit as exc:  # usage errors, --help and --version
        return int(exc.code or 0)
    json_to_stdout = getattr(args, "json", None) == "-"
    console = _Console(out, err, json_to_stdout, getattr(args, "quiet", False))
    try:
        try:
            with _floating_point_errors_as_exceptions():
                return args.handler(args, console)
        except (FloatingPointError, RuntimeWarning, np.linalg.LinAlgError) as exc:
            raise _numerical_failure(exc) from None
    except HfcoreError as exc:
        return _fail(err, str(exc), exc.exit_code)
    except MemoryError:
        # numpy's own allocation failures mean the same to a user as ours.
        return _fail(err, "not enough memory for this run; try a smaller basis or molecule", ResourceError.exit_code)
    except KeyboardInterrupt:
        print("hfcore: interrupted", file=err, flush=True)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        # The reader stopped early (``| head``): stop too, without a message.
        _detach(out)
        return EXIT_BROKEN_PIPE


__all__ = [
    "build_parser",
    "main",
    "parse_basis_for",
    "energy_record",
    "basis_function_count",
    "EXIT_INTERRUPTED",
    "EXIT_BROKEN_PIPE",
]
