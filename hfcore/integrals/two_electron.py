"""Electron-repulsion integrals (μν|λσ) by McMurchie–Davidson, packed with 8-fold symmetry.

Scheme
------
1. Shells on one atom whose exponents all occur in one shell (the s and p
   of an sp shell, several segmented contractions over one primitive set,
   or a primitive published again on its own, as the outermost s and p of
   correlation-consistent sets) form a *family* over that shell's
   primitives; pairs of families share one set of primitive pairs, so their
   Boys function and Hermite integrals are computed once for all member
   shell pairs. In a family paired with itself the primitive pairs (i, j)
   and (j, i) coincide and are merged. For every primitive pair the Hermite coefficients
   E^{ab}_{tuv} are built once, with the contraction coefficients, the
   Cartesian normalisation or spherical transform and the factor 1/p folded
   in. A generally contracted shell costs no extra primitive work: its
   contractions are just more columns ("pair functions") of the folded E.
2. Primitive pairs whose own Schwarz bound, times the largest contracted
   bound, stays below ``threshold / 1000`` are dropped. Pairs are regrouped
   by (L, number of pair functions, number of kept primitive pairs; counts
   within 20 % are merged by padding with zero coefficients) and sorted by
   their Schwarz bound Q = max sqrt((ab|ab)).
3. For each pair of groups (bra, ket), tiles of about 4k primitive quartets
   (and at most 64k Hermite integrals, so a tile stays in cache) are formed;
   tiles with Q_bra Q_ket < threshold are skipped. Inside a tile, for all
   primitive quartets at once: Boys function, Hermite integrals
   R_{tuv}(alpha, P-Q) by the downward recursion on (t, u, v), then

   * one gather R[h_bra + h_ket] into G[k, (j, h_ket), (h_bra, b, i)],
   * ket side: X[k] = E_ket[k] @ G[k] (BLAS, sum over ket primitives j and h_ket),
   * bra side: out[b] = E_bra[b] @ Y[b] (BLAS, sum over bra primitives i and h_bra).

   The roles are chosen per group pair to keep the ket-side product small.
4. The contracted block is scattered into the packed store at the canonical
   position of each (ij|kl).

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
from functools import lru_cache

import numpy as np
from scipy.linalg import blas

from ..basis.shells import BasisSet, Shell, n_cartesian
from ..errors import InputError, ResourceError
from .boys import boys
from .hermite import hermite_e, hermite_r, hermite_signs, n_hermite, sum_index
from .pairs import PairGroup, build_group, contract_einsum, group_pairs
from .spherical import component_transform

_ERI_CONST = 2.0 * np.pi**2.5
_TILE_QUARTETS = 1 << 12
_TILE_ELEMENTS = 1 << 16
_MERGE_FILL = 0.8
#: Direct tiles are this many times larger: each carries a fixed cost of
#: contraction steps, and larger tiles measured 15-20 % faster per pass
#: (benzene, 6-31G*).
_DIRECT_TILE_SCALE = 4
#: Largest dense (nbf,)*4 array ``to_dense`` will build, in bytes.
DENSE_LIMIT_BYTES = 4 << 30
#: Largest store (integrals plus exchange kernel) ``compute_eri`` will build, in bytes.
STORE_LIMIT_BYTES = 12 << 30


@dataclass
class _EriPairs:
    """Shell pairs of one shape with folded Hermite coefficients.

    ``e_bra`` has shape (n, nf, nH * nprim) ordered (hermite, primitive);
    ``e_ket`` has shape (n, nf, nprim * nH) ordered (primitive, hermite), with
    the (-1)^{t+u+v} sign folded in.
    """

    L: int
    p: np.ndarray  # (n, nprim)
    P: np.ndarray  # (3, n, nprim)
    e: np.ndarray  # (n, nprim, nH, nf)
    pidx: np.ndarray  # (n, nf) packed function-pair index
    q: np.ndarray = field(default=None)  # (n,) Schwarz bound
    e_bra: np.ndarray = field(default=None)
    e_ket: np.ndarray = field(default=None)
    tri: np.ndarray = field(default=None)  # pidx (pidx + 1) / 2

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
        nh = self.e.shape[2]
        self.e_bra = np.ascontiguousarray(self.e.transpose(0, 3, 2, 1).reshape(self.n, self.nf, nh * self.nprim))
        signed = self.e * hermite_signs(self.L)[None, None, :, None]
        self.e_ket = np.ascontiguousarray(signed.transpose(0, 3, 1, 2).reshape(self.n, self.nf, self.nprim * nh))
        self.tri = self.pidx * (self.pidx + 1) // 2


def _pair_index(i: np.ndarray, j: np.ndarray) -> np.ndarray:
    hi = np.maximum(i, j)
    return hi * (hi + 1) // 2 + np.minimum(i, j)


def _canonical(a: np.ndarray, b: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Packed quartet index of pair indices a, b (any order), via the table tri[P] = P(P+1)/2."""
    return np.where(a >= b, tri[a] + b, tri[b] + a)


def _function_indices(group: PairGroup, basis: BasisSet) -> np.ndarray:
    """Packed pair index of every pair function, shape (n, nf)."""
    off = basis.shell_offsets
    sa, sb = basis.shells[group.shell_a[0]], basis.shells[group.shell_b[0]]
    nfa = sa.n_functions(basis.spherical)
    nfb = sb.n_functions(basis.spherical)
    i = off[group.shell_a][:, None, None] + np.arange(nfa)[None, :, None]
    j = off[group.shell_b][:, None, None] + np.arange(nfb)[None, None, :]
    return _pair_index(i, j).reshape(group.n, nfa * nfb)


def _fold(group: PairGroup, spherical: bool) -> np.ndarray:
    """Folded Hermite coefficients, shape (n, npa*npb, nH, nf)."""
    p = group.flat(group.p)
    e3 = hermite_e(group.la, group.lb, group.pa(), group.pb(), p, group.flat(group.kab) / p)
    nca, ncb = n_cartesian(group.la), n_cartesian(group.lb)
    npa, npb = group.exp_a.shape[1], group.exp_b.shape[1]
    e3 = e3.reshape(nca, ncb, e3.shape[1], group.n, npa, npb)
    ta = component_transform(group.la, spherical)
    tb = component_transform(group.lb, spherical)
    out = contract_einsum("xyhnij,nai,nbj,sx,ty->nijhasbt", e3, group.coef_a, group.coef_b, ta, tb)
    nh = e3.shape[2]
    return np.ascontiguousarray(out.reshape(group.n, npa * npb, nh, -1))


def _diagonal(pairs: _EriPairs) -> np.ndarray:
    """(f f | f f) for every pair function of every pair, shape (n, nf)."""
    L = pairs.L
    n, m = pairs.n, pairs.nprim
    p = pairs.p[:, :, None]
    q = pairs.p[:, None, :]
    pq = pairs.P[:, :, :, None] - pairs.P[:, :, None, :]
    R = _hermite_block(2 * L, p, q, pq).reshape(-1, n, m, m)
    g = R[sum_index(L, L)]  # (nH, nH, n, m, m)
    signed = pairs.e * hermite_signs(L)[None, None, :, None]
    return contract_einsum("nihf,njkf,hknij->nf", pairs.e, signed, g)


def _hermite_block(L: int, p: np.ndarray, q: np.ndarray, pq: np.ndarray) -> np.ndarray:
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


def _primitive_bounds(pairs: _EriPairs) -> np.ndarray:
    """Schwarz bound of every primitive pair (max over pair functions), shape (n, nprim)."""
    n, m = pairs.n, pairs.nprim
    single = _EriPairs(
        pairs.L,
        pairs.p.reshape(n * m, 1),
        pairs.P.reshape(3, n * m, 1),
        pairs.e.reshape(n * m, 1, pairs.e.shape[2], pairs.nf),
        np.repeat(pairs.pidx, m, axis=0),
    )
    return np.sqrt(np.abs(_diagonal(single)).max(axis=1)).reshape(n, m)


def _survivors(pairs: _EriPairs, keep: np.ndarray) -> list[_EriPairs]:
    """Split pairs by number of kept primitive pairs, dropping the others."""
    counts = keep.sum(axis=1)
    out = []
    for c in np.unique(counts):
        if c == 0:
            continue
        rows = np.flatnonzero(counts == c)
        mask = keep[rows]
        out.append(
            _EriPairs(
                pairs.L,
                pairs.p[rows][mask].reshape(rows.size, c),
                pairs.P[:, rows][:, mask].reshape(3, rows.size, c),
                pairs.e[rows][mask].reshape((rows.size, c) + pairs.e.shape[2:]),
                pairs.pidx[rows],
            )
        )
    return out


def _pad(pairs: _EriPairs, m: int) -> _EriPairs:
    """Append primitive pairs with zero coefficients up to m per pair."""
    extra = m - pairs.nprim
    if extra == 0:
        return pairs
    n = pairs.n
    p = np.concatenate([pairs.p, np.ones((n, extra))], axis=1)
    P = np.concatenate([pairs.P, np.repeat(pairs.P[:, :, :1], extra, axis=2)], axis=2)
    e = np.concatenate([pairs.e, np.zeros((n, extra) + pairs.e.shape[2:])], axis=1)
    return _EriPairs(pairs.L, p, P, e, pairs.pidx)


def _merge(parts: list[_EriPairs], fill: float) -> list[_EriPairs]:
    """Merge same-class parts whose primitive counts differ little, padding with zeros.

    Fewer, larger groups mean fewer and larger tiles; a part joins the current
    group while its count is at least ``fill`` times the group's largest.
    """
    parts = sorted(parts, key=lambda x: -x.nprim)
    merged: list[list[_EriPairs]] = []
    for part in parts:
        if merged and part.nprim >= fill * merged[-1][0].nprim:
            merged[-1].append(part)
        else:
            merged.append([part])
    out = []
    for bunch in merged:
        m = bunch[0].nprim
        padded = [_pad(x, m) for x in bunch]
        out.append(
            _EriPairs(
                bunch[0].L,
                np.concatenate([x.p for x in padded]),
                np.concatenate([x.P for x in padded], axis=1),
                np.concatenate([x.e for x in padded]),
                np.concatenate([x.pidx for x in padded]),
            )
        )
    return out


def _families(basis: BasisSet) -> list[list[int]]:
    """Shells on one atom whose exponents all occur in the family's first shell, by first shell.

    This joins the s and p of an sp shell, and also a single primitive
    published twice, once inside a general contraction and once on its own
    (the outermost s or p of a correlation-consistent set): its pairs are
    then columns of the family's pairs instead of primitive pairs of their own.
    """
    order = sorted(range(basis.n_shells), key=lambda k: (basis.shells[k].atom, -basis.shells[k].n_primitives, k))
    out: list[list[int]] = []
    for k in order:
        shell = basis.shells[k]
        for fam in out:
            first = basis.shells[fam[0]]
            if first.atom == shell.atom and np.isin(shell.exponents, first.exponents).all():
                fam.append(k)
                break
        else:
            out.append([k])
    return out


def _family_shells(basis: BasisSet, fams: list[list[int]]) -> list[Shell]:
    """The shells, each written over the primitives of its family's first shell (zero coefficients elsewhere)."""
    out = list(basis.shells)
    for fam in fams:
        base = basis.shells[fam[0]].exponents
        for k in fam[1:]:
            shell = basis.shells[k]
            if np.array_equal(shell.exponents, base):
                continue
            coef = np.zeros((shell.n_contractions, base.size))
            coef[:, [int(np.flatnonzero(base == x)[0]) for x in shell.exponents]] = shell.coefficients
            out[k] = Shell(shell.l, base, coef, shell.center, shell.atom, shell.label)
    return out


def _family_pairs(fams: list[list[int]], shells: list[Shell]) -> dict[tuple, list[list[tuple[int, int]]]]:
    """Pairs of shell families, each a list of shell pairs sharing one set of primitive pairs.

    Keyed by the shape signature, so pairs with equal keys can be batched.
    """
    out: dict[tuple, list[list[tuple[int, int]]]] = {}
    for ia, fa in enumerate(fams):
        for fb in fams[: ia + 1]:
            subs = [(a, b) for a in fa for b in fb if fa is not fb or a >= b]
            key = tuple(
                (shells[a].l, shells[b].l, shells[a].n_contractions, shells[b].n_contractions) for a, b in subs
            ) + ((shells[fa[0]].n_primitives, shells[fb[0]].n_primitives, fa is fb),)
            out.setdefault(key, []).append(subs)
    return out


@lru_cache(maxsize=None)
def _symmetric_primitive_pairs(m: int) -> tuple[np.ndarray, np.ndarray]:
    """Flat primitive-pair positions (i, j) and (j, i), i <= j, of an m x m pair block."""
    i, j = np.triu_indices(m)
    return i * m + j, j * m + i


def _fold_transposed(pairs: _EriPairs, m: int) -> _EriPairs:
    """Merge primitive pairs (i, j) and (j, i) of a family paired with itself.

    Both sit on one centre with the same exponent sum, so they have the same
    p, P and Hermite functions: one pair carrying the summed folded
    coefficients gives the same integrals with m(m+1)/2 instead of m^2
    primitive pairs.
    """
    ij, ji = _symmetric_primitive_pairs(m)
    e = pairs.e[:, ij] + np.where((ij != ji)[None, :, None, None], pairs.e[:, ji], 0.0)
    return _EriPairs(pairs.L, pairs.p[:, ij], pairs.P[:, :, ij], e, pairs.pidx)


def _batched_family_pairs(basis: BasisSet) -> list[_EriPairs]:
    """Folded Hermite data of every family pair; one entry per shape signature."""
    out = []
    fams = _families(basis)
    shells = _family_shells(basis, fams)
    for key, members in _family_pairs(fams, shells).items():
        subs = np.array(members)  # (n, nsub, 2)
        groups = [build_group(shells[a].l, shells[b].l, shells, shells, subs[:, s]) for s, (a, b) in enumerate(subs[0])]
        L = max(g.la + g.lb for g in groups)
        nh = n_hermite(L)
        parts = []
        for g in groups:
            e = _fold(g, basis.spherical)
            pad = np.zeros(e.shape[:2] + (nh, e.shape[3]))
            pad[:, :, : e.shape[2]] = e
            parts.append(pad)
        g0 = groups[0]
        n, m = parts[0].shape[:2]
        pairs = _EriPairs(
            L,
            g0.flat(g0.p).reshape(n, m),
            g0.flat(g0.P).reshape(3, n, m),
            np.concatenate(parts, axis=3),
            np.concatenate([_function_indices(g, basis) for g in groups], axis=1),
        )
        out.append(_fold_transposed(pairs, g0.exp_a.shape[1]) if key[-1][2] else pairs)
    return out


def _prepare(basis: BasisSet, threshold: float) -> list[_EriPairs]:
    staged = [(x, _primitive_bounds(x)) for x in _batched_family_pairs(basis)]
    qsum = max((float(q.sum(axis=1).max()) for _, q in staged), default=0.0)
    eps = threshold * 1e-3
    classes: dict[tuple[int, int], list[_EriPairs]] = {}
    for pairs, qprim in staged:
        classes.setdefault((pairs.L, pairs.nf), []).extend(_survivors(pairs, qprim * qsum >= eps))
    out = []
    for key in sorted(classes):
        out.extend(_merge(classes[key], _MERGE_FILL))
    for pairs in out:
        q = np.sqrt(np.abs(_diagonal(pairs)).max(axis=1))
        order = np.argsort(-q, kind="stable")
        pairs.p, pairs.P, pairs.e, pairs.pidx = pairs.p[order], pairs.P[:, order], pairs.e[order], pairs.pidx[order]
        pairs.q = q[order]
        pairs.finish()
    return out


def _tile(bra: _EriPairs, brows: slice | np.ndarray, ket: _EriPairs, krows: slice | np.ndarray) -> np.ndarray:
    """Contracted integrals of a tile of bra and ket rows (slices or index arrays), shape (nb, fb, nk * fk)."""
    L = bra.L + ket.L
    p = bra.p[brows]  # (nb, ip)
    q = ket.p[krows]  # (nk, jq)
    nb, ip = p.shape
    nk, jq = q.shape
    nbi = nb * ip
    nhb = n_hermite(bra.L)
    # Quartet batch order (k, j, b, i).
    pq = bra.P[:, brows][:, None, None, :, :] - ket.P[:, krows][:, :, :, None, None]
    R = _hermite_block(L, p[None, None], q[:, :, None, None], pq)
    # G[k, (j, h_ket), (h_bra, b, i)] = R[h_bra + h_ket] of the quartet (k, j, b, i);
    # for an s-type ket (h_ket = 0 only) this is a plain transpose.
    g = R.reshape(R.shape[0], nk * jq, nbi).transpose(1, 0, 2)
    if ket.L:
        g = g[:, sum_index(ket.L, bra.L)]
    g = g.reshape(nk, -1, nhb * nbi)
    x = np.matmul(ket.e_ket[krows], g)  # (nk, fk, nhb * nb * ip)
    y = x.reshape(nk * ket.nf, nhb, nb, ip).transpose(2, 1, 3, 0).reshape(nb, nhb * ip, nk * ket.nf)
    return np.matmul(bra.e_bra[brows], y)  # (nb, fb, nk * fk)


def _cost(bra: _EriPairs, ket: _EriPairs) -> float:
    """Relative cost of a tile with these roles (ket-side matmul plus the bra-side transpose)."""
    return ket.nf * n_hermite(bra.L) * (n_hermite(ket.L) + 1.0 / ket.nprim)


def _chunks(n: int, size: int) -> list[slice]:
    return [slice(s, min(s + size, n)) for s in range(0, n, size)]


def _tile_sizes(a: _EriPairs, b: _EriPairs, scale: int = 1) -> tuple[int, int]:
    per = a.nprim * b.nprim
    target = max(1, scale * min(_TILE_QUARTETS, _TILE_ELEMENTS // n_hermite(a.L + b.L)) // per)
    na = max(1, min(a.n, int(np.sqrt(target))))
    nb = max(1, min(b.n, target // na))
    return na, nb


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
        return _pair_index(i[:, None], i[None, :])

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
            out[i] = self.packed[_pair_index(pm[i][:, None, None], pm[None, :, :])]
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


def schwarz_bounds(basis: BasisSet) -> np.ndarray:
    """Schwarz bounds of shell pairs, Q_ab = max over functions sqrt((ab|ab)).

    Returns
    -------
    ndarray, shape (nshell, nshell)
        Symmetric; in hartree^{1/2}.
    """
    out = np.zeros((basis.n_shells, basis.n_shells))
    i, j = np.tril_indices(basis.n_shells)
    for group in group_pairs(basis.shells, basis.shells, np.stack([i, j], axis=1)):
        e = _fold(group, basis.spherical)
        pairs = _EriPairs(group.la + group.lb, group.flat(group.p).reshape(e.shape[:2]),
                          group.flat(group.P).reshape((3,) + e.shape[:2]), e, np.zeros((group.n, 1), dtype=np.intp))
        q = np.sqrt(np.abs(_diagonal(pairs)).max(axis=1))
        out[group.shell_a, group.shell_b] = q
        out[group.shell_b, group.shell_a] = q
    return out


def _group_pair(g1: _EriPairs, g2: _EriPairs, threshold: float, packed: np.ndarray) -> None:
    """All tiles of one pair of groups that survive the Schwarz test, into the packed store."""
    same = g1 is g2
    bra, ket = (g1, g2) if _cost(g1, g2) <= _cost(g2, g1) else (g2, g1)
    nb_size, nk_size = _tile_sizes(bra, ket)
    if same:
        nb_size = nk_size = min(nb_size, nk_size)
    for ib, brows in enumerate(_chunks(bra.n, nb_size)):
        qb = bra.q[brows.start]
        for ik, krows in enumerate(_chunks(ket.n, nk_size)):
            # Pairs are sorted by decreasing bound, so the first failing ket ends the row.
            if (same and ik > ib) or qb * ket.q[krows.start] < threshold:
                break
            count = int(np.sum(qb * ket.q[krows] >= threshold))
            krows = slice(krows.start, krows.start + max(count, 1))
            _store(bra, brows, ket, krows, _tile(bra, brows, ket, krows), packed)


def _store(bra: _EriPairs, brows: slice, ket: _EriPairs, krows: slice, block: np.ndarray, packed: np.ndarray) -> None:
    """Write a tile (nb, fb, nk * fk) at the canonical packed position of each element."""
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
    groups = _prepare(basis, threshold)
    jobs = [(a, b) for ia, a in enumerate(groups) for b in groups[: ia + 1]]
    total = sum(a.n * a.nprim * b.n * b.nprim * n_hermite(a.L + b.L) for a, b in jobs) or 1
    done = 0
    for g1, g2 in jobs:
        _group_pair(g1, g2, threshold, packed)
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

    pairs: _EriPairs
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

    def __init__(self, n: int) -> None:
        self.n = n
        self.j = np.zeros(n * (n + 1) // 2)
        self.k = np.zeros(n * n)
        self._jparts: list[tuple[np.ndarray, np.ndarray]] = []
        self._kindex = np.empty(self._BATCH, dtype=np.intp)
        self._kvalue = np.empty(self._BATCH)
        self._used = 0

    def add_j(self, index: np.ndarray, value: np.ndarray) -> None:
        self._jparts.append((index, value))

    def k_slot(self, rows: int, cols: int) -> tuple[np.ndarray, np.ndarray]:
        """Index and value buffers, shape (rows, cols) each, for exchange terms to add."""
        size = rows * cols
        if self._used + size > self._kindex.size:
            self.flush()
            if size > self._kindex.size:
                self._kindex = np.empty(size, dtype=np.intp)
                self._kvalue = np.empty(size)
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

    def result(self) -> tuple[np.ndarray, np.ndarray]:
        """(J, K), each symmetric (nbf, nbf)."""
        self.flush()
        n = self.n
        m = np.zeros((n, n))
        first, second = np.tril_indices(n)
        m[first, second] = self.j
        half = self.k.reshape(n, n)
        return m + m.T, half + half.T


class DirectERI:
    """J and K by recomputing the screened integrals on every call (direct mode).

    The integrals come in the same tiles as :func:`compute_eri` builds, each
    contracted with the density at once and dropped, so memory stays at a
    few nbf^2 arrays plus a 32 MiB scatter buffer. Every unique integral is used once with all eight of
    its index permutations. A quartet counts as negligible when its Schwarz
    bound Q_ab Q_cd times the largest density element over the six
    shell-family blocks it touches (ab, cd, ac, ad, bc, bd) is below the
    threshold; tiles shrink to the bra and ket rows that hold a quartet
    that is not, which makes builds from small density changes cheap.

    Parameters
    ----------
    basis : BasisSet
    threshold : float
        Screening threshold (hartree), as in :func:`compute_eri`.

    Attributes
    ----------
    last_stats : DirectPassStats or None
        Work of the latest :meth:`jk` call.
    """

    def __init__(self, basis: BasisSet, *, threshold: float = 1e-12) -> None:
        if threshold < 0:
            raise InputError(f"the screening threshold must be >= 0, not {threshold}")
        self.n_functions = basis.n_functions
        self.threshold = float(threshold)
        self._families = _function_families(basis)
        shell_of = np.repeat(np.arange(basis.n_shells), [s.n_functions(basis.spherical) for s in basis.shells])
        first, second = np.tril_indices(basis.n_functions)
        self._groups = []
        for pairs in _prepare(basis, threshold):
            hi, lo = first[pairs.pidx], second[pairs.pidx]
            weight = np.where(shell_of[hi] == shell_of[lo], 0.5, 1.0)
            fam = self._families
            self._groups.append(_DirectGroup(pairs, hi, lo, weight, fam[hi[:, 0]], fam[lo[:, 0]]))
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
        block_max = _block_max(np.abs(d), self._families)
        acc = _Accumulator(self.n_functions)
        counts = np.zeros(2, dtype=np.int64)
        for ia, g1 in enumerate(self._groups):
            for g2 in self._groups[: ia + 1]:
                self._group_pair(g1, g2, d, block_max, acc, counts)
        self.last_stats = DirectPassStats(int(counts[0]), int(counts[1]))
        return acc.result()

    def _group_pair(
        self, g1: _DirectGroup, g2: _DirectGroup, d: np.ndarray, block_max: np.ndarray, acc: _Accumulator,
        counts: np.ndarray,
    ) -> None:
        same = g1 is g2
        bra, ket = (g1, g2) if _cost(g1.pairs, g2.pairs) <= _cost(g2.pairs, g1.pairs) else (g2, g1)
        nb_size, nk_size = _tile_sizes(bra.pairs, ket.pairs, _DIRECT_TILE_SCALE)
        if same:
            nb_size = nk_size = min(nb_size, nk_size)
        dmax = float(block_max.max()) if block_max.size else 0.0
        per = bra.pairs.nprim * ket.pairs.nprim
        for ib, brows in enumerate(_chunks(bra.pairs.n, nb_size)):
            qb = bra.pairs.q[brows.start]
            for ik, krows in enumerate(_chunks(ket.pairs.n, nk_size)):
                if (same and ik > ib) or qb * ket.pairs.q[krows.start] < self.threshold:
                    break
                diagonal = same and ik == ib
                if not diagonal:
                    # A diagonal tile must keep every row on both sides so each
                    # bra-ket pair appears in both orders and the 1/2 weight holds.
                    count = int(np.sum(qb * ket.pairs.q[krows] >= self.threshold))
                    krows = slice(krows.start, krows.start + max(count, 1))
                counts[0] += (brows.stop - brows.start) * (krows.stop - krows.start) * per
                if qb * ket.pairs.q[krows.start] * dmax < self.threshold:
                    continue
                rows, cols = _significant(bra, brows, ket, krows, block_max, self.threshold, diagonal)
                if rows.size == 0 or cols.size == 0:
                    continue
                counts[1] += rows.size * cols.size * per
                block = _tile(bra.pairs, rows, ket.pairs, cols)
                _contract(bra, rows, ket, cols, block, 0.5 if diagonal else 1.0, d, acc)


def _function_families(basis: BasisSet) -> np.ndarray:
    """Family index (shells of one atom sharing exponents) of every basis function, shape (nbf,)."""
    out = np.empty(basis.n_functions, dtype=np.intp)
    off = basis.shell_offsets
    for f, members in enumerate(_families(basis)):
        for s in members:
            out[off[s] : off[s] + basis.shells[s].n_functions(basis.spherical)] = f
    return out


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
    d: np.ndarray, acc: _Accumulator,
) -> None:
    """Add a tile's integrals, with all eight index permutations, to J and K.

    Each tile value v of (ij|kl) is weighted by 1/2 for a shell paired with
    itself on either side and 1/2 in a diagonal tile, which is exactly one
    over the number of times the tiles hold that integral times the share of
    its eight permutations that coincide. Then J_ij, J_kl get 2 w v D_kl,
    2 w v D_ij and the half-exchange N gets w v D_jl at (i, k) and likewise
    for (j,k), (i,l), (j,l); J and K are the symmetrised sums.
    """
    n = d.shape[0]
    ih, il = bra.hi[brows].ravel(), bra.lo[brows].ravel()
    kh, kl = ket.hi[krows].ravel(), ket.lo[krows].ravel()
    wv = block.reshape(ih.size, kh.size)
    wv = wv * (bra.weight[brows].reshape(-1, 1) * (scale * ket.weight[krows].reshape(1, -1)))
    dflat = d.ravel()
    acc.add_j(bra.pairs.pidx[brows].ravel(), 2.0 * (wv @ dflat[kh * n + kl]))
    acc.add_j(ket.pairs.pidx[krows].ravel(), 2.0 * (dflat[ih * n + il] @ wv))
    for r1, r2 in ((ih, il), (il, ih)):
        r1n = r1[:, None] * n
        for c1, c2 in ((kh, kl), (kl, kh)):
            index, value = acc.k_slot(ih.size, kh.size)
            np.add(r1n, c1[None, :], out=index)
            np.multiply(wv, d[np.ix_(r2, c2)], out=value)


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
    "DirectERI",
    "DirectPassStats",
    "compute_eri",
    "estimate_eri_memory",
    "eri_tensor",
    "schwarz_bounds",
    "DENSE_LIMIT_BYTES",
    "STORE_LIMIT_BYTES",
]
