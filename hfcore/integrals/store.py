"""The stored pass: every unique electron-repulsion integral, packed with 8-fold symmetry.

The tiles of :mod:`hfcore.integrals.tiles` over the batches of
:func:`hfcore.integrals.eri_pairs.prepare_pairs` are scattered into one
packed array at the canonical position of each (ij|kl).

Packed storage
--------------
Pair index ij = i(i+1)/2 + j for i >= j; quartet index IJ(IJ+1)/2 + KL for
IJ >= KL. One float64 (8 bytes) per unique integral; ``ERIStore.jk`` builds,
on first use, a second packed array of the same size (8 more bytes per
unique integral) holding the exchange kernel, so each Fock build is two
packed symmetric matrix-vector products (BLAS ``spmv``).
"""

from __future__ import annotations

from collections.abc import Callable
import errno
import mmap
import weakref
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import blas

from ..basis.shells import BasisSet
from ..errors import ResourceError
from .eri_pairs import pair_index, prepare_pairs, screening_threshold
from .hermite import n_hermite
from .._memory import allocate, allocation_error
from .._parallel import WorkerTeam, can_fork, forked_units, ordered_map, resolve_threads, shared_zeros, work_units
from .tiles import Tile, batch_pairs, iter_tiles

#: Largest dense (nbf,)*4 array ``to_dense`` will build, in bytes.
DENSE_LIMIT_BYTES = 4 << 30
#: Largest store (integrals plus exchange kernel) ``compute_eri`` will build, in bytes.
STORE_LIMIT_BYTES = 12 << 30
#: Largest store (integrals plus exchange kernel, bytes) worth its kernel.
#: Building the kernel costs a gather over the whole store; the lean K build
#: costs more per iteration only while the store is small. Measured (shared
#: 2-core machine, one thread): benzene 6-31G, 66 functions, 37 MiB: the
#: kernel pays back after 2.5 iterations; 6-31G*, 102 functions, 211 MiB:
#: after 19; cc-pVTZ, 264 functions: never (its lean builds were faster).
EXCHANGE_KERNEL_LIMIT_BYTES = 128 << 20
#: A lean K build is cut into this many work units (fixed, for the same sums on any thread count).
_LEAN_UNITS = 16
#: Densities the lean store's worker processes take in one build (α and β).
_TEAM_DENSITIES = 2
#: The pass is cut into about this many work units (thread pool tasks and progress steps).
_UNITS = 256


def _canonical(a: np.ndarray, b: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Packed quartet index of pair indices a, b (any order), via the table tri[P] = P(P+1)/2."""
    return np.where(a >= b, tri[a] + b, tri[b] + a)


@dataclass
class ERIStore:
    """Unique electron-repulsion integrals of a basis, packed with 8-fold symmetry.

    Attributes
    ----------
    n_functions : int
        nbf.
    packed : ndarray, shape (npair * (npair + 1) / 2,)
        (ij|kl) at IJ(IJ+1)/2 + KL with IJ = i(i+1)/2 + j, i >= j, k >= l,
        IJ >= KL; 8 bytes per unique integral. Quartets skipped by the
        Schwarz screening hold zero.
    threshold : float
        Schwarz threshold used (hartree).
    lean : bool
        Build K from the packed integrals directly (8 bytes per unique
        integral in all) instead of from an exchange kernel (16).
    threads : int
        Threads of the lean K build (the same bits for any number).

    Notes
    -----
    Unless ``lean``, the first :meth:`jk` call builds the exchange kernel, a
    second packed array of the same length (another 8 bytes per unique
    integral, reported by :attr:`nbytes`); every call is then two BLAS
    packed symmetric matrix-vector products over npair(npair+1)/2 elements.
    A lean store reads each row of the packed integrals twice per K build
    instead (:meth:`_lean_jk`, J and K in one read of the store), in
    about 3 npair BLAS calls rather than two.
    """

    n_functions: int
    packed: np.ndarray
    threshold: float
    lean: bool = False
    threads: int = 1
    _exchange: np.ndarray | None = field(default=None, repr=False)
    _team: _LeanTeam | None = field(default=None, repr=False, compare=False)

    @property
    def n_pairs(self) -> int:
        return self.n_functions * (self.n_functions + 1) // 2

    @property
    def nbytes(self) -> int:
        """Memory held by the store in bytes (integrals plus exchange kernel once built)."""
        extra = 0 if self._exchange is None else self._exchange.nbytes
        return int(self.packed.nbytes + extra)

    def _pair_map(self) -> np.ndarray:
        i = np.arange(self.n_functions)
        return pair_index(i[:, None], i[None, :])

    def to_dense(self) -> np.ndarray:
        """All integrals (ij|kl), shape (nbf, nbf, nbf, nbf), chemists' notation.

        Raises
        ------
        ResourceError
            If the dense array would exceed :data:`DENSE_LIMIT_BYTES`.
        """
        n = self.n_functions
        if 8 * n**4 > DENSE_LIMIT_BYTES:
            raise ResourceError(f"a dense ERI tensor for {n} functions needs {8 * n**4 / 2**30:.1f} GiB")
        pm = self._pair_map()
        out = np.empty((n, n, n, n))
        for i in range(n):
            out[i] = self.packed[pair_index(pm[i][:, None, None], pm[None, :, :])]
        return out

    def _exchange_kernel(self) -> np.ndarray:
        """Packed W[ik, jl] = ((ij|kl) + (il|kj)) / 2, symmetric in (ik) <-> (jl).

        Built once, one first index i at a time: the rows (i, k), k <= i,
        and their columns form one contiguous stretch of the packed array.
        Every column (j, l) of those rows has l <= j <= i, so the pair (ij)
        always sorts after (kl) and its quartet index needs no comparison;
        only (il|kj) is put in canonical order.
        """
        if self._exchange is None:
            n = self.n_functions
            itype = np.int32 if self.packed.size < 2**31 else np.int64
            pm = self._pair_map().astype(itype)
            tri = (np.arange(self.n_pairs, dtype=np.int64) * (np.arange(self.n_pairs) + 1) // 2).astype(itype)
            first, second = (x.astype(itype) for x in np.tril_indices(n))
            out = allocate("the exchange kernel of the stored integrals", self.packed.shape, zero=False)
            for i in range(n):
                row0 = i * (i + 1) // 2
                ncol = row0 + i + 1
                fj, sl = first[:ncol], second[:ncol]
                k_rows = pm[: i + 1]
                vals = self.packed[tri[pm[i, fj]][None, :] + k_rows[:, sl]]
                vals += self.packed[_canonical(pm[i, sl][None, :], k_rows[:, fj], tri)]
                vals *= 0.5
                keep = np.arange(ncol)[None, :] <= (row0 + np.arange(i + 1))[:, None]
                out[row0 * (row0 + 1) // 2 : ncol * (ncol + 1) // 2] = vals[keep]
            self._exchange = out
        return self._exchange

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coulomb and exchange matrices of a symmetric density.

        Parameters
        ----------
        density : ndarray, shape (nbf, nbf)
            Symmetric matrix D.

        Returns
        -------
        J, K : ndarray, shape (nbf, nbf)
            J_μν = Σ (μν|λσ) D_λσ and K_μν = Σ (μλ|νσ) D_λσ.
        """
        d = np.asarray(density, dtype=np.float64)
        n = self.n_functions
        first, second = np.tril_indices(n)
        dp = d[first, second] * np.where(first == second, 1.0, 2.0)
        if self.lean:
            jp, k = self._lean_jk(d, dp)
            return _unpack_symmetric(jp, n), k
        jp = blas.dspmv(self.n_pairs, 1.0, self.packed, dp)
        kp = blas.dspmv(self.n_pairs, 1.0, self._exchange_kernel(), dp)
        return _unpack_symmetric(jp, n), _unpack_symmetric(kp, n)

    def jk_multi(self, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coulomb matrix of the sum and exchange matrix of each of several symmetric densities.

        Parameters
        ----------
        densities : ndarray, shape (m, nbf, nbf)

        Returns
        -------
        J : ndarray, shape (nbf, nbf)
            Of ``densities.sum(axis=0)``.
        K : ndarray, shape (m, nbf, nbf)
            Of each density.

        Notes
        -----
        With the exchange kernel: one ``spmv`` over the integrals for J and
        one over the kernel per density (m + 1 products instead of 2m). A
        lean store reads each of its rows once for J and every K.
        """
        d = np.asarray(densities, dtype=np.float64)
        n = self.n_functions
        first, second = np.tril_indices(n)
        scale = np.where(first == second, 1.0, 2.0)
        dps = d[:, first, second] * scale
        dp_total = dps.sum(axis=0)
        if self.lean:
            jp, k = self._lean_jk(d, dp_total)
            return _unpack_symmetric(jp, n), k
        jp = blas.dspmv(self.n_pairs, 1.0, self.packed, dp_total)
        kernel = self._exchange_kernel()
        k = np.stack([_unpack_symmetric(blas.dspmv(self.n_pairs, 1.0, kernel, dp), n) for dp in dps])
        return _unpack_symmetric(jp, n), k

    def _lean_jk(self, d: np.ndarray, dp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """J over packed pairs, shape (npair,), and K, shape (nbf, nbf), in one read of the store.

        ``d`` may also be a stack (m, nbf, nbf): K is then one per density,
        shape (m, nbf, nbf), from the same read, and ``dp`` belongs to their
        sum. ``dp`` is the density over packed pairs with off-diagonal elements
        doubled. J: row IJ adds row . dp[:IJ+1] to J[IJ] and row[:IJ] dp[IJ]
        to J[:IJ] (the upper triangle by symmetry). K_ab = Σ_cd (ac|bd) D_cd. The stored row of pair IJ = (i, j) holds
        (ij|bd) for every pair BD <= IJ: as a packed symmetric matrix V
        (zero past the row's end, its last element (ij|ij) halved) it gives
        H[i] += V D[j] and, for i != j, H[j] += V D[i]; the pairs BD > IJ
        give the transposed terms, so K = H + H^T. The part of V over b < i
        is a complete packed matrix of order i: one BLAS ``spmv`` per
        ordered pair, in place. The elements (ij|id), d <= j, of all rows
        j of one i form a lower triangle R[j, d] and are added with a few
        whole-array operations.
        """
        n = self.n_functions
        # Units of first indices i of about equal work (~i^3 each), fixed by
        # nbf alone; their partial H are added in unit order.
        cost = np.cumsum(np.arange(n, dtype=np.float64) ** 3)
        cuts = np.searchsorted(cost, cost[-1] * np.arange(1, _LEAN_UNITS) / _LEAN_UNITS) if n else []
        bounds = np.unique(np.concatenate([[0], cuts, [n]])).astype(int)
        units = list(zip(bounds[:-1], bounds[1:]))
        stack = d if d.ndim == 3 else d[None]
        m = stack.shape[0]
        h = np.zeros((m, n, n))
        jp = np.zeros(self.n_pairs)
        if self.threads > 1 and can_fork() and m <= _TEAM_DENSITIES:
            # Worker processes: the rows are many small BLAS calls, held back
            # by the interpreter lock on threads. Each unit's share has its
            # own slot, added here in unit order as below.
            team = self._lean_team(units)
            team.count[0] = m
            team.density[:m] = stack
            team.packed_density[...] = dp
            team.run(len(units))
            parts = ((pj, ph[:m]) for pj, ph in zip(team.parts_j, team.parts_h))
        else:
            parts = ordered_map(lambda unit: self._lean_rows(unit[0], unit[1], stack, dp), units, self.threads)
        for part_j, part_h in parts:
            jp += part_j
            h += part_h
        k = h + h.transpose(0, 2, 1)
        return jp, (k if d.ndim == 3 else k[0])

    def _lean_team(self, units: list[tuple[int, int]]) -> _LeanTeam:
        """The store's worker processes for lean K builds, made on first use, kept until the store goes."""
        team = self._team
        if team is None or team.size != self.threads:
            if team is not None:
                team.close()
            team = self._team = _LeanTeam(self.packed, self.n_functions, units, self.threads)
            weakref.finalize(self, team.close)
        return team

    def _lean_rows(self, first: int, stop: int, d: np.ndarray, dp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The shares of J and H in :meth:`_lean_jk` of the rows with first index in [first, stop)."""
        return _lean_rows(self.packed, self.n_functions, first, stop, d, dp)


class _LeanTeam:
    """Worker processes of lean J/K builds over one store, with the shared arrays they read and fill.

    It holds the packed integrals, not the store, so the store can be
    collected (and the team closed) as usual.
    """

    def __init__(self, packed: np.ndarray, n: int, units: list[tuple[int, int]], size: int):
        npair = n * (n + 1) // 2
        self.size = size
        what = "the lean K build's shared arrays"
        self.count = shared_zeros(1, what=what)
        self.density = shared_zeros((_TEAM_DENSITIES, n, n), what=what)
        self.packed_density = shared_zeros(npair, what=what)
        self.parts_j = shared_zeros((len(units), npair), what=what)
        self.parts_h = shared_zeros((len(units), _TEAM_DENSITIES, n, n), what=what)
        count, density, packed_density = self.count, self.density, self.packed_density
        parts_j, parts_h = self.parts_j, self.parts_h

        def work(u: int) -> None:
            m = int(count[0])
            parts_j[u], parts_h[u, :m] = _lean_rows(packed, n, units[u][0], units[u][1], density[:m], packed_density)

        self._team = WorkerTeam(work, size)

    def run(self, n_units: int) -> None:
        self._team.run(n_units)

    def close(self) -> None:
        self._team.close()


def _lean_rows(
    packed: np.ndarray, n: int, first: int, stop: int, d: np.ndarray, dp: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The shares of J (packed, shape (npair,)) and H (shape (n, n)) of the rows with first index in [first, stop).

    ``d`` may be a stack (m, n, n); H is then (m, n, n), one per density,
    from the same read of each row. See :meth:`ERIStore._lean_jk`.
    """
    stack = d if d.ndim == 3 else d[None]
    hs = np.zeros(stack.shape)
    jp = np.zeros(n * (n + 1) // 2)
    spmv, axpy = blas.dspmv, blas.daxpy
    for i in range(first, stop):
        ti = i * (i + 1) // 2
        js = np.arange(i + 1)
        starts = (ti + js) * (ti + js + 1) // 2 + ti  # where (ij|i0) sits in row IJ
        lower = js[None, :] <= js[:, None]
        r = np.where(lower, packed[np.where(lower, starts[:, None] + js[None, :], 0)], 0.0)
        r[js, js] *= 0.5
        for h, dm in zip(hs, stack):
            dd = dm[: i + 1, : i + 1]
            # (a, c) = (i, j): H[i, i] += Σ_j R[j] · D[j], H[i, d] += Σ_j R[j, d] D[j, i] for d != i.
            h[i, i] += np.einsum("jd,jd->", r, dd) - r[i, i] * dm[i, i]
            h[i, : i + 1] += r.T @ dm[: i + 1, i]
            # (a, c) = (j, i), j < i: H[j, i] += R[j] · D[i], H[j, d] += R[j, d] D[i, i].
            h[:i, i] += r[:i] @ dm[i, : i + 1]
            h[:i, :i] += r[:i, :i] * dm[i, i]
        for j in range(i + 1):
            pair = ti + j
            start = int(starts[j]) - ti
            row = packed[start : start + pair + 1]
            jp[pair] += row @ dp[: pair + 1]
            if pair:
                axpy(row[:pair], jp[:pair], a=dp[pair])
            if i == 0:
                continue
            full = row[:ti]
            for h, dm in zip(hs, stack):
                spmv(i, 1.0, full, dm[j, :i], beta=1.0, y=h[i, :i], overwrite_y=1)
                if j < i:
                    spmv(i, 1.0, full, dm[i, :i], beta=1.0, y=h[j, :i], overwrite_y=1)
    return jp, (hs if d.ndim == 3 else hs[0])


def _unpack_symmetric(vec: np.ndarray, n: int) -> np.ndarray:
    out = np.zeros((n, n))
    first, second = np.tril_indices(n)
    out[first, second] = vec
    out[second, first] = vec
    return out


def _store_array(what: str, size: int, shared: bool) -> np.ndarray:
    """A zero-filled float64 array of ``size`` elements with every page committed at once.

    The pass writes the packed store in scattered order; committing its pages
    one fault at a time (or as 2 MiB pages, as ``numpy.zeros`` asks the kernel
    for large arrays) cost as much as the integrals themselves. One
    populated anonymous mapping of 4 KiB pages is several times cheaper
    (measured on benzene cc-pVTZ, 4.9 GB: 1.4 s against 11.5 s), and it is
    shared with forked workers when ``shared``. A refused mapping becomes the
    one-line :class:`~hfcore.errors.ResourceError` of
    :func:`hfcore._memory.allocate`.
    """
    n_bytes = 8 * size
    flags = (mmap.MAP_SHARED if shared else mmap.MAP_PRIVATE) | mmap.MAP_ANONYMOUS | getattr(mmap, "MAP_POPULATE", 0)
    try:
        buffer = mmap.mmap(-1, max(n_bytes, 8), flags=flags)
    except (MemoryError, OSError) as exc:
        if isinstance(exc, OSError) and exc.errno != errno.ENOMEM:
            raise
        raise allocation_error(what, n_bytes) from None
    return np.frombuffer(buffer, dtype=np.float64, count=size)


def _store(tile: Tile, block: np.ndarray, packed: np.ndarray) -> None:
    """Write a tile (nb, fb, nk * fk) at the canonical packed position of each element."""
    bra, brows, ket, krows = tile.bra, tile.brows, tile.ket, tile.krows
    b_idx = bra.pidx[brows].reshape(-1, 1)
    k_idx = ket.pidx[krows].reshape(1, -1)
    # About half the elements sit in tiles whose bra pairs all sort on one
    # side of their ket pairs (measured, benzene cc-pVDZ): one sum places them.
    if b_idx.min() >= k_idx.max():
        target = bra.tri[brows].reshape(-1, 1) + k_idx
    elif b_idx.max() <= k_idx.min():
        target = ket.tri[krows].reshape(1, -1) + b_idx
    else:
        target = np.where(b_idx >= k_idx, bra.tri[brows].reshape(-1, 1) + k_idx, ket.tri[krows].reshape(1, -1) + b_idx)
    packed[target] = block.reshape(target.shape)


def compute_eri(
    basis: BasisSet,
    *,
    threshold: float = 1e-12,
    progress: Callable[[float], None] | None = None,
    threads: int = 1,
    lean: bool = False,
) -> ERIStore:
    """Compute all unique electron-repulsion integrals of a basis.

    Parameters
    ----------
    basis : BasisSet
    threshold : float
        Schwarz screening threshold (hartree): shell quartets with
        Q_ab Q_cd below it are skipped and primitive pairs that cannot
        contribute more than ``threshold / 1000`` are dropped. 0 disables
        all screening.
    progress : callable, optional
        Called with the fraction of the work done (0..1] as the pass proceeds.
    threads : int
        Threads the tiles are spread over (:mod:`hfcore._parallel`);
        every integral is computed by one tile alone, so the store holds
        the same bits for any number.
    lean : bool
        Build K from the packed integrals themselves (:attr:`ERIStore.lean`):
        8 bytes per unique integral instead of 16, slower K builds.

    Returns
    -------
    ERIStore

    Raises
    ------
    InputError
        If ``threshold`` is not a number in [0, 1).
    ResourceError
        If the store and its exchange kernel (16 bytes per unique integral,
        8 if ``lean``) would exceed :data:`STORE_LIMIT_BYTES`.
    """
    threshold = screening_threshold(threshold)
    n = basis.n_functions
    npair = n * (n + 1) // 2
    size = npair * (npair + 1) // 2
    per = 8 if lean else 16
    if per * size > STORE_LIMIT_BYTES:
        raise ResourceError(
            f"stored integrals for {n} functions need {per * size / 2**30:.1f} GiB "
            f"(limit {STORE_LIMIT_BYTES / 2**30:.0f} GiB)"
        )
    threads = resolve_threads(threads)
    forked = threads > 1 and can_fork()
    # Forked workers write into shared pages; every integral is written by one tile.
    packed = _store_array("the stored integrals", size, shared=forked)
    tiles = [tile for g1, g2 in batch_pairs(prepare_pairs(basis, threshold)) for tile in iter_tiles(g1, g2, threshold)]
    weights = [tile.quartets * n_hermite(tile.bra.L + tile.ket.L) for tile in tiles]
    total = sum(weights)
    units = work_units(weights, max(total // _UNITS, 1))

    def run(unit: slice) -> int:
        for tile in tiles[unit]:
            _store(tile, tile.integrals(), packed)
        return sum(weights[unit])

    if forked:
        unit_work = np.array([sum(weights[unit]) for unit in units], dtype=np.float64)

        def report(finished: np.ndarray) -> None:
            if progress is not None and total:
                progress(float(unit_work @ finished) / total)

        forked_units(lambda u: run(units[u]), len(units), threads, report)
    else:
        done = 0
        for work in ordered_map(run, units, threads):
            done += work
            if progress is not None:
                progress(done / total)
    if progress is not None and total == 0:
        progress(1.0)
    return ERIStore(n, packed, float(threshold), lean=bool(lean), threads=threads)


def estimate_eri_memory(basis: BasisSet, *, lean: bool = False) -> int:
    """Bytes the stored integrals need for J/K builds, before any is computed.

    The packed store holds one float64 per unique integral and its exchange
    kernel another, so 16 bytes per unique integral, npair(npair+1)/2 of
    them with npair = nbf(nbf+1)/2; a lean store (K from the integrals
    themselves) needs 8. Screening does not shrink the packed arrays, so
    the estimate is exact.

    Parameters
    ----------
    basis : BasisSet
    lean : bool
        The size of a lean store (no exchange kernel).

    Returns
    -------
    int
        Bytes.
    """
    npair = basis.n_functions * (basis.n_functions + 1) // 2
    return (8 if lean else 16) * (npair * (npair + 1) // 2)


def eri_tensor(basis: BasisSet) -> np.ndarray:
    """All electron-repulsion integrals, dense and unscreened.

    Returns
    -------
    ndarray, shape (nbf, nbf, nbf, nbf)
        (μν|λσ) in chemists' notation, hartree. Meant for small systems.
    """
    return compute_eri(basis, threshold=0.0).to_dense()


__all__ = [
    "ERIStore",
    "compute_eri",
    "estimate_eri_memory",
    "eri_tensor",
    "DENSE_LIMIT_BYTES",
    "STORE_LIMIT_BYTES",
    "EXCHANGE_KERNEL_LIMIT_BYTES",
]
