"""Shared argument definitions of the ``hfcore`` commands, and the request they make.

Every command that runs an SCF takes its options from here, so one flag
means one thing everywhere; :func:`run_request` turns parsed arguments into
the :class:`~hfcore.runs.RunRequest` the library runs.
"""

from __future__ import annotations

import argparse
import math
import re
import sys
import typing
from collections.abc import Sequence
from typing import Any

from .. import elements
from ..errors import InputError

#: The stability values, new name first; the old spellings are kept for one release.
STABILITY_CHOICES: tuple[str, ...] = ("skip", "report", "descend")
OLD_STABILITY_CHOICES: dict[str, str] = {"off": "skip", "check": "report", "follow": "descend"}
#: The help of --multiplicity where the default is the electron count's.
MULTIPLICITY_HELP = "spin multiplicity 2S+1 (default: 1 for an even electron count, 2 for an odd one)"
#: Options whose items are ``EL=...`` and which stop at the first item that is not.
ELEMENT_ITEM_OPTIONS: tuple[str, ...] = ("--basis-for", "--zeta")


def positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, found {text!r}") from None
    if value <= 0:
        raise argparse.ArgumentTypeError(f"must be positive, found {value}")
    return value


def positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, found {text!r}") from None
    if not value > 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"must be a positive finite number, found {text}")
    return value


def finite_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, found {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"expected a finite number, found {text!r}")
    return value


def charge(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"the charge must be a whole number, found {text!r}") from None


def _is_element_item(token: str) -> bool:
    """True for ``EL=...`` or ``EL:SHELL=...`` with EL an element symbol."""
    key, sep, _ = token.partition("=")
    if not sep:
        return False
    symbol = key.split(":", 1)[0].strip()
    try:
        elements.atomic_number(symbol)
    except (KeyError, ValueError):
        return False
    return True


def attach_element_items(argv: Sequence[str]) -> list[str]:
    """``--basis-for``/``--zeta`` items attached to their flag, up to the first item that is not ``EL=...``.

    ``--basis-for H=cc-pvdz water.xyz`` would otherwise give the geometry to
    the option; rewritten as ``--basis-for=H=cc-pvdz water.xyz`` it stays a
    positional argument. A first item that is not ``EL=...`` is left to the
    option, whose own check then names it.
    """
    out: list[str] = []
    k = 0
    while k < len(argv):
        token = argv[k]
        k += 1
        if token == "--":
            out.extend(argv[k - 1:])
            break
        if token not in ELEMENT_ITEM_OPTIONS:
            out.append(token)
            continue
        items = []
        while k < len(argv) and _is_element_item(argv[k]):
            items.append(argv[k])
            k += 1
        if not items:
            out.append(token)  # the option's own message names what follows
            continue
        out.extend(f"{token}={item}" for item in items)
    return out


class Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line, like every other error."""

    #: The arguments being parsed (for hints about a value that looks like an option).
    argv: Sequence[str] = ()

    def error(self, message: str) -> typing.NoReturn:
        command = self.prog.partition(" ")[2]
        where = f"{command}: " if command else ""
        self.exit(2, f"hfcore: error: {where}{message}{_value_hint(message, Parser.argv)} (see '{self.prog} --help')\n")


def _value_hint(message: str, argv: Sequence[str]) -> str:
    """A hint naming the cause of two usage errors that hide it.

    ``--opt -1,1``: a value that starts with '-' must be attached with '='.
    A missing GEOMETRY after ``--basis-for X`` / ``--zeta X`` with X not
    ``EL=...``: the option took X.
    """
    if "required: GEOMETRY" in message:
        for position, token in enumerate(argv[:-1]):
            if token in ELEMENT_ITEM_OPTIONS:
                return (f"; {token} took {argv[position + 1]!r} as one of its EL=... items: "
                        f"give the geometry first, or the items as {token}=EL=...")
        return ""
    match = re.match(r"argument ([-\w]+)(?:/[-\w]+)*: expected (?:one|\d+) arguments?", message)
    if not match:
        return ""
    flag = match.group(1)
    for position, token in enumerate(argv[:-1]):
        if token == flag and argv[position + 1].startswith("-"):
            return f"; a value starting with '-' must be attached: write {flag}={argv[position + 1]}"
    return ""


class DeprecatedOption(argparse.Action):
    """Store like the option's new name, with a one-line warning on stderr (hidden from ``--help``)."""

    def __init__(self, option_strings: Sequence[str], dest: str, new_name: str, **kwargs: Any) -> None:
        super().__init__(option_strings, dest, **kwargs)
        self.new_name = new_name

    def __call__(self, parser: argparse.ArgumentParser, namespace: argparse.Namespace, values: Any,
                 option_string: str | None = None) -> None:
        print(f"hfcore: warning: {option_string} is deprecated; use {self.new_name}", file=sys.stderr, flush=True)
        setattr(namespace, self.dest, values)


def _stability_value(text: str) -> str:
    name = text.strip().lower()
    if name in OLD_STABILITY_CHOICES:
        new = OLD_STABILITY_CHOICES[name]
        print(f"hfcore: warning: --stability {name} is deprecated; use --stability {new}", file=sys.stderr,
              flush=True)
        return new
    if name not in STABILITY_CHOICES:
        raise argparse.ArgumentTypeError(f"invalid choice {text!r} (choose from {', '.join(STABILITY_CHOICES)})")
    return name


def add_geometry_arguments(parser: argparse.ArgumentParser, *, geometry: bool = True, charge_option: bool = True,
                           spin: bool = True, multiplicity_help: str = MULTIPLICITY_HELP) -> None:
    """GEOMETRY, --units, --charge (and the spin options), --cartesian/--spherical."""
    if geometry:
        parser.add_argument("geometry", metavar="GEOMETRY", help="XYZ file (atom count, comment, then 'symbol x y z' lines)")
    parser.add_argument(
        "--units", choices=("angstrom", "bohr"), default="angstrom", help="units of the XYZ coordinates (default angstrom)"
    )
    if charge_option:
        parser.add_argument(
            "--charge", type=charge, default=0, help="total molecular charge (default 0; never read from the file)"
        )
    if spin:
        add_spin_arguments(parser, multiplicity_help=multiplicity_help)
    form = parser.add_mutually_exclusive_group()
    form.add_argument("--cartesian", dest="spherical", action="store_false", default=None, help="Cartesian d, f, ... functions")
    form.add_argument("--spherical", dest="spherical", action="store_true", help="real spherical d, f, ... functions")


def add_spin_arguments(parser: Any, *, multiplicity: bool = True, multiplicity_help: str = MULTIPLICITY_HELP) -> None:
    """--multiplicity (unless ``multiplicity`` is False) and the open-shell method (--uhf | --rohf)."""
    if multiplicity:
        parser.add_argument("--multiplicity", type=positive_int, metavar="M", help=multiplicity_help)
    add_method_arguments(parser)


def add_method_arguments(parser: Any) -> None:
    """--uhf | --rohf: the method of every open-shell run (a closed-shell singlet stays RHF unless --uhf)."""
    method = parser.add_mutually_exclusive_group()
    method.add_argument("--uhf", dest="method", action="store_const", const="uhf", default=None,
                        help="unrestricted Hartree–Fock for open shells (the default for them); "
                        "on a singlet, lets the spin symmetry break")
    method.add_argument("--rohf", dest="method", action="store_const", const="rohf",
                        help="restricted open-shell Hartree–Fock for every open shell (singlets stay RHF)")
    parser.add_argument("--spherical-atom", action="store_true", default=None,
                        help="an open-shell lone atom runs as ROHF with one radial function per shell "
                        "(equivalence restrictions, as numerical Hartree–Fock limits assume); "
                        "other species run as without it; not with --uhf")


def add_scf_arguments(parser: argparse.ArgumentParser) -> None:
    """Convergence, stability, the integral mode, memory and threads."""
    group = parser.add_argument_group("SCF convergence (defaults: see hfcore.scf.SCFOptions)")
    group.add_argument("--energy-tol", type=positive_float, metavar="X", help="energy change threshold in Eh (1e-10)")
    group.add_argument(
        "--gradient-tol", type=positive_float, metavar="X", help="largest orbital-gradient element threshold (1e-7)"
    )
    group.add_argument("--max-iterations", type=positive_int, metavar="N", help="iteration limit (100)")
    group.add_argument("--max-diis-size", type=positive_int, metavar="N", help="most Fock matrices DIIS keeps (8)")
    group.add_argument(
        "--diis-space", dest="max_diis_size", type=positive_int, metavar="N", help=argparse.SUPPRESS,
        action=DeprecatedOption, new_name="--max-diis-size",
    )
    group.add_argument(
        "--lindep-threshold",
        type=positive_float,
        metavar="X",
        help="drop overlap eigenvectors with eigenvalue below X (1e-7)",
    )
    add_stability_argument(group)
    memory = parser.add_argument_group("two-electron integrals (default: stored if they fit in --memory, else direct)")
    mode = memory.add_mutually_exclusive_group()
    mode.add_argument("--direct", dest="direct", action="store_const", const=True, default=None,
                      help="recompute the integrals every iteration instead of storing them")
    mode.add_argument("--stored", dest="direct", action="store_const", const=False,
                      help="store the integrals; fail up front if they exceed --memory")
    memory.add_argument("--memory", type=positive_float, metavar="MIB",
                        help="memory the stored integrals may use, in MiB (default: half of the least of the available "
                        "memory, the cgroup limit and the address-space and data limits)")
    add_threads_argument(memory)


def add_threads_argument(parser: Any) -> None:
    parser.add_argument("--threads", type=positive_int, metavar="N",
                        help="threads for the integral passes and linear algebra "
                        "(default and most: the cores this process may use); the energy does not depend on N beyond ~1e-13 Eh")


def add_stability_argument(parser: Any) -> None:
    parser.add_argument(
        "--stability",
        type=_stability_value,
        default="descend",
        metavar="{" + ",".join(STABILITY_CHOICES) + "}",
        help="after convergence, check that no orbital rotation lowers the energy; 'descend' (default) moves "
        "to the lower solution if one does, 'report' only warns, 'skip' skips the analysis",
    )


def add_fit_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--fit-basis",
        metavar="NAME",
        help="density-fitted J and K with this fitting set (e.g. cc-pVTZ-JKFIT, def2-universal-JKFIT); "
        "'auto' takes the set made for the orbital basis, else def2-universal-JKFIT",
    )


def add_json_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--json",
        metavar="PATH",
        help="write the results as JSON to PATH; '-' writes JSON to stdout and nothing else goes there",
    )


def basis_names(args: argparse.Namespace) -> list[str]:
    """The comma-separated ``--basis`` names of a study command."""
    names = [n.strip() for n in args.basis.split(",") if n.strip()]
    if not names:
        raise InputError("--basis: give at least one basis name, e.g. sto-3g,cc-pvdz")
    return names


def run_request(args: argparse.Namespace, **override: Any) -> Any:
    """The :class:`~hfcore.runs.RunRequest` of parsed arguments (options a command lacks keep their defaults).

    Parameters
    ----------
    args : argparse.Namespace
    **override
        Request fields to set instead (e.g. ``geometry``, ``basis``).
    """
    import dataclasses

    from ..runs import RunRequest

    renamed = {"memory_mib": "memory"}
    given: dict[str, Any] = {}
    for f in dataclasses.fields(RunRequest):
        value = getattr(args, renamed.get(f.name, f.name), None)
        if value is not None:
            given[f.name] = value
    if "origin" in given:
        given["origin"] = tuple(given["origin"])
    given.update(override)
    given.setdefault("geometry", "")
    return RunRequest(**given)


def scf_options(args: argparse.Namespace) -> Any:
    """The :class:`~hfcore.scf.SCFOptions` of a study command's arguments."""
    return run_request(args, mp2=False, frozen_core=False, mp2_fit_basis=None).scf_options()


def check_study_spin(args: argparse.Namespace, molecule: Any, command: str) -> Any:
    """The one spin check of a study command, before any integral: the molecule with its multiplicity.

    ``--multiplicity`` (when the command has it) is checked against the
    electrons (:func:`hfcore.geometry.check_multiplicity`), and the method
    against the spin (:func:`hfcore.scf.spin.resolve_method`; ``--uhf``
    with ``--rohf`` is refused by the parser). No study takes ``--mp2``, so
    MP2 on ROHF cannot be asked for here.

    Parameters
    ----------
    args : argparse.Namespace
    molecule : Molecule or None
        The study's molecule (None for a study of several: only the options
        are checked).
    command : str
        The command's name, for the message.

    Returns
    -------
    Molecule or None
        ``molecule`` with ``--multiplicity`` applied.

    Raises
    ------
    InputError
        One line: an impossible multiplicity, or RHF on an open shell.
    """
    from ..scf.spin import resolve_method
    from ..studies.pieces import piece_method

    method = getattr(args, "method", None)
    if molecule is None:
        return None
    multiplicity = getattr(args, "multiplicity", None)
    if multiplicity is not None:
        molecule = molecule.with_multiplicity(multiplicity)
    resolve_method(molecule.spin_multiplicity, piece_method(molecule.spin_multiplicity, method))
    return molecule


__all__ = [
    "STABILITY_CHOICES",
    "Parser",
    "DeprecatedOption",
    "attach_element_items",
    "positive_int",
    "positive_float",
    "finite_float",
    "charge",
    "add_geometry_arguments",
    "add_spin_arguments",
    "add_method_arguments",
    "add_scf_arguments",
    "add_threads_argument",
    "add_stability_argument",
    "add_fit_argument",
    "add_json_argument",
    "basis_names",
    "run_request",
    "scf_options",
    "check_study_spin",
]
