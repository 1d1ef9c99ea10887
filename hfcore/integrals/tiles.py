"""The tile generator: blocks of (bra pair | ket pair) electron-repulsion integrals.

Every two-electron pass of hfcore (the store, the direct J/K builder and the
three-centre integrals of density fitting) computes its integrals here, in
tiles, and differs only in what it does with each tile.

Contract
--------
Inputs
    Two lists of :class:`PairBatch` (a bra list and a ket list; one list for
    a pass over the unique pairs of pairs). A batch holds ``n`` rows
    ("pairs"), each with ``nprim`` primitive pairs (exponent sums ``p``,
    product centres ``P``) and ``nf`` pair functions. Its folded Hermite
    coefficients ``e[row, prim, h, f]`` carry everything but the Hermite
    integrals: contraction coefficients, primitive and component norms (or
    the spherical transform), exp(-mu |A-B|^2) and the factor 1/p. ``q`` is
    each row's Schwarz bound; rows must be sorted by decreasing ``q`` (the
    tiles stop at the first row that fails the screening). ``pidx`` labels
    the pair functions (the packed function-pair index for orbital pairs;
    any integer label otherwise). Call :meth:`PairBatch.finish` once the
    rows are in their final order.

Output
    :func:`tile_integrals` returns, for bra rows ``brows`` and ket rows
    ``krows``, the contracted integrals as one array of shape
    ``(nb, fb, nk * fk)``: element ``[b, f, k * fk + g]`` is
    (bra row b, function f | ket row k, function g) in hartree.
    :func:`iter_tiles` yields the :class:`Tile` records of a whole pass in a
    fixed order, already screened by the Schwarz bound and with the roles of
    bra and ket chosen per batch pair to keep the work small (so a tile's
    ``bra`` may come from either list: tell them apart by identity).

Three-centre integrals
    (μν|P) is a tile whose ket "pair" is the auxiliary shell P with a unit s
    function of exponent 0: p = the exponents of P, P = its centre,
    exp(-mu |A-B|^2) = 1, so ``e`` holds the one-centre Hermite coefficients
    of P's contracted functions (:func:`hfcore.integrals.eri_pairs.shell_batches`
    builds such batches). Two-centre integrals (P|Q) are tiles of two such
    batches.

Inside a tile
-------------
For all primitive quartets at once: Boys function, Hermite integrals
R_{tuv}(alpha, P-Q) by the downward recursion on (t, u, v), then

* one gather R[h_bra + h_ket] into G[k, (j, h_ket), (h_bra, b, i)],
* ket side: X[k] = E_ket[k] @ G[k] (BLAS, sum over ket primitives j and h_ket),
* bra side: out[b] = E_bra[b] @ Y[b] (BLAS, sum over bra primitives i and h_bra).

Tiles hold about 4k primitive quartets (and at most 64k Hermite integrals,
so a tile stays in cache), ``scale`` times more when asked.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np

from .boys import boys
from .hermite import hermite_r, hermite_signs, n_hermite, sum_index

_ERI_CONST = 2.0 * np.pi**2.5
_TILE_QUARTETS = 1 << 12
_TILE_ELEMENTS = 1 << 16


@dataclass
class PairBatch:
    """Rows of primitive pairs of one shape with folded Hermite coefficients.

    Attributes
    ----------
    L : int
        Highest total angular momentum of the pair functions.
    p : ndarray, shape (n, nprim)
        Exponent sums (bohr⁻²).
    P : ndarray, shape (3, n, nprim)
        Product centres (bohr).
    e : ndarray, shape (n, nprim, n_hermite(L), nf)
        Folded Hermite coefficients (see the module contract).
    pidx : ndarray of int, shape (n, nf)
        Label of every pair function.
    q : ndarray, shape (n,)
        Schwarz bound of every row (hartree^{1/2}), decreasing.
    e_bra, e_ket : ndarray
        Set by :meth:`finish`: ``e`` as (n, nf, nH * nprim) ordered
        (hermite, primitive), and as (n, nf, nprim * nH) ordered
        (primitive, hermite) with the (-1)^{t+u+v} sign folded in.
    tri : ndarray of int, shape (n, nf)
        Set by :meth:`finish`: pidx (pidx + 1) / 2.
    """

    L: int
    p: np.ndarray
    P: np.ndarray
    e: np.ndarray
    pidx: np.ndarray
    q: np.ndarray = field(default=None)
    e_bra: np.ndarray = field(default=None)
    e_ket: np.ndarray = field(default=None)
    tri: np.ndarray = field(default=None)

    @property
    def n(self) -> int:
        return int(self.p.shape[0])

    @property
    def nprim(self) -> int:
        return int(self.p.shape[1])

    @property
    def nf(self) -> int:
        return int(self.e.shape[3])

    def finish(self) -> None:
        """Lay out the coefficients for :func:`tile_integrals`; call once rows are final."""
        nh = self.e.shape[2]
        self.e_bra = np.ascontiguousarray(self.e.transpose(0, 3, 2, 1).reshape(self.n, self.nf, nh * self.nprim))
        signed = self.e * hermite_signs(self.L)[None, None, :, None]
        self.e_ket = np.ascontiguousarray(signed.transpose(0, 3, 1, 2).reshape(self.n, self.nf, self.nprim * nh))
        self.tri = self.pidx * (self.pidx + 1) // 2


def hermite_block(L: int, p: np.ndarray, q: np.ndarray, pq: np.ndarray) -> np.ndarray:
    """R_{tuv} with the ERI prefactor for broadcastable exponent arrays; shape (nH, N).

    ``p + q`` must broadcast to the full quartet shape of ``pq[0]``.
    """
    pq_sum = p + q
    alpha = (p * q / pq_sum).reshape(-1)
    pqf = pq.reshape(3, -1)
    t = alpha * np.einsum("kn,kn->n", pqf, pqf)
    base = boys(L, t)
    # Row m gets 2 pi^{5/2} / sqrt(p+q) * (-2 alpha)^m, built as a running product.
    fac = _ERI_CONST / np.sqrt(pq_sum.reshape(-1))
    base[0] *= fac
    m2a = -2.0 * alpha
    for m in range(1, L + 1):
        fac *= m2a
        base[m] *= fac
    return hermite_r(L, pqf, base)


def tile_integrals(
    bra: PairBatch, brows: slice | np.ndarray, ket: PairBatch, krows: slice | np.ndarray
) -> np.ndarray:
    """Contracted integrals of a tile of bra and ket rows (slices or index arrays).

    Returns
    -------
    ndarray, shape (nb, fb, nk * fk)
        Element [b, f, k * fk + g] is (bra row b, function f | ket row k, function g).
    """
    L = bra.L + ket.L
    p = bra.p[brows]  # (nb, ip)
    q = ket.p[krows]  # (nk, jq)
    nb, ip = p.shape
    nk, jq = q.shape
    nbi = nb * ip
    nhb = n_hermite(bra.L)
    # Quartet batch order (k, j, b, i).
    pq = bra.P[:, brows][:, None, None, :, :] - ket.P[:, krows][:, :, :, None, None]
    R = hermite_block(L, p[None, None], q[:, :, None, None], pq)
    # G[k, (j, h_ket), (h_bra, b, i)] = R[h_bra + h_ket] of the quartet (k, j, b, i);
    # for an s-type ket (h_ket = 0 only) this is a plain transpose.
    g = R.reshape(R.shape[0], nk * jq, nbi).transpose(1, 0, 2)
    if ket.L:
        g = g[:, sum_index(ket.L, bra.L)]
    g = g.reshape(nk, -1, nhb * nbi)
    x = np.matmul(ket.e_ket[krows], g)  # (nk, fk, nhb * nb * ip)
    y = x.reshape(nk * ket.nf, nhb, nb, ip).transpose(2, 1, 3, 0).reshape(nb, nhb * ip, nk * ket.nf)
    return np.matmul(bra.e_bra[brows], y)  # (nb, fb, nk * fk)


def tile_cost(bra: PairBatch, ket: PairBatch) -> float:
    """Relative cost of a tile with these roles (ket-side matmul plus the bra-side transpose)."""
    return ket.nf * n_hermite(bra.L) * (n_hermite(ket.L) + 1.0 / ket.nprim)


def chunks(n: int, size: int) -> list[slice]:
    """Consecutive row ranges of at most ``size`` rows covering ``range(n)``."""
    return [slice(s, min(s + size, n)) for s in range(0, n, size)]


def tile_sizes(a: PairBatch, b: PairBatch, scale: int = 1) -> tuple[int, int]:
    """Rows of ``a`` and of ``b`` per tile: about ``scale`` x 4k quartets and 64k Hermite integrals."""
    per = a.nprim * b.nprim
    target = max(1, scale * min(_TILE_QUARTETS, _TILE_ELEMENTS // n_hermite(a.L + b.L)) // per)
    na = max(1, min(a.n, int(np.sqrt(target))))
    nb = max(1, min(b.n, target // na))
    return na, nb


@dataclass(frozen=True)
class Tile:
    """One block of a pass: bra rows ``brows`` of ``bra`` against ket rows ``krows`` of ``ket``.

    Attributes
    ----------
    bra, ket : PairBatch
    brows, krows : slice
    diagonal : bool
        Both sides are the same rows of the same batch, so the tile holds
        every integral of that block twice (once in each order).
    """

    bra: PairBatch
    brows: slice
    ket: PairBatch
    krows: slice
    diagonal: bool

    @property
    def quartets(self) -> int:
        """Primitive quartets the tile computes."""
        nb = self.brows.stop - self.brows.start
        nk = self.krows.stop - self.krows.start
        return nb * nk * self.bra.nprim * self.ket.nprim

    def integrals(self) -> np.ndarray:
        """The tile's integrals, shape (nb, fb, nk * fk) (see :func:`tile_integrals`)."""
        return tile_integrals(self.bra, self.brows, self.ket, self.krows)


def batch_pairs(
    first: Sequence[PairBatch], second: Sequence[PairBatch] | None = None
) -> list[tuple[PairBatch, PairBatch]]:
    """The batch pairs of a pass, in pass order.

    With one list, the unique pairs (a, b) with b at or before a; with two,
    every (a from ``first``, b from ``second``).
    """
    if second is None:
        return [(a, b) for ia, a in enumerate(first) for b in first[: ia + 1]]
    return [(a, b) for a in first for b in second]


def iter_tiles(
    g1: PairBatch, g2: PairBatch, threshold: float, *, scale: int = 1, trim_diagonal: bool = True
) -> Iterator[Tile]:
    """The tiles of one batch pair that pass the Schwarz test, in a fixed order.

    Parameters
    ----------
    g1, g2 : PairBatch
        The two batches; the same object for a batch paired with itself,
        in which case only the triangle of row blocks is visited.
    threshold : float
        Tiles (and ket rows at a tile's end) with Q_bra Q_ket below it are
        skipped (hartree).
    scale : int
        Tiles hold this many times the default number of quartets.
    trim_diagonal : bool
        Whether diagonal tiles may drop their trailing ket rows too; a pass
        that relies on each pair appearing in both orders there says False.

    Yields
    ------
    Tile
    """
    same = g1 is g2
    bra, ket = (g1, g2) if tile_cost(g1, g2) <= tile_cost(g2, g1) else (g2, g1)
    nb_size, nk_size = tile_sizes(bra, ket, scale)
    if same:
        nb_size = nk_size = min(nb_size, nk_size)
    for ib, brows in enumerate(chunks(bra.n, nb_size)):
        qb = bra.q[brows.start]
        for ik, krows in enumerate(chunks(ket.n, nk_size)):
            # Rows are sorted by decreasing bound, so the first failing ket ends the row.
            if (same and ik > ib) or qb * ket.q[krows.start] < threshold:
                break
            diagonal = same and ik == ib
            if trim_diagonal or not diagonal:
                count = int(np.sum(qb * ket.q[krows] >= threshold))
                krows = slice(krows.start, krows.start + max(count, 1))
            yield Tile(bra, brows, ket, krows, diagonal)


__all__ = ["PairBatch", "Tile", "tile_integrals", "hermite_block", "iter_tiles", "batch_pairs", "tile_sizes"]
