"""A second-order (trust-region Newton) orbital step, the last automatic convergence aid.

The step solves ``H κ = -g`` for the occupied-virtual rotation κ with the
energy gradient ``g_ai = 4 F_ai`` and the orbital Hessian ``H`` of
:class:`hfcore.scf.stability.OrbitalHessian` (products by J/K builds on
transition densities), by truncated conjugate gradients inside a trust
radius (T. Steihaug, SIAM J. Numer. Anal. 20, 626 (1983); from memory): a
direction of negative curvature or a step reaching the radius stops at the
boundary, so the step always lowers the quadratic model even on a saddle
point. The radius shrinks when the energy went up since the previous step
and grows slowly otherwise.
"""

from __future__ import annotations

import numpy as np

from .stability import OrbitalHessian, rotate_orbitals

#: Trust radius (norm of κ, radians) to start with, and its bounds.
TRUST_START: float = 0.3
TRUST_MIN: float = 0.01
TRUST_MAX: float = 0.6
#: Conjugate-gradient iterations (Hessian products) per step at most.
MAX_PRODUCTS: int = 20


class SecondOrderStep:
    """Turns the current density into the next by one trust-region Newton step.

    Attributes
    ----------
    trust : float
        The current trust radius.
    products : int
        Hessian products (J/K builds) made so far.
    """

    def __init__(self) -> None:
        self.trust = TRUST_START
        self.products = 0
        self._last_energy: float | None = None

    def next_orbitals(
        self, coefficients: np.ndarray, fock: np.ndarray, n_occ: int, jk, energy: float
    ) -> np.ndarray:
        """Orbitals after one step from ``coefficients`` (occupied first).

        Parameters
        ----------
        coefficients : ndarray, shape (nbf, nmo)
            S-orthonormal orbitals whose first ``n_occ`` span the current density.
        fock : ndarray, shape (nbf, nbf)
            Fock matrix of the current density (hartree).
        n_occ : int
        jk : JKBuilder
        energy : float
            Energy of the current density, to adapt the trust radius (hartree).

        Returns
        -------
        ndarray, shape (nbf, nmo)
        """
        if self._last_energy is not None:
            grew = energy > self._last_energy
            self.trust = max(TRUST_MIN, 0.5 * self.trust) if grew else min(TRUST_MAX, 1.2 * self.trust)
        self._last_energy = energy
        hessian = OrbitalHessian(coefficients, fock, n_occ, jk)
        gradient = 4.0 * (coefficients[:, n_occ:].T @ fock @ coefficients[:, :n_occ])
        step = _truncated_cg(hessian, gradient, np.maximum(hessian.diagonal, 0.1), self.trust)
        self.products += hessian.products
        return rotate_orbitals(coefficients, n_occ, step, 1.0)


def _truncated_cg(hessian, gradient: np.ndarray, precondition: np.ndarray, radius: float) -> np.ndarray:
    """Approximate minimiser of g·x + ½ x·H x with |x| ≤ radius (preconditioned conjugate gradients)."""
    x = np.zeros_like(gradient)
    r = -gradient
    g_norm = float(np.linalg.norm(gradient))
    if g_norm == 0.0:
        return x
    z = r / precondition
    p = z.copy()
    rz = float(np.vdot(r, z))
    for _ in range(MAX_PRODUCTS):
        hp = hessian(p)
        curvature = float(np.vdot(p, hp))
        if curvature <= 0.0:
            return _to_boundary(x, p, radius)
        alpha = rz / curvature
        x_next = x + alpha * p
        if np.linalg.norm(x_next) >= radius:
            return _to_boundary(x, p, radius)
        x = x_next
        r = r - alpha * hp
        # A relative residual that tightens with the gradient makes the steps converge superlinearly.
        if np.linalg.norm(r) < min(0.1, np.sqrt(g_norm)) * g_norm:
            break
        z = r / precondition
        rz_next = float(np.vdot(r, z))
        p = z + (rz_next / rz) * p
        rz = rz_next
    return x


def _to_boundary(x: np.ndarray, p: np.ndarray, radius: float) -> np.ndarray:
    """x + τ p with τ ≥ 0 and |x + τ p| = radius."""
    a = float(np.vdot(p, p))
    if a == 0.0:
        return x
    b = 2.0 * float(np.vdot(x, p))
    c = float(np.vdot(x, x)) - radius**2
    tau = (-b + np.sqrt(max(b * b - 4.0 * a * c, 0.0))) / (2.0 * a)
    return x + tau * p


__all__ = ["SecondOrderStep", "TRUST_START", "TRUST_MIN", "TRUST_MAX", "MAX_PRODUCTS"]
