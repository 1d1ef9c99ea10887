"""Fragments of a complex, the SCF runs an interaction energy needs, and the records of their outcome.

:func:`interaction_pieces` lists the runs as plain data
(:class:`InteractionPiece`); :mod:`hfcore.studies.interaction` runs them
and assembles :class:`InteractionRow` and :class:`InteractionStudy`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING

from .._deprecation import rename_fields
from ..errors import InputError
from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .basis_limit import BasisLimit, basis_limit

if TYPE_CHECKING:
    from ..geometry import Molecule

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
    multiplicity : int or None
        Spin multiplicity 2S+1 of the run: the fragment's in both of its
        bases, the complex's for the complex (None: the default of the
        electron count).
    method : {None, "uhf", "rohf"}
        The SCF method asked for (None: RHF for a singlet, UHF otherwise).
    """

    basis: str
    kind: str
    fragment: int | None
    atoms: tuple[int, ...]
    ghosts: tuple[int, ...]
    charge: int
    multiplicity: int | None = None
    method: str | None = None

    @property
    def key(self) -> tuple[str, str, int | None]:
        """The piece's key in a runner's outcomes: (basis, kind, fragment)."""
        return (self.basis, self.kind, self.fragment)

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
            atom order as the complex, so the same basis functions), with
            the piece's multiplicity (checked against its electrons).
        """
        if self.kind == "own basis":
            cut = complex_molecule.subset(self.atoms, self.charge)
        else:
            cut = complex_molecule.with_multiplicity(None).with_charge(self.charge).with_ghosts(self.ghosts)
        return cut.with_multiplicity(self.multiplicity)


@dataclass(frozen=True)
class PieceResult:
    """The outcome of one :class:`InteractionPiece`.

    Attributes
    ----------
    piece : InteractionPiece
    energy_total : float
        Hartree–Fock total energy (RHF, UHF or ROHF) in hartree.
    n_functions : int
        Basis functions of the run (ghost functions included).
    iterations : int
        SCF iterations (0 when the runner did not report them).
    wall_seconds : float
        Wall-clock time of the run, integrals included.
    reused_integrals : bool
        True if the run took the complex's overlap, kinetic and
        two-electron integrals instead of computing them.
    method : str
        ``"RHF"``, ``"UHF"`` or ``"ROHF"`` (empty if the runner did not say).
    """

    piece: InteractionPiece
    energy_total: float
    n_functions: int
    iterations: int
    wall_seconds: float
    reused_integrals: bool
    method: str = ""


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
    wall_seconds : float
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
    wall_seconds: float
    integral_seconds: float = 0.0

    def to_dict(self) -> dict:
        """Plain form; each of raw, counterpoise and superposition_error also in kJ/mol and kcal/mol.

        ``seconds`` repeats ``wall_seconds`` under its deprecated key (kept for one release).
        """
        out = asdict(self)
        out["seconds"] = self.wall_seconds
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
    wall_seconds : float
        Wall-clock time of all runs.
    citation : str
        Source of the counterpoise correction.
    batch : bool
        True if the pieces ran as batch jobs (their times are the jobs'
        own, possibly from an earlier run recorded in the results file).
    fragment_multiplicities : tuple of int
        2S+1 of each fragment.
    multiplicity : int
        2S+1 of the complex.
    multiplicity_rule : str
        How the complex's multiplicity was set: ``"given"`` or
        ``"high-spin coupling"`` (M = 1 + Σ (M_i − 1), every fragment's
        unpaired electrons parallel).
    """

    source: str
    fragments: tuple[tuple[int, ...], ...]
    fragment_charges: tuple[int, ...]
    rows: tuple[InteractionRow, ...]
    pieces: tuple[PieceResult, ...] = field(default=(), repr=False)
    reuse_integrals: bool = True
    wall_seconds: float = 0.0
    citation: str = BOYS_BERNARDI_CITATION
    batch: bool = False
    fragment_multiplicities: tuple[int, ...] = ()
    multiplicity: int = 1
    multiplicity_rule: str = "given"

    @property
    def integral_seconds_saved(self) -> float:
        """Integral time the full-basis fragment runs did not spend, summed over bases (0 without reuse)."""
        if not self.reuse_integrals:
            return 0.0
        return sum(row.integral_seconds * len(self.fragments) for row in self.rows)

    def limit(self, kind: str = "counterpoise") -> BasisLimit:
        """Basis-limit record of the ``"counterpoise"`` (default) or ``"raw"`` interaction energies over the bases.

        The rule of :mod:`hfcore.studies.basis_limit` on the difference's own series (no variational cut).
        """
        return basis_limit([(r.basis, getattr(r, kind), r.spherical) for r in self.rows], bounded_above=False)

    def to_dict(self) -> dict:
        """Plain, JSON-ready form (atom numbers 0-based, energies in hartree unless a key names a unit).

        ``seconds`` repeats ``wall_seconds`` under its deprecated key (kept for one release).
        """
        return {
            "source": self.source,
            "fragments": [list(f) for f in self.fragments],
            "fragment_charges": list(self.fragment_charges),
            "fragment_multiplicities": list(self.fragment_multiplicities),
            "multiplicity": self.multiplicity,
            "multiplicity_rule": self.multiplicity_rule,
            "rows": [row.to_dict() for row in self.rows],
            "limit": self.limit().to_dict(),
            "limit_raw": self.limit("raw").to_dict(),
            "runs": [
                {
                    "basis": p.piece.basis,
                    "kind": p.piece.kind,
                    "fragment": p.piece.fragment,
                    "multiplicity": p.piece.multiplicity,
                    "method": p.method,
                    "energy_total": p.energy_total,
                    "n_functions": p.n_functions,
                    "iterations": p.iterations,
                    "wall_seconds": p.wall_seconds,
                    "seconds": p.wall_seconds,
                    "reused_integrals": p.reused_integrals,
                }
                for p in self.pieces
            ],
            "reuse_integrals": self.reuse_integrals,
            "integral_seconds_saved": self.integral_seconds_saved,
            "wall_seconds": self.wall_seconds,
            "seconds": self.wall_seconds,
            "citation": self.citation,
            "batch": self.batch,
        }


rename_fields(PieceResult, {"seconds": "wall_seconds"})
rename_fields(InteractionRow, {"seconds": "wall_seconds"})
rename_fields(InteractionStudy, {"seconds": "wall_seconds"})


def check_fragments(
    n_atoms: int, fragments: Sequence[Sequence[int]], charges: Sequence[int] | None = None
) -> tuple[tuple[tuple[int, ...], ...], tuple[int, ...]]:
    """Check that fragments split the atoms exactly once each.

    Parameters
    ----------
    n_atoms : int
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
            if not 0 <= a < n_atoms:
                raise InputError(f"fragment {k + 1}: atom {a + 1} does not exist (the complex has {n_atoms} atoms)")
            if a in seen:
                raise InputError(f"atom {a + 1} is in fragment {seen[a] + 1} and in fragment {k + 1}")
            seen[a] = k
    missing = [a + 1 for a in range(n_atoms) if a not in seen]
    if missing:
        raise InputError(f"atom {missing[0]} is in no fragment; every atom of the complex must be in one")
    q = tuple(int(c) for c in charges) if charges is not None else (0,) * len(parts)
    if len(q) != len(parts):
        raise InputError(f"{len(q)} fragment charges for {len(parts)} fragments")
    return parts, q


HIGH_SPIN = "high-spin coupling"


def complex_multiplicity(fragment_multiplicities: Sequence[int]) -> int:
    """The high-spin coupling of fragment spins: M = 1 + Σ (M_i − 1), every unpaired electron parallel."""
    return 1 + sum(int(m) - 1 for m in fragment_multiplicities)


def interaction_pieces(
    n_atoms: int, fragments: Sequence[Sequence[int]], bases: Sequence[str], charges: Sequence[int] | None = None,
    multiplicities: Sequence[int | None] | None = None, multiplicity: int | None = None, method: str | None = None,
) -> list[InteractionPiece]:
    """Every SCF run an interaction calculation needs, per basis in order.

    Per basis: the complex, then each fragment in its own basis, then each
    fragment in the full basis (these share the complex's integrals and
    may start from the fragment's own-basis density).

    Parameters
    ----------
    n_atoms : int
    fragments : sequence of sequence of int
        0-based atoms of each fragment.
    bases : sequence of str
    charges : sequence of int, optional
    multiplicities : sequence of int or None, optional
        2S+1 of each fragment (None: the default of its electron count).
    multiplicity : int, optional
        2S+1 of the complex (None: the default of its electron count).
    method : {None, "uhf", "rohf"}
        The study's open-shell method (:func:`~hfcore.studies.pieces.piece_method`
        per piece; a piece whose multiplicity is None counts as a singlet here).

    Returns
    -------
    list of InteractionPiece
    """
    from .pieces import piece_method

    parts, q = check_fragments(n_atoms, fragments, charges)
    spins = tuple(multiplicities) if multiplicities is not None else (None,) * len(parts)
    if len(spins) != len(parts):
        raise InputError(f"{len(spins)} fragment multiplicities for {len(parts)} fragments")
    pieces = []
    everything = tuple(range(n_atoms))
    for name in bases:
        pieces.append(InteractionPiece(name, "complex", None, everything, (), sum(q), multiplicity,
                                       piece_method(multiplicity or 1, method)))
        for kind in ("own basis", "full basis"):
            for k, part in enumerate(parts):
                others = tuple(a for a in everything if a not in part) if kind == "full basis" else ()
                pieces.append(InteractionPiece(name, kind, k, part, others, q[k], spins[k],
                                               piece_method(spins[k] or 1, method)))
    return pieces


__all__ = [
    "BOYS_BERNARDI_CITATION",
    "KINDS",
    "InteractionPiece",
    "PieceResult",
    "InteractionRow",
    "InteractionStudy",
    "check_fragments",
    "complex_multiplicity",
    "HIGH_SPIN",
    "interaction_pieces",
]
