"""Three-centre (P|μν) and two-centre (P|Q) Coulomb integrals over a fitting set.

Scheme
------
A fitting function P is a Gaussian "pair" of P with a unit s function of
exponent 0: its product centre is P's centre, its exponent sum P's
exponent, and its Hermite expansion the one-centre E^{l0}_{tuv}. So the
fitting shells become pair groups of the same kind the four-centre passes
use (:mod:`hfcore.integrals.tiles`), and a three-centre integral is a
tile of orbital pairs against fitting "pairs", a two-centre integral a tile
of fitting "pairs" against themselves. The Boys function and Hermite
integrals then go up to l_P + l_μ + l_ν (16 for i fitting functions with h
orbital pairs), which the tables cover (:data:`hfcore.integrals.boys.M_MAX`).

Storage
-------
(P|μν) is held as an array of shape (naux, npair), npair = nbf(nbf+1)/2,
column μ(μ+1)/2 + ν for μ >= ν: 8 bytes per fitting function and orbital
pair. :class:`ThreeCenterEngine` computes it whole or in blocks of fitting
functions, so a fitted J/K build can recompute it block by block when the
whole does not fit in memory. Orbital pairs come with the Schwarz bounds of
the four-centre passes; a tile is skipped when Q_μν (P|P)^{1/2} is below
the threshold.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np

from ..basis.shells import BasisSet
from .eri_pairs import prepare_pairs, screening_threshold, shell_batches
from .hermite import n_hermite
from .._memory import allocate
from .._parallel import can_fork, forked_units, ordered_map, resolve_threads, work_units
from .tiles import PairBatch, Tile, batch_pairs, chunks, iter_tiles, tile_cost, tile_integrals, tile_sizes

#: A pass is cut into about this many work units for the thread pool (fixed,
#: so the units, and every integral, are the same for any thread count).
_UNITS = 64
#: ... each of at least this much work (primitive quartets times Hermite
#: integrals), so that small blocks are not cut into units whose Python
#: overhead, serialised by the interpreter lock, outweighs their numpy work.
_MIN_UNIT_WORK = 1 << 20

#: Fitting functions per block handed out by :meth:`ThreeCenterEngine.blocks`
#: when no smaller size is asked for.
DEFAULT_BLOCK_FUNCTIONS = 256


@dataclass(frozen=True)
class _Piece:
    """Rows of one fitting group that belong to a block."""

    group: int
    rows: slice


def _run_tiles(tasks: list[Callable[[], None]], weights: list[int], threads: int) -> None:
    """Run tile tasks (each writes its own disjoint part of an output) on the pool.

    The units depend only on the weights, and every integral is computed by
    one tile alone, so the output holds the same bits for any thread count.
    """
    total = sum(weights)
    units = work_units(weights, max(total // _UNITS, _MIN_UNIT_WORK, 1))

    def run(unit: slice) -> None:
        for task in tasks[unit]:
            task()

    if _forked(threads):  # the outputs are in shared memory (_zeros)
        forked_units(lambda u: run(units[u]), len(units), threads)
        return
    for _ in ordered_map(run, units, threads):
        pass


def _forked(threads: int) -> bool:
    return threads > 1 and can_fork()


def _zeros(shape: tuple[int, ...], threads: int, what: str = "the three-centre integrals") -> np.ndarray:
    """An output of :func:`_run_tiles`: in shared memory when the tiles run on worker processes."""
    return allocate(what, shape, shared=_forked(threads))


def two_center_integrals(aux: BasisSet) -> np.ndarray:
    """The Coulomb metric (P|Q) of a fitting set, unscreened.

    Parameters
    ----------
    aux : BasisSet
        The fitting set placed on the molecule.

    Returns
    -------
    ndarray, shape (naux, naux)
        (P|Q) = ∫∫ P(r₁) Q(r₂) / r₁₂ in hartree, symmetric.
    """
    n = aux.n_functions
    out = np.zeros((n, n))
    for g1, g2 in batch_pairs(shell_batches(aux.shells, aux.spherical)):
        for tile in iter_tiles(g1, g2, 0.0):
            b_idx = tile.bra.pidx[tile.brows].reshape(-1, 1)
            k_idx = tile.ket.pidx[tile.krows].reshape(1, -1)
            values = tile.integrals().reshape(b_idx.size, k_idx.size)
            out[b_idx, k_idx] = values
            out[k_idx.T, b_idx.T] = values.T
    return out


class ThreeCenterEngine:
    """Three-centre integrals (P|μν) of an orbital basis and a fitting set, whole or in blocks.

    Parameters
    ----------
    basis : BasisSet
        The orbital basis.
    aux : BasisSet
        The fitting set on the same molecule.
    threshold : float
        Screening threshold (hartree): tiles with Q_μν (P|P)^{1/2} below it
        are skipped, and orbital primitive pairs are dropped as in the
        four-centre passes. 0 disables screening.
    threads : int
        Threads the tiles are spread over (:mod:`hfcore._parallel`);
        every integral is computed by one tile alone, so the arrays hold
        the same bits for any number.

    Attributes
    ----------
    n_functions : int
        nbf of the orbital basis.
    n_aux : int
        naux of the fitting set.
    n_pairs : int
        nbf(nbf+1)/2, the columns of every block.
    """

    def __init__(self, basis: BasisSet, aux: BasisSet, *, threshold: float = 1e-12, threads: int = 1) -> None:
        threshold = screening_threshold(threshold)
        self.n_functions = basis.n_functions
        self.n_aux = aux.n_functions
        self.n_pairs = self.n_functions * (self.n_functions + 1) // 2
        self.threshold = float(threshold)
        self.threads = resolve_threads(threads)
        self._pairs = prepare_pairs(basis, threshold)
        self._aux = shell_batches(aux.shells, aux.spherical)

    def _pieces(self, block_functions: int) -> list[list[_Piece]]:
        """Fitting rows cut into blocks of at most ``block_functions`` functions (at least one shell)."""
        blocks: list[list[_Piece]] = []
        current: list[_Piece] = []
        used = 0
        for gi, group in enumerate(self._aux):
            rows_per = max(1, block_functions // group.nf)
            for rows in chunks(group.n, rows_per):
                size = (rows.stop - rows.start) * group.nf
                if current and used + size > block_functions:
                    blocks.append(current)
                    current, used = [], 0
                current.append(_Piece(gi, rows))
                used += size
        if current:
            blocks.append(current)
        return blocks

    def largest_block(self, block_functions: int) -> int:
        """The most fitting functions any block of :meth:`blocks` holds for this size."""
        return max((sum((p.rows.stop - p.rows.start) * self._aux[p.group].nf for p in b)
                    for b in self._pieces(block_functions)), default=0)

    def blocks(self, block_functions: int = DEFAULT_BLOCK_FUNCTIONS) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        """Compute (P|μν) a block of fitting functions at a time.

        Parameters
        ----------
        block_functions : int
            Largest number of fitting functions per block (a single shell
            with more functions still forms one block).

        Yields
        ------
        index : ndarray of int, shape (nblock,)
            The fitting functions of the block.
        values : ndarray, shape (nblock, npair)
            (P|μν) at column μ(μ+1)/2 + ν, μ >= ν, hartree.
        """
        for pieces in self._pieces(block_functions):
            index = np.concatenate([self._aux[p.group].pidx[p.rows].ravel() for p in pieces])
            out = _zeros((index.size, self.n_pairs), self.threads)
            tasks: list[Callable[[], None]] = []
            weights: list[int] = []
            start = 0
            for piece in pieces:
                group = self._aux[piece.group]
                nrow = (piece.rows.stop - piece.rows.start) * group.nf
                self._fill(group, piece.rows, out[start : start + nrow], tasks, weights)
                start += nrow
            _run_tiles(tasks, weights, self.threads)
            yield index, out

    def compute(self) -> np.ndarray:
        """All of (P|μν), shape (naux, npair), in fitting-function order."""
        out = allocate("the three-centre integrals", (self.n_aux, self.n_pairs), zero=False)
        for index, values in self.blocks(self.n_aux):
            out[index] = values
        return out

    def compute_pair_major(self) -> tuple[np.ndarray, np.ndarray]:
        """All of (P|μν) transposed: row μ(μ+1)/2 + ν holds every fitting function.

        The layout of fitted exchange builds, whose matrix products run over
        the fitting index for one orbital pair after another. Columns come in
        the tile generator's order (fitting batch, then row, then function),
        so each tile fills a contiguous column range.

        Returns
        -------
        values : ndarray, shape (npair, naux)
        order : ndarray of int, shape (naux,)
            Fitting-function index of every column.
        """
        out = _zeros((self.n_pairs, self.n_aux), self.threads, "the fitted factors")
        start = {}
        column = 0
        for aux in self._aux:
            start[id(aux)] = column
            column += aux.n * aux.nf
        order = np.concatenate([aux.pidx.reshape(-1) for aux in self._aux])

        def task(tile: Tile, aux: PairBatch) -> Callable[[], None]:
            def fill() -> None:
                block = tile.integrals()
                if tile.bra is aux:
                    rows, o_idx = tile.brows, tile.ket.pidx[tile.krows].reshape(-1)
                    block = block.reshape(-1, o_idx.size).T
                else:
                    rows, o_idx = tile.krows, tile.bra.pidx[tile.brows].reshape(-1)
                    block = block.reshape(o_idx.size, -1)
                base = start[id(aux)]
                out[o_idx, base + rows.start * aux.nf : base + rows.stop * aux.nf] = block

            return fill

        tasks, weights = [], []
        for aux, orb in batch_pairs(self._aux, self._pairs):
            for tile in iter_tiles(aux, orb, self.threshold):
                tasks.append(task(tile, aux))
                weights.append(tile.quartets * n_hermite(tile.bra.L + tile.ket.L))
        _run_tiles(tasks, weights, self.threads)
        return out, order

    def _fill(
        self, aux: PairBatch, rows: slice, out: np.ndarray, tasks: list[Callable[[], None]], weights: list[int]
    ) -> None:
        """Tasks filling (P|μν) of fitting rows ``rows`` of one group into ``out`` (nrows * nf, npair).

        The tile generator's loop (:func:`hfcore.integrals.tiles.iter_tiles`)
        restricted to a range of fitting rows; one task (and its work, in
        primitive quartets times Hermite integrals) per tile is appended to
        ``tasks`` and ``weights``, rows in block order.
        """
        local = np.arange(out.shape[0]).reshape(rows.stop - rows.start, aux.nf)
        for orb in self._pairs:
            aux_bra = tile_cost(aux, orb) <= tile_cost(orb, aux)
            bra, ket = (aux, orb) if aux_bra else (orb, aux)
            nb_size, nk_size = tile_sizes(bra, ket)
            a_size, o_size = (nb_size, nk_size) if aux_bra else (nk_size, nb_size)
            for arows in chunks(rows.stop - rows.start, a_size):
                arows = slice(arows.start + rows.start, arows.stop + rows.start)
                qa = aux.q[arows.start]
                for orows in chunks(orb.n, o_size):
                    # Both sides are sorted by decreasing bound: the first failing tile ends the row.
                    if qa * orb.q[orows.start] < self.threshold:
                        break
                    count = int(np.sum(qa * orb.q[orows] >= self.threshold))
                    orows = slice(orows.start, orows.start + max(count, 1))
                    a_local = local[arows.start - rows.start : arows.stop - rows.start].reshape(-1)
                    tasks.append(self._tile_task(aux, arows, orb, orows, aux_bra, a_local, out))
                    nq = (arows.stop - arows.start) * (orows.stop - orows.start) * aux.nprim * orb.nprim
                    weights.append(nq * n_hermite(aux.L + orb.L))

    @staticmethod
    def _tile_task(
        aux: PairBatch, arows: slice, orb: PairBatch, orows: slice, aux_bra: bool, a_local: np.ndarray, out: np.ndarray
    ) -> Callable[[], None]:
        """One tile of :meth:`_fill`: its integrals written at rows ``a_local`` of ``out``."""

        def fill() -> None:
            o_cols = orb.pidx[orows].reshape(-1)
            if aux_bra:
                block = tile_integrals(aux, arows, orb, orows).reshape(a_local.size, o_cols.size)
            else:
                block = tile_integrals(orb, orows, aux, arows).reshape(o_cols.size, a_local.size).T
            out[a_local[:, None], o_cols[None, :]] = block

        return fill


def three_center_integrals(basis: BasisSet, aux: BasisSet, *, threshold: float = 0.0) -> np.ndarray:
    """All three-centre integrals (P|μν), dense.

    Parameters
    ----------
    basis : BasisSet
        The orbital basis.
    aux : BasisSet
        The fitting set.
    threshold : float
        Screening threshold (hartree); 0 (default) computes every integral.

    Returns
    -------
    ndarray, shape (naux, nbf, nbf)
        (P|μν) = ∫∫ P(r₁) μ(r₂) ν(r₂) / r₁₂ in hartree, symmetric in μν.
    """
    packed = ThreeCenterEngine(basis, aux, threshold=threshold).compute()
    n = basis.n_functions
    first, second = np.tril_indices(n)
    pair = np.zeros((n, n), dtype=np.intp)
    pair[first, second] = np.arange(first.size)
    pair[second, first] = np.arange(first.size)
    return packed[:, pair]


def estimate_three_center_memory(basis: BasisSet, aux: BasisSet) -> int:
    """Bytes the whole (P|μν) array needs: 8 naux nbf(nbf+1)/2.

    Parameters
    ----------
    basis, aux : BasisSet
        Orbital basis and fitting set.

    Returns
    -------
    int
    """
    n = basis.n_functions
    return 8 * aux.n_functions * (n * (n + 1) // 2)


__all__ = [
    "ThreeCenterEngine",
    "three_center_integrals",
    "two_center_integrals",
    "estimate_three_center_memory",
    "DEFAULT_BLOCK_FUNCTIONS",
]
