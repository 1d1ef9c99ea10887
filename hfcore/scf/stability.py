"""Internal stability of an RHF solution: the lowest eigenvalues of the orbital Hessian.

A converged RHF solution is a stationary point of the energy with respect to
real rotations between occupied orbitals i and virtual orbitals a,
``C(κ) = C exp(K)`` with ``K[a, i] = κ_ai = -K[i, a]``. It is a minimum
(stable) only if the Hessian of the energy in those rotations has no
negative eigenvalue (R. Seeger and J. A. Pople, J. Chem. Phys. 66, 3045
(1977), the RHF→RHF "internal" case; from memory). In the language of
linear response that Hessian is ``4 (A + B)``, the singlet
``A + B`` matrix of R. Bauernschmitt and R. Ahlrichs, J. Chem. Phys. 104,
9047 (1996) (from memory)::

    (A + B)_{ia,jb} = δ_ij F_ab - δ_ab F_ij + 4 (ia|jb) - (ib|ja) - (ij|ab)

It is never formed: its product with a trial rotation ``x`` (shape
(nvir, nocc)) needs one J/K build on the symmetric transition density
``D_x = C_v x C_oᵀ + (C_v x C_oᵀ)ᵀ``::

    (A + B) x = F_vv x - x F_oo + C_vᵀ (2 J(D_x) - K(D_x)) C_o

and a Davidson eigensolver finds the lowest few eigenvalues from a handful
of such products. The eigenvalues reported are those of the energy Hessian
``d²E/dκ²`` itself, ``4 (A + B)``, in hartree per radian².

Screening with fitted products
------------------------------
When every exact product is a full integral pass (direct mode) or a read
of a large store (:mod:`hfcore.scf.stability_screen` says where), the
search first runs on density-fitted products (:class:`hfcore.scf.stability_screen.FittedScreen`, a
JKFIT set for the orbital basis, built once for the run at the cost of
one three-centre pass) and only goes on with exact products, started
from the fitted vectors, when the fitted lowest eigenvalue lies within
:data:`SCREEN_MARGIN` of the threshold (:func:`screened_eigenpairs`). A
verdict near the threshold, and every unstable one, so always rests on
exact products; a value far above it is reported as fitted
(``eigenvalues_from``). With a small store an exact product costs
about what a fitted one does, so the screen would only add its
three-centre pass and is not used.

Nothing here prints; the records say what was found.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
from scipy.linalg import expm

from .._deprecation import rename_fields
from ..errors import InputError
from .jk import IncrementalJK, JKBuilder

if TYPE_CHECKING:
    from .stability_screen import FittedScreen

#: Names accepted for :attr:`hfcore.scf.SCFOptions.stability`: no analysis, analyse and
#: report, analyse and descend to a lower solution.
STABILITY_MODES: tuple[str, ...] = ("skip", "report", "descend")
#: Spellings of the stability settings before 0.1.0, accepted with a DeprecationWarning for one release.
OLD_STABILITY_MODES: dict[str, str] = {"off": "skip", "check": "report", "follow": "descend"}

#: Rotation angles (radians along the unit-norm mode) tried when leaving an unstable solution.
FOLLOW_ANGLES: tuple[float, ...] = tuple(0.15 * k for k in range(1, 11))

#: A fitted lowest eigenvalue at least this far (hartree) above ``-threshold`` settles the verdict
#: without exact products; below it the search goes on with exact products. The fitting error of
#: the lowest eigenvalue measured with the JKFIT sets of ``fit_basis="auto"`` was at most 1.2e-3 Eh
#: (water dimer aug-cc-pVDZ, 1.30916 against 1.31032 exact; water cc-pVTZ 3.4e-4 Eh, HF
#: aug-cc-pVTZ 5.1e-4, benzene 6-31G* 5.9e-5, cc-pVDZ 6.2e-5, the other hard cases of the tests
#: below 1.1e-4): the margin leaves forty times the largest.
SCREEN_MARGIN: float = 0.05


@dataclass(frozen=True)
class StabilityAnalysis:
    """The lowest eigenpairs of the real RHF orbital Hessian of one solution.

    Attributes
    ----------
    eigenvalues : ndarray, shape (n_roots,)
        Lowest eigenvalues of the energy Hessian d²E/dκ² = 4 (A + B),
        ascending, in hartree (per radian² of rotation).
    vectors : ndarray, shape (n_roots, nvir, nocc)
        The matching unit-norm rotations κ_ai.
    threshold : float
        The solution counts as stable when the lowest eigenvalue is above
        ``-threshold``.
    converged : bool
        Whether every root's residual fell below the solver tolerance.
    products : int
        Exact Hessian-vector products used, each one J/K build.
    eigenvalues_from : {"exact", "fitted"}
        Which products the stated eigenvalues come from: "fitted" only when
        a fitted screen found the lowest far enough above the threshold
        (:data:`SCREEN_MARGIN`) that exact products were not needed.
    fitted_products : int
        Products with the fitted screen's builder.
    spin_flip_space : pair of ndarray or None
        The rotations of every exact product, shape (m, nvir, nocc), and the
        spin-flipping UHF block's products with them (same shape), which
        the same J/K builds gave: the RHF→UHF check starts from them.
    """

    eigenvalues: np.ndarray
    vectors: np.ndarray
    threshold: float
    converged: bool
    products: int
    eigenvalues_from: str = "exact"
    fitted_products: int = 0
    spin_flip_space: tuple[np.ndarray, np.ndarray] | None = field(default=None, repr=False, compare=False)

    @property
    def lowest_eigenvalue(self) -> float:
        """The lowest eigenvalue (hartree)."""
        return float(self.eigenvalues[0])

    @property
    def mode(self) -> np.ndarray:
        """The rotation of the lowest eigenvalue, shape (nvir, nocc)."""
        return self.vectors[0]

    @property
    def stable(self) -> bool:
        """True when no eigenvalue lies below ``-threshold``."""
        return self.lowest_eigenvalue >= -self.threshold


@dataclass(frozen=True)
class StabilityReport:
    """What the stability stage of an RHF run checked and did.

    Attributes
    ----------
    mode : {"report", "descend"}
        The setting used (``"skip"`` runs leave ``RHFResult.stability`` None).
    stable : bool
        Verdict on the final solution: no Hessian eigenvalue below
        ``-threshold``.
    lowest_eigenvalue : float
        Lowest energy-Hessian eigenvalue of the final solution (hartree).
    eigenvalues : ndarray, shape (n_roots,)
        The lowest few eigenvalues of the final solution (hartree).
    vector : ndarray, shape (nvir, nocc)
        The rotation of the lowest eigenvalue of the final solution.
    threshold : float
        Stability threshold (hartree).
    solutions : list of float
        Total energy of each converged solution in the order found; the
        first is the one the SCF reached from its guess, the last is the
        reported one.
    lowest_eigenvalues : list of float
        The lowest eigenvalue of each analysed solution, same order.
    rounds : int
        Rotations along an unstable mode that were followed.
    hessian_products : int
        Exact Hessian-vector products (J/K builds) spent in all analyses
        (``products`` is its deprecated name).
    message : str
        The outcome in words.
    eigenvalues_from : {"exact", "fitted"}
        Whether ``lowest_eigenvalue`` and ``eigenvalues`` come from exact
        products or, far above the threshold, from the fitted screen's
        (see :data:`SCREEN_MARGIN`); always "exact" without a screen.
    fitted_products : int
        Hessian products made with the fitted screen's builder.
    screen_fit_basis : str or None
        The fitting set of the screen, None when none was used.
    spin_flip_space : pair of ndarray or None
        :attr:`StabilityAnalysis.spin_flip_space` of the final solution's
        analysis (not in :meth:`to_dict`).
    """

    mode: str
    stable: bool
    lowest_eigenvalue: float
    eigenvalues: np.ndarray
    vector: np.ndarray
    threshold: float
    solutions: list[float] = field(default_factory=list)
    lowest_eigenvalues: list[float] = field(default_factory=list)
    rounds: int = 0
    hessian_products: int = 0
    message: str = ""
    eigenvalues_from: str = "exact"
    fitted_products: int = 0
    screen_fit_basis: str | None = None
    spin_flip_space: tuple[np.ndarray, np.ndarray] | None = field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        """The ``scf.stability`` object of the JSON record (eigenvalues in hartree; no ``vector``)."""
        return {
            "mode": self.mode,
            "stable": self.stable,
            "lowest_eigenvalue": self.lowest_eigenvalue,
            "eigenvalues": self.eigenvalues,
            "threshold": self.threshold,
            "solutions": list(self.solutions),
            "lowest_eigenvalues": list(self.lowest_eigenvalues),
            "rounds": self.rounds,
            "hessian_products": self.hessian_products,
            "message": self.message,
            "eigenvalues_from": self.eigenvalues_from,
            "fitted_products": self.fitted_products,
            "screen_fit_basis": self.screen_fit_basis,
        }


rename_fields(StabilityReport, {"products": "hessian_products"})


def check_stability_mode(mode: object) -> str:
    """The lower-case stability setting, or InputError naming the choices.

    An old spelling (``off``, ``check``, ``follow``) gives its new name with a
    DeprecationWarning.
    """
    name = mode.lower() if isinstance(mode, str) else mode
    if name in OLD_STABILITY_MODES:
        from .._deprecation import renamed_value

        name = renamed_value("the stability setting", str(name), OLD_STABILITY_MODES)
    if name not in STABILITY_MODES:
        raise InputError(f"unknown stability setting {mode!r}: choose one of {', '.join(STABILITY_MODES)}")
    return str(name)


def plain_builder(jk: JKBuilder) -> JKBuilder:
    """A builder that treats every call independently (transition densities are not SCF steps)."""
    return jk.engine if isinstance(jk, IncrementalJK) else jk


class OrbitalHessian:
    """Products of the real RHF→RHF energy Hessian with orbital rotations.

    Parameters
    ----------
    coefficients : ndarray, shape (nbf, nmo)
        S-orthonormal orbitals, the first ``n_occ`` occupied. Dropped
        (linearly dependent) directions are simply absent: the rotations
        live in the nmo-dimensional orbital space.
    fock : ndarray, shape (nbf, nbf)
        The Fock matrix of the solution (hartree).
    n_occ : int
        Number of doubly occupied orbitals.
    jk : JKBuilder
        J/K builder; each product makes one call.

    Attributes
    ----------
    diagonal : ndarray, shape (nvir, nocc)
        4 (F_aa - F_ii), the diagonal without the two-electron part, used
        as the Davidson preconditioner.
    products : int
        Products made so far.
    """

    def __init__(self, coefficients: np.ndarray, fock: np.ndarray, n_occ: int, jk: JKBuilder) -> None:
        self.occ = np.ascontiguousarray(coefficients[:, :n_occ])
        self.vir = np.ascontiguousarray(coefficients[:, n_occ:])
        fmo = coefficients.T @ fock @ coefficients
        self.f_oo = fmo[:n_occ, :n_occ]
        self.f_vv = fmo[n_occ:, n_occ:]
        self.jk = plain_builder(jk)
        self.diagonal = 4.0 * (np.diag(self.f_vv)[:, None] - np.diag(self.f_oo)[None, :])
        self.products = 0
        #: (rotation, spin-flipping product) of every product made, when set to a list.
        self.spin_flip: list[tuple[np.ndarray, np.ndarray]] | None = None

    @property
    def shape(self) -> tuple[int, int]:
        """(nvir, nocc), the shape of a rotation."""
        return (self.vir.shape[1], self.occ.shape[1])

    def __call__(self, x: np.ndarray) -> np.ndarray:
        """d²E/dκ² · x for a rotation x of shape (nvir, nocc); result of the same shape, hartree."""
        return self.block([x])[0]

    def block(self, xs: list[np.ndarray]) -> list[np.ndarray]:
        """:meth:`__call__` for several rotations at once (a builder that can does them in one pass).

        The transition density of ``x`` is L C_oᵀ + C_o Lᵀ with ``L = C_v x``:
        a builder that takes the two thin factors (``jk_transitions``, the
        fitted one) half-transforms C_o once for all products and the lefts
        together; any other builder gets one J/K build per rotation.
        """
        lefts = [self.vir @ x for x in xs]
        transitions = getattr(self.jk, "jk_transitions", None)
        if transitions is not None:
            built = transitions(lefts, self.occ)
        else:
            built = []
            for left in lefts:
                half = left @ self.occ.T
                built.append(self.jk.jk(half + half.T))
        self.products += len(xs)
        if self.spin_flip is not None:
            # The same exchange matrices give the spin-flipping UHF block's products for free
            # (hfcore.scf.uhf_stability.TripletHessian), kept for the RHF→UHF check.
            self.spin_flip.extend(
                (x.copy(), 2.0 * (self.f_vv @ x - x @ self.f_oo - self.vir.T @ k @ self.occ))
                for x, (_, k) in zip(xs, built)
            )
        return [
            4.0 * (self.f_vv @ x - x @ self.f_oo + self.vir.T @ (2.0 * j - k) @ self.occ)
            for x, (j, k) in zip(xs, built)
        ]

    def release(self) -> None:
        """Let the builder drop what it kept for these products (the fitted builder's Z of C_o)."""
        release = getattr(self.jk, "release", None)
        if release is not None:
            release()


def lowest_eigenpairs(
    hessian: Callable[[np.ndarray], np.ndarray],
    diagonal: np.ndarray,
    n_roots: int = 3,
    tol: float = 1e-6,
    max_iterations: int = 60,
    max_space: int = 40,
    n_start: int | None = None,
    *,
    start: np.ndarray | None = None,
    seeded: bool = False,
    known: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, bool]:
    """Davidson's method for the lowest eigenpairs of a symmetric operator.

    Parameters
    ----------
    hessian : callable
        Maps an array of the shape of ``diagonal`` to the product with the
        operator. If it has a ``block`` method (a list of arrays to a list
        of products, as :class:`OrbitalHessian`), the start vectors go
        through it together.
    diagonal : ndarray
        An approximation of the operator's diagonal (preconditioner and
        source of the start vectors).
    n_roots : int
        Number of eigenpairs wanted (capped at the dimension).
    tol : float
        Converged when every residual norm ``|H v - λ v|`` is below this.
    max_iterations : int
        Subspace expansions before giving up.
    max_space : int
        Subspace size at which the search restarts from the current
        best vectors.
    n_start : int, optional
        Unit start vectors on the smallest diagonal elements (default
        ``n_roots + 3``), plus one preconditioned vector reaching every
        component.
    start : ndarray, shape (m, *diagonal.shape), optional
        Extra start vectors (for example the modes of a previous analysis).
    seeded : bool
        Start from ``start`` alone, without the unit and spread vectors
        (the exact refinement of a fitted search, whose vectors already
        hold the low modes).
    known : pair of ndarray, shapes (m, *diagonal.shape), optional
        Vectors whose products are already known, and those products: the
        search starts from their span (made orthonormal) instead of the
        unit and spread vectors, at no cost (the RHF→UHF check on the
        rotations of the RHF analysis, see ``spin_flip_space``).

    Returns
    -------
    eigenvalues : ndarray, shape (n_roots,)
    vectors : ndarray, shape (n_roots, *diagonal.shape)
        Unit-norm eigenvectors.
    converged : bool
        Every residual below ``tol``.

    Notes
    -----
    The search always goes on to ``tol``. Stopping earlier, once the lowest
    Ritz value θ lies clearly above the threshold by its residual bound
    (|λ − θ| ≤ ‖r‖ for some eigenvalue λ), is not sound here: that bound
    says nothing about modes the subspace barely holds yet. On benzene
    cc-pVQZ with cc-pVQZ-JKFIT the Ritz value sat at 1.146 Eh with a residual
    of 0.084 and then 0.073 (under a tenth of θ), before the true lowest
    mode, 0.674 Eh, reached through the spread start vector, took over at
    the next expansion; for an unstable solution the same would hide the
    negative mode.
    """
    shape = diagonal.shape
    d = diagonal.ravel()
    dim = d.size
    n_roots = max(1, min(n_roots, dim))
    block = getattr(hessian, "block", None)

    def products_of(vectors: np.ndarray) -> np.ndarray:
        trial = [v.reshape(shape) for v in vectors.T]
        made = block(trial) if block is not None else [hessian(v) for v in trial]
        return np.column_stack([p.ravel() for p in made])

    # Unit vectors on the smallest diagonal elements reach modes of several
    # symmetries; one vector with every component nonzero (from a fixed seed,
    # so runs repeat digit for digit) reaches any symmetry they miss. It is
    # preconditioned (weighted by 1 / (d - min d + 0.5 Eh)) so that its Rayleigh
    # quotient is low and the low modes it carries are resolved instead of
    # hidden behind its high-energy part: a stretched-N2 solution has a zero
    # mode that plain random and unit vectors only reach with many more roots.
    if known is not None and len(known[0]):
        basis, products = _span_of(np.reshape(known[0], (len(known[0]), dim)).T,
                                   np.reshape(known[1], (len(known[1]), dim)).T)
    elif seeded and start is not None and len(start):
        basis = np.zeros((dim, 0))
    else:
        order = np.argsort(d, kind="stable")
        n_start = min(dim, n_start if n_start is not None else n_roots + 3)
        basis = np.zeros((dim, n_start))
        basis[order[:n_start], np.arange(n_start)] = 1.0
        if n_start < dim:
            spread = np.random.default_rng(20260).standard_normal(dim) / (d - d.min() + 0.5)
            basis = np.column_stack([basis, spread])
    if known is None or not len(known[0]):
        if start is not None and len(start):
            basis = np.column_stack([basis, np.reshape(start, (len(start), dim)).T])
        basis = _orthonormal_columns(basis)
        products = products_of(basis)
    elif start is not None and len(start):
        added = _extend(basis, np.reshape(start, (len(start), dim)).T)
        basis, products = np.column_stack([basis, added]), np.column_stack([products, products_of(added)])
    converged = False
    for _ in range(max_iterations):
        small = basis.T @ products
        values, vecs = np.linalg.eigh(0.5 * (small + small.T))
        values, vecs = values[:n_roots], vecs[:, :n_roots]
        ritz = basis @ vecs
        residuals = products @ vecs - ritz * values
        norms = np.linalg.norm(residuals, axis=0)
        if np.all(norms < tol) or basis.shape[1] >= dim:
            converged = bool(np.all(norms < tol)) or basis.shape[1] >= dim
            break
        if basis.shape[1] + n_roots > max_space:
            basis, products = ritz, products @ vecs
        new = []
        for k in np.flatnonzero(norms >= tol):
            denom = d - values[k]
            denom[np.abs(denom) < 1e-4] = 1e-4
            new.append(residuals[:, k] / denom)
        added = _extend(basis, np.column_stack(new))
        if added.shape[1] == 0:
            break
        basis = np.column_stack([basis, added])
        products = np.column_stack([products, products_of(added)])
    vectors = np.array([ritz[:, k].reshape(shape) / np.linalg.norm(ritz[:, k]) for k in range(n_roots)])
    return values.copy(), vectors, converged


def _span_of(vectors: np.ndarray, products: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """An orthonormal basis of the columns of ``vectors`` and the operator's products with it.

    The operator is linear, so with vectors = U S Wᵀ the basis U has
    products ``products @ W / S``; directions with S below 1e-8 · max S are
    dropped.
    """
    u, sv, wt = np.linalg.svd(vectors, full_matrices=False)
    keep = sv > 1e-8 * sv.max() if sv.size else np.zeros(0, dtype=bool)
    return u[:, keep], (products @ wt[keep].T) / sv[keep]


def _orthonormal_columns(m: np.ndarray) -> np.ndarray:
    q, r = np.linalg.qr(m)
    keep = np.abs(np.diag(r)) > 1e-10
    return q[:, keep]


def _extend(basis: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Candidates made orthonormal to ``basis`` and to each other; near-dependent ones dropped."""
    kept: list[np.ndarray] = []
    for v in candidates.T:
        v = v / (np.linalg.norm(v) or 1.0)
        for _ in range(2):  # twice is enough (Kahan's rule)
            v = v - basis @ (basis.T @ v)
            for w in kept:
                v = v - w * (w @ v)
        norm = np.linalg.norm(v)
        if norm > 1e-6:
            kept.append(v / norm)
    return np.column_stack(kept) if kept else np.zeros((basis.shape[0], 0))


def screened_eigenpairs(
    exact: Callable[[np.ndarray], np.ndarray],
    fitted: Callable[[np.ndarray], np.ndarray] | None,
    diagonal: np.ndarray,
    n_roots: int,
    tol: float,
    threshold: float,
    *,
    start: np.ndarray | None = None,
    known: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, bool, str]:
    """Lowest eigenpairs, from fitted products where they settle the verdict, else exact ones.

    Parameters
    ----------
    exact, fitted : callable
        The operator with exact and with fitted J/K (as for
        :func:`lowest_eigenpairs`); ``fitted`` None gives the exact search alone.
    diagonal, n_roots, tol, start
        As for :func:`lowest_eigenpairs`.
    known : pair of ndarray, optional
        Exact products already made (see :func:`lowest_eigenpairs`); the
        exact search then starts from them.
    threshold : float
        Stability threshold (hartree).

    Returns
    -------
    eigenvalues, vectors, converged
        As :func:`lowest_eigenpairs`.
    source : {"exact", "fitted"}
        "fitted" when the fitted lowest eigenvalue is at least
        :data:`SCREEN_MARGIN` above ``-threshold``: the exact one then lies
        above the threshold too (the fitting error is far below the margin).
        Otherwise the exact search starts from the fitted vectors alone
        (one more root than asked for, so a nearly degenerate partner is
        not lost) and its values are returned.
    """
    if fitted is None or (known is not None and len(known[0])):
        return (*lowest_eigenpairs(exact, diagonal, n_roots, tol, start=start, known=known), "exact")
    wide = min(n_roots + 1, diagonal.size)
    values, vectors, converged = lowest_eigenpairs(fitted, diagonal, wide, tol, start=start)
    if converged and values[0] >= -threshold + SCREEN_MARGIN:
        return values[:n_roots].copy(), vectors[:n_roots], True, "fitted"
    return (*lowest_eigenpairs(exact, diagonal, n_roots, tol, start=vectors, seeded=True), "exact")


def analyse_stability(
    coefficients: np.ndarray,
    fock: np.ndarray,
    n_occ: int,
    jk: JKBuilder,
    *,
    threshold: float = 1e-5,
    n_roots: int = 3,
    tol: float = 1e-6,
    start: np.ndarray | None = None,
    screen: "FittedScreen | None" = None,
    keep_spin_flip: bool = False,
) -> StabilityAnalysis:
    """Internal (real RHF→RHF) stability analysis of a converged solution.

    Parameters
    ----------
    coefficients : ndarray, shape (nbf, nmo)
        The solution's canonical orbitals, occupied first (as in
        ``RHFResult.coefficients``).
    fock : ndarray, shape (nbf, nbf)
        Its Fock matrix (hartree).
    n_occ : int
        Doubly occupied orbitals.
    jk : JKBuilder
        The J/K builder the SCF used.
    threshold : float
        Stable when the lowest eigenvalue is at least ``-threshold``.
    n_roots : int
        Eigenvalues wanted.
    tol : float
        Residual norm at which the eigensolver stops (hartree).
    start : ndarray, shape (m, nvir, nocc), optional
        Extra start vectors, e.g. the modes of the previous solution's
        analysis.
    screen : FittedScreen, optional
        Search with its fitted products first (:func:`screened_eigenpairs`).
    keep_spin_flip : bool
        Keep the spin-flipping products the exact J/K builds also give
        (:attr:`StabilityAnalysis.spin_flip_space`).

    Returns
    -------
    StabilityAnalysis

    Notes
    -----
    With no virtual orbital there is no rotation: the analysis reports an
    eigenvalue of +inf (stable) without any J/K build.
    """
    hessian = OrbitalHessian(coefficients, fock, n_occ, jk)
    nvir, nocc = hessian.shape
    if nvir == 0 or nocc == 0:
        return StabilityAnalysis(np.array([np.inf]), np.zeros((1, nvir, nocc)), threshold, True, 0)
    if keep_spin_flip:
        hessian.spin_flip = []
    fitted = None if screen is None else OrbitalHessian(coefficients, fock, n_occ, screen.builder())
    try:
        values, vectors, converged, source = screened_eigenpairs(
            hessian, fitted, hessian.diagonal, n_roots, tol, threshold, start=start
        )
    finally:
        hessian.release()
        if fitted is not None:
            fitted.release()
    space = None
    if hessian.spin_flip:
        space = (np.array([x for x, _ in hessian.spin_flip]), np.array([t for _, t in hessian.spin_flip]))
    return StabilityAnalysis(values, vectors, threshold, converged, hessian.products, source,
                             0 if fitted is None else fitted.products, space)


def rotate_orbitals(coefficients: np.ndarray, n_occ: int, rotation: np.ndarray, angle: float) -> np.ndarray:
    """Orbitals ``C exp(K)`` turned by ``angle`` along an occupied-virtual rotation.

    Parameters
    ----------
    coefficients : ndarray, shape (nbf, nmo)
    n_occ : int
    rotation : ndarray, shape (nmo - n_occ, n_occ)
        κ_ai, usually a unit-norm Hessian eigenvector.
    angle : float
        Scale of the rotation (radians for a unit-norm ``rotation``).

    Returns
    -------
    ndarray, shape (nbf, nmo)
        Still S-orthonormal (exp(K) is orthogonal for antisymmetric K).
    """
    nmo = coefficients.shape[1]
    kappa = np.zeros((nmo, nmo))
    kappa[n_occ:, :n_occ] = angle * rotation
    kappa[:n_occ, n_occ:] = -angle * rotation.T
    return coefficients @ expm(kappa)


__all__ = [
    "STABILITY_MODES",
    "FOLLOW_ANGLES",
    "SCREEN_MARGIN",
    "screened_eigenpairs",
    "StabilityAnalysis",
    "StabilityReport",
    "OrbitalHessian",
    "lowest_eigenpairs",
    "analyse_stability",
    "rotate_orbitals",
    "check_stability_mode",
    "plain_builder",
]
