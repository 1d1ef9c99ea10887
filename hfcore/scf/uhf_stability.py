"""Stability of UHF solutions (UHF→UHF) and of RHF ones towards UHF (RHF→UHF).

A UHF solution is stationary under real rotations κ_σ,ai between the
occupied orbitals i and empty orbitals a of each spin σ; it is a minimum
only if the energy Hessian in those rotations has no negative eigenvalue
(R. Seeger and J. A. Pople, J. Chem. Phys. 66, 3045 (1977), from memory).
With the symmetric transition densities ``d_σ = C_v,σ κ_σ C_o,σᵀ + transpose``
its product is::

    (d²E/dκ²) κ |_σ = 2 [F_vv,σ κ_σ − κ_σ F_oo,σ + C_v,σᵀ (J(d_α + d_β) − K(d_σ)) C_o,σ]

one J and two K per product, from one multi-density build
(:func:`hfcore.scf.jk.jk_multi`). With κ_α = κ_β it reduces to the RHF
Hessian 4 (A + B) of :mod:`hfcore.scf.stability`, whose Davidson solver
(:func:`hfcore.scf.stability.lowest_eigenpairs`) is used here unchanged.

On an RHF solution (C_α = C_β) the same Hessian is the RHF→UHF test: its
lowest eigenvalue also covers the spin-flipping ("triplet") rotations
κ_α = −κ_β that RHF cannot make, so a negative one means a lower
unrestricted (broken-symmetry) solution exists.

Nothing here prints.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from ..errors import ConvergenceError
from .following import CHECK_ANALYSIS, FOLLOW_ANALYSIS, NEW_SOLUTION_MARGIN
from .jk import IncrementalJK, JKBuilder, jk_multi
from .open_result import UHFResult
from .uhf import solve_uhf
from .result import RHFResult, SCFIteration
from .stability import FOLLOW_ANGLES, StabilityAnalysis, StabilityReport, lowest_eigenpairs, plain_builder, rotate_orbitals

from .solver import IterationProgress

#: The record of the open-shell stability stage is the RHF one (same fields).
OpenStabilityReport = StabilityReport


class UHFOrbitalHessian:
    """Products of the real UHF energy Hessian with α and β orbital rotations.

    Parameters
    ----------
    coefficients : pair of ndarray, shapes (nbf, nmo)
        α and β orbitals, occupied first.
    focks : pair of ndarray, shapes (nbf, nbf)
        α and β Fock matrices (hartree).
    n_occ : pair of int
        N_α and N_β.
    jk : JKBuilder

    Attributes
    ----------
    diagonal : ndarray, shape (nvir_α nocc_α + nvir_β nocc_β,)
        2 (F_aa − F_ii) per spin, the preconditioner.
    products : int
    """

    def __init__(self, coefficients, focks, n_occ, jk: JKBuilder) -> None:
        self.occ, self.vir, self.f_oo, self.f_vv = [], [], [], []
        for c, f, n in zip(coefficients, focks, n_occ):
            fmo = c.T @ f @ c
            self.occ.append(np.ascontiguousarray(c[:, :n]))
            self.vir.append(np.ascontiguousarray(c[:, n:]))
            self.f_oo.append(fmo[:n, :n])
            self.f_vv.append(fmo[n:, n:])
        self.shapes = [(v.shape[1], o.shape[1]) for v, o in zip(self.vir, self.occ)]
        self.sizes = [a * b for a, b in self.shapes]
        self.jk = plain_builder(jk)
        self.diagonal = np.concatenate(
            [2.0 * (np.diag(fv)[:, None] - np.diag(fo)[None, :]).ravel() for fv, fo in zip(self.f_vv, self.f_oo)]
        )
        self.products = 0

    def split(self, x: np.ndarray) -> list[np.ndarray]:
        """The α and β rotations (nvir_σ, nocc_σ) of a flat vector."""
        return [x[: self.sizes[0]].reshape(self.shapes[0]), x[self.sizes[0] :].reshape(self.shapes[1])]

    def __call__(self, x: np.ndarray) -> np.ndarray:
        parts = self.split(np.asarray(x).ravel())
        halves = [v @ p @ o.T for v, p, o in zip(self.vir, parts, self.occ)]
        j, k = jk_multi(self.jk, np.array([h + h.T for h in halves]))
        self.products += 1
        out = [
            2.0 * (fv @ p - p @ fo + v.T @ (j - kk) @ o)
            for fv, fo, v, o, p, kk in zip(self.f_vv, self.f_oo, self.vir, self.occ, parts, k)
        ]
        return np.concatenate([o.ravel() for o in out])


def analyse_uhf_stability(
    coefficients, focks, n_occ, jk: JKBuilder, *, threshold: float = 1e-5, n_roots: int = 1, tol: float = 1e-3
) -> StabilityAnalysis:
    """Lowest eigenpairs of the UHF orbital Hessian of a solution.

    Parameters
    ----------
    coefficients : pair of ndarray (nbf, nmo)
        α and β orbitals, occupied first.
    focks : pair of ndarray (nbf, nbf)
    n_occ : pair of int
    jk : JKBuilder
    threshold, n_roots, tol
        As for :func:`hfcore.scf.stability.analyse_stability`.

    Returns
    -------
    StabilityAnalysis
        Its ``vectors`` are flat, shape (n_roots, nvir_α nocc_α + nvir_β nocc_β),
        α part first.
    """
    hessian = UHFOrbitalHessian(coefficients, focks, n_occ, jk)
    if hessian.diagonal.size == 0:
        return StabilityAnalysis(np.array([np.inf]), np.zeros((1, 0)), threshold, True, 0)
    values, vectors, converged = lowest_eigenpairs(hessian, hessian.diagonal, n_roots, tol)
    return StabilityAnalysis(values, vectors, threshold, converged, hessian.products)


def check_rhf_to_uhf(result: RHFResult, jk: JKBuilder, *, n_roots: int = 1, tol: float = 1e-3) -> StabilityAnalysis:
    """RHF→UHF stability of a converged RHF solution (see the module notes).

    Returns
    -------
    StabilityAnalysis
        ``stable`` False when a lower unrestricted solution exists.
    """
    n = result.n_occupied
    c = result.coefficients
    return analyse_uhf_stability(
        (c, c), (result.fock, result.fock), (n, n), jk, threshold=result.options.stability_threshold,
        n_roots=n_roots, tol=tol,
    )


def rhf_to_uhf_warning(analysis: StabilityAnalysis) -> str:
    """The one-line warning for an RHF singlet with a lower unrestricted solution ("" when stable)."""
    if analysis.stable:
        return ""
    return (
        f"the RHF solution is unstable towards UHF (lowest Hessian eigenvalue {analysis.lowest_eigenvalue:.3g} Eh): "
        "a lower broken-symmetry unrestricted solution exists; run UHF to find it"
    )


def _uhf_energy(densities: np.ndarray, hcore: np.ndarray, builder: JKBuilder, energy_nuclear: float) -> float:
    j, k = jk_multi(builder, densities)
    e = float(np.vdot(densities.sum(axis=0), hcore))
    e += 0.5 * sum(float(np.vdot(d, j - kk)) for d, kk in zip(densities, k))
    return e + energy_nuclear


def _rotated_densities(result: UHFResult, analysis: StabilityAnalysis, jk: JKBuilder, energy_nuclear: float) -> np.ndarray:
    """α and β densities after the rotation along the unstable mode with the lowest energy on the scan."""
    builder = plain_builder(jk)
    n_occ = (result.n_alpha, result.n_beta)
    coefficients = (result.coefficients_alpha, result.coefficients_beta)
    sizes = [(c.shape[1] - n) * n for c, n in zip(coefficients, n_occ)]
    mode = analysis.vectors[0].ravel()
    parts = [mode[: sizes[0]], mode[sizes[0] :]]
    best_energy, best = np.inf, np.array([result.density_alpha, result.density_beta])
    for angle in FOLLOW_ANGLES:
        densities = []
        for c, n, p in zip(coefficients, n_occ, parts):
            occ = rotate_orbitals(c, n, p.reshape(c.shape[1] - n, n), angle)[:, :n]
            densities.append(occ @ occ.T)
        densities = np.array(densities)
        energy = _uhf_energy(densities, result.core_hamiltonian, builder, energy_nuclear)
        if energy < best_energy:
            best_energy, best = energy, densities
    return best


def stabilise_uhf(
    result: UHFResult, jk: JKBuilder, energy_nuclear: float, *, progress: IterationProgress | None = None
) -> UHFResult:
    """Analyse a converged UHF solution and, in "descend" mode, move to a stable one.

    The same rounds, defaults and verdicts as the RHF stage
    (:func:`hfcore.scf.following.stabilise`): the lowest root to a
    residual of 1e-3 in "descend" mode, three to 1e-4 in "report" mode;
    rotate along the unstable mode by the best angle of
    :data:`hfcore.scf.stability.FOLLOW_ANGLES`, converge again, at most
    ``stability_rounds`` times.

    Returns
    -------
    UHFResult
        The final solution with ``stability`` filled in and the histories
        of all solutions concatenated.
    """
    t0 = time.perf_counter()
    options = result.options
    inner = replace(options, stability="skip")
    energies = [result.energy_total]
    lowest: list[float] = []
    history = list(result.history)
    aids = list(result.aids)
    scf_time = result.timings.get("scf", 0.0)
    later_scf = 0.0
    products = 0
    rounds = 0
    check = options.stability == "report" and not isinstance(jk, IncrementalJK)
    n_roots, tol = CHECK_ANALYSIS if check else FOLLOW_ANALYSIS
    while True:
        analysis = analyse_uhf_stability(
            (result.coefficients_alpha, result.coefficients_beta), (result.fock_alpha, result.fock_beta),
            (result.n_alpha, result.n_beta), jk, threshold=options.stability_threshold, n_roots=n_roots, tol=tol,
        )
        products += analysis.products
        lowest.append(analysis.lowest_eigenvalue)
        if analysis.stable:
            plural = "instability" if rounds == 1 else "instabilities"
            message = "stable" if rounds == 0 else f"stable after following {rounds} {plural}"
            break
        if options.stability == "report":
            message = "unstable: a lower UHF solution exists (not followed in check mode)"
            break
        if rounds >= options.stability_rounds:
            message = f"still unstable after {rounds} rotations (the limit, stability_rounds)"
            break
        densities = _rotated_densities(result, analysis, jk, energy_nuclear)
        if isinstance(jk, IncrementalJK):
            jk.reset()
        try:
            new = solve_uhf(
                result.overlap, result.core_hamiltonian, jk, result.n_alpha, result.n_beta, energy_nuclear, inner,
                densities, progress=progress, _solution=rounds + 1,
            )
        except ConvergenceError as exc:
            message = f"unstable; the SCF after rotation {rounds + 1} did not converge ({exc}), so the previous solution is kept"
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
    report = StabilityReport(
        mode=options.stability, stable=analysis.stable, lowest_eigenvalue=analysis.lowest_eigenvalue,
        eigenvalues=analysis.eigenvalues, vector=analysis.mode, threshold=options.stability_threshold,
        solutions=energies, lowest_eigenvalues=lowest, rounds=rounds, hessian_products=products, message=message,
    )
    timings = {**result.timings, "scf": scf_time + later_scf, "stability": time.perf_counter() - t0 - later_scf}
    run_message = result.message
    if len(energies) > 1:
        run_message = f"converged in {len(history)} iterations over {len(energies)} solutions"
    return replace(
        result, options=options, stability=report, history=history, iterations=len(history), aids=tuple(aids),
        timings=timings, message=run_message,
    )


__all__ = [
    "UHFOrbitalHessian",
    "analyse_uhf_stability",
    "check_rhf_to_uhf",
    "rhf_to_uhf_warning",
    "stabilise_uhf",
    "OpenStabilityReport",
]
