"""Leaving an unstable RHF solution: analyse, rotate along the lowest mode, converge again.

:func:`stabilise` is what :func:`hfcore.scf.solve_rhf` (and so
:func:`hfcore.scf.run_rhf`) runs after :func:`hfcore.scf.solver.converge_rhf`
unless ``SCFOptions.stability`` is "skip"; each later solution is converged
by that same function.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import numpy as np

from ..errors import ConvergenceError
from .jk import IncrementalJK, JKBuilder
from .result import RHFResult
from .solver import IterationProgress, converge_rhf
from .stability_screen import FittedScreen
from .stability import (
    FOLLOW_ANGLES,
    StabilityAnalysis,
    StabilityReport,
    analyse_stability,
    plain_builder,
    rotate_orbitals,
)

#: The next solution must lie at least this much lower (hartree) to count as a new one.
NEW_SOLUTION_MARGIN: float = 1e-8


def stabilise(
    result: RHFResult,
    jk: JKBuilder,
    n_electrons: int,
    energy_nuclear: float,
    *,
    progress: IterationProgress | None = None,
    screen: FittedScreen | None = None,
) -> RHFResult:
    """Analyse a converged solution and, in "descend" mode, move to a stable one.

    Each round: find the lowest eigenpairs of the orbital Hessian
    (:func:`hfcore.scf.stability.analyse_stability`); if the lowest is below
    ``-stability_threshold`` and the mode is "descend", turn the orbitals
    along its eigenvector by the angle of :data:`FOLLOW_ANGLES` with the
    lowest energy (a scan, one J/K build per angle) and converge again from
    there, at most ``stability_rounds`` times. A round that does not
    converge, or converges to no lower energy, ends the search; the last
    good solution is kept and the report says so.

    Parameters
    ----------
    result : RHFResult
        A converged result; its ``options`` decide the mode.
    jk : JKBuilder
        The builder the SCF used.
    n_electrons : int
    energy_nuclear : float
        Nuclear repulsion (hartree).
    progress : callable, optional
        Passed on to the SCF runs of later solutions.
    screen : FittedScreen, optional
        Fitted products for the search first (see
        :func:`hfcore.scf.stability.screened_eigenpairs`); the run's driver
        makes one where exact products are expensive.

    Returns
    -------
    RHFResult
        The final solution, with ``stability`` filled in, the histories of
        all solutions concatenated (``SCFIteration.solution`` tells them
        apart), ``iterations`` their total and the aids of all runs.
    """
    n_roots, tol = analysis_settings(result.options.stability, jk)

    def analyse(current: RHFResult, start: np.ndarray | None) -> StabilityAnalysis:
        return analyse_stability(
            current.coefficients, current.fock, current.n_occupied, jk,
            threshold=current.options.stability_threshold, n_roots=n_roots, tol=tol, start=start, screen=screen,
            keep_spin_flip=True,
        )

    def reconverge(current: RHFResult, analysis: StabilityAnalysis, inner, solution: int) -> RHFResult:
        density = _rotated_density(current, analysis, jk, energy_nuclear)
        if isinstance(jk, IncrementalJK):
            jk.reset()
        return converge_rhf(
            current.overlap, current.core_hamiltonian, jk, n_electrons, energy_nuclear, inner, density,
            progress=progress, solution=solution,
        )

    return follow_instabilities(result, analyse, reconverge, "RHF", screen)


def follow_instabilities(
    result: Any,
    analyse: Callable[[Any, np.ndarray | None], StabilityAnalysis],
    reconverge: Callable[[Any, StabilityAnalysis, Any, int], Any],
    method: str,
    screen: FittedScreen | None = None,
) -> Any:
    """The rounds of stability following shared by RHF and UHF (see :func:`stabilise`).

    Parameters
    ----------
    result : RHFResult or UHFResult
        A converged solution; its ``options`` decide the mode.
    analyse : callable
        ``analyse(solution, start)``: the stability analysis of a solution,
        the previous solution's modes (or None) as start vectors.
    reconverge : callable
        ``reconverge(solution, analysis, options, n)``: the SCF from the
        solution turned along the analysis's unstable mode, as solution n
        (``options`` is the run's with stability "skip"); raises
        ConvergenceError when it does not converge.
    method : str
        "RHF" or "UHF", for the messages.
    screen : FittedScreen, optional
        Named in the report when the analysis used fitted products.

    Returns
    -------
    RHFResult or UHFResult
        The final solution with ``stability`` filled in, the histories of
        all solutions concatenated, ``iterations`` their total and the aids
        of all runs.
    """
    t0 = time.perf_counter()
    options = result.options
    inner = replace(options, stability="skip")
    energies = [result.energy_total]
    lowest: list[float] = []
    history = list(result.history)
    aids = list(result.aids)
    scf_time = result.timings.get("scf", 0.0)
    later_scf = 0.0  # seconds in the SCF runs after rotations, kept apart from the analysis time
    products = fitted_products = 0
    message = ""
    rounds = 0
    start = None
    while True:
        analysis = analyse(result, start)
        products += analysis.products
        fitted_products += analysis.fitted_products
        lowest.append(analysis.lowest_eigenvalue)
        if analysis.stable:
            plural = "instability" if rounds == 1 else "instabilities"
            message = "stable" if rounds == 0 else f"stable after following {rounds} {plural}"
            break
        if options.stability == "report":
            message = f"unstable: a lower {method} solution exists (not followed in report mode)"
            break
        if rounds >= options.stability_rounds:
            message = f"still unstable after {rounds} rotations (the limit, stability_rounds)"
            break
        try:
            new = reconverge(result, analysis, inner, rounds + 1)
        except ConvergenceError as exc:
            message = (
                f"unstable; the SCF after rotation {rounds + 1} did not converge ({exc}), "
                "so the previous solution is kept"
            )
            break
        rounds += 1
        history.extend(new.history)
        aids.extend(a for a in new.aids if a not in aids)
        later_scf += new.timings.get("scf", 0.0)
        if new.energy_total > result.energy_total - NEW_SOLUTION_MARGIN:
            energies.append(new.energy_total)
            message = "unstable; following the lowest mode led back to no lower solution, so that one is kept"
            break
        result = new
        energies.append(result.energy_total)
        # The previous solution's modes start the next search: the new solution lies near it.
        start = analysis.vectors
    report = StabilityReport(
        mode=options.stability,
        stable=analysis.stable,
        lowest_eigenvalue=analysis.lowest_eigenvalue,
        eigenvalues=analysis.eigenvalues,
        vector=analysis.mode,
        threshold=options.stability_threshold,
        solutions=energies,
        lowest_eigenvalues=lowest,
        rounds=rounds,
        hessian_products=products,
        message=message,
        eigenvalues_from=analysis.eigenvalues_from,
        fitted_products=fitted_products,
        screen_fit_basis=None if screen is None else screen.fit_basis,
        spin_flip_space=getattr(analysis, "spin_flip_space", None),
    )
    timings = {**result.timings, "scf": scf_time + later_scf, "stability": time.perf_counter() - t0 - later_scf}
    run_message = result.message
    if len(energies) > 1:
        run_message = f"converged in {len(history)} iterations over {len(energies)} solutions"
    return replace(
        result, options=options, stability=report, history=history, iterations=len(history), aids=tuple(aids),
        timings=timings, message=run_message,
    )


#: Roots and residual tolerance of the analysis in "descend" mode (the default) and in
#: "report" mode. Following needs only the verdict's root and its mode; the Ritz value
#: of the lowest root is an upper bound whose error is about residual² / gap, so a
#: residual of 1e-3 leaves it good to ~1e-6 hartree and can never make a stable
#: solution look unstable. A check is the diagnostic a user asked for: it reports the
#: lowest three, each to ~1e-8, unless each J/K build is a full integral pass (direct
#: mode), where it too seeks only the lowest.
FOLLOW_ANALYSIS: tuple[int, float] = (1, 1e-3)
CHECK_ANALYSIS: tuple[int, float] = (3, 1e-4)


def analysis_settings(mode: str, jk: JKBuilder) -> tuple[int, float]:
    """(roots, residual tolerance) of the analyses of a stability mode (see :data:`CHECK_ANALYSIS`)."""
    check = mode == "report" and not isinstance(jk, IncrementalJK)
    return CHECK_ANALYSIS if check else FOLLOW_ANALYSIS


def _rotated_density(
    result: RHFResult, analysis: StabilityAnalysis, jk: JKBuilder, energy_nuclear: float
) -> np.ndarray:
    """Total density after the rotation along the unstable mode with the lowest energy on the scan."""
    builder = plain_builder(jk)
    n_occ = result.n_occupied
    best_energy, best_density = np.inf, result.density
    for angle in FOLLOW_ANGLES:
        occ = rotate_orbitals(result.coefficients, n_occ, analysis.mode, angle)[:, :n_occ]
        density = 2.0 * occ @ occ.T
        j, k = builder.jk(density)
        energy = float(np.vdot(density, result.core_hamiltonian + 0.5 * (j - 0.5 * k))) + energy_nuclear
        if energy < best_energy:
            best_energy, best_density = energy, density
    return best_density


__all__ = ["stabilise", "follow_instabilities", "NEW_SOLUTION_MARGIN", "FOLLOW_ANALYSIS", "CHECK_ANALYSIS", "analysis_settings"]
