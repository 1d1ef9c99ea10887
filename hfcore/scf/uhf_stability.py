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
unrestricted (broken-symmetry) solution exists. There the Hessian splits
exactly into two blocks: on κ_α = κ_β = κ/√2 it is half the RHF Hessian
4 (A + B) (whose lowest eigenvalue the RHF analysis has already found),
and on κ_α = −κ_β = κ/√2 the Coulomb part cancels::

    T κ = 2 [F_vv κ − κ F_oo − C_vᵀ K(d_κ) C_o]

so :func:`check_rhf_to_uhf` searches only that block
(:class:`TripletHessian`), whose products need K alone: several come from
one multi-density build, and the RHF analysis's own builds have already
given its products with every rotation that analysis tried, so the search
starts from their span.

Nothing here prints.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

import numpy as np

from .following import analysis_settings, follow_instabilities
from .jk import IncrementalJK, JKBuilder, jk_multi
from .open_result import UHFResult
from .uhf import solve_uhf
from .result import RHFResult, SCFIteration
from .stability_screen import FittedScreen
from .stability import (
    FOLLOW_ANGLES,
    OrbitalHessian,
    StabilityAnalysis,
    StabilityReport,
    analyse_stability,
    plain_builder,
    rotate_orbitals,
    screened_eigenpairs,
)

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


class TripletHessian:
    """The spin-flipping block of the UHF Hessian of an RHF solution (see the module notes).

    Its eigenvalues are those of the UHF energy Hessian on rotations
    κ_α = −κ_β = κ/√2 (hartree), for unit-norm κ of shape (nvir, nocc).

    Parameters
    ----------
    coefficients : ndarray, shape (nbf, nmo)
    fock : ndarray, shape (nbf, nbf)
    n_occ : int
    jk : JKBuilder

    Attributes
    ----------
    diagonal : ndarray, shape (nvir, nocc)
        2 (F_aa − F_ii), the preconditioner.
    products : int
    """

    def __init__(self, coefficients: np.ndarray, fock: np.ndarray, n_occ: int, jk: JKBuilder) -> None:
        self._rhf = OrbitalHessian(coefficients, fock, n_occ, jk)
        self.diagonal = 0.5 * self._rhf.diagonal
        self.products = 0

    @property
    def shape(self) -> tuple[int, int]:
        return self._rhf.shape

    def __call__(self, x: np.ndarray) -> np.ndarray:
        return self.block([x])[0]

    def block(self, xs: list[np.ndarray]) -> list[np.ndarray]:
        """Products with several rotations; their exchange matrices come from one build.

        A builder with thin-factor transitions (the fitted one) takes them
        all in one pass; any other gets one multi-density build for all
        (its Coulomb matrix of the sum is not needed).
        """
        h = self._rhf
        lefts = [h.vir @ x for x in xs]
        transitions = getattr(h.jk, "jk_transitions", None)
        if transitions is not None:
            ks = [k for _, k in transitions(lefts, h.occ)]
        else:
            halves = [left @ h.occ.T for left in lefts]
            _, ks = jk_multi(h.jk, np.array([half + half.T for half in halves]))
        self.products += len(xs)
        return [2.0 * (h.f_vv @ x - x @ h.f_oo - h.vir.T @ k @ h.occ) for x, k in zip(xs, ks)]

    def release(self) -> None:
        self._rhf.release()


def analyse_uhf_stability(
    coefficients, focks, n_occ, jk: JKBuilder, *, threshold: float = 1e-5, n_roots: int = 1, tol: float = 1e-3,
    start: np.ndarray | None = None, screen: FittedScreen | None = None,
) -> StabilityAnalysis:
    """Lowest eigenpairs of the UHF orbital Hessian of a solution.

    Parameters
    ----------
    coefficients : pair of ndarray (nbf, nmo)
        α and β orbitals, occupied first.
    focks : pair of ndarray (nbf, nbf)
    n_occ : pair of int
    jk : JKBuilder
    threshold, n_roots, tol, start, screen
        As for :func:`hfcore.scf.stability.analyse_stability` (``start`` flat
        vectors of the shape of the returned ones).

    Returns
    -------
    StabilityAnalysis
        Its ``vectors`` are flat, shape (n_roots, nvir_α nocc_α + nvir_β nocc_β),
        α part first.
    """
    hessian = UHFOrbitalHessian(coefficients, focks, n_occ, jk)
    if hessian.diagonal.size == 0:
        return StabilityAnalysis(np.array([np.inf]), np.zeros((1, 0)), threshold, True, 0)
    fitted = None if screen is None else UHFOrbitalHessian(coefficients, focks, n_occ, screen.builder())
    values, vectors, converged, source = screened_eigenpairs(
        hessian, fitted, hessian.diagonal, n_roots, tol, threshold, start=start
    )
    return StabilityAnalysis(values, vectors, threshold, converged, hessian.products, source,
                             0 if fitted is None else fitted.products)


def check_rhf_to_uhf(
    result: RHFResult, jk: JKBuilder, *, n_roots: int = 1, tol: float = 1e-3, screen: FittedScreen | None = None
) -> StabilityAnalysis:
    """RHF→UHF stability of a converged RHF solution (see the module notes).

    The lowest eigenvalues of the UHF Hessian are those of its two blocks
    together: the spin-keeping block is half the RHF Hessian, taken from
    ``result.stability`` when the RHF analysis ran (else analysed here),
    and the spin-flipping block is searched with :class:`TripletHessian`.

    Parameters
    ----------
    result : RHFResult
        A converged RHF solution.
    jk : JKBuilder
        The builder its SCF used.
    n_roots, tol
        Roots and residual tolerance of the search.
    screen : FittedScreen, optional
        As for :func:`hfcore.scf.stability.analyse_stability`.

    Returns
    -------
    StabilityAnalysis
        ``stable`` False when a lower unrestricted solution exists; its
        vectors are flat (α part, then β), ``products`` counts the exact
        products made here (none for the spin-keeping block when it was
        taken from ``result.stability``).
    """
    n, c, threshold = result.n_occupied, result.coefficients, result.options.stability_threshold
    triplet = TripletHessian(c, result.fock, n, jk)
    nvir, nocc = triplet.shape
    if nvir == 0 or nocc == 0:
        return StabilityAnalysis(np.array([np.inf]), np.zeros((1, 0)), threshold, True, 0)
    singlet = _spin_keeping_block(result, jk, n_roots, tol, screen)
    # The RHF analysis's J/K builds already gave the spin-flipping products of its rotations, unit and
    # spread start vectors included. A screened analysis made exact products only from fitted vectors,
    # which need not reach every symmetry of the other block: it gets its own screened search.
    known = singlet.spin_flip_space if screen is None else None
    fitted = None if screen is None else TripletHessian(c, result.fock, n, screen.builder())
    try:
        values, vectors, converged, source = screened_eigenpairs(
            triplet, fitted, triplet.diagonal, n_roots, tol, threshold, known=known
        )
    finally:
        triplet.release()
        if fitted is not None:
            fitted.release()
    root = np.sqrt(0.5)
    # Unit-norm UHF vectors: (κ, κ)/√2 on the spin-keeping block, (κ, −κ)/√2 on the spin-flipping one.
    flat = [root * np.concatenate([v.ravel(), v.ravel()]) for v in singlet.vectors]
    flat += [root * np.concatenate([v.ravel(), -v.ravel()]) for v in vectors]
    merged = np.concatenate([singlet.eigenvalues, values])
    sources = [singlet.eigenvalues_from] * singlet.eigenvalues.size + [source] * values.size
    order = np.argsort(merged, kind="stable")[: max(1, min(n_roots, merged.size))]
    lowest_from = sources[int(order[0])]
    return StabilityAnalysis(
        merged[order], np.array([flat[i] for i in order]), threshold, converged and singlet.converged,
        triplet.products + singlet.products, lowest_from,
        (0 if fitted is None else fitted.products) + singlet.fitted_products,
    )


def _spin_keeping_block(result: RHFResult, jk: JKBuilder, n_roots: int, tol: float,
                        screen: FittedScreen | None) -> StabilityAnalysis:
    """Eigenpairs of the UHF Hessian on κ_α = κ_β: the RHF analysis's, halved (unit-norm κ of each spin block)."""
    report = result.stability
    if report is not None and np.all(np.isfinite(report.eigenvalues)) and report.vector.size:
        # Only the lowest RHF mode is kept in the report; its eigenvalue is the one that can decide the verdict.
        return StabilityAnalysis(0.5 * np.asarray(report.eigenvalues[:1]), report.vector[None], report.threshold,
                                 True, 0, report.eigenvalues_from, spin_flip_space=report.spin_flip_space)
    own = analyse_stability(result.coefficients, result.fock, result.n_occupied, jk,
                            threshold=result.options.stability_threshold, n_roots=n_roots, tol=tol, screen=screen,
                            keep_spin_flip=True)
    return replace(own, eigenvalues=0.5 * own.eigenvalues)


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
    result: UHFResult, jk: JKBuilder, energy_nuclear: float, *, progress: IterationProgress | None = None,
    screen: FittedScreen | None = None,
) -> UHFResult:
    """Analyse a converged UHF solution and, in "descend" mode, move to a stable one.

    The same rounds, defaults and verdicts as the RHF stage
    (:func:`hfcore.scf.following.stabilise`): the lowest root to a
    residual of 1e-3 in "descend" mode, three to 1e-4 in "report" mode;
    rotate along the unstable mode by the best angle of
    :data:`hfcore.scf.stability.FOLLOW_ANGLES`, converge again, at most
    ``stability_rounds`` times. Each search starts also from the previous
    solution's modes; ``screen`` (see
    :func:`hfcore.scf.stability.screened_eigenpairs`) gives fitted products
    for the search first.

    Returns
    -------
    UHFResult
        The final solution with ``stability`` filled in and the histories
        of all solutions concatenated.
    """
    n_roots, tol = analysis_settings(result.options.stability, jk)

    def analyse(current: UHFResult, start: np.ndarray | None) -> StabilityAnalysis:
        return analyse_uhf_stability(
            (current.coefficients_alpha, current.coefficients_beta), (current.fock_alpha, current.fock_beta),
            (current.n_alpha, current.n_beta), jk, threshold=current.options.stability_threshold, n_roots=n_roots,
            tol=tol, start=start, screen=screen,
        )

    def reconverge(current: UHFResult, analysis: StabilityAnalysis, inner, solution: int) -> UHFResult:
        densities = _rotated_densities(current, analysis, jk, energy_nuclear)
        if isinstance(jk, IncrementalJK):
            jk.reset()
        return solve_uhf(
            current.overlap, current.core_hamiltonian, jk, current.n_alpha, current.n_beta, energy_nuclear, inner,
            densities, progress=progress, _solution=solution,
        )

    return follow_instabilities(result, analyse, reconverge, "UHF", screen)


__all__ = [
    "UHFOrbitalHessian",
    "TripletHessian",
    "analyse_uhf_stability",
    "check_rhf_to_uhf",
    "rhf_to_uhf_warning",
    "stabilise_uhf",
    "OpenStabilityReport",
]
