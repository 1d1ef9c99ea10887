"""Cartesian → real solid harmonic transformation matrices.

``c2s(l)`` maps the Cartesian components of a shell (hfcore order, each
component scaled like the x^l function, see :mod:`hfcore.basis.shells`) to
unit-normalised real solid harmonics ordered m = -l..l (p stays x, y, z).
The coefficients are the closed form of the real solid harmonics
S_lm (T. Helgaker, P. Jørgensen, J. Olsen, *Molecular Electronic-Structure
Theory*, Wiley 2000, eq. 6.4.48), with the usual phase: S_{l,+|m|} carries
cos(|m|φ), S_{l,-|m|} carries sin(|m|φ), and the leading coefficient of
x^|m| (resp. x^{|m|-1} y) is positive.
"""

from __future__ import annotations

from fractions import Fraction
from functools import lru_cache
from math import comb

import numpy as np

from ..basis.shells import cartesian_component_norms, cartesian_components, n_cartesian


def _double_factorial(n: int) -> int:
    out = 1
    while n > 1:
        out *= n
        n -= 2
    return out


def _solid_harmonic_monomials(l: int, m: int) -> dict[tuple[int, int, int], Fraction]:
    """Unnormalised S_lm as {(a, b, c): coefficient of x^a y^b z^c}."""
    am = abs(m)
    # v runs over integers for m >= 0 and half-integers for m < 0; 2v is used.
    twov_start = 0 if m >= 0 else 1
    out: dict[tuple[int, int, int], Fraction] = {}
    for t in range((l - am) // 2 + 1):
        for u in range(t + 1):
            for twov in range(twov_start, am + 1, 2):
                sign = -1 if ((2 * t + twov - twov_start) // 2) % 2 else 1
                coef = Fraction(sign * comb(l, t) * comb(l - t, am + t) * comb(t, u) * comb(am, twov), 4**t)
                key = (2 * t + am - 2 * u - twov, 2 * u + twov, l - 2 * t - am)
                out[key] = out.get(key, Fraction(0)) + coef
    return out


def _cartesian_gram(l: int) -> np.ndarray:
    """Overlap of x^l-scaled Cartesian monomials sharing one radial part."""
    comps = cartesian_components(l)
    dl = _double_factorial(2 * l - 1)
    g = np.zeros((len(comps), len(comps)))
    for i, (a, b, c) in enumerate(comps):
        for j, (d, e, f) in enumerate(comps):
            if (a + d) % 2 or (b + e) % 2 or (c + f) % 2:
                continue
            g[i, j] = _double_factorial(a + d - 1) * _double_factorial(b + e - 1) * _double_factorial(c + f - 1) / dl
    return g


@lru_cache(maxsize=None)
def _c2s(l: int) -> np.ndarray:
    if l == 0:
        return np.ones((1, 1))
    if l == 1:
        return np.eye(3)
    comps = cartesian_components(l)
    index = {c: i for i, c in enumerate(comps)}
    rows = np.zeros((2 * l + 1, n_cartesian(l)))
    for row, m in enumerate(range(-l, l + 1)):
        for key, coef in _solid_harmonic_monomials(l, m).items():
            rows[row, index[key]] += float(coef)
    gram = _cartesian_gram(l)
    norms = np.sqrt(np.einsum("ij,jk,ik->i", rows, gram, rows))
    out = rows / norms[:, None]
    out.setflags(write=False)
    return out


def c2s(l: int) -> np.ndarray:
    """Cartesian → real spherical transformation for angular momentum ``l``.

    Parameters
    ----------
    l : int
        Angular momentum (0..4 in hfcore, any l works).

    Returns
    -------
    ndarray, shape (2l+1, n_cartesian(l))
        Row m+l gives the unit-normalised S_lm as a combination of the
        x^l-scaled Cartesian components (read-only).
    """
    return _c2s(l)


@lru_cache(maxsize=None)
def _cart_norm_matrix(l: int) -> np.ndarray:
    out = np.diag(cartesian_component_norms(l))
    out.setflags(write=False)
    return out


def component_transform(l: int, spherical: bool) -> np.ndarray:
    """Map from x^l-scaled Cartesian components to a shell's exposed functions.

    Returns
    -------
    ndarray, shape (ncomp, n_cartesian(l))
        :func:`c2s` for spherical shells, the diagonal of
        :func:`hfcore.basis.shells.cartesian_component_norms` otherwise.
    """
    return _c2s(l) if spherical else _cart_norm_matrix(l)


__all__ = ["c2s", "component_transform"]
