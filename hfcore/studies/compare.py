"""Run one molecule in several basis sets and tabulate the energies.

The study's contract (:mod:`hfcore.studies.pieces`): :func:`comparison_pieces`
lists one run per basis; :func:`run_comparison_pieces` runs them in this
process from the smallest basis to the largest, each possibly starting from
the previous converged density projected into the new basis (or a runner
passed to :func:`compare_bases` runs them elsewhere);
:func:`assemble_comparison` makes the record. When the list holds
correlation-consistent sets with consecutive cardinal numbers, basis-limit
estimates are added (:func:`series_estimates`, on plain energies by
cardinal number; :mod:`hfcore.studies.extrapolation`).
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import scipy.linalg

from .._deprecation import module_aliases, rename_fields, rename_keywords
from ..basis import build_basis
from ..errors import ConvergenceError, InputError
from ..integrals import overlap
from ..scf.open_driver import run_scf
from ..scf.options import SCFOptions
from ..scf.spin import resolve_method
from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .basis_limit import BasisLimit, basis_limit
from .extrapolation import (
    FELLER_CITATION,
    KARTON_MARTIN_CITATION,
    correlation_consistent,
    feller_three_point,
    karton_martin_two_point,
)
from .pieces import MessageProgress, PieceOutcome, PieceRunner, check_basis_names, collect, piece_method

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..scf.result import RHFResult

#: Starting guesses of a basis comparison (the SCF's own are :data:`hfcore.scf.GUESSES`).
COMPARISON_GUESSES: tuple[str, ...] = ("auto", "projected", "sad")
# ``GUESSES``, the deprecated name of COMPARISON_GUESSES, warns when read (kept for one release).
__getattr__ = module_aliases(__name__, {"GUESSES": ("COMPARISON_GUESSES", COMPARISON_GUESSES)})


@dataclass(frozen=True)
class ComparisonRow:
    """One basis of a comparison.

    Attributes
    ----------
    basis : str
        The basis name as given.
    n_functions : int
        Number of basis functions.
    spherical : bool
        Real spherical (True) or Cartesian (False) functions.
    energy_total : float
        Hartree–Fock total energy (RHF, UHF or ROHF) in hartree.
    delta_mEh : float
        energy_total minus the reference basis' energy, in millihartree.
    delta_kcal_mol : float
        The same difference in kcal/mol.
    iterations : int
        SCF iterations.
    wall_seconds : float
        Wall-clock seconds of the SCF run (integrals included).
    converged : bool
        Whether the SCF converged.
    guess : str
        ``"sad"`` or ``"projected from <basis>"``.
    stable : bool or None
        Verdict of the internal stability analysis of the solution
        (``RHFResult.stability``); None when it was off or the SCF did not
        converge.
    method : str
        ``"RHF"``, ``"UHF"`` or ``"ROHF"`` (empty if the runner did not say).
    s_squared : float or None
        ⟨S²⟩ of an open-shell run.
    """

    basis: str
    n_functions: int
    spherical: bool
    energy_total: float
    delta_mEh: float
    delta_kcal_mol: float
    iterations: int
    wall_seconds: float
    converged: bool
    guess: str
    stable: bool | None = None
    method: str = ""
    s_squared: float | None = None


@dataclass(frozen=True)
class BasisLimitEstimate:
    """An extrapolated basis-limit Hartree–Fock energy.

    Attributes
    ----------
    method : {"two-point", "three-point"}
        The model form (see :mod:`hfcore.studies.extrapolation`).
    series : str
        The correlation-consistent series, ``"cc-pVXZ"`` or ``"aug-cc-pVXZ"``.
    bases : tuple of str
        The bases used, by increasing cardinal number.
    cardinal_numbers : tuple of int
        Their cardinal numbers X.
    energy_total : float
        Estimated basis-limit energy in hartree.
    delta_mEh : float
        Estimate minus the reference basis' energy, in millihartree.
    citation : str
        Published source of the model form.
    """

    method: str
    series: str
    bases: tuple[str, ...]
    cardinal_numbers: tuple[int, ...]
    energy_total: float
    delta_mEh: float
    citation: str


@dataclass(frozen=True)
class BasisComparison:
    """The outcome of :func:`compare_bases`.

    Attributes
    ----------
    rows : tuple of ComparisonRow
        One per basis, in the order the names were given.
    reference_basis : str
        The basis with the most functions; deltas are relative to it.
    estimates : tuple of BasisLimitEstimate
        Basis-limit estimates (possibly none).
    notes : tuple of str
        Why an estimate the names would allow was not made.
    results : tuple of RHFResult
        The RHF results, in the order of ``rows`` (not part of :meth:`to_dict`).
    limit : BasisLimit or None
        The one basis-limit record: best estimate ± uncertainty, the rule
        and the bases (:mod:`hfcore.studies.basis_limit`); a record with a
        note when the bases cannot support one.
    """

    rows: tuple[ComparisonRow, ...]
    reference_basis: str
    estimates: tuple[BasisLimitEstimate, ...] = ()
    notes: tuple[str, ...] = ()
    results: tuple = field(default=(), repr=False, compare=False)
    limit: BasisLimit | None = None

    def to_dict(self) -> dict:
        """Plain, JSON-ready form with stable key names.

        Returns
        -------
        dict
            ``{"reference_basis": str, "rows": [row, ...],
            "estimates": [estimate, ...], "limit": record, "notes": [str, ...]}``
            where each row and estimate is a dict of its attributes (tuples
            as lists) and ``limit`` the :class:`BasisLimit` record
            (``limit.energy_total``, ``limit.uncertainty`` in hartree);
            rows also carry ``wall_time`` and estimates ``family``, the
            deprecated keys of ``wall_seconds`` and ``series`` (kept for one release).
        """
        limit = self.limit if self.limit is not None else comparison_limit(self.rows)
        return {
            "reference_basis": self.reference_basis,
            "rows": [{**asdict(row), "wall_time": row.wall_seconds} for row in self.rows],
            "estimates": [_estimate_dict(e) for e in self.estimates],
            "limit": limit.to_dict(),
            "notes": list(self.notes),
        }


rename_fields(ComparisonRow, {"wall_time": "wall_seconds"})
rename_fields(BasisLimitEstimate, {"family": "series"})


def _estimate_dict(estimate: BasisLimitEstimate) -> dict:
    out = asdict(estimate)
    out["family"] = estimate.series  # deprecated key, kept for one release
    out["bases"] = list(estimate.bases)
    out["cardinal_numbers"] = list(estimate.cardinal_numbers)
    return out


def project_density(density: np.ndarray, basis_old: BasisSet, basis_new: BasisSet, *, lindep_threshold: float = 1e-7) -> np.ndarray:
    """Carry a density matrix from one basis into another.

    D_new = S_new⁻¹ S_new,old D_old S_old,new S_new⁻¹, the density of the
    old orbitals' projection onto the new space. The inverse is taken over
    overlap eigenvalues above ``lindep_threshold`` so that near-linear
    dependence cannot blow it up.

    Parameters
    ----------
    density : ndarray, shape (nbf_old, nbf_old)
        Density in the old basis.
    basis_old, basis_new : BasisSet
        On the same molecule.
    lindep_threshold : float
        Overlap eigenvalues below this are left out of the inverse.

    Returns
    -------
    ndarray, shape (nbf_new, nbf_new)
        Symmetric density in the new basis.
    """
    s_new = overlap(basis_new)
    cross = overlap(basis_new, basis_old)
    w, v = scipy.linalg.eigh(s_new)
    keep = w > lindep_threshold
    inverse = (v[:, keep] / w[keep]) @ v[:, keep].T
    half = inverse @ cross
    projected = half @ density @ half.T
    return np.ascontiguousarray(0.5 * (projected + projected.T))


@dataclass(frozen=True)
class ComparisonPiece:
    """One SCF run of a basis comparison, as plain data.

    Attributes
    ----------
    basis : str
        The basis name as given (the piece's ``key``).
    n_functions : int
        Basis functions.
    spherical : bool
    step : int
        1-based place in the run order (smallest basis first).
    projected : bool
        Start from the density of the last converged earlier run, projected
        into this basis (False: from the superposition of atomic densities).
    multiplicity : int
        The molecule's multiplicity 2S+1.
    method : {None, "uhf", "rohf"}
        The SCF method asked for (None: RHF for a singlet, UHF otherwise).
    """

    basis: str
    n_functions: int
    spherical: bool
    step: int
    projected: bool
    multiplicity: int = 1
    method: str | None = None

    @property
    def key(self) -> str:
        """The piece's key in a runner's outcomes: the basis name."""
        return self.basis


def comparison_pieces(bases: Sequence[BasisSet], names: Sequence[str], guess: str, multiplicity: int = 1,
                      method: str | None = None) -> list[ComparisonPiece]:
    """Every SCF run a basis comparison needs, in the order of ``names``.

    Parameters
    ----------
    bases : sequence of BasisSet
        Each name's basis, placed on the molecule.
    names : sequence of str
    guess : {"projected", "sad"}
        A resolved comparison guess (not ``"auto"``).
    multiplicity : int
        The molecule's 2S+1.
    method : {None, "uhf", "rohf"}
        The study's open-shell choice (:func:`~hfcore.studies.pieces.piece_method`).

    Returns
    -------
    list of ComparisonPiece
        Steps run from the smallest basis to the largest, so that each
        projected guess comes from a smaller space.
    """
    order = sorted(range(len(bases)), key=lambda k: bases[k].n_functions)
    step = {k: n for n, k in enumerate(order, start=1)}
    return [
        ComparisonPiece(names[k], bases[k].n_functions, bases[k].spherical, step[k], guess == "projected" and step[k] > 1,
                        multiplicity, piece_method(multiplicity, method))
        for k in range(len(names))
    ]


def _run_one(molecule: Molecule, basis: BasisSet, options: SCFOptions | None, guess: str | np.ndarray) -> tuple[RHFResult, bool]:
    """(result, converged); an unconverged run keeps its last result (RHF, UHF or ROHF by ``options.method``)."""
    try:
        result = run_scf(molecule, basis, options, guess=guess)
    except ConvergenceError as exc:
        if exc.result is None:
            raise
        return exc.result, False
    return result, bool(result.converged)


def run_comparison_pieces(
    molecule: Molecule,
    pieces: Sequence[ComparisonPiece],
    bases: Mapping[str, BasisSet],
    *,
    options: SCFOptions | None = None,
    message_progress: MessageProgress | None = None,
) -> tuple[dict[str, PieceOutcome], dict[str, RHFResult]]:
    """The in-process runner of a basis comparison: each piece in step order, projected guesses from earlier runs.

    Parameters
    ----------
    molecule : Molecule
    pieces : sequence of ComparisonPiece
    bases : mapping of str to BasisSet
        The basis of each piece, by key.
    options : SCFOptions, optional
    message_progress : callable, optional
        Called with a one-line message after each run.

    Returns
    -------
    (dict of str to PieceOutcome, dict of str to RHFResult)
        Outcomes and full results by piece key; an unconverged run keeps its
        last result and ``converged=False``.
    """
    outcomes: dict[str, PieceOutcome] = {}
    results: dict[str, RHFResult] = {}
    previous = None
    base = options or SCFOptions()
    ordered = sorted(pieces, key=lambda p: p.step)
    from ..scf.spherical_atom import check_before_runs

    check_before_runs(((molecule, p.method, bases[p.key].spherical, molecule.source) for p in ordered), base)
    for piece in ordered:
        start = time.perf_counter()
        basis = bases[piece.key]
        options = dataclasses.replace(base, method=piece.method)
        if piece.projected and previous is not None:
            density = project_density(previous[0].density, previous[0].basis, basis, lindep_threshold=_lindep(options))
            used = f"projected from {previous[1]}"
            result, converged = _run_one(molecule, basis, options, density)
        else:
            used = "sad"
            result, converged = _run_one(molecule, basis, options, "sad")
        outcomes[piece.key] = PieceOutcome(
            energy_total=float(result.energy_total),
            wall_seconds=time.perf_counter() - start,
            n_functions=basis.n_functions,
            iterations=int(result.iterations),
            converged=converged,
            stable=None if getattr(result, "stability", None) is None else bool(result.stability.stable),
            guess=used,
            method=str(result.method).upper(),
            s_squared=None if getattr(result, "s_squared", None) is None else float(result.s_squared),
        )
        results[piece.key] = result
        if converged:
            previous = (result, piece.basis)
        if message_progress is not None:
            message_progress(_progress_line(piece.step, len(ordered), piece, outcomes[piece.key]))
    return outcomes, results


@rename_keywords({"progress": "message_progress"})
def compare_bases(
    molecule: Molecule,
    names: Sequence[str],
    *,
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    guess: str = "auto",
    message_progress: MessageProgress | None = None,
    runner: PieceRunner | None = None,
    method: str | None = None,
) -> BasisComparison:
    """Hartree–Fock energies of one molecule in several basis sets.

    Parameters
    ----------
    molecule : Molecule
        Any multiplicity (``molecule.spin_multiplicity``): RHF for a
        singlet, UHF (or ``method``) for an open shell.
    names : sequence of str
        Basis names, each different.
    spherical : bool, optional
        Real spherical (True) or Cartesian (False) functions for every
        basis; each family's own convention by default.
    options : SCFOptions, optional
        Settings of every SCF run.
    guess : {"auto", "projected", "sad"}
        ``"projected"`` starts each basis after the first from the previous
        (next smaller) converged density projected into it
        (:func:`project_density`); ``"sad"`` starts every run from the
        superposition of atomic densities. ``"auto"`` (default) takes
        ``"sad"`` for a single atom, whose atomic guess is already close to
        the answer, and ``"projected"`` otherwise (measured: Ne cc-pVTZ
        after cc-pVDZ 3 iterations with SAD, 6 projected; water, HF,
        ammonia and methanol one iteration fewer projected than SAD).
    message_progress : callable, optional
        Called with a one-line message after each basis (in-process runs).
    runner : callable, optional
        Runs the pieces elsewhere instead of in this process: called as
        ``runner(pieces)`` after every check, it returns a
        :class:`~hfcore.studies.pieces.PieceOutcome` (or a pair energy /
        Eh, seconds) per piece key (the basis name). Such runs are
        independent, so no guess is projected and ``results`` stays empty.
    method : {None, "uhf", "rohf"}, optional
        The method of an open shell (a singlet stays RHF unless ``"uhf"``);
        default ``options.method``.

    Returns
    -------
    BasisComparison
        Rows in the order of ``names``.

    Raises
    ------
    InputError
        If the names are empty or repeated, or ``guess`` is unknown.
    BasisError
        If a name is unknown or does not cover the molecule's elements.
    """
    labels = check_basis_names(names)
    if guess not in COMPARISON_GUESSES:
        raise InputError(
            f"unknown guess {guess!r} for a basis comparison: use one of {', '.join(COMPARISON_GUESSES)}"
        )
    if method is None and options is not None:
        method = options.method
    multiplicity = molecule.spin_multiplicity
    if molecule.n_electrons <= 0:
        molecule.require_closed_shell()  # its message: nothing to compute
    resolve_method(multiplicity, piece_method(multiplicity, method))  # RHF on an open shell: before any integral
    if guess == "auto":
        guess = "sad" if molecule.n_atoms == 1 else "projected"
    bases = [build_basis(molecule, name, spherical=spherical) for name in labels]
    if runner is not None:
        pieces = comparison_pieces(bases, labels, "sad", multiplicity, method)
        return assemble_comparison(pieces, collect(pieces, runner(pieces)))
    pieces = comparison_pieces(bases, labels, guess, multiplicity, method)
    outcomes, results = run_comparison_pieces(
        molecule, pieces, dict(zip(labels, bases)), options=options, message_progress=message_progress
    )
    return assemble_comparison(pieces, outcomes, tuple(results[p.key] for p in pieces))


def _lindep(options: SCFOptions | None) -> float:
    return 1e-7 if options is None else float(options.lindep_threshold)


def _progress_line(step: int, total: int, piece: ComparisonPiece, outcome: PieceOutcome) -> str:
    state = "" if outcome.converged else " NOT CONVERGED"
    return (
        f"[{step}/{total}] {piece.basis} ({piece.n_functions} functions, guess {outcome.guess}): "
        f"E = {outcome.energy_total:.10f} Eh after {outcome.iterations} iterations in {outcome.wall_seconds:.2f} s{state}"
    )


def assemble_comparison(
    pieces: Sequence[ComparisonPiece], outcomes: Mapping[str, PieceOutcome], results: tuple = ()
) -> BasisComparison:
    """The comparison's record from its pieces and their outcomes.

    Parameters
    ----------
    pieces : sequence of ComparisonPiece
        In the order the rows should have.
    outcomes : mapping of str to PieceOutcome
        By piece key.
    results : tuple of RHFResult
        The full results in the order of ``pieces``, if the runner kept them.

    Returns
    -------
    BasisComparison
        Deltas relative to the basis with the most functions (the first of
        them on a tie).
    """
    reference = max(range(len(pieces)), key=lambda k: pieces[k].n_functions)
    e_ref = float(outcomes[pieces[reference].key].energy_total)
    rows = []
    for piece in pieces:
        outcome = outcomes[piece.key]
        delta = float(outcome.energy_total) - e_ref
        rows.append(
            ComparisonRow(
                basis=piece.basis,
                n_functions=piece.n_functions,
                spherical=piece.spherical,
                energy_total=float(outcome.energy_total),
                delta_mEh=1e3 * delta,
                delta_kcal_mol=delta * KCAL_MOL_PER_HARTREE,
                iterations=int(outcome.iterations),
                wall_seconds=float(outcome.wall_seconds),
                converged=bool(outcome.converged),
                guess=outcome.guess or "sad",
                stable=outcome.stable,
                method=outcome.method,
                s_squared=outcome.s_squared,
            )
        )
    estimates, notes = basis_limit_estimates(rows, e_ref)
    return BasisComparison(
        rows=tuple(rows),
        reference_basis=pieces[reference].basis,
        estimates=tuple(estimates),
        notes=tuple(notes),
        results=tuple(results),
        limit=comparison_limit(rows),
    )


def comparison_limit(rows: Sequence[ComparisonRow]) -> BasisLimit:
    """The basis-limit record of a comparison's converged rows (total energies, variationally bounded)."""
    return basis_limit([(r.basis, r.energy_total if r.converged else math.nan, r.spherical) for r in rows])


def _consecutive_tail(cardinals: list[int], length: int) -> list[int] | None:
    """The highest run of ``length`` consecutive numbers in a sorted list, if any."""
    present = set(cardinals)
    for top in sorted(present, reverse=True):
        window = list(range(top - length + 1, top + 1))
        if all(x in present for x in window):
            return window
    return None


@dataclass(frozen=True)
class SeriesEstimate:
    """A basis-limit estimate from one correlation-consistent series, on plain data.

    Attributes
    ----------
    method : {"two-point", "three-point"}
    cardinal_numbers : tuple of int
        The cardinal numbers X used, increasing.
    energy_total : float
        Estimated basis-limit energy (hartree).
    citation : str
        Published source of the model form.
    """

    method: str
    cardinal_numbers: tuple[int, ...]
    energy_total: float
    citation: str


def series_estimates(energies: Mapping[int, float], series: str = "") -> tuple[list[SeriesEstimate], list[str]]:
    """Two- and three-point basis-limit estimates from the energies of one series, by cardinal number.

    The two-point form uses the two highest consecutive cardinal numbers,
    the three-point form the three highest consecutive ones.

    Parameters
    ----------
    energies : mapping of int to float
        Total energy (hartree) by cardinal number X of one series (e.g. cc-pVXZ).
    series : str
        The series' name, for the notes.

    Returns
    -------
    (list of SeriesEstimate, list of str)
        The estimates and a note for each estimate that could not be made.
    """
    cardinals = sorted(energies)
    estimates: list[SeriesEstimate] = []
    notes: list[str] = []
    pair = _consecutive_tail(cardinals, 2)
    if pair is not None:
        energy = karton_martin_two_point(energies[pair[0]], energies[pair[1]], pair[0], pair[1])
        estimates.append(SeriesEstimate("two-point", tuple(pair), float(energy), KARTON_MARTIN_CITATION))
    triple = _consecutive_tail(cardinals, 3)
    if triple is not None:
        try:
            energy = feller_three_point(*(energies[x] for x in triple), *triple)
        except InputError as exc:
            notes.append(f"three-point {series} estimate skipped: {exc}")
        else:
            estimates.append(SeriesEstimate("three-point", tuple(triple), float(energy), FELLER_CITATION))
    return estimates, notes


def correlation_consistent_series(
    energies: Sequence[tuple[str, bool, float]],
) -> dict[tuple[str, bool], dict[int, tuple[str, float]]]:
    """Group (basis name, spherical, energy) triples by series and spherical choice.

    Returns
    -------
    dict
        ``(series, spherical) -> {cardinal number: (basis name, energy)}``
        over the correlation-consistent names (cc-pVXZ, aug-cc-pVXZ); other
        names are left out.
    """
    groups: dict[tuple[str, bool], dict[int, tuple[str, float]]] = {}
    for name, spherical, energy in energies:
        found = correlation_consistent(name)
        if found is not None:
            groups.setdefault((found[0], spherical), {})[found[1]] = (name, float(energy))
    return groups


def basis_limit_estimates(rows: Sequence[ComparisonRow], e_ref: float) -> tuple[list[BasisLimitEstimate], list[str]]:
    """Two- and three-point estimates from correlation-consistent rows.

    Per series (cc-pVXZ, aug-cc-pVXZ) and per spherical/Cartesian choice,
    :func:`series_estimates` on the rows' energies. Rows that did not
    converge are left out.

    Parameters
    ----------
    rows : sequence of ComparisonRow
    e_ref : float
        Reference energy (hartree) for the estimates' ``delta_mEh``.

    Returns
    -------
    (list of BasisLimitEstimate, list of str)
        The estimates and a note for each estimate that could not be made.
    """
    groups = correlation_consistent_series([(r.basis, r.spherical, r.energy_total) for r in rows if r.converged])
    estimates: list[BasisLimitEstimate] = []
    notes: list[str] = []
    for (series, _), members in groups.items():
        found, why = series_estimates({x: e for x, (_, e) in members.items()}, series)
        notes += why
        for est in found:
            names = tuple(members[x][0] for x in est.cardinal_numbers)
            estimates.append(_estimate(est.method, series, names, est.cardinal_numbers, est.energy_total, e_ref,
                                       est.citation))
    return estimates, notes


def _estimate(method, series, names, cardinals, energy, e_ref, citation) -> BasisLimitEstimate:
    return BasisLimitEstimate(
        method=method,
        series=series,
        bases=tuple(names),
        cardinal_numbers=tuple(int(x) for x in cardinals),
        energy_total=float(energy),
        delta_mEh=1e3 * (float(energy) - e_ref),
        citation=citation,
    )


__all__ = [
    "COMPARISON_GUESSES",
    "ComparisonPiece",
    "comparison_pieces",
    "run_comparison_pieces",
    "assemble_comparison",
    "SeriesEstimate",
    "series_estimates",
    "correlation_consistent_series",
    "KCAL_MOL_PER_HARTREE",
    "KJ_MOL_PER_HARTREE",
    "ComparisonRow",
    "BasisLimitEstimate",
    "BasisComparison",
    "compare_bases",
    "project_density",
    "basis_limit_estimates",
]
