"""Reaction energies from Hartree–Fock totals, across basis sets.

The equations and their syntax are in :mod:`hfcore.studies.equations`.
The reaction energy is ΔE = Σ ν E(products) − Σ ν E(reactants) with the
Hartree–Fock total energies at the given geometries: RHF for closed-shell
singlets, UHF (or ROHF, with ``method="rohf"``) for open shells
(:func:`hfcore.studies.pieces.piece_method`) (no zero-point or thermal
terms). Each distinct species is computed once per basis. Basis-limit
estimates of ΔE come from the species' extrapolated totals, with the two
formulas of :func:`hfcore.studies.compare.series_estimates`; the
basis-limit record of each ΔE (:meth:`ReactionStudy.limits`) applies the
rule of :mod:`hfcore.studies.basis_limit` to the ΔE series itself, where
the species' errors partly cancel.

The study's contract (:mod:`hfcore.studies.pieces`): :func:`reaction_pieces`
lists the SCF runs as plain data (species × basis); :func:`run_reaction_pieces`
runs them in this process, or a runner passed to :func:`reaction_energies`
runs them elsewhere; :func:`assemble_reactions` makes the record.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from .._deprecation import rename_fields, rename_keywords
from ..basis import build_basis
from ..errors import ConvergenceError, InputError
from ..scf.open_driver import run_scf
from ..scf.options import SCFOptions
from ..scf.spin import resolve_method
from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .compare import correlation_consistent_series, series_estimates
from .basis_limit import BasisLimit, basis_limit
from .equations import Reaction, Species, load_reactions, parse_reaction  # noqa: F401  (part of this module's API)
from .pieces import MessageProgress, PieceOutcome, check_basis_names, collect, outcome_of_result, piece_method

if TYPE_CHECKING:
    from ..basis.shells import BasisSet


@dataclass(frozen=True)
class ReactionPiece:
    """One SCF run of a reaction study: a species in a basis.

    Attributes
    ----------
    species: int
        Index into the study's species.
    basis : str
    multiplicity : int
        The species' multiplicity 2S+1.
    method : {None, "uhf", "rohf"}
        The SCF method asked for (None: RHF for a singlet, UHF otherwise).
    """

    species: int
    basis: str
    multiplicity: int = 1
    method: str | None = None

    @property
    def key(self) -> tuple[int, str]:
        """The piece's key in a runner's outcomes: (species index, basis)."""
        return (self.species, self.basis)


def reaction_pieces(species: Sequence[Species], bases: Sequence[str], method: str | None = None) -> list[ReactionPiece]:
    """Every SCF run a reaction study needs: each distinct species in each basis, basis by basis.

    Parameters
    ----------
    species : sequence of Species
    bases : sequence of str
    method : {None, "uhf", "rohf"}
        The open-shell method of the study (applied by :func:`~hfcore.studies.pieces.piece_method`).

    Returns
    -------
    list of ReactionPiece
    """
    return [
        ReactionPiece(k, name, s.multiplicity, piece_method(s.multiplicity, method))
        for name in bases for k, s in enumerate(species)
    ]


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
        Hartree–Fock total energy of each species.
    reaction_energies : tuple of float
        ΔE of each reaction.
    deltas : tuple of float
        ΔE minus ΔE in the reference basis, per reaction.
    wall_seconds : float
        Wall-clock time of this basis' runs (summed over its pieces).
    species_functions : tuple of int
        Basis functions of each species.
    species_methods : tuple of str
        ``"RHF"``, ``"UHF"`` or ``"ROHF"`` of each species' run (empty if the runner did not say).
    """

    basis: str
    n_functions: int
    spherical: bool
    species_energies: tuple[float, ...]
    reaction_energies: tuple[float, ...]
    deltas: tuple[float, ...]
    wall_seconds: float
    species_functions: tuple[int, ...] = ()
    species_methods: tuple[str, ...] = ()

    def reaction_functions(self, reaction: Reaction) -> int:
        """Basis functions summed over the distinct species of one reaction."""
        return sum(self.species_functions[k] for k in {k for k, _ in reaction.terms})


@dataclass(frozen=True)
class ReactionEstimate:
    """A basis-limit estimate of the reaction energies from extrapolated totals.

    Attributes
    ----------
    method : {"two-point", "three-point"}
    series : str
        The correlation-consistent series, ``"cc-pVXZ"`` or ``"aug-cc-pVXZ"``.
    bases : tuple of str
    species_energies : tuple of float
        Extrapolated total of each species (hartree).
    reaction_energies : tuple of float
        ΔE of each reaction from those totals (hartree).
    citation : str
    """

    method: str
    series: str
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
    wall_seconds : float
        Wall-clock time of all runs.
    """

    species: tuple[Species, ...]
    reactions: tuple[Reaction, ...]
    rows: tuple[ReactionRow, ...]
    reference_basis: str
    estimates: tuple[ReactionEstimate, ...] = ()
    notes: tuple[str, ...] = ()
    wall_seconds: float = 0.0

    def spread(self) -> tuple[float, ...] | None:
        """Per reaction, the spread (hartree) between the two- and three-point estimates of one series, if both exist.

        Not an uncertainty: see :meth:`limits`.
        """
        by_series: dict[str, dict[str, ReactionEstimate]] = {}
        for est in self.estimates:
            by_series.setdefault(est.series, {})[est.method] = est
        for members in by_series.values():
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
        """Plain, JSON-ready form; energies in hartree unless a key names kJ/mol or kcal/mol.

        ``seconds`` and ``family`` repeat ``wall_seconds`` and ``series``
        under their deprecated keys (kept for one release).
        """

        def units(values: Sequence[float], key: str) -> dict:
            return {
                key: list(values),
                f"{key}_kJ_mol": [v * KJ_MOL_PER_HARTREE for v in values],
                f"{key}_kcal_mol": [v * KCAL_MOL_PER_HARTREE for v in values],
            }

        spread, limits = self.spread(), self.limits()
        return {
            "species": [
                {"path": s.path, "charge": s.charge, "multiplicity": s.multiplicity, "formula": s.formula,
                 "source": s.molecule.source,
                 "method": self.rows[0].species_methods[k] if self.rows and self.rows[0].species_methods else None}
                for k, s in enumerate(self.species)
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
                    "species_methods": list(row.species_methods),
                    **units(row.reaction_energies, "reaction_energies"),
                    **units(row.deltas, "deltas"),
                    "wall_seconds": row.wall_seconds,
                    "seconds": row.wall_seconds,
                }
                for row in self.rows
            ],
            "estimates": [
                {
                    "method": e.method,
                    "series": e.series,
                    "family": e.series,
                    "bases": list(e.bases),
                    "species_energies": list(e.species_energies),
                    **units(e.reaction_energies, "reaction_energies"),
                    "citation": e.citation,
                }
                for e in self.estimates
            ],
            "spread": None if spread is None else units(spread, "reaction_energies"),
            "notes": list(self.notes),
            "wall_seconds": self.wall_seconds,
            "seconds": self.wall_seconds,
        }


rename_fields(ReactionRow, {"seconds": "wall_seconds"})
rename_fields(ReactionEstimate, {"family": "series"})
rename_fields(ReactionStudy, {"seconds": "wall_seconds"})

#: Runs reaction pieces elsewhere: (pieces, species) -> outcome by piece key (species index, basis),
#: a :class:`~hfcore.studies.pieces.PieceOutcome` or a pair (energy / Eh, seconds).
PieceRunner = Callable[[Sequence["ReactionPiece"], Sequence[Species]], Mapping[tuple[int, str], object]]


def run_reaction_pieces(
    pieces: Sequence[ReactionPiece],
    species: Sequence[Species],
    bases: Mapping[tuple[int, str], BasisSet],
    *,
    options: SCFOptions | None = None,
    message_progress: MessageProgress | None = None,
) -> dict[tuple[int, str], PieceOutcome]:
    """The in-process runner of a reaction study: each piece in turn.

    Parameters
    ----------
    pieces : sequence of ReactionPiece
    species : sequence of Species
    bases : mapping
        The basis of each piece, by piece key.
    options : SCFOptions, optional
    message_progress : callable, optional
        Called with a one-line message after each run.

    Returns
    -------
    dict of (int, str) to PieceOutcome

    Raises
    ------
    ConvergenceError
        If a run does not converge (naming the species and basis).
    """
    from ..scf.spherical_atom import check_before_runs

    base = options or SCFOptions()
    check_before_runs(((species[p.species].molecule, p.method, bases[p.key].spherical, species[p.species].label)
                       for p in pieces), base)
    out: dict[tuple[int, str], PieceOutcome] = {}
    for step, piece in enumerate(pieces, start=1):
        t0 = time.perf_counter()
        basis = bases[piece.key]
        run_options = dataclasses.replace(base, method=piece.method)
        try:
            result = run_scf(species[piece.species].molecule, basis, run_options)
        except ConvergenceError as exc:
            raise ConvergenceError(f"{species[piece.species].label} in {piece.basis}: {exc}", exc.result) from None
        out[piece.key] = outcome_of_result(result, time.perf_counter() - t0, basis.n_functions)
        if message_progress is not None:
            message_progress(
                f"[{step}/{len(pieces)}] {piece.basis}, {species[piece.species].label} ({basis.n_functions} functions, "
                f"{result.method}): E = {result.energy_total:.10f} Eh after {result.iterations} iterations in "
                f"{time.perf_counter() - t0:.2f} s"
            )
    return out


def check_piece_methods(pieces: Sequence[ReactionPiece], species: Sequence[Species]) -> None:
    """Each piece's method against its species' spin (before any integral).

    Raises
    ------
    InputError
        RHF asked for an open-shell species.
    """
    for piece in pieces:
        try:
            resolve_method(piece.multiplicity, piece.method)
        except InputError as exc:
            raise InputError(f"{species[piece.species].label}: {exc}") from None


@rename_keywords({"progress": "message_progress"})
def reaction_energies(
    reactions: Sequence[str] | str,
    bases: Sequence[str],
    *,
    units: str = "angstrom",
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    message_progress: MessageProgress | None = None,
    runner: PieceRunner | None = None,
    method: str | None = None,
) -> ReactionStudy:
    """Hartree–Fock reaction energies of one or more equations in several basis sets.

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
    message_progress : callable, optional
        Called with a one-line message after each SCF run (in-process runs).
    runner : callable, optional
        Runs the pieces elsewhere instead of in this process: called as
        ``runner(pieces, species)`` after every check, it returns the
        outcome of each piece keyed by ``(species index, basis)``: a
        :class:`~hfcore.studies.pieces.PieceOutcome` or a pair (total energy
        / hartree, wall time / seconds), e.g. through the batch machinery.
    method : {None, "uhf", "rohf"}, optional
        The method of every open-shell species (a closed-shell singlet stays
        RHF unless ``"uhf"``); default ``options.method``, else UHF for open
        shells.

    Returns
    -------
    ReactionStudy

    Raises
    ------
    InputError
        Malformed or unbalanced equations, unknown spin words, spins that do
        not fit the electrons, bad geometry files, repeated bases: all
        before any SCF runs.
    BasisError
        A basis that is unknown or misses an element (checked up front).
    ConvergenceError
        If a run does not converge.
    """
    names = check_basis_names(bases)
    species, parsed = load_reactions([reactions] if isinstance(reactions, str) else list(reactions), units=units)
    basis_of = {
        (k, name): build_basis(s.molecule, name, spherical=spherical) for name in names for k, s in enumerate(species)
    }
    if method is None and options is not None:
        method = options.method
    pieces = reaction_pieces(species, names, method)
    check_piece_methods(pieces, species)
    started = time.perf_counter()
    if runner is not None:
        outcomes = collect(pieces, runner(pieces, species))
    else:
        outcomes = run_reaction_pieces(pieces, species, basis_of, options=options, message_progress=message_progress)
    return assemble_reactions(species, parsed, names, basis_of, outcomes, time.perf_counter() - started)


def assemble_reactions(
    species: Sequence[Species],
    reactions: Sequence[Reaction],
    names: Sequence[str],
    bases: Mapping[tuple[int, str], BasisSet],
    outcomes: Mapping[tuple[int, str], PieceOutcome],
    wall_seconds: float = 0.0,
) -> ReactionStudy:
    """The reaction study's record from the outcomes of its pieces.

    Parameters
    ----------
    species : sequence of Species
    reactions : sequence of Reaction
    names : sequence of str
        The basis names, in the order of the rows.
    bases : mapping
        The basis of each piece, by key (for function counts).
    outcomes : mapping
        The outcome of each piece, by key (species index, basis).
    wall_seconds : float
        Wall-clock time of all runs.

    Returns
    -------
    ReactionStudy
        Deltas relative to the basis with the most functions summed over the species.
    """
    n = len(species)
    size = {name: sum(bases[(k, name)].n_functions for k in range(n)) for name in names}
    reference = max(names, key=lambda name: size[name])
    per_basis = {name: tuple(outcomes[(k, name)].energy_total for k in range(n)) for name in names}
    ref_de = tuple(r.energy(per_basis[reference]) for r in reactions)
    rows = []
    for name in names:
        de = tuple(r.energy(per_basis[name]) for r in reactions)
        seconds = 0.0
        for k in range(n):
            seconds += outcomes[(k, name)].wall_seconds
        rows.append(
            ReactionRow(name, size[name], bases[(0, name)].spherical, per_basis[name], de,
                        tuple(a - b for a, b in zip(de, ref_de)), seconds,
                        tuple(bases[(k, name)].n_functions for k in range(n)),
                        tuple(outcomes[(k, name)].method for k in range(n)) if all(
                            outcomes[(k, name)].method for k in range(n)) else ())
        )
    estimates, notes = _estimates(species, reactions, names, bases, outcomes)
    return ReactionStudy(tuple(species), tuple(reactions), tuple(rows), reference, tuple(estimates), tuple(notes),
                         wall_seconds)


def _estimates(species, reactions, names, bases, outcomes) -> tuple[list[ReactionEstimate], list[str]]:
    """Extrapolate every species' totals by series (:func:`series_estimates`) and combine them."""
    found: dict[tuple, list] = {}
    notes: list[str] = []
    for k in range(len(species)):
        series = correlation_consistent_series(
            [(name, bases[(k, name)].spherical, outcomes[(k, name)].energy_total) for name in names]
        )
        for (name, _), members in series.items():
            estimates, why = series_estimates({x: e for x, (_, e) in members.items()}, name)
            notes += [f"{species[k].label}: {n}" for n in why]
            for est in estimates:
                used = tuple(members[x][0] for x in est.cardinal_numbers)
                found.setdefault((est.method, name, used, est.citation), [None] * len(species))[k] = est.energy_total
    out = []
    for (method, series_name, used, citation), totals in found.items():
        if any(t is None for t in totals):
            notes.append(f"{method} {series_name} estimate of the reaction energies skipped: not every species has one")
            continue
        out.append(ReactionEstimate(method, series_name, used, tuple(totals), tuple(r.energy(totals) for r in reactions),
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
    "run_reaction_pieces",
    "assemble_reactions",
    "reaction_energies",
    "PieceRunner",
]
