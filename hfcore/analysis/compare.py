"""Run one molecule in several basis sets and tabulate the energies.

:func:`compare_bases` is the one place in :mod:`hfcore.analysis` that runs
the SCF: it is a driver over several RHF runs. Bases run from the smallest
to the largest, and each run may start from the previous converged density
projected into the new basis. When the list holds correlation-consistent
sets with consecutive cardinal numbers, basis-limit estimates are added
(:mod:`hfcore.analysis.extrapolation`).
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import scipy.linalg

from .._deprecation import module_aliases
from ..errors import ConvergenceError, InputError
from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .basis_limit import BasisLimit, basis_limit
from .extrapolation import (
    FELLER_CITATION,
    KARTON_MARTIN_CITATION,
    correlation_consistent,
    feller_three_point,
    karton_martin_two_point,
)

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..scf.options import SCFOptions
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
        RHF total energy in hartree.
    delta_mEh : float
        energy_total minus the reference basis' energy, in millihartree.
    delta_kcal_mol : float
        The same difference in kcal/mol.
    iterations : int
        SCF iterations.
    wall_time : float
        Seconds for building the basis and running the SCF.
    converged : bool
        Whether the SCF converged.
    guess : str
        ``"sad"`` or ``"projected from <basis>"``.
    stable : bool or None
        Verdict of the internal stability analysis of the solution
        (``RHFResult.stability``); None when it was off or the SCF did not
        converge.
    """

    basis: str
    n_functions: int
    spherical: bool
    energy_total: float
    delta_mEh: float
    delta_kcal_mol: float
    iterations: int
    wall_time: float
    converged: bool
    guess: str
    stable: bool | None = None


@dataclass(frozen=True)
class BasisLimitEstimate:
    """An extrapolated basis-limit RHF energy.

    Attributes
    ----------
    method : {"two-point", "three-point"}
        The model form (see :mod:`hfcore.analysis.extrapolation`).
    family : str
        ``"cc-pVXZ"`` or ``"aug-cc-pVXZ"``.
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
    family: str
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
        Basis-limit estimates of each formula (possibly none).
    notes : tuple of str
        Why an estimate the names would allow was not made.
    results : tuple of RHFResult
        The RHF results, in the order of ``rows`` (not part of :meth:`to_dict`).
    limit : BasisLimit or None
        The one basis-limit record: best estimate ± uncertainty, the rule
        and the bases (:mod:`hfcore.analysis.basis_limit`); a record with a
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
            (``limit.energy_total``, ``limit.uncertainty`` in hartree).
        """
        limit = self.limit if self.limit is not None else comparison_limit(self.rows)
        return {
            "reference_basis": self.reference_basis,
            "rows": [asdict(row) for row in self.rows],
            "estimates": [_estimate_dict(e) for e in self.estimates],
            "limit": limit.to_dict(),
            "notes": list(self.notes),
        }


def _estimate_dict(estimate: BasisLimitEstimate) -> dict:
    out = asdict(estimate)
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
    from ..integrals import overlap

    s_new = overlap(basis_new)
    cross = overlap(basis_new, basis_old)
    w, v = scipy.linalg.eigh(s_new)
    keep = w > lindep_threshold
    inverse = (v[:, keep] / w[keep]) @ v[:, keep].T
    half = inverse @ cross
    projected = half @ density @ half.T
    return np.ascontiguousarray(0.5 * (projected + projected.T))


def _check_names(names: Sequence[str]) -> list[str]:
    if isinstance(names, str):
        raise InputError("compare_bases needs a list of basis names, not one string")
    out = [str(n) for n in names]
    if not out:
        raise InputError("compare_bases needs at least one basis name")
    lowered = [n.strip().lower() for n in out]
    repeated = sorted({n for n in out if lowered.count(n.strip().lower()) > 1})
    if repeated:
        raise InputError(f"basis {repeated[0]!r} is listed more than once")
    return out


def _run_one(molecule: Molecule, basis: BasisSet, options: SCFOptions | None, guess: str | np.ndarray) -> tuple[RHFResult, bool]:
    """(result, converged); an unconverged run keeps its last result."""
    from ..scf import run_rhf

    try:
        result = run_rhf(molecule, basis, options, guess=guess)
    except ConvergenceError as exc:
        if exc.result is None:
            raise
        return exc.result, False
    return result, bool(result.converged)


def compare_bases(
    molecule: Molecule,
    names: Sequence[str],
    *,
    spherical: bool | None = None,
    options: SCFOptions | None = None,
    guess: str = "auto",
    progress: Callable[[str], None] | None = None,
) -> BasisComparison:
    """RHF energies of one molecule in several basis sets.

    Parameters
    ----------
    molecule : Molecule
        A closed-shell molecule.
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
    progress : callable, optional
        Called with a one-line message after each basis.

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
    from ..basis import build_basis

    labels = _check_names(names)
    if guess not in COMPARISON_GUESSES:
        raise InputError(
            f"unknown guess {guess!r} for a basis comparison: use one of {', '.join(COMPARISON_GUESSES)}"
        )
    molecule.require_closed_shell()
    if guess == "auto":
        guess = "sad" if molecule.natom == 1 else "projected"
    bases = [build_basis(molecule, name, spherical=spherical) for name in labels]
    # Small to large, so that each projected guess comes from a smaller space.
    order = sorted(range(len(bases)), key=lambda k: bases[k].n_functions)
    runs: dict[int, tuple] = {}
    previous = None
    for step, k in enumerate(order, start=1):
        start = time.perf_counter()
        if guess == "projected" and previous is not None:
            density = project_density(previous[0].density, previous[0].basis, bases[k], lindep_threshold=_lindep(options))
            used = f"projected from {labels[previous[1]]}"
            result, converged = _run_one(molecule, bases[k], options, density)
        else:
            used = "sad"
            result, converged = _run_one(molecule, bases[k], options, "sad")
        runs[k] = (result, converged, time.perf_counter() - start, used)
        if converged:
            previous = (result, k)
        if progress is not None:
            progress(_progress_line(step, len(order), labels[k], bases[k].n_functions, runs[k]))
    return _assemble(labels, bases, runs)


def _lindep(options: SCFOptions | None) -> float:
    return 1e-7 if options is None else float(options.lindep_threshold)


def _progress_line(step: int, total: int, name: str, nbf: int, run: tuple) -> str:
    result, converged, seconds, used = run
    state = "" if converged else " NOT CONVERGED"
    return (
        f"[{step}/{total}] {name} ({nbf} functions, guess {used}): E = {result.energy_total:.10f} Eh "
        f"after {result.iterations} iterations in {seconds:.2f} s{state}"
    )


def _assemble(labels: list[str], bases: list, runs: dict[int, tuple]) -> BasisComparison:
    reference = max(range(len(bases)), key=lambda k: bases[k].n_functions)
    e_ref = float(runs[reference][0].energy_total)
    rows = []
    for k, (name, basis) in enumerate(zip(labels, bases)):
        result, converged, seconds, used = runs[k]
        delta = float(result.energy_total) - e_ref
        rows.append(
            ComparisonRow(
                basis=name,
                n_functions=basis.n_functions,
                spherical=basis.spherical,
                energy_total=float(result.energy_total),
                delta_mEh=1e3 * delta,
                delta_kcal_mol=delta * KCAL_MOL_PER_HARTREE,
                iterations=int(result.iterations),
                wall_time=float(seconds),
                converged=converged,
                guess=used,
                stable=None if result.stability is None else bool(result.stability.stable),
            )
        )
    estimates, notes = basis_limit_estimates(rows, e_ref)
    return BasisComparison(
        rows=tuple(rows),
        reference_basis=labels[reference],
        estimates=tuple(estimates),
        notes=tuple(notes),
        results=tuple(runs[k][0] for k in range(len(labels))),
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


def basis_limit_estimates(rows: Sequence[ComparisonRow], e_ref: float) -> tuple[list[BasisLimitEstimate], list[str]]:
    """Two- and three-point estimates from correlation-consistent rows.

    Per family (cc-pVXZ, aug-cc-pVXZ) and per spherical/Cartesian choice,
    the two-point form uses the two highest consecutive cardinal numbers
    and the three-point form the three highest consecutive ones. Rows that
    did not converge are left out.

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
    groups: dict[tuple[str, bool], dict[int, ComparisonRow]] = {}
    for row in rows:
        found = correlation_consistent(row.basis)
        if found is not None and row.converged:
            groups.setdefault((found[0], row.spherical), {})[found[1]] = row
    estimates: list[BasisLimitEstimate] = []
    notes: list[str] = []
    for (family, _), members in groups.items():
        cardinals = sorted(members)
        pair = _consecutive_tail(cardinals, 2)
        if pair is not None:
            used = [members[x] for x in pair]
            energy = karton_martin_two_point(used[0].energy_total, used[1].energy_total, pair[0], pair[1])
            estimates.append(_estimate("two-point", family, used, pair, energy, e_ref, KARTON_MARTIN_CITATION))
        triple = _consecutive_tail(cardinals, 3)
        if triple is not None:
            used = [members[x] for x in triple]
            try:
                energy = feller_three_point(*(r.energy_total for r in used), *triple)
            except InputError as exc:
                notes.append(f"three-point {family} estimate skipped: {exc}")
            else:
                estimates.append(_estimate("three-point", family, used, triple, energy, e_ref, FELLER_CITATION))
    return estimates, notes


def _estimate(method, family, used, cardinals, energy, e_ref, citation) -> BasisLimitEstimate:
    return BasisLimitEstimate(
        method=method,
        family=family,
        bases=tuple(r.basis for r in used),
        cardinal_numbers=tuple(int(x) for x in cardinals),
        energy_total=float(energy),
        delta_mEh=1e3 * (float(energy) - e_ref),
        citation=citation,
    )


__all__ = [
    "COMPARISON_GUESSES",
    "KCAL_MOL_PER_HARTREE",
    "KJ_MOL_PER_HARTREE",
    "ComparisonRow",
    "BasisLimitEstimate",
    "BasisComparison",
    "compare_bases",
    "project_density",
    "basis_limit_estimates",
    "comparison_limit",
]
