"""Interaction energies of a complex of fragments, raw and counterpoise-corrected.

For a complex AB of fragments A and B (or more), in one basis:

* raw interaction energy      E(AB) - E(A) - E(B), each fragment in its own basis;
* counterpoise-corrected one  E(AB) - E(A | AB) - E(B | AB), each fragment in
  the full basis of the complex: the partner's atoms are ghosts that keep
  their basis functions but have no nuclei and no electrons
  (S. F. Boys and F. Bernardi, Mol. Phys. 19, 553 (1970));
* basis-set superposition error  sum over fragments of E(X) - E(X | AB),
  the corrected minus the raw value. Within Hartree–Fock it is never negative: the
  complex's basis contains the fragment's own, and the variational
  principle does the rest.

A fragment in the full basis has the complex's basis functions at the
complex's positions, hence its overlap, kinetic and two-electron integrals;
only the nuclear attraction differs. Those runs therefore reuse the
complex's integrals (:func:`hfcore.scf.prepare_integrals`) unless told not
to.

The study's contract (:mod:`hfcore.studies.pieces`): :func:`interaction_pieces`
(in :mod:`hfcore.studies.fragments`) lists the SCF runs as plain data;
:func:`run_interaction_pieces` runs them in this process with shared
integrals, or a runner passed to :func:`interaction_energies` runs them
elsewhere; :func:`assemble_interaction` makes the record.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

from .._deprecation import rename_keywords
from ..basis import build_basis
from ..errors import ConvergenceError, InputError
from ..geometry import check_multiplicity, default_multiplicity
from ..scf.driver import prepare_integrals
from ..scf.open_driver import run_scf
from ..scf.options import SCFOptions
from ..scf.spin import resolve_method
from .fragments import (  # noqa: F401  (re-exported: the records belong to this module's API)
    BOYS_BERNARDI_CITATION,
    HIGH_SPIN,
    KINDS,
    InteractionPiece,
    InteractionRow,
    InteractionStudy,
    PieceResult,
    check_fragments,
    complex_multiplicity,
    interaction_pieces,
)
from .pieces import MessageProgress, PieceOutcome, check_basis_names, collect, outcome_of_result

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..scf.driver import SharedIntegrals
    from ..scf.result import RHFResult


def run_piece(
    complex_molecule: Molecule,
    piece: InteractionPiece,
    basis: BasisSet | None = None,
    *,
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    shared: SharedIntegrals | None = None,
    guess: str | np.ndarray = "sad",
) -> tuple[PieceResult, RHFResult]:
    """Run one piece.

    Parameters
    ----------
    complex_molecule : Molecule
    piece : InteractionPiece
    basis : BasisSet, optional
        The basis of the piece's molecule (built from ``piece.basis`` if
        omitted); must be ``shared.basis`` when ``shared`` is given.
    spherical : bool, optional
    options : SCFOptions, optional
    shared : SharedIntegrals, optional
        The complex's integrals, for the complex and full-basis pieces.
    guess : str or ndarray, shape (nbf, nbf)
        Starting density, as for :func:`hfcore.scf.run_rhf`.

    Returns
    -------
    (PieceResult, RHFResult)

    Raises
    ------
    ConvergenceError
        If the SCF does not converge.
    """
    start = time.perf_counter()
    molecule = piece.molecule(complex_molecule)
    if basis is None:
        basis = shared.basis if shared is not None else build_basis(molecule, piece.basis, spherical=spherical)
    run_options = dataclasses.replace(options or SCFOptions(), method=piece.method)
    try:
        result = run_scf(molecule, basis, run_options, guess=guess, shared=shared)
    except ConvergenceError as exc:
        raise ConvergenceError(f"{piece.basis}, {piece.label}: {exc}", exc.result) from None
    seconds = time.perf_counter() - start
    summary = PieceResult(piece, float(result.energy_total), basis.n_functions, int(result.iterations), seconds,
                          shared is not None and piece.kind != "complex", str(result.method).upper())
    return summary, result


def embedded_density(density: np.ndarray, basis: BasisSet, atoms: Sequence[int]) -> np.ndarray:
    """A fragment's own-basis density placed in the complex's basis (zero on the ghost functions).

    The fragment's own basis is the complex's functions on its atoms, in the
    same order, so the density is copied into that block: a starting guess
    for the fragment in the full basis that is already converged but for
    the ghost functions.

    Parameters
    ----------
    density : ndarray, shape (nbf_fragment, nbf_fragment)
        Total density of the fragment in its own basis.
    basis : BasisSet
        The complex's basis.
    atoms : sequence of int
        0-based atoms of the fragment.

    Returns
    -------
    ndarray, shape (nbf, nbf)
    """
    index = np.flatnonzero(np.isin(basis.function_atoms(), list(atoms)))
    if index.size != density.shape[0]:
        raise InputError(f"a density over {density.shape[0]} functions does not fit the {index.size} on atoms {list(atoms)}")
    full = np.zeros((basis.n_functions, basis.n_functions))
    full[np.ix_(index, index)] = density
    return full


def run_interaction_pieces(
    molecule: Molecule,
    pieces: Sequence[InteractionPiece],
    bases: Mapping[str, BasisSet],
    own_bases: Mapping[tuple[str, int], BasisSet],
    *,
    options: SCFOptions | None = None,
    reuse_integrals: bool = True,
    message_progress: MessageProgress | None = None,
) -> tuple[dict[tuple, PieceOutcome], dict[str, tuple[float, float]]]:
    """The in-process runner of an interaction study, basis by basis.

    In each basis the complex runs first; with ``reuse_integrals`` its
    overlap, kinetic and two-electron integrals serve the fragments in the
    full basis too, and each of those starts from its own-basis density
    placed in the full basis (:func:`embedded_density`).

    Parameters
    ----------
    molecule : Molecule
        The complex.
    pieces : sequence of InteractionPiece
        Per basis: the complex, then the fragments in their own bases, then
        in the full basis (the order of :func:`interaction_pieces`).
    bases : mapping of str to BasisSet
        The complex's basis by name.
    own_bases : mapping of (str, int) to BasisSet
        Each fragment's own basis by (name, fragment).
    options : SCFOptions, optional
    reuse_integrals : bool
    message_progress : callable, optional
        Called with a one-line message after each run.

    Returns
    -------
    (dict, dict)
        The outcome of each piece by key (the complex's time includes the
        shared integrals it paid for), and per basis name (wall-clock
        seconds of its runs, seconds of the complex's integrals).

    Raises
    ------
    ConvergenceError
        If a run does not converge.
    """
    outcomes: dict[tuple, PieceOutcome] = {}
    times: dict[str, tuple[float, float]] = {}
    for name in dict.fromkeys(p.basis for p in pieces):
        t0 = time.perf_counter()
        shared = prepare_integrals(bases[name], options, molecule=molecule.with_multiplicity(None).with_charge(_complex_charge(pieces, name))) \
            if reuse_integrals else None
        integral_seconds = shared.wall_seconds if shared is not None else 0.0
        densities: dict[int, np.ndarray] = {}
        for piece in (p for p in pieces if p.basis == name):
            if piece.kind == "own basis":
                basis, use = own_bases[(name, piece.fragment)], None
            else:
                basis, use = bases[name], shared
            guess = "sad"
            if piece.kind == "full basis":
                guess = embedded_density(densities[piece.fragment], basis, piece.atoms)
            summary, result = run_piece(molecule, piece, basis, options=options, shared=use, guess=guess)
            if piece.kind == "own basis":
                densities[piece.fragment] = result.density
            seconds = summary.wall_seconds
            if piece.kind == "complex" and shared is not None:
                seconds += shared.wall_seconds  # it paid for them
            if piece.kind == "complex" and shared is None:
                integral_seconds = result.timings["integrals"]
            outcomes[piece.key] = dataclasses.replace(
                outcome_of_result(result, seconds, summary.n_functions), reused_integrals=summary.reused_integrals
            )
            if message_progress is not None:
                message_progress(
                    f"[{len(outcomes)}/{len(pieces)}] {name}, {piece.label} ({summary.n_functions} functions, "
                    f"{summary.method}): "
                    f"E = {summary.energy_total:.10f} Eh after {summary.iterations} iterations in {seconds:.2f} s"
                )
        times[name] = (time.perf_counter() - t0, integral_seconds)
    return outcomes, times


def _complex_charge(pieces: Sequence[InteractionPiece], name: str) -> int:
    return next(p.charge for p in pieces if p.basis == name and p.kind == "complex")


@rename_keywords({"progress": "message_progress"})
def interaction_energies(
    molecule: Molecule,
    fragments: Sequence[Sequence[int]],
    bases: Sequence[str],
    *,
    fragment_charges: Sequence[int] | None = None,
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    reuse_integrals: bool = True,
    message_progress: MessageProgress | None = None,
    runner: Callable[[Sequence[InteractionPiece]], Mapping[tuple, object]] | None = None,
    fragment_multiplicities: Sequence[int] | None = None,
    multiplicity: int | None = None,
    method: str | None = None,
) -> InteractionStudy:
    """Raw and counterpoise-corrected interaction energies in several bases.

    Parameters
    ----------
    molecule : Molecule
        The complex; its own charge is ignored in favour of the sum of the
        fragment charges.
    fragments : sequence of sequence of int
        0-based atoms of each fragment; together they hold every atom once.
    bases : sequence of str
        Basis names, each different.
    fragment_charges : sequence of int, optional
        Charge of each fragment (default all 0).
    spherical : bool, optional
        Real spherical or Cartesian functions; each family's own by default.
    options : SCFOptions, optional
        Settings of every SCF run.
    reuse_integrals : bool
        Let the fragments in the full basis reuse the complex's overlap,
        kinetic and two-electron integrals (default). False computes them
        again for every run, as separate runs would.
    message_progress : callable, optional
        Called with a one-line message after each SCF run (in-process runs).
    runner : callable, optional
        Runs the pieces elsewhere instead (e.g. as batch jobs), each on its
        own integrals: called as ``runner(pieces)`` after every check, it
        returns the outcome of each piece keyed by ``(basis, kind,
        fragment)``: a :class:`~hfcore.studies.pieces.PieceOutcome` or a
        pair (total energy / hartree, wall time / seconds).
    fragment_multiplicities : sequence of int, optional
        2S+1 of each fragment (default: 1 for an even, 2 for an odd electron
        count), in both of its bases.
    multiplicity : int, optional
        2S+1 of the complex; by default the high-spin coupling of the
        fragments, M = 1 + Σ (M_i − 1).
    method : {None, "uhf", "rohf"}, optional
        The method of every open-shell piece (singlets stay RHF unless
        ``"uhf"``); default ``options.method``.

    Returns
    -------
    InteractionStudy

    Raises
    ------
    InputError
        Bad fragments, charges or multiplicities (checked against each
        piece's electrons), repeated bases; all checked before any SCF runs.
    BasisError
        A basis that is unknown or misses an element (checked up front).
    ConvergenceError
        If a run does not converge.
    """
    names = check_basis_names(bases)
    parts, charges = check_fragments(molecule.n_atoms, fragments, fragment_charges)
    if method is None and options is not None:
        method = options.method
    spins, total, rule = _multiplicities(molecule, parts, charges, fragment_multiplicities, multiplicity)
    pieces = interaction_pieces(molecule.n_atoms, parts, names, charges, spins, total, method)
    for piece in pieces[: 1 + 2 * len(parts)]:
        run = piece.molecule(molecule)
        if run.n_electrons <= 0:
            run.require_closed_shell()  # its message: nothing to compute
        try:
            resolve_method(run.spin_multiplicity, piece.method)
        except InputError as exc:
            raise InputError(f"{piece.label}: {exc}") from None
    complex_molecule = molecule.with_multiplicity(None).with_charge(sum(charges)).with_multiplicity(total)
    basis_of = {name: build_basis(complex_molecule, name, spherical=spherical) for name in names}
    own_basis = {
        (p.basis, p.fragment): build_basis(p.molecule(molecule), p.basis, spherical=spherical)
        for p in pieces
        if p.kind == "own basis"
    }
    started = time.perf_counter()
    if runner is not None:
        outcomes = collect(pieces, runner(pieces))
        times = None
        reuse_integrals = False
    else:
        outcomes, times = run_interaction_pieces(
            molecule, pieces, basis_of, own_basis, options=options, reuse_integrals=reuse_integrals, message_progress=message_progress
        )
    study = assemble_interaction(
        molecule.source, parts, charges, pieces, basis_of, own_basis, outcomes, times,
        reuse_integrals=reuse_integrals, wall_seconds=time.perf_counter() - started,
    )
    return dataclasses.replace(study, fragment_multiplicities=spins, multiplicity=total, multiplicity_rule=rule)


def _multiplicities(
    molecule: Molecule, parts: Sequence[tuple[int, ...]], charges: Sequence[int],
    given: Sequence[int] | None, multiplicity: int | None,
) -> tuple[tuple[int, ...], int, str]:
    """(fragment multiplicities, the complex's, how it was set), each checked against its electrons."""
    if given is not None and len(given) != len(parts):
        raise InputError(f"{len(given)} fragment multiplicities for {len(parts)} fragments")
    spins = []
    for k, (part, q) in enumerate(zip(parts, charges)):
        n = molecule.subset(part, q).n_electrons
        m = default_multiplicity(n) if given is None else int(given[k])
        spins.append(check_multiplicity(n, m, f"{molecule.source}: fragment {k + 1} (charge {q:+d})"))
    n_complex = molecule.with_multiplicity(None).with_charge(sum(charges)).n_electrons
    rule = "given"
    if multiplicity is None:
        multiplicity, rule = complex_multiplicity(spins), HIGH_SPIN
    check_multiplicity(n_complex, int(multiplicity), f"{molecule.source}: the complex ({rule})")
    return tuple(spins), int(multiplicity), rule


def assemble_interaction(
    source: str,
    fragments: Sequence[tuple[int, ...]],
    fragment_charges: Sequence[int],
    pieces: Sequence[InteractionPiece],
    bases: Mapping[str, BasisSet],
    own_bases: Mapping[tuple[str, int], BasisSet],
    outcomes: Mapping[tuple, PieceOutcome],
    basis_times: Mapping[str, tuple[float, float]] | None = None,
    *,
    reuse_integrals: bool = True,
    wall_seconds: float = 0.0,
) -> InteractionStudy:
    """The interaction study's record from the outcomes of its pieces.

    Parameters
    ----------
    source : str
        Where the complex's geometry came from.
    fragments, fragment_charges : sequences
        As checked by :func:`check_fragments`.
    pieces : sequence of InteractionPiece
    bases, own_bases : mappings
        The complex's basis by name, each fragment's own by (name, fragment).
    outcomes : mapping
        The outcome of each piece by key.
    basis_times : mapping, optional
        Per basis (wall-clock seconds, seconds of the complex's integrals)
        from the in-process runner; without it (pieces run elsewhere) a
        row's time is the sum of its pieces' and ``batch`` is True.
    reuse_integrals : bool
        Whether the full-basis runs reused the complex's integrals.
    wall_seconds : float
        Wall-clock time of all runs.

    Returns
    -------
    InteractionStudy
    """
    done = []
    for p in pieces:
        outcome = outcomes[p.key]
        n = (own_bases[(p.basis, p.fragment)] if p.kind == "own basis" else bases[p.basis]).n_functions
        done.append(PieceResult(p, outcome.energy_total, n, outcome.iterations, outcome.wall_seconds,
                                outcome.reused_integrals, outcome.method))
    rows = []
    for name in dict.fromkeys(p.basis for p in pieces):
        energies = {(p.kind, p.fragment): outcomes[p.key].energy_total for p in pieces if p.basis == name}
        if basis_times is None:
            seconds = 0.0
            for p in pieces:
                if p.basis == name:
                    seconds += outcomes[p.key].wall_seconds
            times = (seconds, 0.0)
        else:
            times = basis_times[name]
        rows.append(_row(name, bases[name], energies, len(fragments), *times))
    return InteractionStudy(
        source=source,
        fragments=tuple(fragments),
        fragment_charges=tuple(fragment_charges),
        rows=tuple(rows),
        pieces=tuple(done),
        reuse_integrals=reuse_integrals,
        wall_seconds=wall_seconds,
        batch=basis_times is None,
    )


def _row(name: str, basis: BasisSet, energies: Mapping[tuple, float], n_parts: int, seconds: float,
         integral_seconds: float) -> InteractionRow:
    """Assemble one basis' row from the energies of its pieces, keyed by (kind, fragment)."""
    e_ab = energies[("complex", None)]
    own = tuple(energies[("own basis", k)] for k in range(n_parts))
    full = tuple(energies[("full basis", k)] for k in range(n_parts))
    raw = e_ab - sum(own)
    cp = e_ab - sum(full)
    return InteractionRow(name, basis.n_functions, basis.spherical, e_ab, own, full, raw, cp, cp - raw, seconds,
                          integral_seconds)


__all__ = [
    "BOYS_BERNARDI_CITATION",
    "KINDS",
    "InteractionPiece",
    "PieceResult",
    "InteractionRow",
    "InteractionStudy",
    "check_fragments",
    "interaction_pieces",
    "run_piece",
    "embedded_density",
    "run_interaction_pieces",
    "assemble_interaction",
    "interaction_energies",
]
