"""Component conventions of every shell: one home for all of them.

Angular-momentum letters
    :data:`L_LETTERS`: s, p, d, f, g, h, i for l = 0..6.

Cartesian components
    For angular momentum l, the monomials x^a y^b z^c with a+b+c = l in
    lexicographic order of decreasing a, then decreasing b:
    p: x, y, z;  d: xx, xy, xz, yy, yz, zz;  f: xxx, xxy, xxz, xyy, xyz,
    xzz, yyy, yyz, yzz, zzz; and so on (see :func:`cartesian_components`).
    Every Cartesian basis function hfcore exposes is normalised to one on
    its own (so d_xx and d_xy are both unit functions): the contracted
    radial part normalises the x^l component (see
    :attr:`hfcore.basis.shells.Shell.norm_coefficients`) and
    :func:`cartesian_component_norms` the others.

Real spherical components
    For l >= 2 the real solid harmonics ordered m = -l, ..., 0, ..., +l
    (negative m are the sine-like functions, e.g. d: xy, yz, z², xz, x²-y²).
    For l = 1 the order is x, y, z (the solid harmonics of l = 1 are the
    Cartesian p functions). s is the same in both forms. Each spherical
    function is normalised to one.

The spherical transform
    :func:`c2s` maps the x^l-scaled Cartesian components to unit-normalised
    real solid harmonics. The coefficients are the closed form of the real
    solid harmonics S_lm (T. Helgaker, P. Jørgensen, J. Olsen, *Molecular
    Electronic-Structure Theory*, Wiley 2000, eq. 6.4.48), with the usual
    phase: S_{l,+|m|} carries cos(|m|φ), S_{l,-|m|} carries sin(|m|φ), and
    the leading coefficient of x^|m| (resp. x^{|m|-1} y) is positive.
    :func:`component_transform` gives the map to a shell's exposed
    functions in either form, the one the integral layer folds in.
"""

from __future__ import annotations

import math
from fractions import Fraction
from functools import lru_cache
from math import comb

import numpy as np

#: Letter of each angular momentum, indexed by l.
L_LETTERS = "spdfghi"


def n_cartesian(l: int) -> int:
    """Number of Cartesian components of angular momentum ``l``."""
    return (l + 1) * (l + 2) // 2


def n_spherical(l: int) -> int:
    """Number of real spherical components of angular momentum ``l``."""
    return 2 * l + 1


@lru_cache(maxsize=None)
def cartesian_components(l: int) -> tuple[tuple[int, int, int], ...]:
    """Exponent triples (a, b, c) of x^a y^b z^c for angular momentum ``l``.

    Returns
    -------
    tuple of (int, int, int)
        In hfcore's Cartesian order (decreasing a, then decreasing b).
    """
    out = []
    for a in range(l, -1, -1):
        for b in range(l - a, -1, -1):
            out.append((a, b, l - a - b))
    return tuple(out)


def _double_factorial(n: int) -> int:
    """(n)!! with (-1)!! = 0!! = 1."""
    return math.prod(range(n, 0, -2)) if n > 0 else 1


@lru_cache(maxsize=None)
def _cartesian_component_norms(l: int) -> tuple[float, ...]:
    dl = _double_factorial(2 * l - 1)
    return tuple(
        math.sqrt(dl / (_double_factorial(2 * a - 1) * _double_factorial(2 * b - 1) * _double_factorial(2 * c - 1)))
        for a, b, c in cartesian_components(l)
    )


def cartesian_component_norms(l: int) -> np.ndarray:
    """Factor turning each x^l-normalised Cartesian component into a unit function.

    Returns
    -------
    ndarray, shape (n_cartesian(l),)
        sqrt((2l-1)!! / ((2a-1)!! (2b-1)!! (2c-1)!!)) per component.
    """
    return np.array(_cartesian_component_norms(l))


_SPH_LABELS = {
    0: ("",),
    1: ("x", "y", "z"),
    2: ("xy", "yz", "z2", "xz", "x2-y2"),
}


def component_labels(l: int, spherical: bool) -> tuple[str, ...]:
    """Human labels of the components of a shell, in hfcore's order."""
    if l == 0:
        return ("",)
    if not spherical or l == 1:
        return tuple("x" * a + "y" * b + "z" * c for a, b, c in cartesian_components(l))
    if l in _SPH_LABELS:
        return _SPH_LABELS[l]
    return tuple(f"{m:+d}" for m in range(-l, l + 1))


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
        Angular momentum (0..5 for orbital shells, 0..6 for fitting shells; any l works).

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
        :func:`cartesian_component_norms` otherwise.
    """
    return _c2s(l) if spherical else _cart_norm_matrix(l)


__all__ = [
    "L_LETTERS",
    "n_cartesian",
    "n_spherical",
    "cartesian_components",
    "cartesian_component_norms",
    "component_labels",
    "c2s",
    "component_transform",
]
