"""One-electron integrals: overlap, kinetic energy, nuclear attraction, multipoles.

Scheme (McMurchie–Davidson): for each group of shell pairs of one shape
(:mod:`hfcore.integrals.pairs`), the one-dimensional Hermite coefficients
E^{ij}_t of every primitive pair are built at once. Overlap, kinetic and
multipole integrals factorise into products of one-dimensional overlaps
S_ij = E^{ij}_0 sqrt(pi/p); the nuclear attraction uses the
three-dimensional E^{ab}_{tuv} and the Hermite Coulomb integrals R_{tuv}.
Contraction coefficients and the Cartesian/spherical transform are applied
once per group on the primitive results.
"""

from __future__ import annotations

from math import comb

import numpy as np
from numpy.typing import ArrayLike

from ..basis.components import cartesian_components
from ..basis.shells import BasisSet
from .boys import boys
from .hermite import hermite_e, hermite_e_1d, hermite_r, n_hermite
from .pairs import PairGroup, group_pairs


def _all_pairs(n_a: int, n_b: int) -> np.ndarray:
    i, j = np.meshgrid(np.arange(n_a), np.arange(n_b), indexing="ij")
    return np.stack([i.ravel(), j.ravel()], axis=1)


def _lower_pairs(n: int) -> np.ndarray:
    i, j = np.tril_indices(n)
    return np.stack([i, j], axis=1)


def _scatter(mat: np.ndarray, group: PairGroup, blocks: np.ndarray, off_a: np.ndarray, off_b: np.ndarray) -> None:
    """Write shell-pair blocks (..., n, nfa, nfb) into matrices (..., nbf_a, nbf_b)."""
    nfa, nfb = blocks.shape[-2:]
    rows = off_a[group.shell_a][:, None, None] + np.arange(nfa)[None, :, None]
    cols = off_b[group.shell_b][:, None, None] + np.arange(nfb)[None, None, :]
    mat[..., rows, cols] = blocks


def _symmetrise_lower(mat: np.ndarray) -> np.ndarray:
    """Fill the upper triangle of (..., n, n) from shell blocks computed for a >= b."""
    lower = np.tril(mat)
    return lower + np.swapaxes(np.tril(mat, -1), -1, -2)


def _overlaps_1d(group: PairGroup, extra_b: int) -> list[np.ndarray]:
    """One-dimensional overlaps S_ij, i <= la, j <= lb + extra_b, per axis: (la+1, lb+extra_b+1, N)."""
    p = group.flat(group.p)
    pa, pb = group.pa(), group.pb()
    inv2p = 0.5 / p
    root = np.sqrt(np.pi / p)
    kab = group.flat(group.kab)
    ones = np.ones_like(p)
    out = []
    for axis in range(3):
        e = hermite_e_1d(group.la, group.lb + extra_b, pa[axis], pb[axis], inv2p, kab if axis == 0 else ones)
        out.append(e[:, :, 0] * root)
    return out


def _cartesian_product(group: PairGroup, factors: list[np.ndarray]) -> np.ndarray:
    """Product over axes of 1D tables (la+1, lb'+1, N) -> (ncart_a, ncart_b, N)."""
    ca = np.array(cartesian_components(group.la))
    cb = np.array(cartesian_components(group.lb))
    out = factors[0][ca[:, None, 0], cb[None, :, 0]]
    for axis in (1, 2):
        out = out * factors[axis][ca[:, None, axis], cb[None, :, axis]]
    return out


def _trim(table: np.ndarray, lb: int) -> np.ndarray:
    return table[:, : lb + 1]


def _kinetic_1d(s: np.ndarray, b: np.ndarray, lb: int) -> np.ndarray:
    """-1/2 d²/dx² acting on the ket: (la+1, lb+1, N) from overlaps up to lb+2."""
    out = np.empty((s.shape[0], lb + 1, s.shape[2]))
    for j in range(lb + 1):
        val = 4.0 * b * b * s[:, j + 2] - 2.0 * b * (2 * j + 1) * s[:, j]
        if j >= 2:
            val += j * (j - 1) * s[:, j - 2]
        out[:, j] = -0.5 * val
    return out


def overlap(basis: BasisSet, other: BasisSet | None = None) -> np.ndarray:
    """Overlap matrix <mu|nu>.

    Parameters
    ----------
    basis : BasisSet
    other : BasisSet, optional
        If given, the cross overlap <mu(basis)|nu(other)>, e.g. to project a
        density from one basis to another.

    Returns
    -------
    ndarray, shape (nbf, nbf) or (nbf, nbf_other)
    """
    if other is None:
        return _one_body(basis, _overlap_block)
    out = np.zeros((basis.n_functions, other.n_functions))
    for group in group_pairs(basis.shells, other.shells, _all_pairs(basis.n_shells, other.n_shells)):
        blocks = group.contract(_overlap_block(group), basis.spherical, other.spherical)
        _scatter(out, group, blocks, basis.shell_offsets, other.shell_offsets)
    return out


def _one_body(basis: BasisSet, kernel, lead: tuple[int, ...] = ()) -> np.ndarray:
    out = np.zeros(lead + (basis.n_functions, basis.n_functions))
    for group in group_pairs(basis.shells, basis.shells, _lower_pairs(basis.n_shells)):
        blocks = group.contract(kernel(group), basis.spherical, basis.spherical)
        _scatter(out, group, blocks, basis.shell_offsets, basis.shell_offsets)
    return np.ascontiguousarray(_symmetrise_lower(out))


def _overlap_block(group: PairGroup) -> np.ndarray:
    return _cartesian_product(group, _overlaps_1d(group, 0))


def _kinetic_block(group: PairGroup) -> np.ndarray:
    s = _overlaps_1d(group, 2)
    b = group.flat(np.broadcast_to(group.exp_b[:, None, :], group.p.shape))
    t = [_kinetic_1d(x, b, group.lb) for x in s]
    s = [_trim(x, group.lb) for x in s]
    return (
        _cartesian_product(group, [t[0], s[1], s[2]])
        + _cartesian_product(group, [s[0], t[1], s[2]])
        + _cartesian_product(group, [s[0], s[1], t[2]])
    )


def kinetic(basis: BasisSet) -> np.ndarray:
    """Kinetic energy matrix <mu| -1/2 ∇² |nu>, shape (nbf, nbf), hartree."""
    return _one_body(basis, _kinetic_block)


def multipole(basis: BasisSet, order: int = 1, origin: ArrayLike = (0.0, 0.0, 0.0)) -> np.ndarray:
    """Cartesian multipole integrals <mu| (x-O_x)^a (y-O_y)^b (z-O_z)^c |nu>, a+b+c = order.

    Parameters
    ----------
    basis : BasisSet
    order : int
        1 for the dipole (x, y, z), 2 for (xx, xy, xz, yy, yz, zz), ...
    origin : array_like, shape (3,)
        Expansion origin O in bohr.

    Returns
    -------
    ndarray, shape (n_cartesian(order), nbf, nbf)
        Components in hfcore's Cartesian order; for order 1, shape (3, nbf, nbf).
    """
    if order < 0:
        raise ValueError("multipole order must be >= 0")
    o = np.asarray(origin, dtype=np.float64).reshape(3)
    powers = cartesian_components(order)

    def kernel(group: PairGroup) -> np.ndarray:
        s = _overlaps_1d(group, order)
        bo = group.center_b - o
        npp = group.p[0].size
        moments = []
        for axis in range(3):
            shift = np.repeat(bo[:, axis], npp)
            per_power = []
            for k in range(order + 1):
                acc = np.zeros((group.la + 1, group.lb + 1, s[axis].shape[2]))
                for n in range(k + 1):
                    # (x - O)^k = sum_n C(k,n) (x - B)^n (B - O)^{k-n}
                    acc += comb(k, n) * shift ** (k - n) * s[axis][:, n : n + group.lb + 1]
                per_power.append(acc)
            moments.append(per_power)
        return np.stack([_cartesian_product(group, [moments[0][a], moments[1][b], moments[2][c]]) for a, b, c in powers])

    return _one_body(basis, kernel, (len(powers),))


def nuclear_attraction(basis: BasisSet, charges: np.ndarray, coordinates: np.ndarray) -> np.ndarray:
    """Electron–nuclear attraction matrix <mu| -Σ_C Z_C / |r - C| |nu>.

    Parameters
    ----------
    basis : BasisSet
    charges : ndarray, shape (ncharge,)
        Point charges Z_C (atomic units; nuclei are positive).
    coordinates : ndarray, shape (ncharge, 3)
        Positions of the charges in bohr.

    Returns
    -------
    ndarray, shape (nbf, nbf), hartree
    """
    z = np.asarray(charges, dtype=np.float64).reshape(-1)
    c = np.asarray(coordinates, dtype=np.float64).reshape(-1, 3)
    return _one_body(basis, lambda g: _nuclear_block(g, z, c))


_CHUNK = 1 << 16


def _nuclear_block(group: PairGroup, z: np.ndarray, c: np.ndarray) -> np.ndarray:
    L = group.la + group.lb
    p = group.flat(group.p)
    P = group.flat(group.P)
    e3 = hermite_e(group.la, group.lb, group.pa(), group.pb(), p, group.flat(group.kab))
    nh = n_hermite(L)
    out = np.empty((e3.shape[0], p.size))
    step = max(1, _CHUNK // max(1, nh * c.shape[0]))
    for start in range(0, p.size, step):
        sl = slice(start, start + step)
        pc = P[:, sl, None] - c.T[:, None, :]
        pp = p[sl, None]
        t = pp * np.sum(pc * pc, axis=0)
        f = boys(L, t)
        scale = (-2.0 * pp) ** np.arange(L + 1)[:, None, None]
        base = f * scale * (-2.0 * np.pi / pp * z[None, :])
        n = pc.shape[1] * pc.shape[2]
        r = hermite_r(L, pc.reshape(3, n), base.reshape(L + 1, n)).reshape(nh, -1, c.shape[0]).sum(axis=2)
        out[:, sl] = np.einsum("fhn,hn->fn", e3[:, :, sl], r)
    return out.reshape((group.la + 1) * (group.la + 2) // 2, (group.lb + 1) * (group.lb + 2) // 2, p.size)


__all__ = ["overlap", "kinetic", "nuclear_attraction", "multipole"]
