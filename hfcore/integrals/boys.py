"""The Boys function F_m(T) = ∫_0^1 t^{2m} exp(-T t²) dt, vectorised.

Scheme
------
* ``T < T_switch(m_max)``: a fifth-order Taylor expansion of F_{m_max}
  about the nearest point of a grid with spacing 1/32 (the derivative is
  dF_m/dT = -F_{m+1}, so the expansion needs only tabulated F values; the
  truncation error is below (1/64)^6/6! ≈ 2e-14 relative), then
  downward recursion F_m = (2T F_{m+1} + e^{-T}) / (2m+1), which is stable
  because every term is positive.
* ``T > T_switch(m_max)``: the asymptotic form
  F_m(T) = (2m-1)!! / 2^{m+1} sqrt(pi / T^{2m+1}), whose relative error
  Γ(m+½, T)/Γ(m+½) is below 1e-16 there.

The table is built once at import from the convergent series
F_m(T) = e^{-T} Σ_k (2T)^k / ((2m+1)(2m+3)...(2m+2k+1)) at the highest order
and downward recursion, so it is accurate to a few ulp.
"""

from __future__ import annotations

import math

import numpy as np

#: Highest order the table supports.
M_MAX: int = 32
_TAYLOR_TERMS = 6
_STEP = 1.0 / 32.0


def _series_table(m: int, grid: np.ndarray) -> np.ndarray:
    """F_m on the grid by the positive series (accurate, slow, import-time only)."""
    n_terms = int(2 * grid.max()) + 200
    total = np.zeros_like(grid)
    term = np.full_like(grid, 1.0 / (2 * m + 1))
    for k in range(n_terms):
        total += term
        term = term * (2.0 * grid) / (2 * m + 2 * k + 3)
    return np.exp(-grid) * total


def _build_table(t_max: float) -> np.ndarray:
    grid = np.arange(0.0, t_max + 2 * _STEP, _STEP)
    top = M_MAX + _TAYLOR_TERMS
    table = np.empty((grid.size, top + 1))
    table[:, top] = _series_table(top, grid)
    expm = np.exp(-grid)
    for m in range(top - 1, -1, -1):
        table[:, m] = (2.0 * grid * table[:, m + 1] + expm) / (2 * m + 1)
    return np.ascontiguousarray(table)


def _upper_gamma_half_orders(t: np.ndarray) -> np.ndarray:
    """Q(m + ½, t) = Γ(m + ½, t) / Γ(m + ½) for m = 0..M_MAX, shape (M_MAX + 1, t.size).

    Q(½, t) = erfc(√t) and Q(a + 1, t) = Q(a, t) + t^a e^{-t} / Γ(a + 1)
    (exact properties), every term positive, so the upward recursion is
    stable; the closed form spares importing scipy.special at start-up.
    """
    q = np.empty((M_MAX + 1, t.size))
    q[0] = [math.erfc(math.sqrt(x)) for x in t]
    for m in range(M_MAX):
        a = m + 0.5
        q[m + 1] = q[m] + np.exp(a * np.log(t) - t - math.lgamma(a + 1.0))
    return q


def _switch_points() -> np.ndarray:
    """Smallest integer T per order above which the asymptotic form is exact to 1e-16."""
    t = np.arange(1.0, 400.0)
    return np.argmax(_upper_gamma_half_orders(t) < 1e-17, axis=1) + 1.0


def _taylor_tables(table: np.ndarray) -> np.ndarray:
    """Per order m, the Taylor coefficients F_{m+k}(t0) (-1)^k / k!, shape (M_MAX+1, K, ngrid)."""
    k = np.arange(_TAYLOR_TERMS)
    sign_fact = np.array([(-1.0) ** i / math.factorial(i) for i in k])
    cols = np.arange(M_MAX + 1)[:, None] + k[None, :]
    return np.ascontiguousarray(table[:, cols].transpose(1, 2, 0) * sign_fact[None, :, None])


_T_SWITCH = _switch_points()
_N_GRID_MAX = int(_T_SWITCH.max() / _STEP)
_COEFFS = _taylor_tables(_build_table(float(_T_SWITCH.max())))
_ASYM = np.array([math.prod(range(2 * m - 1, 0, -2)) / 2.0 ** (m + 1) * math.sqrt(math.pi) for m in range(M_MAX + 1)])


def boys(m_max: int, T: np.ndarray) -> np.ndarray:
    """Boys function F_m(T) for m = 0..m_max.

    Parameters
    ----------
    m_max : int
        Highest order, 0 <= m_max <= :data:`M_MAX`.
    T : array_like, any shape
        Arguments, all >= 0 (dimensionless).

    Returns
    -------
    ndarray, shape (m_max + 1, *T.shape)
        ``out[m]`` is F_m(T); relative error below 1e-13.
    """
    if not 0 <= m_max <= M_MAX:
        raise ValueError(f"Boys function order {m_max} outside 0..{M_MAX}")
    t = np.asarray(T, dtype=np.float64)
    shape = t.shape
    t = t.reshape(-1)
    out = np.empty((m_max + 1, t.size))
    t_switch = _T_SWITCH[m_max]
    # Nearest grid point and the offset from it (plain indexing and in-place
    # steps: this runs once per tile on a few thousand quartets, where each
    # call's fixed cost counts).
    x = np.minimum(t, t_switch)
    x *= 1.0 / _STEP
    grid = np.rint(x)
    idx = grid.astype(np.intp)
    x -= grid
    x *= _STEP
    coeffs = _COEFFS[m_max]
    top = out[m_max]
    top[...] = coeffs[-1][idx]
    for k in range(_TAYLOR_TERMS - 2, -1, -1):
        top *= x
        top += coeffs[k][idx]
    large = t > t_switch
    if large.any():
        # T^{-m-1/2} by repeated multiplication (several times cheaper than a
        # general power), for every element and kept where T is large: cheaper
        # than gathering and scattering the large ones.
        inv = np.maximum(t, t_switch)
        np.divide(1.0, inv, out=inv)
        val = np.sqrt(inv)
        val *= _ASYM[m_max]
        for _ in range(m_max):
            val *= inv
        np.copyto(top, val, where=large)
    if m_max:
        expt = np.exp(-t)
        two_t = 2.0 * t
        for m in range(m_max - 1, -1, -1):
            row = out[m]
            np.multiply(two_t, out[m + 1], out=row)
            row += expt
            row *= 1.0 / (2 * m + 1)
    return out.reshape((m_max + 1,) + shape)


__all__ = ["boys", "M_MAX"]
