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

The SCF runs are listed as plain data first (:func:`interaction_pieces`),
so that they could be handed to another runner; :func:`interaction_energies`
runs them in this process.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConvergenceError, InputError
from .compare import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE, _check_names

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..scf.driver import SharedIntegrals
    from ..scf.options import SCFOptions
    from ..scf.result import RHFResult

#: Citation of the counterpoise correction.
BOYS_BERNARDI_CITATION = "S. F. Boys and F. Bernardi, Mol. Phys. 19, 553 (1970)"

#: What a piece computes: the whole complex, a fragment in its own basis, a fragment in the complex's basis.
KINDS: tuple[str, ...] = ("complex", "own basis", "full basis")


@dataclass(frozen=True)
class InteractionPiece:
    """One SCF run of an interaction calculation, as plain data.

    Attributes
    ----------
    basis : str
        Basis name.
    kind : {"complex", "own basis", "full basis"}
        The complex; a fragment alone; a fragment with the other fragments'
        atoms as ghosts.
    fragment : int or None
        0-based fragment index (None for the complex).
    atoms : tuple of int
        0-based atoms (file order) that carry nuclei and electrons.
    ghosts : tuple of int
        0-based atoms present only through their basis functions.
    charge : int
        Total charge of the run.
    """

    basis: str
    kind: str
    fragment: int | None
    atoms: tuple[int, ...]
    ghosts: tuple[int, ...]
    charge: int

    @property
    def label(self) -> str:
        """A short name, e.g. ``"fragment 2 in the full basis"``."""
        if self.fragment is None:
            return "complex"
        return f"fragment {self.fragment + 1} in {'its own' if self.kind == 'own basis' else 'the full'} basis"

    def molecule(self, complex_molecule: Molecule) -> Molecule:
        """The molecule this piece runs, cut from the complex.

        Parameters
        ----------
        complex_molecule : Molecule
            The whole complex.

        Returns
        -------
        Molecule
            The complex, the fragment alone, or the complex with ghosts (same
            atom order as the complex, so the same basis functions).
        """
        if self.kind == "own basis":
            return complex_molecule.subset(self.atoms, self.charge)
        return complex_molecule.with_charge(self.charge).with_ghosts(self.ghosts)


@dataclass(frozen=True)
class PieceResult:
    """The outcome of one :class:`InteractionPiece`.

    Attributes
    ----------
    piece : InteractionPiece
    energy_total : float
        RHF total energy in hartree.
    n_functions : int
        Basis functions of the run (ghost functions included).
    iterations : int
        SCF iterations.
    seconds : float
        Wall-clock time of the run, integrals included.
    reused_integrals : bool
        True if the run took the complex's overlap, kinetic and
        two-electron integrals instead of computing them.
    """

    piece: InteractionPiece
    energy_total: float
    n_functions: int
    iterations: int
    seconds: float
    reused_integrals: bool


@dataclass(frozen=True)
class InteractionRow:
    """The interaction energy of the complex in one basis (energies in hartree).

    Attributes
    ----------
    basis : str
    n_functions : int
        Basis functions of the complex.
    spherical : bool
    energy_complex : float
    fragments_own_basis : tuple of float
        Each fragment's energy in its own basis.
    fragments_full_basis : tuple of float
        Each fragment's energy in the complex's basis (ghost functions).
    raw : float
        E(complex) minus the fragments in their own bases.
    counterpoise : float
        E(complex) minus the fragments in the full basis.
    superposition_error : float
        counterpoise minus raw: the sum over fragments of E(own) - E(full),
        never negative within RHF.
    seconds : float
        Wall-clock time of this basis' runs.
    integral_seconds : float
        Time the complex's overlap, kinetic and two-electron integrals
        took; each full-basis fragment run that reused them saved about as
        much.
    """

    basis: str
    n_functions: int
    spherical: bool
    energy_complex: float
    fragments_own_basis: tuple[float, ...]
    fragments_full_basis: tuple[float, ...]
    raw: float
    counterpoise: float
    superposition_error: float
    seconds: float
    integral_seconds: float = 0.0

    def to_dict(self) -> dict:
        """Plain form; each of raw, counterpoise and superposition_error also in kJ/mol and kcal/mol."""
        out = asdict(self)
        out["fragments_own_basis"] = list(self.fragments_own_basis)
        out["fragments_full_basis"] = list(self.fragments_full_basis)
        for name in ("raw", "counterpoise", "superposition_error"):
            value = getattr(self, name)
            out[f"{name}_kJ_mol"] = value * KJ_MOL_PER_HARTREE
            out[f"{name}_kcal_mol"] = value * KCAL_MOL_PER_HARTREE
        return out


@dataclass(frozen=True)
class InteractionStudy:
    """The outcome of :func:`interaction_energies`.

    Attributes
    ----------
    source : str
        Where the complex's geometry came from.
    fragments : tuple of tuple of int
        0-based atoms of each fragment.
    fragment_charges : tuple of int
    rows : tuple of InteractionRow
        One per basis, in the order given.
    pieces : tuple of PieceResult
        Every SCF run, in the order run.
    reuse_integrals : bool
        Whether the full-basis fragment runs reused the complex's integrals.
    seconds : float
        Wall-clock time of all runs.
    citation : str
        Source of the counterpoise correction.
    """

    source: str
    fragments: tuple[tuple[int, ...], ...]
    fragment_charges: tuple[int, ...]
    rows: tuple[InteractionRow, ...]
    pieces: tuple[PieceResult, ...] = field(default=(), repr=False)
    reuse_integrals: bool = True
    seconds: float = 0.0
    citation: str = BOYS_BERNARDI_CITATION

    @property
    def integral_seconds_saved(self) -> float:
        """Integral time the full-basis fragment runs did not spend, summed over bases (0 without reuse)."""
        if not self.reuse_integrals:
            return 0.0
        return sum(row.integral_seconds * len(self.fragments) for row in self.rows)

    def to_dict(self) -> dict:
        """Plain, JSON-ready form (atom numbers 0-based, energies in hartree unless a key names a unit)."""
        return {
            "source": self.source,
            "fragments": [list(f) for f in self.fragments],
            "fragment_charges": list(self.fragment_charges),
            "rows": [row.to_dict() for row in self.rows],
            "runs": [
                {
                    "basis": p.piece.basis,
                    "kind": p.piece.kind,
                    "fragment": p.piece.fragment,
                    "energy_total": p.energy_total,
                    "n_functions": p.n_functions,
                    "iterations": p.iterations,
                    "seconds": p.seconds,
                    "reused_integrals": p.reused_integrals,
                }
                for p in self.pieces
            ],
            "reuse_integrals": self.reuse_integrals,
            "integral_seconds_saved": self.integral_seconds_saved,
            "seconds": self.seconds,
            "citation": self.citation,
        }


def check_fragments(
    natom: int, fragments: Sequence[Sequence[int]], charges: Sequence[int] | None = None
) -> tuple[tuple[tuple[int, ...], ...], tuple[int, ...]]:
    """Check that fragments split the atoms exactly once each.

    Parameters
    ----------
    natom : int
        Atoms of the complex.
    fragments : sequence of sequence of int
        0-based atoms of each fragment (at least two fragments).
    charges : sequence of int, optional
        Charge of each fragment (all 0 by default).

    Returns
    -------
    (tuple of tuple of int, tuple of int)
        Sorted fragments and their charges.

    Raises
    ------
    InputError
        Fewer than two fragments, an empty fragment, an atom in two
        fragments or in none, an atom that does not exist, or a charge count
        that does not match.
    """
    parts = tuple(tuple(sorted({int(a) for a in f})) for f in fragments)
    if len(parts) < 2:
        raise InputError("an interaction energy needs at least two fragments, e.g. --fragments 1-3,4-6")
    seen: dict[int, int] = {}
    for k, part in enumerate(parts):
        if not part:
            raise InputError(f"fragment {k + 1} has no atoms")
        for a in part:
            if not 0 <= a < natom:
                raise InputError(f"fragment {k + 1}: atom {a + 1} does not exist (the complex has {natom} atoms)")
            if a in seen:
                raise InputError(f"atom {a + 1} is in fragment {seen[a] + 1} and in fragment {k + 1}")
            seen[a] = k
    missing = [a + 1 for a in range(natom) if a not in seen]
    if missing:
        raise InputError(f"atom {missing[0]} is in no fragment; every atom of the complex must be in one")
    q = tuple(int(c) for c in charges) if charges is not None else (0,) * len(parts)
    if len(q) != len(parts):
        raise InputError(f"{len(q)} fragment charges for {len(parts)} fragments")
    return parts, q


def interaction_pieces(
    natom: int, fragments: Sequence[Sequence[int]], bases: Sequence[str], charges: Sequence[int] | None = None
) -> list[InteractionPiece]:
    """Every SCF run an interaction calculation needs, per basis in order.

    Per basis: the complex, then each fragment in its own basis, then each
    fragment in the full basis (these share the complex's integrals and
    may start from the fragment's own-basis density).

    Parameters
    ----------
    natom : int
    fragments : sequence of sequence of int
        0-based atoms of each fragment.
    bases : sequence of str
    charges : sequence of int, optional

    Returns
    -------
    list of InteractionPiece
    """
    parts, q = check_fragments(natom, fragments, charges)
    pieces = []
    everything = tuple(range(natom))
    for name in bases:
        pieces.append(InteractionPiece(name, "complex", None, everything, (), sum(q)))
        for kind in ("own basis", "full basis"):
            for k, part in enumerate(parts):
                others = tuple(a for a in everything if a not in part) if kind == "full basis" else ()
                pieces.append(InteractionPiece(name, kind, k, part, others, q[k]))
    return pieces


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
        Called with a one-line message after each SCF run.

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
    for name in names:
        t0 = time.perf_counter()
        shared = prepare_integrals(basis_of[name], options) if reuse_integrals else None
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
        e_ab = energies[("complex", None)]
        own = tuple(energies[("own basis", k)] for k in range(len(parts)))
        full = tuple(energies[("full basis", k)] for k in range(len(parts)))
        raw = e_ab - sum(own)
        cp = e_ab - sum(full)
        rows.append(
            InteractionRow(name, basis_of[name].n_functions, basis_of[name].spherical, e_ab, own, full, raw, cp,
                           cp - raw, time.perf_counter() - t0, integral_seconds)
        )
    return InteractionStudy(
        source=molecule.source,
        fragments=parts,
        fragment_charges=charges,
        rows=tuple(rows),
        pieces=tuple(done),
        reuse_integrals=reuse_integrals,
        seconds=time.perf_counter() - started,
    )


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
