"""Basis-set-limit extrapolation of energies over the cardinal number X.

Two published model forms are provided, each solved exactly through the
given points (no fitting):

* two-point, for Hartree-Fock energies,
  E(X) = E_CBS + A (X + 1) exp(-9 sqrt(X))
  (A. Karton and J. M. L. Martin, Theor. Chem. Acc. 115, 330 (2006));
* three-point exponential, E(X) = E_CBS + B exp(-C X)
  (D. Feller, J. Chem. Phys. 96, 6104 (1992)).

The cardinal number X of a correlation-consistent set is 2 for D, 3 for T,
4 for Q and the digit itself for 5 and 6 (:func:`cardinal_number`).
"""

from __future__ import annotations

import math
import re

from ..errors import InputError

#: Citation of the two-point form.
KARTON_MARTIN_CITATION = "A. Karton and J. M. L. Martin, Theor. Chem. Acc. 115, 330 (2006)"
#: Citation of the three-point form.
FELLER_CITATION = "D. Feller, J. Chem. Phys. 96, 6104 (1992)"

_CARDINALS = {"d": 2, "t": 3, "q": 4, "5": 5, "6": 6}
_CC_NAME = re.compile(r"^(aug-)?cc-pv([dtq56])z$")


def correlation_consistent(basis_name: str) -> tuple[str, int] | None:
    """Family and cardinal number of a cc-pVXZ or aug-cc-pVXZ name.

    Parameters
    ----------
    basis_name : str
        A basis name in any letter case, e.g. ``"aug-cc-pVTZ"``.

    Returns
    -------
    (str, int) or None
        ``("cc-pVXZ", X)`` or ``("aug-cc-pVXZ", X)``; None for any other name.
    """
    match = _CC_NAME.match(basis_name.strip().lower())
    if match is None:
        return None
    family = "aug-cc-pVXZ" if match.group(1) else "cc-pVXZ"
    return family, _CARDINALS[match.group(2)]


def cardinal_number(basis_name: str) -> int | None:
    """Cardinal number X of a cc-pVXZ or aug-cc-pVXZ basis name.

    Parameters
    ----------
    basis_name : str
        E.g. ``"cc-pVDZ"`` (2), ``"aug-cc-pvqz"`` (4), ``"cc-pV5Z"`` (5).

    Returns
    -------
    int or None
        X in 2..6, or None if the name is not a correlation-consistent set.
    """
    found = correlation_consistent(basis_name)
    return None if found is None else found[1]


def _karton_martin_shape(x: float) -> float:
    return (x + 1.0) * math.exp(-9.0 * math.sqrt(x))


def karton_martin_two_point(e_x: float, e_y: float, x: float, y: float) -> float:
    """Two-point Hartree-Fock basis-limit energy.

    Solves E(X) = E_CBS + A (X + 1) exp(-9 sqrt(X)) through (x, e_x) and
    (y, e_y) (Karton and Martin 2006).

    Parameters
    ----------
    e_x, e_y : float
        Energies in hartree with cardinal numbers ``x`` and ``y``.
    x, y : float
        Cardinal numbers, positive and different.

    Returns
    -------
    float
        E_CBS in hartree.

    Raises
    ------
    InputError
        If the cardinal numbers are equal or not positive.
    """
    if x <= 0 or y <= 0 or x == y:
        raise InputError(f"two-point extrapolation needs two different positive cardinal numbers, got {x} and {y}")
    fx, fy = _karton_martin_shape(x), _karton_martin_shape(y)
    return (e_y * fx - e_x * fy) / (fx - fy)


def _decay_rate(r: float, h1: float, h2: float) -> float:
    """C > 0 with (1 - exp(-C h2)) / (exp(C h1) - 1) = r, for 0 < r < h2/h1."""

    def mismatch(c: float) -> float:
        return -math.expm1(-c * h2) / math.expm1(c * h1) - r

    # mismatch decreases from h2/h1 - r (C -> 0) to -r (C -> inf).
    high = 1.0
    while mismatch(high) > 0.0:
        high *= 2.0
    from scipy.optimize import brentq  # lazy: only this solve needs it, not every run's start-up

    return brentq(mismatch, 1e-12, high, xtol=1e-15, rtol=1e-15, maxiter=500)


def feller_three_point(e1: float, e2: float, e3: float, x1: float, x2: float, x3: float) -> float:
    """Three-point exponential basis-limit energy.

    Solves E(X) = E_CBS + B exp(-C X) exactly through three points (Feller
    1992). For equally spaced X (e.g. consecutive cardinal numbers) the
    closed form E_CBS = (e1 e3 - e2²) / (e1 + e3 - 2 e2) applies; otherwise C
    is found by a bracketed root search.

    Parameters
    ----------
    e1, e2, e3 : float
        Energies in hartree at cardinal numbers x1 < x2 < x3.
    x1, x2, x3 : float
        Cardinal numbers, strictly increasing.

    Returns
    -------
    float
        E_CBS in hartree.

    Raises
    ------
    InputError
        If the X are not increasing, or the energies do not converge
        monotonically (the steps change sign, or do not shrink fast enough
        for a decaying exponential), so that no C > 0 exists.
    """
    if not x1 < x2 < x3:
        raise InputError(f"three-point extrapolation needs increasing cardinal numbers, got {x1}, {x2}, {x3}")
    d1, d2 = e1 - e2, e2 - e3
    h1, h2 = x2 - x1, x3 - x2
    ratio = d2 / d1 if d1 != 0.0 else math.nan
    # A decaying exponential needs same-sign steps with d2/d1 < h2/h1 (the
    # limit of the step ratio as C -> 0).
    if not (d1 * d2 > 0.0 and ratio < h2 / h1):
        raise InputError(
            f"energies {e1:.10f}, {e2:.10f}, {e3:.10f} Eh do not converge monotonically with X; "
            "the exponential form has no solution"
        )
    if math.isclose(h1, h2, rel_tol=1e-12):
        return (e1 * e3 - e2 * e2) / (e1 + e3 - 2.0 * e2)
    c = _decay_rate(ratio, h1, h2)
    # e3 - E_CBS = B exp(-C x3) and d2 = B exp(-C x3) (exp(C h2) - 1).
    return e3 - d2 / math.expm1(c * h2)


__all__ = [
    "KARTON_MARTIN_CITATION",
    "FELLER_CITATION",
    "cardinal_number",
    "correlation_consistent",
    "karton_martin_two_point",
    "feller_three_point",
]
