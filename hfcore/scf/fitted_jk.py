"""Density-fitted J and K with the Coulomb metric.

Method
------
The orbital products are fitted in a fitting set {P} with the Coulomb
metric (Whitten, J. Chem. Phys. 58, 4496 (1973); Vahtras, Almlöf and
Feyereisen, Chem. Phys. Lett. 213, 514 (1993)):
(μν|λσ) ≈ Σ_PQ (μν|P) [M⁻¹]_PQ (Q|λσ), M_PQ = (P|Q). With M = L Lᵀ and
the whitened factors B = L⁻¹ (P|μν):

* J_μν = Σ_P B_Pμν g_P with g = B d, d the packed density (two BLAS
  matrix-vector products over the factors);
* K_μν = Σ_P Σ_k w_k Y_Pkμ Y_Pkν with Y_Pk· = Σ_μ v_μk B_Pμ·, where
  D = Σ_k w_k v_k v_kᵀ is the density factored by its eigenvectors
  (weights of either sign, so a guess or a density change works too; the
  SCF density 2 C_occ C_occᵀ has nocc non-zero weights), so a K build costs
  O(naux · nocc · nbf²) in matrix products.

The metric is factored by Cholesky; when it fails or a pivot falls below
:data:`METRIC_THRESHOLD`, by eigen-decomposition instead, dropping the
eigenvectors below that threshold and reporting how many
(:attr:`FittedJK.n_dropped`), as for near-linear dependence in the overlap.

Memory
------
With the whole factor array (8 naux nbf(nbf+1)/2 bytes) in the budget it is
computed once ("stored"). Otherwise each J/K build recomputes (P|μν) in
blocks of fitting functions ("blocked"): one pass forms g and the
half-transformed Σ_μ v_μk (P|μν) (8 naux · rank · nbf bytes), a second
forms J from the fitted coefficients M⁻¹ g. :func:`plan_fitting` predicts
both before anything is computed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from .._memory import allocate
from ..basis.shells import BasisSet
from ..errors import ResourceError
from ..integrals.three_center import ThreeCenterEngine, estimate_three_center_memory, two_center_integrals

#: Smallest metric eigenvalue (or Cholesky pivot squared) kept, hartree.
METRIC_THRESHOLD: float = 1e-10
#: Orbital-pair columns whitened at a time.
_COLUMN_CHUNK = 4096
#: Bytes of the tile buffer of :func:`_half_transform_rows` (a column block of the packed
#: factors, copied so that it feeds one matrix product; at least one orbital's rows).
_TILE_BYTES: int = 32 * 2**20


@dataclass(frozen=True)
class FittingPlan:
    """How fitted J and K will be built, decided before any integral is computed.

    Attributes
    ----------
    storage : {"stored", "blocked"}
        Factors computed once and kept, or recomputed in blocks every build.
    need_bytes : int
        Predicted peak memory of the chosen way (bytes).
    stored_bytes : int
        What keeping the factors would need (bytes).
    limit_bytes : int
        The budget.
    block_functions : int
        Fitting functions per block in the blocked way (naux when stored).
    half_bytes : int
        Room for the half-transformed factors in the blocked way (bytes);
        a density of higher rank than fits is taken in several passes.
    tile_bytes : int
        Tile of the half-transform (bytes, see :func:`_half_transform_rows`);
        0 for the narrowest tile, one orbital's rows.
    """

    storage: str
    need_bytes: int
    stored_bytes: int
    limit_bytes: int
    block_functions: int
    half_bytes: int = 0
    tile_bytes: int = _TILE_BYTES


def _metric_bytes(naux: int) -> int:
    # The metric, its reordered copy and its factor.
    return 24 * naux * naux


def plan_fitting(basis: BasisSet, aux: BasisSet, n_occupied: int, limit_bytes: int) -> FittingPlan:
    """Choose stored or blocked factors for a memory budget.

    Parameters
    ----------
    basis, aux : BasisSet
        Orbital basis and fitting set.
    n_occupied : int
        Doubly occupied orbitals: the rank of the SCF density, which sets
        the size of the half-transformed factors of the blocked way.
    limit_bytes : int
        Memory budget (bytes).

    Returns
    -------
    FittingPlan

    Raises
    ------
    ResourceError
        If even the blocked way with the smallest blocks exceeds the budget.
    """
    nbf, naux = basis.n_functions, aux.n_functions
    npair = nbf * (nbf + 1) // 2
    fixed = _metric_bytes(naux) + 8 * nbf * nbf * 8
    # Half-transformed factors Z (nbf, naux, nocc); the tile of the half-transform comes on top.
    half = 8 * naux * max(1, n_occupied) * nbf
    stored = estimate_three_center_memory(basis, aux) + fixed + half + _tile_bytes(nbf, naux)
    if stored <= limit_bytes:
        return FittingPlan("stored", stored, stored, limit_bytes, naux)
    smallest = max(s.n_functions(aux.spherical) for s in aux.shells)
    per_function = 8 * 2 * npair + 16 * nbf  # a block row, its pair-major copy, a one-column tile
    room = limit_bytes - fixed - half
    # A wide tile makes the half-transform faster; it is reserved only where the budget has room.
    tile = 2 * _TILE_BYTES if room - 2 * _TILE_BYTES >= smallest * per_function else 0
    fixed, room = fixed + tile, room - tile
    if room < smallest * per_function:
        minimum = fixed + half + smallest * per_function
        raise ResourceError(
            f"density fitting with {naux} fitting and {nbf} orbital functions needs at least "
            f"{minimum / 2**20:.3g} MiB even in blocks, but {limit_bytes / 2**20:.3g} MiB are allowed; "
            f"raise the limit (--memory MIB, memory_limit)"
        )
    block = int(min(naux, room // per_function))
    return FittingPlan(
        "blocked", fixed + half + block * per_function, stored, limit_bytes, block,
        limit_bytes - fixed - block * per_function, tile // 2,
    )


class MetricFactor:
    """A factorisation of the Coulomb metric, M ≈ Wᵀ W restricted to its well-conditioned part.

    Parameters
    ----------
    metric : ndarray, shape (naux, naux)
        (P|Q).
    threshold : float
        Cholesky is used when every pivot squared is above it; otherwise
        eigenvectors with eigenvalue below it are dropped.

    Attributes
    ----------
    method : {"cholesky", "eigen"}
    n_dropped : int
        Eigenvectors dropped (0 with Cholesky).
    n_kept : int
        Rows of the whitened factors.
    """

    def __init__(self, metric: np.ndarray, threshold: float = METRIC_THRESHOLD) -> None:
        naux = metric.shape[0]
        try:
            lower = scipy.linalg.cholesky(metric, lower=True, check_finite=False)
            ok = bool(np.all(np.diag(lower) ** 2 > threshold))
        except np.linalg.LinAlgError:
            ok = False
        if ok:
            self.method = "cholesky"
            self._lower = lower
            self.n_dropped = 0
            self.n_kept = naux
        else:
            values, vectors = np.linalg.eigh(metric)
            keep = values > threshold
            self.method = "eigen"
            self._w = np.ascontiguousarray((vectors[:, keep] / np.sqrt(values[keep])).T)  # (nkeep, naux)
            self.n_dropped = int(naux - keep.sum())
            self.n_kept = int(keep.sum())

    def whiten(self, x: np.ndarray) -> np.ndarray:
        """W x for x of shape (naux, m): L⁻¹ x (Cholesky) or λ^{-1/2} Uᵀ x; shape (n_kept, m).

        Works in column chunks, writing into the leading rows of ``x``
        (which is overwritten); returns that view.
        """
        for start in range(0, x.shape[1], _COLUMN_CHUNK):
            cols = slice(start, min(start + _COLUMN_CHUNK, x.shape[1]))
            if self.method == "cholesky":
                x[:, cols] = scipy.linalg.solve_triangular(self._lower, x[:, cols], lower=True, check_finite=False)
            else:
                x[: self.n_kept, cols] = self._w @ x[:, cols]
        return x[: self.n_kept]

    def whiten_pair_major(self, xt: np.ndarray) -> np.ndarray:
        """(W xtᵀ)ᵀ for xt of shape (npair, naux), in place in row chunks; returns shape (npair, n_kept).

        With Cholesky every chunk is a triangular solve on its transpose
        (Fortran-ordered, so no copy of the whole array); with the
        eigen-decomposition the kept columns are the leading ones (a view).
        """
        for start in range(0, xt.shape[0], _COLUMN_CHUNK):
            rows = slice(start, min(start + _COLUMN_CHUNK, xt.shape[0]))
            if self.method == "cholesky":
                solved = scipy.linalg.solve_triangular(
                    self._lower, xt[rows].T, lower=True, overwrite_b=True, check_finite=False
                )
                xt[rows] = solved.T
            else:
                xt[rows, : self.n_kept] = xt[rows] @ self._w.T
        return xt[:, : self.n_kept]

    def solve(self, g: np.ndarray) -> np.ndarray:
        """M⁻¹ g on the kept space, shape (naux,)."""
        if self.method == "cholesky":
            return scipy.linalg.cho_solve((self._lower, True), g, check_finite=False)
        return self._w.T @ (self._w @ g)


def factor_density(density: np.ndarray, tolerance: float = 1e-13) -> tuple[np.ndarray, np.ndarray]:
    """Eigen-factor a symmetric matrix: D ≈ Σ_k w_k v_k v_kᵀ, dropping |w_k| below tolerance · max |w|.

    Returns
    -------
    vectors : ndarray, shape (nbf, rank)
        v_k sqrt|w_k|, positive weights first.
    signs : ndarray, shape (rank,)
        +1 or -1.
    """
    w, v = np.linalg.eigh(density)
    big = np.abs(w).max() if w.size else 0.0
    keep = np.abs(w) > tolerance * big if big > 0 else np.zeros(w.shape, dtype=bool)
    order = np.argsort(-w[keep], kind="stable")
    wk, vk = w[keep][order], v[:, keep][:, order]
    return np.ascontiguousarray(vk * np.sqrt(np.abs(wk))), np.sign(wk)


def _tile_bytes(n_functions: int, n_columns: int) -> int:
    """Peak scratch memory of :func:`_half_transform` (the tile and its product), bytes."""
    return 2 * max(_TILE_BYTES, 8 * n_functions * n_columns)


def _half_transform_rows(b: np.ndarray, c: np.ndarray, tile_bytes: int = _TILE_BYTES) -> np.ndarray:
    """Zᵀ[μ, k, P] = Σ_ν c_νk B_Pμν from pair-major packed factors b (npair, nP); shape (nbf, rank, nP).

    The packed lower triangle holds, for each μ, the rows p(μ, ν ≤ μ) as one
    contiguous run: their part, Σ_{ν ≤ μ}, is one product cᵀ · run per μ,
    read in place. The other part, Σ_{ν > μ} c_νk B_P(ν,μ), reads column μ
    of the triangle, which is scattered; it is taken a block of columns ν ∈
    [j0, j1) at a time: the rows μ > j0 of the block are copied (contiguous
    slabs, zero above the diagonal) into a tile, and one matrix product
    cᵀ · tile gives the block's whole contribution (the tile and that product
    take at most 2 · ``tile_bytes`` together, or one column's worth).
    Both products have the (rank × K)·(K × many) shape that runs at the
    matrix-product rate (a Python loop over μ with a gather of rows per μ and
    a (nP × K)·(K × rank) product ran at about half of it).
    """
    n, n_cols = int(round((np.sqrt(8 * b.shape[0] + 1) - 1) / 2)), b.shape[1]
    rank = c.shape[1]
    ct = np.ascontiguousarray(c.T)
    z = np.empty((n, rank, n_cols))
    starts = np.arange(n) * (np.arange(n) + 1) // 2
    for mu in range(n):
        s = starts[mu]
        np.matmul(ct[:, : mu + 1], b[s : s + mu + 1], out=z[mu])
    if n < 2 or rank == 0:
        return z
    # The tile (rows × width × nP) and its product (rank × width × nP) share twice tile_bytes.
    width = max(1, min(n, 2 * tile_bytes // (8 * n_cols * (n - 1 + rank))))
    tile = np.empty(width * (n - 1) * n_cols)
    product = np.empty(rank * width * n_cols)
    for j0 in range(0, n - 1, width):
        j1 = min(n, j0 + width)
        nj, rows = j1 - j0, n - j0 - 1
        block = tile[: rows * nj * n_cols].reshape(rows, nj, n_cols)
        for mu in range(j0 + 1, n):
            s, top = starts[mu], min(mu, j1)
            block[mu - j0 - 1, : top - j0] = b[s + j0 : s + top]
            block[mu - j0 - 1, top - j0 :] = 0.0
        out = product[: rank * nj * n_cols].reshape(rank, nj * n_cols)
        np.matmul(ct[:, j0 + 1 :], block.reshape(rows, -1), out=out)
        z[j0:j1] += out.reshape(rank, nj, n_cols).transpose(1, 0, 2)
    return z


def _half_transform(
    b: np.ndarray, c: np.ndarray, upper_rows: list[np.ndarray] | None = None, tile_bytes: int = _TILE_BYTES
) -> np.ndarray:
    """Z[μ, P, k] = Σ_ν B_Pμν c_νk from pair-major factors b (npair, nP); shape (nbf, nP, rank).

    The layout of :func:`_half_transform_rows` transposed (``upper_rows`` is
    no longer needed and ignored; it stays for callers written before).
    """
    return np.ascontiguousarray(_half_transform_rows(b, c, tile_bytes).transpose(0, 2, 1))


class FittedJK:
    """A J/K builder from density-fitted integrals (see the module notes).

    Parameters
    ----------
    basis : BasisSet
        Orbital basis.
    aux : BasisSet
        Fitting set on the same molecule.
    plan : FittingPlan
        From :func:`plan_fitting`.
    threshold : float
        Screening threshold of the three-centre integrals (hartree).
    metric_threshold : float
        See :class:`MetricFactor`.
    threads : int
        Threads the three-centre pass is spread over (the same integrals
        for any number, see :class:`ThreeCenterEngine`).

    Attributes
    ----------
    n_dropped : int
        Metric eigenvectors dropped as near-singular.
    storage : {"stored", "blocked"}
    """

    def __init__(
        self, basis: BasisSet, aux: BasisSet, plan: FittingPlan, *, threshold: float = 1e-12,
        metric_threshold: float = METRIC_THRESHOLD, threads: int = 1,
    ) -> None:
        self.n_functions = basis.n_functions
        self.n_aux = aux.n_functions
        self.storage = plan.storage
        self._plan = plan
        self._engine = ThreeCenterEngine(basis, aux, threshold=threshold, threads=threads)
        metric = two_center_integrals(aux)
        factors = order = None
        if self.storage == "stored":
            # The pair-major factors come in the tile generator's column order; the metric follows it.
            factors, order = self._engine.compute_pair_major()
            metric = metric[np.ix_(order, order)]
        self._metric = MetricFactor(metric, metric_threshold)
        self.n_dropped = self._metric.n_dropped
        n = self.n_functions
        first, second = np.tril_indices(n)
        pair = np.empty((n, n), dtype=np.intp)
        pair[first, second] = np.arange(first.size)
        pair[second, first] = np.arange(first.size)
        self._pair = pair.ravel()
        self._first, self._second = first, second
        # Stored factors are pair-major, (npair, n_kept): see _half_transform.
        self._factors: np.ndarray | None = None
        if self.storage == "stored":
            self._factors = self._metric.whiten_pair_major(factors)
        # _half_transform no longer needs the gathered rows; the name stays for callers written before.
        self._upper_rows = None
        # The half-transformed fixed factor of jk_transition, kept between calls when it fits.
        self._fixed_factor: np.ndarray | None = None
        self._fixed_half: np.ndarray | None = None

    def _packed(self, density: np.ndarray) -> np.ndarray:
        d = density[self._first, self._second]
        return d * np.where(self._first == self._second, 1.0, 2.0)

    @staticmethod
    def _exchange(y: np.ndarray, signs: np.ndarray) -> np.ndarray:
        """Σ_P Σ_k s_k Y_Pkμ Y_Pkν for y of shape (nP, rank, nbf)."""
        npos = int(np.count_nonzero(signs > 0))
        k = np.zeros((y.shape[2], y.shape[2]))
        for part, sign in ((slice(0, npos), 1.0), (slice(npos, y.shape[1]), -1.0)):
            if part.stop > part.start:
                flat = np.ascontiguousarray(y[:, part]).reshape(-1, y.shape[2])
                k += sign * (flat.T @ flat)
        return k

    def jk_transition(self, left: np.ndarray, right: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Fitted J and K of the symmetric density D = L Rᵀ + R Lᵀ given by its two thin factors.

        A stability or second-order step needs J/K of transition densities
        ``C_v x C_oᵀ + (C_v x C_oᵀ)ᵀ``: ``left = C_v x`` changes from call to
        call, ``right = C_o`` does not. With stored factors, K = Z_L Z_Rᵀ +
        Z_R Z_Lᵀ from the half-transformed factors Z (see
        :func:`_half_transform_rows`); Z_R is kept between calls while the same
        ``right`` comes back and the memory budget has room for it, so a call
        costs one half-transform and one matrix product (:meth:`jk` on the
        same density would eigen-factor it into rank 2·nocc and half-transform
        both signs). In blocked storage the density goes through the blocked
        build factored as ½[(L+R)(L+R)ᵀ − (L−R)(L−R)ᵀ], without an
        eigen-decomposition.

        Parameters
        ----------
        left, right : ndarray, shape (nbf, rank)

        Returns
        -------
        J, K : ndarray, shape (nbf, nbf)
            As :meth:`jk` returns for the density ``left @ right.T + right @ left.T``.
        """
        return self.jk_transitions([left], right)[0]

    def jk_transitions(self, lefts: list[np.ndarray], right: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
        """:meth:`jk_transition` for several left factors sharing one right factor, in one pass.

        With stored factors the lefts are half-transformed together (a wider
        product, so a higher rate) in as many groups as the memory budget
        allows, and all Coulomb matrices come from one pass over the factors.

        Parameters
        ----------
        lefts : list of ndarray, each shape (nbf, rank)
        right : ndarray, shape (nbf, rank)

        Returns
        -------
        list of (J, K), each ndarray of shape (nbf, nbf)
        """
        right = np.ascontiguousarray(right, dtype=np.float64)
        lefts = [np.ascontiguousarray(x, dtype=np.float64) for x in lefts]
        n, rank = self.n_functions, right.shape[1]
        densities = [x @ right.T for x in lefts]
        packed = np.array([self._packed(d + d.T) for d in densities]).reshape(len(lefts), -1)
        if self._factors is None:
            root = np.sqrt(0.5)
            signs = np.concatenate([np.ones(rank), -np.ones(rank)])
            out = []
            for x, dp in zip(lefts, packed):
                jp, k = self._blocked(dp, np.column_stack([root * (x + right), root * (x - right)]), signs)
                out.append((self._unpack(jp), 0.5 * (k + k.T)))
            return out
        b = self._factors
        jps = b @ (packed @ b).T  # (npair, m): every Coulomb matrix from one pass
        z_right = self._half_of_fixed(right).reshape(n, -1)
        # One group's half-transform takes rank · group columns; the plan holds one of rank nocc.
        spare = self._plan.limit_bytes - self._plan.need_bytes - (z_right.nbytes if self._fixed_half is not None else 0)
        group = max(1, 1 + int(spare // max(1, z_right.nbytes)))
        exchange = []
        for g0 in range(0, len(lefts), group):
            chunk = lefts[g0 : g0 + group]
            z = _half_transform_rows(b, np.column_stack(chunk), self._plan.tile_bytes).reshape(n, len(chunk), -1)
            for i in range(len(chunk)):
                m = z[:, i] @ z_right.T  # z[:, i] is a strided view that the product takes as it is
                k = m + m.T
                exchange.append(0.5 * (k + k.T))
            del z
        return [(self._unpack(jps[:, i]), k) for i, k in enumerate(exchange)]

    def _unpack(self, jp: np.ndarray) -> np.ndarray:
        j = np.empty((self.n_functions, self.n_functions))
        j[self._first, self._second] = jp
        j[self._second, self._first] = jp
        return j

    def _half_of_fixed(self, right: np.ndarray) -> np.ndarray:
        """Z_R for :meth:`jk_transition`, reused while ``right`` is unchanged and the budget allows."""
        if self._fixed_half is not None and self._fixed_factor is not None and np.array_equal(right, self._fixed_factor):
            return self._fixed_half
        z = _half_transform_rows(self._factors, right, self._plan.tile_bytes)
        if self._plan.limit_bytes - self._plan.need_bytes >= z.nbytes:
            self._fixed_factor, self._fixed_half = right.copy(), z
        return z

    def release(self) -> None:
        """Drop the half-transformed factor :meth:`jk_transition` keeps (its memory returns)."""
        self._fixed_factor = self._fixed_half = None

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Fitted Coulomb and exchange matrices of a symmetric density.

        Parameters
        ----------
        density : ndarray, shape (nbf, nbf)

        Returns
        -------
        J, K : ndarray, shape (nbf, nbf)
            J_μν ≈ Σ (μν|λσ) D_λσ and K_μν ≈ Σ (μλ|νσ) D_λσ with the fitted integrals.
        """
        d = np.asarray(density, dtype=np.float64)
        vectors, signs = factor_density(d)
        dp = self._packed(d)
        if self._factors is not None:
            b = self._factors
            jp = b @ (dp @ b)
            k = np.zeros((self.n_functions, self.n_functions))
            for sign in (1.0, -1.0):
                part = vectors[:, signs == sign]
                if part.shape[1]:
                    z = _half_transform_rows(b, part, self._plan.tile_bytes).reshape(self.n_functions, -1)
                    # z zᵀ is symmetric: the rank-k update computes one triangle (half the flops).
                    upper = scipy.linalg.blas.dsyrk(1.0, z.T, trans=1)  # z.T is Fortran-ordered: no copy
                    k += sign * (upper + np.triu(upper, 1).T)
        else:
            jp, k = self._blocked(dp, vectors, signs)
        j = np.empty((self.n_functions, self.n_functions))
        j[self._first, self._second] = jp
        j[self._second, self._first] = jp
        return j, 0.5 * (k + k.T)

    def jk_multi(self, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Fitted J of the sum and K of each of several densities, from one use of the factors.

        Blocked way: the factor vectors of all densities share one pass of
        recomputed blocks. Stored factors: J of the sum in one product, and
        one half-transform per density for K (faster than one of the
        combined rank, see the comment in the code).

        Parameters
        ----------
        densities : ndarray, shape (m, nbf, nbf)

        Returns
        -------
        J : ndarray, shape (nbf, nbf)
        K : ndarray, shape (m, nbf, nbf)
        """
        d = np.asarray(densities, dtype=np.float64)
        n, m = self.n_functions, d.shape[0]
        parts = [factor_density(dm) for dm in d]
        vectors = np.concatenate([v for v, _ in parts], axis=1)
        signs = np.concatenate([sg for _, sg in parts])
        owner = np.concatenate([np.full(sg.size, q) for q, (_, sg) in enumerate(parts)])
        dp = self._packed(d.sum(axis=0))
        k = np.zeros((m, n, n))
        if self._factors is not None:
            b = self._factors
            jp = b @ (dp @ b)
            # One half-transform per density and sign, as jk does: measured on benzene/cc-pVDZ
            # (def2-universal-jkfit, one thread), two of rank r cost less than one of rank 2r
            # followed by the copies that split it (36 against 44 ms), so the factors are read
            # once per density for K; J of the sum reads them once.
            for q, (vq, sq) in enumerate(parts):
                for sign in (1.0, -1.0):
                    part = vq[:, sq == sign]
                    if part.shape[1]:
                        z = _half_transform(b, part, self._upper_rows).reshape(n, -1)
                        upper = scipy.linalg.blas.dsyrk(1.0, z.T, trans=1)
                        k[q] += sign * (upper + np.triu(upper, 1).T)
        else:
            jp, k = self._blocked(dp, vectors, signs, owner, m)
        j = np.empty((n, n))
        j[self._first, self._second] = jp
        j[self._second, self._first] = jp
        return j, 0.5 * (k + k.transpose(0, 2, 1))

    def _blocked(
        self, dp: np.ndarray, vectors: np.ndarray, signs: np.ndarray, owner: np.ndarray | None = None, m: int = 0
    ) -> tuple[np.ndarray, np.ndarray]:
        """J (packed) and K recomputing (P|μν) in blocks; the density rank is taken in chunks that fit."""
        n, naux = self.n_functions, self.n_aux
        block = self._plan.block_functions
        rank = vectors.shape[1]
        chunk = max(1, min(rank, self._plan.half_bytes // (8 * naux * n))) if rank else 0
        gamma = np.zeros(naux)
        k = np.zeros((n, n))
        ks = np.zeros((m, n, n))
        first = True
        for r0 in range(0, max(rank, 1), max(chunk, 1)):
            cols = slice(r0, min(r0 + chunk, rank))
            half = allocate("the half-transformed fitted factors", (naux, cols.stop - cols.start, n)) if rank else None
            for index, values in self._engine.blocks(block):
                if first:
                    gamma[index] = values @ dp
                if half is not None:
                    z = _half_transform_rows(np.ascontiguousarray(values.T), vectors[:, cols], self._plan.tile_bytes)
                    half[index] = z.transpose(2, 1, 0)
            first = False
            if half is not None:
                y = self._metric.whiten(half.reshape(naux, -1)).reshape(-1, cols.stop - cols.start, n)
                if owner is None:
                    k += self._exchange(y, signs[cols])
                else:
                    # Several densities: each column's exchange goes to its own density's K.
                    for q in np.unique(owner[cols]):
                        mine = np.flatnonzero(owner[cols] == q)
                        ks[q] += self._exchange(np.ascontiguousarray(y[:, mine]), signs[cols][mine])
        coef = self._metric.solve(gamma)
        jp = np.zeros(dp.size)
        for index, values in self._engine.blocks(block):
            jp += values.T @ coef[index]
        return jp, (k if owner is None else ks)


__all__ = ["FittedJK", "FittingPlan", "MetricFactor", "plan_fitting", "factor_density", "METRIC_THRESHOLD"]
