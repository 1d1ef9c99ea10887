"""Interaction energies of a complex of fragments, raw and counterpoise-corrected.

For a complex AB of fragments A and B (or more), in one basis:

* raw interaction energy      E(AB) - E(A) - E(B), each fragment in its own basis;
* counterpoise-corrected one  E(AB) - E(A | AB) - E(B | AB), each fragment in
  the full basis of the complex: the partner's atoms are ghosts that keep
  their basis functions but have no nuclei and no electrons
  (S. F. Boys and F. Bernardi, Mol. Phys. 19, 553 (1970));
* basis-set superposition error  sum over fragments of E(X) - E(X | AB),
  the corrected minus the raw value. Within RHF it is never negative: the
  complex's basis contains the fragment's own, and the variational
  principle does the rest.

A fragment in the full basis has the complex's basis functions at the
complex's positions, hence its overlap, kinetic and two-electron integrals;
only the nuclear attraction differs. Those runs therefore reuse the
complex's integrals (:func:`hfcore.scf.prepare_integrals`) unless told not
to.

The SCF runs are listed as plain data first (:func:`interaction_pieces`, in
:mod:`hfcore.analysis.fragments`), so that they could be handed to another
runner; :func:`interaction_energies` runs them in this process.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConvergenceError, InputError
from .compare import _check_names
from .fragments import (  # noqa: F401  (re-exported: the records belong to this module's API)
    BOYS_BERNARDI_CITATION,
    KINDS,
    InteractionPiece,
    InteractionRow,
    InteractionStudy,
    PieceResult,
    check_fragments,
    interaction_pieces,
)

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..scf.driver import SharedIntegrals
    from ..scf.options import SCFOptions
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
    from ..basis import build_basis
    from ..scf import run_rhf

    start = time.perf_counter()
    molecule = piece.molecule(complex_molecule)
    if basis is None:
        basis = shared.basis if shared is not None else build_basis(molecule, piece.basis, spherical=spherical)
    try:
        result = run_rhf(molecule, basis, options, guess=guess, shared=shared)
    except ConvergenceError as exc:
        raise ConvergenceError(f"{piece.basis}, {piece.label}: {exc}", exc.result) from None
    seconds = time.perf_counter() - start
    summary = PieceResult(piece, float(result.energy_total), basis.n_functions, int(result.iterations), seconds,
                          shared is not None and piece.kind != "complex")
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


def interaction_energies(
    molecule: Molecule,
    fragments: Sequence[Sequence[int]],
    bases: Sequence[str],
    *,
    fragment_charges: Sequence[int] | None = None,
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    reuse_integrals: bool = True,
    progress: Callable[[str], None] | None = None,
    runner: Callable[[Sequence[InteractionPiece]], Mapping[tuple, tuple[float, float]]] | None = None,
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
    progress : callable, optional
        Called with a one-line message after each SCF run (in-process runs).
    runner : callable, optional
        Runs the pieces elsewhere instead (e.g. as batch jobs), each on its
        own integrals: called as ``runner(pieces)`` after every check, it
        returns the total energy (hartree) and wall time (seconds) of each
        piece keyed by ``(basis, kind, fragment)``.

    Returns
    -------
    InteractionStudy

    Raises
    ------
    InputError
        Bad fragments or charges, an open-shell piece, repeated bases; all
        checked before any SCF runs.
    BasisError
        A basis that is unknown or misses an element (checked up front).
    ConvergenceError
        If a run does not converge.
    """
    from ..basis import build_basis
    from ..scf import prepare_integrals

    names = _check_names(bases)
    pieces = interaction_pieces(molecule.natom, fragments, names, fragment_charges)
    parts, charges = check_fragments(molecule.natom, fragments, fragment_charges)
    for piece in pieces[: 1 + 2 * len(parts)]:
        piece.molecule(molecule).require_closed_shell()
    complex_molecule = molecule.with_charge(sum(charges))
    basis_of = {name: build_basis(complex_molecule, name, spherical=spherical) for name in names}
    own_basis = {
        (p.basis, p.fragment): build_basis(p.molecule(molecule), p.basis, spherical=spherical)
        for p in pieces
        if p.kind == "own basis"
    }
    started = time.perf_counter()
    done: list[PieceResult] = []
    rows = []
    outside = runner(pieces) if runner is not None else None
    if outside is not None:
        reuse_integrals = False
    for name in names:
        t0 = time.perf_counter()
        if outside is not None:
            energies = {(kind, k): e for (b, kind, k), (e, _) in outside.items() if b == name}
            for p in (p for p in pieces if p.basis == name):
                n = (own_basis[(name, p.fragment)] if p.kind == "own basis" else basis_of[name]).n_functions
                done.append(PieceResult(p, energies[(p.kind, p.fragment)], n, 0, outside[(name, p.kind, p.fragment)][1],
                                        False))
            rows.append(_row(name, basis_of[name], energies, len(parts), sum(s for (b, _, _), (_, s) in outside.items()
                                                                            if b == name), 0.0))
            continue
        shared = prepare_integrals(basis_of[name], options, molecule=complex_molecule) if reuse_integrals else None
        integral_seconds = shared.seconds if shared is not None else 0.0
        energies: dict[tuple[str, int | None], float] = {}
        densities: dict[int, np.ndarray] = {}
        for piece in (p for p in pieces if p.basis == name):
            if piece.kind == "own basis":
                basis = own_basis[(name, piece.fragment)]
                use = None
            else:
                basis = basis_of[name]
                use = shared
            guess = "sad"
            if piece.kind == "full basis":
                guess = embedded_density(densities[piece.fragment], basis, piece.atoms)
            summary, result = run_piece(molecule, piece, basis, options=options, shared=use, guess=guess)
            if piece.kind == "own basis":
                densities[piece.fragment] = result.density
            if piece.kind == "complex" and shared is not None:
                summary = replace(summary, seconds=summary.seconds + shared.seconds)  # it paid for them
            if piece.kind == "complex" and shared is None:
                integral_seconds = result.timings["integrals"]
            done.append(summary)
            energies[(piece.kind, piece.fragment)] = summary.energy_total
            if progress is not None:
                progress(
                    f"[{len(done)}/{len(pieces)}] {name}, {piece.label} ({summary.n_functions} functions): "
                    f"E = {summary.energy_total:.10f} Eh after {summary.iterations} iterations in {summary.seconds:.2f} s"
                )
        rows.append(_row(name, basis_of[name], energies, len(parts), time.perf_counter() - t0, integral_seconds))
    return InteractionStudy(
        source=molecule.source,
        fragments=parts,
        fragment_charges=charges,
        rows=tuple(rows),
        pieces=tuple(done),
        reuse_integrals=reuse_integrals,
        seconds=time.perf_counter() - started,
        batch=outside is not None,
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
    "interaction_energies",
]
