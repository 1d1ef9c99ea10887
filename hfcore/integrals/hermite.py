"""McMurchie–Davidson building blocks: Hermite expansion (E) and Hermite integral (R) recursions.

All functions work on whole batches of primitive pairs or quartets at once;
the batch axes come last so every recursion step is one numpy operation on
contiguous rows. Hermite indices (t, u, v) are ordered by total degree
t+u+v, then in Cartesian order, so the set with t+u+v <= n is a prefix of
the set for any larger bound (see :func:`hermite_indices`).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from ..basis.components import cartesian_components


@lru_cache(maxsize=None)
def hermite_indices(L: int) -> np.ndarray:
    """Hermite triples (t, u, v) with t+u+v <= L, shape (n_hermite(L), 3)."""
    out = [c for n in range(L + 1) for c in cartesian_components(n)]
    arr = np.array(out, dtype=np.intp).reshape(-1, 3)
    arr.setflags(write=False)
    return arr


def n_hermite(L: int) -> int:
    """Number of Hermite triples with t+u+v <= L."""
    return (L + 1) * (L + 2) * (L + 3) // 6


@lru_cache(maxsize=None)
def _position(L: int) -> dict[tuple[int, int, int], int]:
    return {tuple(int(x) for x in h): i for i, h in enumerate(hermite_indices(L))}


def hermite_e_1d(la: int, lb: int, xpa: np.ndarray, xpb: np.ndarray, inv2p: np.ndarray, e00: np.ndarray) -> np.ndarray:
    """One-dimensional Hermite expansion coefficients E^{ij}_t.

    Parameters
    ----------
    la, lb : int
        Highest powers i and j needed.
    xpa, xpb : ndarray, shape (n,)
        P - A and P - B along one axis (bohr).
    inv2p : ndarray, shape (n,)
        1 / (2p), p the sum of exponents.
    e00 : ndarray, shape (n,)
        E^{00}_0 (the Gaussian product prefactor along this axis).

    Returns
    -------
    ndarray, shape (la+1, lb+1, la+lb+1, n)
    """
    n = xpa.shape[0]
    e = np.zeros((la + 1, lb + 1, la + lb + 2, n))
    e[0, 0, 0] = e00
    for i in range(la):
        prev = e[i, 0]
        cur = e[i + 1, 0]
        for t in range(i + 2):
            val = xpa * prev[t]
            if t:
                val += inv2p * prev[t - 1]
            val += (t + 1) * prev[t + 1]
            cur[t] = val
    for j in range(lb):
        for i in range(la + 1):
            prev = e[i, j]
            cur = e[i, j + 1]
            for t in range(i + j + 2):
                val = xpb * prev[t]
                if t:
                    val += inv2p * prev[t - 1]
                val += (t + 1) * prev[t + 1]
                cur[t] = val
    return e[:, :, : la + lb + 1]


@lru_cache(maxsize=None)
def _e3_tables(la: int, lb: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Flat indices into the 1D tables for each (component a, component b, hermite h)."""
    herm = hermite_indices(la + lb)
    shape = (la + 1, lb + 1, la + lb + 1)
    ca = np.array(cartesian_components(la))
    cb = np.array(cartesian_components(lb))
    idx = []
    for axis in range(3):
        i = ca[:, None, None, axis]
        j = cb[None, :, None, axis]
        t = herm[None, None, :, axis]
        valid = t <= i + j
        flat = np.ravel_multi_index((np.broadcast_to(i, valid.shape), np.broadcast_to(j, valid.shape), np.where(valid, t, 0)), shape)
        # Entries with t > i + j are zero; point them at a zero slot appended at the end.
        flat = np.where(valid, flat, np.prod(shape))
        idx.append(flat.reshape(-1))
    return idx[0], idx[1], idx[2]


def hermite_e(la: int, lb: int, pa: np.ndarray, pb: np.ndarray, p: np.ndarray, kab: np.ndarray) -> np.ndarray:
    """Three-dimensional Hermite coefficients E^{ab}_{tuv} for Cartesian components.

    Parameters
    ----------
    la, lb : int
        Angular momenta.
    pa, pb : ndarray, shape (3, n)
        P - A and P - B (bohr).
    p : ndarray, shape (n,)
        Sum of exponents.
    kab : ndarray, shape (n,)
        exp(-mu |A-B|²) (and any extra per-pair factor).

    Returns
    -------
    ndarray, shape (n_cartesian(la) * n_cartesian(lb), n_hermite(la+lb), n)
        Row-major over (component a, component b).
    """
    n = p.shape[0]
    inv2p = 0.5 / p
    ones = np.ones(n)
    tables = []
    for axis in range(3):
        e1 = hermite_e_1d(la, lb, pa[axis], pb[axis], inv2p, kab if axis == 0 else ones)
        tables.append(np.concatenate([e1.reshape(-1, n), np.zeros((1, n))]))
    ix, iy, iz = _e3_tables(la, lb)
    out = tables[0][ix]
    out *= tables[1][iy]
    out *= tables[2][iz]
    nca = (la + 1) * (la + 2) // 2
    ncb = (lb + 1) * (lb + 2) // 2
    return out.reshape(nca * ncb, n_hermite(la + lb), n)


#: Share of rows with a second recursion term from which a level adds it to every row (measured: from L = 5 on).
_DENSE_SHARE = 0.6


@lru_cache(maxsize=None)
def _r_tables(L: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """For each Hermite triple beyond (0,0,0): the axis it is built along, its two parents and the coefficient."""
    herm = hermite_indices(L)
    pos = _position(L)
    axis = np.empty(len(herm) - 1, dtype=np.intp)
    p1 = np.empty_like(axis)
    p2 = np.empty_like(axis)
    coef = np.empty(len(herm) - 1)
    for k, h in enumerate(herm[1:]):
        d = int(np.flatnonzero(h)[0])
        one = h.copy()
        one[d] -= 1
        two = one.copy()
        two[d] = max(two[d] - 1, 0)
        axis[k] = d
        p1[k] = pos[tuple(int(x) for x in one)]
        p2[k] = pos[tuple(int(x) for x in two)]
        coef[k] = h[d] - 1
    return axis, p1, p2, coef


def hermite_r(L: int, pq: np.ndarray, base: np.ndarray) -> np.ndarray:
    """Hermite Coulomb integrals R_{tuv} for t+u+v <= L.

    Parameters
    ----------
    L : int
        Highest total order.
    pq : ndarray, shape (3, n)
        P - Q (or P - C) in bohr.
    base : ndarray, shape (L+1, n)
        R^{(m)}_{000} = (-2 alpha)^m F_m(alpha |PQ|²) times any common prefactor.

    Returns
    -------
    ndarray, shape (n_hermite(L), n)
    """
    if L == 0:
        return base[:1]
    axis, p1, p2, coef = _r_tables(L)
    # The Hermite list is ordered by degree, so every level uses a prefix of
    # these tables and of the gathered P-Q rows.
    xyz = pq[axis]
    nz_all = np.flatnonzero(coef)
    cur = base[L:L + 1]
    n = base.shape[1]
    for m in range(L - 1, -1, -1):
        size = n_hermite(L - m)
        nxt = np.empty((size, n))
        nxt[0] = base[m]
        body = nxt[1:]
        np.multiply(xyz[: size - 1], cur[p1[: size - 1]], out=body)
        nz = nz_all[nz_all < size - 1]
        if nz.size >= _DENSE_SHARE * (size - 1):
            # Most rows have a second term: adding zeros to the rest is
            # cheaper than gathering and scattering the rows that have one.
            extra = cur[p2[: size - 1]]
            extra *= coef[: size - 1, None]
            body += extra
        elif nz.size:
            extra = cur[p2[nz]]
            extra *= coef[nz, None]
            body[nz] += extra
        cur = nxt
    return cur


@lru_cache(maxsize=None)
def sum_index(lb_total: int, lk_total: int) -> np.ndarray:
    """Position of h_bra + h_ket in the Hermite list of order lb_total + lk_total.

    Returns
    -------
    ndarray, shape (n_hermite(lb_total), n_hermite(lk_total))
    """
    L = lb_total + lk_total
    herm = hermite_indices(L)
    lookup = np.zeros((L + 1,) * 3, dtype=np.intp)
    lookup[herm[:, 0], herm[:, 1], herm[:, 2]] = np.arange(len(herm))
    total = hermite_indices(lb_total)[:, None, :] + hermite_indices(lk_total)[None, :, :]
    out = lookup[total[..., 0], total[..., 1], total[..., 2]]
    out.setflags(write=False)
    return out


@lru_cache(maxsize=None)
def hermite_signs(L: int) -> np.ndarray:
    """(-1)^{t+u+v} for the Hermite list of order L, shape (n_hermite(L),)."""
    out = (-1.0) ** hermite_indices(L).sum(axis=1)
    out.setflags(write=False)
    return out


__all__ = ["hermite_indices", "n_hermite", "hermite_e_1d", "hermite_e", "hermite_r", "sum_index", "hermite_signs"]
