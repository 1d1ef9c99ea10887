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
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import blas

from ..basis.shells import BasisSet
from ..errors import InputError, ResourceError
from .eri_pairs import pair_index, prepare_pairs
from .hermite import n_hermite
from .tiles import Tile, batch_pairs, iter_tiles

#: Largest dense (nbf,)*4 array ``to_dense`` will build, in bytes.
DENSE_LIMIT_BYTES = 4 << 30
#: Largest store (integrals plus exchange kernel) ``compute_eri`` will build, in bytes.
STORE_LIMIT_BYTES = 12 << 30


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

    Notes
    -----
    The first :meth:`jk` call builds the exchange kernel, a second packed
    array of the same length (another 8 bytes per unique integral, reported
    by :attr:`nbytes`); every call is then two BLAS packed symmetric
    matrix-vector products over npair(npair+1)/2 elements.
    """

    n_functions: int
    packed: np.ndarray
    threshold: float
    _exchange: np.ndarray | None = field(default=None, repr=False)

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
            out = np.empty_like(self.packed)
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
        jp = blas.dspmv(self.n_pairs, 1.0, self.packed, dp)
        kp = blas.dspmv(self.n_pairs, 1.0, self._exchange_kernel(), dp)
        return _unpack_symmetric(jp, n), _unpack_symmetric(kp, n)


def _unpack_symmetric(vec: np.ndarray, n: int) -> np.ndarray:
    out = np.zeros((n, n))
    first, second = np.tril_indices(n)
    out[first, second] = vec
    out[second, first] = vec
    return out


def _store(tile: Tile, block: np.ndarray, packed: np.ndarray) -> None:
    """Write a tile (nb, fb, nk * fk) at the canonical packed position of each element."""
    bra, brows, ket, krows = tile.bra, tile.brows, tile.ket, tile.krows
    b_idx = bra.pidx[brows].reshape(-1, 1)
    k_idx = ket.pidx[krows].reshape(1, -1)
    target = np.where(b_idx >= k_idx, bra.tri[brows].reshape(-1, 1) + k_idx, ket.tri[krows].reshape(1, -1) + b_idx)
    packed[target] = block.reshape(target.shape)


def compute_eri(
    basis: BasisSet, *, threshold: float = 1e-12, progress: Callable[[float], None] | None = None
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

    Returns
    -------
    ERIStore

    Raises
    ------
    InputError
        If ``threshold`` is negative.
    ResourceError
        If the store and its exchange kernel (16 bytes per unique integral)
        would exceed :data:`STORE_LIMIT_BYTES`.
    """
    if threshold < 0:
        raise InputError(f"the screening threshold must be >= 0, not {threshold}")
    n = basis.n_functions
    npair = n * (n + 1) // 2
    size = npair * (npair + 1) // 2
    if 16 * size > STORE_LIMIT_BYTES:
        raise ResourceError(
            f"stored integrals for {n} functions need {16 * size / 2**30:.1f} GiB "
            f"(limit {STORE_LIMIT_BYTES / 2**30:.0f} GiB)"
        )
    packed = np.zeros(size)
    jobs = batch_pairs(prepare_pairs(basis, threshold))
    total = sum(a.n * a.nprim * b.n * b.nprim * n_hermite(a.L + b.L) for a, b in jobs) or 1
    done = 0
    for g1, g2 in jobs:
        for tile in iter_tiles(g1, g2, threshold):
            _store(tile, tile.integrals(), packed)
        done += g1.n * g1.nprim * g2.n * g2.nprim * n_hermite(g1.L + g2.L)
        if progress is not None:
            progress(done / total)
    return ERIStore(n, packed, float(threshold))


def estimate_eri_memory(basis: BasisSet) -> int:
    """Bytes the stored integrals need for J/K builds, before any is computed.

    The packed store holds one float64 per unique integral and its exchange
    kernel another, so 16 bytes per unique integral, npair(npair+1)/2 of
    them with npair = nbf(nbf+1)/2. Screening does not shrink the packed
    arrays, so the estimate is exact.

    Parameters
    ----------
    basis : BasisSet

    Returns
    -------
    int
        Bytes.
    """
    npair = basis.n_functions * (basis.n_functions + 1) // 2
    return 16 * (npair * (npair + 1) // 2)


def eri_tensor(basis: BasisSet) -> np.ndarray:
    """All electron-repulsion integrals, dense and unscreened.

    Returns
    -------
    ndarray, shape (nbf, nbf, nbf, nbf)
        (μν|λσ) in chemists' notation, hartree. Meant for small systems.
    """
    return compute_eri(basis, threshold=0.0).to_dense()


__all__ = ["ERIStore", "compute_eri", "estimate_eri_memory", "eri_tensor", "DENSE_LIMIT_BYTES", "STORE_LIMIT_BYTES"]
