"""The direct pass: J and K contracted from each tile as it is computed, nothing stored.

The tiles (:mod:`hfcore.integrals.tiles`) are listed once; every build cuts
them into fixed work units, runs the units on several threads or, where
``os.fork`` exists, on a team of forked worker processes kept for the
engine's life (:mod:`hfcore._parallel`), each unit into its own partial J
and K, and adds the partial sums in unit order, so J and K are the same
bits on any number of threads or processes.
"""

from __future__ import annotations

import threading
import weakref
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from ..basis.shells import BasisSet
from .eri_pairs import function_families, prepare_pairs, screening_threshold
from .._parallel import WorkerTeam, can_fork, ordered_map, resolve_threads, shared_zeros, work_units
from .tiles import PairBatch, Tile, batch_pairs, iter_tiles, tile_integrals

#: Direct tiles are this many times larger: each carries a fixed cost of
#: contraction steps, and larger tiles measured 15-20 % faster per pass
#: (benzene, 6-31G*).
_DIRECT_TILE_SCALE = 4
#: A build's tiles are cut into about this many work units for the thread
#: pool (fixed, so the sums are the same for any thread count) ...
_UNITS = 128
#: ... each of at least this many primitive quartets.
_MIN_UNIT_QUARTETS = 1 << 16
#: Densities a build on the worker processes takes at once (α and β); more go to threads.
_TEAM_DENSITIES = 2
#: Shared memory for the partial sums of one round of units on the worker processes (bytes).
_TEAM_ROUND_BYTES = 64 << 20


@dataclass(frozen=True)
class DirectPassStats:
    """Work of one direct J/K pass, counted in primitive quartets.

    Attributes
    ----------
    quartets_schwarz : int
        Primitive quartets in tiles that pass the plain Schwarz test (what a
        stored pass computes).
    quartets_computed : int
        Those of them in tiles that also pass the density-weighted test.
    """

    quartets_schwarz: int
    quartets_computed: int

    @property
    def skipped_fraction(self) -> float:
        """Share of the Schwarz-surviving quartets the density weighting skipped."""
        if self.quartets_schwarz == 0:
            return 0.0
        return 1.0 - self.quartets_computed / self.quartets_schwarz


@dataclass
class _DirectGroup:
    """Index data of one pair group for the contraction into J and K."""

    pairs: PairBatch
    hi: np.ndarray  # (n, nf) larger function index of each pair function
    lo: np.ndarray  # (n, nf) smaller function index
    weight: np.ndarray  # (n, nf) 1/2 for functions of a shell with itself, else 1
    fam_a: np.ndarray  # (n,) family of the first function
    fam_b: np.ndarray  # (n,) family of the second function


class _Accumulator:
    """Scatter-adds into J (packed pairs) and the half-exchange N, flushed in batches.

    One bincount per batch instead of one per tile keeps the cost of the
    nbf^2-long output arrays off every small tile; tiles write their
    exchange terms straight into reused buffers.
    """

    _BATCH = 1 << 21
    _buffers = threading.local()

    def __init__(self, n: int, m: int = 1) -> None:
        self.n = n
        self.j = np.zeros(n * (n + 1) // 2)
        self.k = np.zeros(m * n * n)
        self._jparts: list[tuple[np.ndarray, np.ndarray]] = []
        # Each pool thread keeps one pair of scatter buffers for all its work units.
        cache = self._buffers
        if not hasattr(cache, "index"):
            cache.index = np.empty(self._BATCH, dtype=np.intp)
            cache.value = np.empty(self._BATCH)
        self._kindex, self._kvalue = cache.index, cache.value
        self._used = 0

    def add_j(self, index: np.ndarray, value: np.ndarray) -> None:
        self._jparts.append((index, value))

    def k_slot(self, rows: int, cols: int) -> tuple[np.ndarray, np.ndarray]:
        """Index and value buffers, shape (rows, cols) each, for exchange terms to add."""
        size = rows * cols
        if self._used + size > self._kindex.size:
            self.flush()
            if size > self._kindex.size:
                self._kindex = self._buffers.index = np.empty(size, dtype=np.intp)
                self._kvalue = self._buffers.value = np.empty(size)
        start, self._used = self._used, self._used + size
        window = slice(start, self._used)
        return self._kindex[window].reshape(rows, cols), self._kvalue[window].reshape(rows, cols)

    def flush(self) -> None:
        if self._jparts:
            index = np.concatenate([p[0] for p in self._jparts])
            value = np.concatenate([p[1] for p in self._jparts])
            self.j += np.bincount(index, value, minlength=self.j.size)
            self._jparts.clear()
        if self._used:
            self.k += np.bincount(self._kindex[: self._used], self._kvalue[: self._used], minlength=self.k.size)
            self._used = 0

    def partial(self) -> tuple[np.ndarray, np.ndarray]:
        """The sums so far: J over packed pairs, shape (npair,), and N, shape (m * nbf * nbf,)."""
        self.flush()
        return self.j, self.k


def _symmetrised(j: np.ndarray, half: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """(J, K), each symmetric (nbf, nbf), from the packed J sums and the half-exchange N."""
    m = np.zeros((n, n))
    first, second = np.tril_indices(n)
    m[first, second] = j
    half = half.reshape(n, n)
    return m + m.T, half + half.T


class DirectERI:
    """J and K by recomputing the screened integrals on every call (direct mode).

    The integrals come in the same tiles as :func:`compute_eri` builds, each
    contracted with the density at once and dropped, so memory stays at a
    few nbf^2 arrays plus a 32 MiB scatter buffer per thread. Every unique
    integral is used once with all eight of its index permutations. A quartet counts as negligible when its Schwarz
    bound Q_ab Q_cd times the largest density element over the six
    shell-family blocks it touches (ab, cd, ac, ad, bc, bd) is below the
    threshold; tiles shrink to the bra and ket rows that hold a quartet
    that is not, which makes builds from small density changes cheap.

    Parameters
    ----------
    basis : BasisSet
    threshold : float
        Screening threshold (hartree), as in :func:`compute_eri`.
    threads : int
        Threads the tiles of a build are spread over (see
        :mod:`hfcore._parallel`): where ``os.fork`` exists, ``threads - 1``
        worker processes beside this one, forked at the first build and
        kept until the engine is collected; J and K are the same bits for
        any number.

    Attributes
    ----------
    last_stats : DirectPassStats or None
        Work of the latest :meth:`jk` call.
    """

    def __init__(self, basis: BasisSet, *, threshold: float = 1e-12, threads: int = 1) -> None:
        threshold = screening_threshold(threshold)
        self.n_functions = basis.n_functions
        self.threshold = float(threshold)
        self.threads = resolve_threads(threads)
        self._families = function_families(basis)
        shell_of = np.repeat(np.arange(basis.n_shells), [s.n_functions(basis.spherical) for s in basis.shells])
        first, second = np.tril_indices(basis.n_functions)
        self._groups: list[_DirectGroup] = []
        for pairs in prepare_pairs(basis, threshold):
            hi, lo = first[pairs.pidx], second[pairs.pidx]
            weight = np.where(shell_of[hi] == shell_of[lo], 0.5, 1.0)
            fam = self._families
            self._groups.append(_DirectGroup(pairs, hi, lo, weight, fam[hi[:, 0]], fam[lo[:, 0]]))
        self._group_of = {id(g.pairs): g for g in self._groups}
        # A diagonal tile must keep every row on both sides so each bra-ket
        # pair appears in both orders and the 1/2 weight holds.
        self._tiles = [
            tile
            for g1, g2 in batch_pairs([g.pairs for g in self._groups])
            for tile in iter_tiles(g1, g2, self.threshold, scale=_DIRECT_TILE_SCALE, trim_diagonal=False)
        ]
        weights = [tile.quartets for tile in self._tiles]
        self._units = work_units(weights, max(sum(weights) // _UNITS, _MIN_UNIT_QUARTETS))
        self.last_stats: DirectPassStats | None = None

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coulomb and exchange matrices of a symmetric density.

        Parameters
        ----------
        density : ndarray, shape (nbf, nbf)
            Symmetric matrix D (a full density or a density change).

        Returns
        -------
        J, K : ndarray, shape (nbf, nbf)
            J_μν = Σ (μν|λσ) D_λσ and K_μν = Σ (μλ|νσ) D_λσ.
        """
        d = np.ascontiguousarray(density, dtype=np.float64)
        j, k = self._build(d, d[None])
        return j, k[0]

    def jk_multi(self, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coulomb matrix of the sum and exchange matrix of each density, from one integral pass.

        Parameters
        ----------
        densities : ndarray, shape (m, nbf, nbf)
            Symmetric matrices (full densities or density changes).

        Returns
        -------
        J : ndarray, shape (nbf, nbf)
            Of ``densities.sum(axis=0)``.
        K : ndarray, shape (m, nbf, nbf)
            Of each density. A quartet is screened with the largest
            |D| of any of the densities.
        """
        stack = np.ascontiguousarray(densities, dtype=np.float64)
        return self._build(np.ascontiguousarray(stack.sum(axis=0)), stack)

    def _build(self, total: np.ndarray, stack: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """J of ``total`` and K of each matrix of ``stack`` (m, nbf, nbf), in one pass."""
        absd = np.abs(stack[0]) if stack.shape[0] == 1 else np.maximum(np.abs(total), np.abs(stack).max(axis=0))
        block_max = _block_max(absd, self._families)
        dmax = float(block_max.max()) if block_max.size else 0.0
        n = self.n_functions
        m = stack.shape[0]
        j, half = np.zeros(n * (n + 1) // 2), np.zeros(m * n * n)
        counts = np.zeros(2, dtype=np.int64)

        def run(unit: slice) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
            return self._unit(self._tiles[unit], total, stack, block_max, dmax)

        if self.threads > 1 and can_fork() and m <= _TEAM_DENSITIES and len(self._units) > 1:
            # Tiles are many small numpy kernels, held back by the interpreter
            # lock on threads: run them on worker processes instead.
            parts = self._direct_team().build(total, stack, block_max, dmax)
        else:
            parts = ordered_map(run, self._units, self.threads)
        # Partial sums are added in unit order: the same bits for any thread or process count.
        for pj, pk, pc in parts:
            j += pj
            half += pk
            counts += pc
        self.last_stats = DirectPassStats(int(counts[0]), int(counts[1]))
        parts = [_symmetrised(j, half[q * n * n : (q + 1) * n * n], n) for q in range(m)]
        return parts[0][0], np.stack([p[1] for p in parts])

    def _unit(
        self, tiles: list[Tile], d: np.ndarray, stack: np.ndarray, block_max: np.ndarray, dmax: float
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Packed J sums (of ``d``), half-exchange (of each of ``stack``) and quartet counts of one work unit of tiles."""
        return _unit_sums(tiles, self._group_of, self.n_functions, self.threshold, d, stack, block_max, dmax)

    def _direct_team(self) -> _DirectTeam:
        """The engine's worker processes, made on first use and kept until the engine goes."""
        team = getattr(self, "_team", None)
        if team is None or team.size != self.threads:
            if team is not None:
                team.close()
            nfam = int(self._families.max()) + 1 if self._families.size else 0
            team = self._team = _DirectTeam(
                self._tiles, self._units, self._group_of, self.n_functions, nfam, self.threshold, self.threads
            )
            weakref.finalize(self, team.close)
        return team


def _unit_sums(
    tiles: list[Tile], group_of: dict[int, _DirectGroup], n: int, threshold: float, d: np.ndarray, stack: np.ndarray,
    block_max: np.ndarray, dmax: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Packed J sums (of ``d``), half-exchange (of each of ``stack``) and quartet counts of one work unit of tiles."""
    acc = _Accumulator(n, stack.shape[0])
    counts = np.zeros(2, dtype=np.int64)
    for tile in tiles:
        counts[0] += tile.quartets
        if tile.bra.q[tile.brows.start] * tile.ket.q[tile.krows.start] * dmax < threshold:
            continue
        bra, ket = group_of[id(tile.bra)], group_of[id(tile.ket)]
        rows, cols = _significant(bra, tile.brows, ket, tile.krows, block_max, threshold, tile.diagonal)
        if rows.size == 0 or cols.size == 0:
            continue
        counts[1] += rows.size * cols.size * tile.bra.nprim * tile.ket.nprim
        block = tile_integrals(tile.bra, rows, tile.ket, cols)
        _contract(bra, rows, ket, cols, block, 0.5 if tile.diagonal else 1.0, d, stack, acc)
    pj, pk = acc.partial()
    return pj, pk, counts


class _DirectTeam:
    """Worker processes of direct J/K builds over one engine's tiles, with the shared arrays they read and fill.

    The densities of a build go into shared arrays, the units run in
    rounds of at most ``slots`` units (each unit's partial sums into its
    own slot, so the shared memory stays within :data:`_TEAM_ROUND_BYTES`
    however large the basis), and :meth:`build` hands the slots back in
    unit order after each round. It holds the tiles, not the engine, so the
    engine can be collected (and the team closed) as usual.
    """

    def __init__(
        self, tiles: list[Tile], units: list[slice], group_of: dict[int, _DirectGroup], n: int, nfam: int,
        threshold: float, size: int,
    ) -> None:
        npair = n * (n + 1) // 2
        per_slot = 8 * (npair + _TEAM_DENSITIES * n * n + 2)
        self.size = size
        self.n_units = len(units)
        self.slots = max(1, min(self.n_units, _TEAM_ROUND_BYTES // per_slot))
        what = "the direct J/K build's shared arrays"
        self.header = shared_zeros(3, np.int64, what=what)  # first unit of the round, number of densities
        self.dmax = shared_zeros(1, what=what)
        self.total = shared_zeros((n, n), what=what)
        self.stack = shared_zeros((_TEAM_DENSITIES, n, n), what=what)
        self.block_max = shared_zeros((nfam, nfam), what=what)
        self.parts_j = shared_zeros((self.slots, npair), what=what)
        self.parts_k = shared_zeros((self.slots, _TEAM_DENSITIES * n * n), what=what)
        self.parts_c = shared_zeros((self.slots, 2), np.int64, what=what)
        header, dmax_, total, stack, block_max = self.header, self.dmax, self.total, self.stack, self.block_max
        parts_j, parts_k, parts_c = self.parts_j, self.parts_k, self.parts_c

        def work(slot: int) -> None:
            m = int(header[1])
            unit = units[int(header[0]) + slot]
            pj, pk, pc = _unit_sums(tiles[unit], group_of, n, threshold, total, stack[:m], block_max, float(dmax_[0]))
            parts_j[slot], parts_k[slot, : m * n * n], parts_c[slot] = pj, pk, pc

        self._team = WorkerTeam(work, size)

    def build(
        self, total: np.ndarray, stack: np.ndarray, block_max: np.ndarray, dmax: float
    ) -> Iterator[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """The partial sums of every unit, in unit order (views into shared slots, valid until the next item)."""
        m = stack.shape[0]
        n = total.shape[0]
        self.total[...] = total
        self.stack[:m] = stack
        self.block_max[...] = block_max
        self.dmax[0] = dmax
        self.header[1] = m
        for first in range(0, self.n_units, self.slots):
            count = min(self.slots, self.n_units - first)
            self.header[0] = first
            self._team.run(count)
            for slot in range(count):
                yield self.parts_j[slot], self.parts_k[slot, : m * n * n], self.parts_c[slot]

    def close(self) -> None:
        self._team.close()


def _block_max(absd: np.ndarray, families: np.ndarray) -> np.ndarray:
    """Largest |D| element of every family-family block, shape (nfam, nfam)."""
    nfam = int(families.max()) + 1 if families.size else 0
    rows = np.full((nfam, absd.shape[1]), 0.0)
    np.maximum.at(rows, families, absd)
    out = np.full((nfam, nfam), 0.0)
    np.maximum.at(out.T, families, rows.T)
    return out


def _significant(
    bra: _DirectGroup, brows: slice, ket: _DirectGroup, krows: slice, m: np.ndarray, threshold: float, diagonal: bool
) -> tuple[np.ndarray, np.ndarray]:
    """Bra and ket rows of a tile with some Q_ab Q_cd max|D| at or above the threshold.

    The density bound of a quartet takes the largest |D| over the family
    blocks ab, cd, ac, ad, bc, bd, the ones J and K read. In a diagonal tile
    the bound matrix is symmetric and both sides keep the same rows, so
    each bra-ket pair still appears in both orders.
    """
    a, b = bra.fam_a[brows], bra.fam_b[brows]
    c, d = ket.fam_a[krows], ket.fam_b[krows]
    dm = np.maximum(m[a, b][:, None], m[c, d][None, :])
    for x in (a, b):
        dm = np.maximum(dm, np.maximum(m[x][:, c], m[x][:, d]))
    keep = bra.pairs.q[brows][:, None] * ket.pairs.q[krows][None, :] * dm >= threshold
    row_keep, col_keep = keep.any(axis=1), keep.any(axis=0)
    if diagonal:
        row_keep = col_keep = row_keep | col_keep
    return np.flatnonzero(row_keep) + brows.start, np.flatnonzero(col_keep) + krows.start


def _contract(
    bra: _DirectGroup, brows: np.ndarray, ket: _DirectGroup, krows: np.ndarray, block: np.ndarray, scale: float,
    d: np.ndarray, stack: np.ndarray, acc: _Accumulator,
) -> None:
    """Add a tile's integrals, with all eight index permutations, to J and K.

    Each tile value v of (ij|kl) is weighted by 1/2 for a shell paired with
    itself on either side and 1/2 in a diagonal tile, which is exactly one
    over the number of times the tiles hold that integral times the share of
    its eight permutations that coincide. Then J_ij, J_kl get 2 w v D_kl,
    2 w v D_ij and the half-exchange N gets w v D_jl at (i, k) and likewise
    for (j,k), (i,l), (j,l); J and K are the symmetrised sums. J uses ``d``,
    and each matrix of ``stack`` (m, nbf, nbf) gets its own N.
    """
    n = d.shape[0]
    ih, il = bra.hi[brows].ravel(), bra.lo[brows].ravel()
    kh, kl = ket.hi[krows].ravel(), ket.lo[krows].ravel()
    wv = block.reshape(ih.size, kh.size)
    wb, wk = bra.weight[brows].reshape(-1, 1), scale * ket.weight[krows].reshape(1, -1)
    if wb.min() < 1.0 or wk.min() < 1.0:  # weights are 1 or 1/2: most tiles have none below 1
        wv = wv * (wb * wk)
    dflat = d.ravel()
    acc.add_j(bra.pairs.pidx[brows].ravel(), 2.0 * (wv @ dflat[kh * n + kl]))
    acc.add_j(ket.pairs.pidx[krows].ravel(), 2.0 * (dflat[ih * n + il] @ wv))
    # Broadcast index pairs (np.ix_ costs more than the small gathers it feeds).
    rows, cols = {id(ih): ih[:, None], id(il): il[:, None]}, {id(kh): kh[None, :], id(kl): kl[None, :]}
    for q, dq in enumerate(stack):
        for r1, r2 in ((ih, il), (il, ih)):
            r1n = r1[:, None] * n + q * n * n  # density q's half-exchange sits in the q-th nbf² stretch
            for c1, c2 in ((kh, kl), (kl, kh)):
                index, value = acc.k_slot(ih.size, kh.size)
                np.add(r1n, cols[id(c1)], out=index)
                np.multiply(wv, dq[rows[id(r2)], cols[id(c2)]], out=value)



__all__ = ["DirectERI", "DirectPassStats"]
