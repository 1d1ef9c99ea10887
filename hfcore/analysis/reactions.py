"""Reaction energies from RHF totals, across basis sets.

The equations and their syntax are in :mod:`hfcore.analysis.equations`.
The reaction energy is ΔE = Σ ν E(products) − Σ ν E(reactants) with the
RHF total energies at the given geometries (no zero-point or thermal
terms). Each distinct species is computed once per basis. Basis-limit
estimates of ΔE come from the species' extrapolated totals, with the two
formulas of :func:`hfcore.analysis.compare.basis_limit_estimates`; the
basis-limit record of each ΔE (:meth:`ReactionStudy.limits`) applies the
rule of :mod:`hfcore.analysis.basis_limit` to the ΔE series itself, where
the species' errors partly cancel.

The SCF runs are listed as plain data first (:func:`reaction_pieces`,
species × basis), so that they could be handed to another runner;
:func:`reaction_energies` runs them in this process.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from ..errors import ConvergenceError
from .basis_limit import BasisLimit, basis_limit
from .compare import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE, ComparisonRow, _check_names, basis_limit_estimates
from .equations import Reaction, Species, load_reactions, parse_reaction  # noqa: F401  (part of this module's API)

if TYPE_CHECKING:
    from ..scf.options import SCFOptions

@dataclass(frozen=True)
class ReactionPiece:
    """One SCF run of a reaction study: a species in a basis.

    Attributes
    ----------
    species : int
        Index into the study's species.
    basis : str
    """

    species: int
    basis: str


def reaction_pieces(species: Sequence[Species], bases: Sequence[str]) -> list[ReactionPiece]:
    """Every SCF run a reaction study needs: each distinct species in each basis, basis by basis.

    Parameters
    ----------
    species : sequence of Species
    bases : sequence of str

    Returns
    -------
    list of ReactionPiece
    """
    return [ReactionPiece(k, name) for name in bases for k in range(len(species))]


@dataclass(frozen=True)
class ReactionRow:
    """All reactions in one basis (energies in hartree).

    Attributes
    ----------
    basis : str
    n_functions : int
        Basis functions summed over the distinct species.
    spherical : bool
    species_energies : tuple of float
        RHF total energy of each species.
    reaction_energies : tuple of float
        ΔE of each reaction.
    deltas : tuple of float
        ΔE minus ΔE in the reference basis, per reaction.
    seconds : float
        Wall-clock time of this basis' runs.
    species_functions : tuple of int
        Basis functions of each species.
    """

    basis: str
    n_functions: int
    spherical: bool
    species_energies: tuple[float, ...]
    reaction_energies: tuple[float, ...]
    deltas: tuple[float, ...]
    seconds: float
    species_functions: tuple[int, ...] = ()

    def reaction_functions(self, reaction: Reaction) -> int:
        """Basis functions summed over the distinct species of one reaction."""
        return sum(self.species_functions[k] for k in {k for k, _ in reaction.terms})


@dataclass(frozen=True)
class ReactionEstimate:
    """A basis-limit estimate of the reaction energies from extrapolated totals.

    Attributes
    ----------
    method : {"two-point", "three-point"}
    family : str
    bases : tuple of str
    species_energies : tuple of float
        Extrapolated total of each species (hartree).
    reaction_energies : tuple of float
        ΔE of each reaction from those totals (hartree).
    citation : str
    """

    method: str
    family: str
    bases: tuple[str, ...]
    species_energies: tuple[float, ...]
    reaction_energies: tuple[float, ...]
    citation: str


@dataclass(frozen=True)
class ReactionStudy:
    """The outcome of :func:`reaction_energies`.

    Attributes
    ----------
    species : tuple of Species
    reactions : tuple of Reaction
    rows : tuple of ReactionRow
        One per basis, in the order given.
    reference_basis : str
        The basis with the most functions; ``deltas`` are relative to it.
    estimates : tuple of ReactionEstimate
    notes : tuple of str
        Why an estimate was not made.
    seconds : float
        Wall-clock time of all runs.
    """

    species: tuple[Species, ...]
    reactions: tuple[Reaction, ...]
    rows: tuple[ReactionRow, ...]
    reference_basis: str
    estimates: tuple[ReactionEstimate, ...] = ()
    notes: tuple[str, ...] = ()
    seconds: float = 0.0

    def spread(self) -> tuple[float, ...] | None:
        """Per reaction, the spread (hartree) between the two- and three-point estimates of one family, if both exist.

        Not an uncertainty: see :meth:`limits`.
        """
        by_family: dict[str, dict[str, ReactionEstimate]] = {}
        for est in self.estimates:
            by_family.setdefault(est.family, {})[est.method] = est
        for members in by_family.values():
            if "two-point" in members and "three-point" in members:
                a, b = members["two-point"].reaction_energies, members["three-point"].reaction_energies
                return tuple(abs(x - y) for x, y in zip(a, b))
        return None

    def limits(self) -> tuple[BasisLimit, ...]:
        """Per reaction, the basis-limit record of ΔE: estimate ± uncertainty (hartree), rule and bases.

        The rule runs on the ΔE series itself (no variational cut, a
        difference has no bound); a record with a note where the bases
        cannot support an estimate.
        """
        return tuple(
            basis_limit([(row.basis, row.reaction_energies[r], row.spherical) for row in self.rows], bounded_above=False)
            for r in range(len(self.reactions))
        )

    def to_dict(self) -> dict:
        """Plain, JSON-ready form; energies in hartree unless a key names kJ/mol or kcal/mol."""

        def units(values: Sequence[float], key: str) -> dict:
            return {
                key: list(values),
                f"{key}_kJ_mol": [v * KJ_MOL_PER_HARTREE for v in values],
                f"{key}_kcal_mol": [v * KCAL_MOL_PER_HARTREE for v in values],
            }

        spread, limits = self.spread(), self.limits()
        return {
            "species": [
                {"path": s.path, "charge": s.charge, "formula": s.formula, "source": s.molecule.source}
                for s in self.species
            ],
            "reactions": [
                {"equation": r.text, "terms": [{"species": k, "factor": float(nu)} for k, nu in r.terms],
                 "limit": limit.to_dict()}
                for r, limit in zip(self.reactions, limits)
            ],
            "reference_basis": self.reference_basis,
            "rows": [
                {
                    "basis": row.basis,
                    "n_functions": row.n_functions,
                    "spherical": row.spherical,
                    "species_energies": list(row.species_energies),
                    "species_functions": list(row.species_functions),
                    **units(row.reaction_energies, "reaction_energies"),
                    **units(row.deltas, "deltas"),
                    "seconds": row.seconds,
                }
                for row in self.rows
            ],
            "estimates": [
                {
                    "method": e.method,
                    "family": e.family,
                    "bases": list(e.bases),
                    "species_energies": list(e.species_energies),
                    **units(e.reaction_energies, "reaction_energies"),
                    "citation": e.citation,
                }
                for e in self.estimates
            ],
            "spread": None if spread is None else units(spread, "reaction_energies"),
            "notes": list(self.notes),
            "seconds": self.seconds,
        }


#: Runs reaction pieces elsewhere: (pieces, species) -> {(species index, basis): (energy / Eh, seconds)}.
PieceRunner = Callable[[Sequence["ReactionPiece"], Sequence[Species]], Mapping[tuple[int, str], tuple[float, float]]]


def reaction_energies(
    reactions: Sequence[str] | str,
    bases: Sequence[str],
    *,
    units: str = "angstrom",
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    progress: Callable[[str], None] | None = None,
    runner: PieceRunner | None = None,
) -> ReactionStudy:
    """RHF reaction energies of one or more equations in several basis sets.

    Parameters
    ----------
    reactions : str or sequence of str
        Equations over geometry files (see the module notes).
    bases : sequence of str
        Basis names, each different.
    units : {"angstrom", "bohr"}
        Units of the geometry files.
    spherical : bool, optional
        Real spherical or Cartesian functions; each family's own by default.
    options : SCFOptions, optional
        Settings of every SCF run.
    progress : callable, optional
        Called with a one-line message after each SCF run (in-process runs).
    runner : callable, optional
        Runs the pieces elsewhere instead of in this process: called as
        ``runner(pieces, species)`` after every check, it returns the total
        energy (hartree) and wall time (seconds) of each piece, keyed by
        ``(species index, basis)`` (e.g. through the batch machinery).

    Returns
    -------
    ReactionStudy

    Raises
    ------
    InputError
        Malformed or unbalanced equations, bad geometry files, open shells,
        repeated bases: all before any SCF runs.
    BasisError
        A basis that is unknown or misses an element (checked up front).
    ConvergenceError
        If a run does not converge.
    """
    from ..basis import build_basis
    from ..scf import run_rhf

    names = _check_names(bases)
    species, parsed = load_reactions([reactions] if isinstance(reactions, str) else list(reactions), units=units)
    basis_of = {
        (k, name): build_basis(s.molecule, name, spherical=spherical) for name in names for k, s in enumerate(species)
    }
    pieces = reaction_pieces(species, names)
    started = time.perf_counter()
    energies: dict[tuple[int, str], float] = {}
    seconds: dict[str, float] = dict.fromkeys(names, 0.0)
    if runner is not None:
        for (k, name), (energy, wall) in runner(pieces, species).items():
            energies[(k, name)] = float(energy)
            seconds[name] += float(wall)
        pieces = []
    for step, piece in enumerate(pieces, start=1):
        t0 = time.perf_counter()
        basis = basis_of[(piece.species, piece.basis)]
        try:
            result = run_rhf(species[piece.species].molecule, basis, options)
        except ConvergenceError as exc:
            raise ConvergenceError(f"{species[piece.species].label} in {piece.basis}: {exc}", exc.result) from None
        energies[(piece.species, piece.basis)] = float(result.energy_total)
        seconds[piece.basis] += time.perf_counter() - t0
        if progress is not None:
            progress(
                f"[{step}/{len(pieces)}] {piece.basis}, {species[piece.species].label} ({basis.n_functions} functions): "
                f"E = {result.energy_total:.10f} Eh after {result.iterations} iterations in {time.perf_counter() - t0:.2f} s"
            )
    size = {name: sum(basis_of[(k, name)].n_functions for k in range(len(species))) for name in names}
    reference = max(names, key=lambda name: size[name])
    per_basis = {name: tuple(energies[(k, name)] for k in range(len(species))) for name in names}
    ref_de = tuple(r.energy(per_basis[reference]) for r in parsed)
    rows = []
    for name in names:
        de = tuple(r.energy(per_basis[name]) for r in parsed)
        rows.append(
            ReactionRow(name, size[name], basis_of[(0, name)].spherical, per_basis[name], de,
                        tuple(a - b for a, b in zip(de, ref_de)), seconds[name],
                        tuple(basis_of[(k, name)].n_functions for k in range(len(species))))
        )
    estimates, notes = _estimates(species, parsed, names, basis_of, energies)
    return ReactionStudy(species, parsed, tuple(rows), reference, tuple(estimates), tuple(notes),
                         time.perf_counter() - started)


def _estimates(species, reactions, names, basis_of, energies) -> tuple[list[ReactionEstimate], list[str]]:
    """Extrapolate every species with the basis comparison's formulas and combine the totals."""
    found: dict[tuple, list] = {}
    notes: list[str] = []
    for k in range(len(species)):
        rows = [
            ComparisonRow(name, basis_of[(k, name)].n_functions, basis_of[(k, name)].spherical, energies[(k, name)],
                          0.0, 0.0, 0, 0.0, True, "sad")
            for name in names
        ]
        estimates, why = basis_limit_estimates(rows, 0.0)
        notes += [f"{species[k].label}: {n}" for n in why]
        for est in estimates:
            found.setdefault((est.method, est.family, est.bases, est.citation), [None] * len(species))[k] = est.energy_total
    out = []
    for (method, family, bases, citation), totals in found.items():
        if any(t is None for t in totals):
            notes.append(f"{method} {family} estimate of the reaction energies skipped: not every species has one")
            continue
        out.append(ReactionEstimate(method, family, bases, tuple(totals), tuple(r.energy(totals) for r in reactions),
                                    citation))
    return out, notes


__all__ = [
    "Species",
    "Reaction",
    "ReactionPiece",
    "ReactionRow",
    "ReactionEstimate",
    "ReactionStudy",
    "parse_reaction",
    "load_reactions",
    "reaction_pieces",
    "reaction_energies",
    "PieceRunner",
]
