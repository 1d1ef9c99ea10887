"""Pair preparation for the two-electron passes: shell families, folded coefficients, screening data.

1. Shells on one atom whose exponents all occur in one shell (the s and p
   of an sp shell, several segmented contractions over one primitive set,
   or a primitive published again on its own, as the outermost s and p of
   correlation-consistent sets) form a *family* over that shell's
   primitives; pairs of families share one set of primitive pairs, so their
   Boys function and Hermite integrals are computed once for all member
   shell pairs. In a family paired with itself the primitive pairs (i, j)
   and (j, i) coincide and are merged. For every primitive pair the Hermite
   coefficients E^{ab}_{tuv} are built once, with the contraction
   coefficients, the Cartesian normalisation or spherical transform and the
   factor 1/p folded in. A generally contracted shell costs no extra
   primitive work: its contractions are just more columns ("pair
   functions") of the folded E.
2. Primitive pairs whose own Schwarz bound, times the largest contracted
   bound, stays below ``threshold / 1000`` are dropped. Pairs are regrouped
   by (L, number of pair functions, number of kept primitive pairs; counts
   within 20 % are merged by padding with zero coefficients) and sorted by
   their Schwarz bound Q = max sqrt((ab|ab)).

The result, :func:`prepare_pairs`, is the list of
:class:`~hfcore.integrals.tiles.PairBatch` the tile generator takes.
:func:`shell_batches` makes the one-shell batches of three-centre passes.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache

import numpy as np

from ..basis.components import component_transform, n_cartesian
from ..basis.shells import BasisSet, Shell
from ..errors import InputError
from .hermite import hermite_e, hermite_signs, n_hermite, sum_index
from .pairs import PairGroup, build_group, contract_einsum, group_pairs
from .tiles import PairBatch, hermite_block

_MERGE_FILL = 0.8


def pair_index(i: np.ndarray, j: np.ndarray) -> np.ndarray:
    """Packed index of function pairs (i, j) in any order: hi (hi + 1) / 2 + lo."""
    hi = np.maximum(i, j)
    return hi * (hi + 1) // 2 + np.minimum(i, j)


def _function_indices(group: PairGroup, basis: BasisSet) -> np.ndarray:
    """Packed pair index of every pair function, shape (n, nf)."""
    off = basis.shell_offsets
    sa, sb = basis.shells[group.shell_a[0]], basis.shells[group.shell_b[0]]
    nfa = sa.n_functions(basis.spherical)
    nfb = sb.n_functions(basis.spherical)
    i = off[group.shell_a][:, None, None] + np.arange(nfa)[None, :, None]
    j = off[group.shell_b][:, None, None] + np.arange(nfb)[None, None, :]
    return pair_index(i, j).reshape(group.n, nfa * nfb)


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


def diagonal_integrals(pairs: PairBatch) -> np.ndarray:
    """(f f | f f) for every pair function of every pair, shape (n, nf)."""
    L = pairs.L
    n, m = pairs.n, pairs.nprim
    p = pairs.p[:, :, None]
    q = pairs.p[:, None, :]
    pq = pairs.P[:, :, :, None] - pairs.P[:, :, None, :]
    R = hermite_block(2 * L, p, q, pq).reshape(-1, n, m, m)
    g = R[sum_index(L, L)]  # (nH, nH, n, m, m)
    signed = pairs.e * hermite_signs(L)[None, None, :, None]
    return contract_einsum("nihf,njkf,hknij->nf", pairs.e, signed, g)


def _primitive_bounds(pairs: PairBatch) -> np.ndarray:
    """Schwarz bound of every primitive pair (max over pair functions), shape (n, nprim)."""
    n, m = pairs.n, pairs.nprim
    single = PairBatch(
        pairs.L,
        pairs.p.reshape(n * m, 1),
        pairs.P.reshape(3, n * m, 1),
        pairs.e.reshape(n * m, 1, pairs.e.shape[2], pairs.nf),
        np.repeat(pairs.pidx, m, axis=0),
    )
    return np.sqrt(np.abs(diagonal_integrals(single)).max(axis=1)).reshape(n, m)


def _survivors(pairs: PairBatch, keep: np.ndarray) -> list[PairBatch]:
    """Split pairs by number of kept primitive pairs, dropping the others."""
    counts = keep.sum(axis=1)
    out = []
    for c in np.unique(counts):
        if c == 0:
            continue
        rows = np.flatnonzero(counts == c)
        mask = keep[rows]
        out.append(
            PairBatch(
                pairs.L,
                pairs.p[rows][mask].reshape(rows.size, c),
                pairs.P[:, rows][:, mask].reshape(3, rows.size, c),
                pairs.e[rows][mask].reshape((rows.size, c) + pairs.e.shape[2:]),
                pairs.pidx[rows],
            )
        )
    return out


def _pad(pairs: PairBatch, m: int) -> PairBatch:
    """Append primitive pairs with zero coefficients up to m per pair."""
    extra = m - pairs.nprim
    if extra == 0:
        return pairs
    n = pairs.n
    p = np.concatenate([pairs.p, np.ones((n, extra))], axis=1)
    P = np.concatenate([pairs.P, np.repeat(pairs.P[:, :, :1], extra, axis=2)], axis=2)
    e = np.concatenate([pairs.e, np.zeros((n, extra) + pairs.e.shape[2:])], axis=1)
    return PairBatch(pairs.L, p, P, e, pairs.pidx)


def _merge(parts: list[PairBatch], fill: float) -> list[PairBatch]:
    """Merge same-class parts whose primitive counts differ little, padding with zeros.

    Fewer, larger groups mean fewer and larger tiles; a part joins the current
    group while its count is at least ``fill`` times the group's largest.
    """
    parts = sorted(parts, key=lambda x: -x.nprim)
    merged: list[list[PairBatch]] = []
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
            PairBatch(
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


def _fold_transposed(pairs: PairBatch, m: int) -> PairBatch:
    """Merge primitive pairs (i, j) and (j, i) of a family paired with itself.

    Both sit on one centre with the same exponent sum, so they have the same
    p, P and Hermite functions: one pair carrying the summed folded
    coefficients gives the same integrals with m(m+1)/2 instead of m^2
    primitive pairs.
    """
    ij, ji = _symmetric_primitive_pairs(m)
    e = pairs.e[:, ij] + np.where((ij != ji)[None, :, None, None], pairs.e[:, ji], 0.0)
    return PairBatch(pairs.L, pairs.p[:, ij], pairs.P[:, :, ij], e, pairs.pidx)


def _batched_family_pairs(basis: BasisSet) -> list[PairBatch]:
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
        pairs = PairBatch(
            L,
            g0.flat(g0.p).reshape(n, m),
            g0.flat(g0.P).reshape(3, n, m),
            np.concatenate(parts, axis=3),
            np.concatenate([_function_indices(g, basis) for g in groups], axis=1),
        )
        out.append(_fold_transposed(pairs, g0.exp_a.shape[1]) if key[-1][2] else pairs)
    return out


def screening_threshold(value: object, name: str = "the screening threshold") -> float:
    """The rule of a Schwarz screening threshold, checked in this one place.

    Parameters
    ----------
    value : object
        The threshold (hartree).
    name : str
        What to call it in the message.

    Returns
    -------
    float
        ``value`` as a float.

    Raises
    ------
    InputError
        Unless it is a number in [0, 1) (0: no screening).
    """
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) or not 0.0 <= value < 1.0:
        raise InputError(f"{name} must be a number in [0.0, 1.0), got {value!r}")
    return float(value)


def prepare_pairs(basis: BasisSet, threshold: float) -> list[PairBatch]:
    """Every function pair of a basis in screened, sorted, finished batches for the tile generator.

    Parameters
    ----------
    basis : BasisSet
    threshold : float
        Schwarz threshold (hartree); primitive pairs that cannot contribute
        ``threshold / 1000`` are dropped.

    Returns
    -------
    list of PairBatch
        ``pidx`` holds packed function-pair indices (:func:`pair_index`).
    """
    staged = [(x, _primitive_bounds(x)) for x in _batched_family_pairs(basis)]
    qsum = max((float(q.sum(axis=1).max()) for _, q in staged), default=0.0)
    eps = threshold * 1e-3
    classes: dict[tuple[int, int], list[PairBatch]] = {}
    for pairs, qprim in staged:
        classes.setdefault((pairs.L, pairs.nf), []).extend(_survivors(pairs, qprim * qsum >= eps))
    out = []
    for key in sorted(classes):
        out.extend(_merge(classes[key], _MERGE_FILL))
    for pairs in out:
        _sort_and_finish(pairs)
    return out


def _sort_and_finish(pairs: PairBatch) -> None:
    """Sort a batch's rows by decreasing Schwarz bound (set in ``q``) and lay it out for tiles."""
    q = np.sqrt(np.abs(diagonal_integrals(pairs)).max(axis=1))
    order = np.argsort(-q, kind="stable")
    pairs.p, pairs.P, pairs.e, pairs.pidx = pairs.p[order], pairs.P[:, order], pairs.e[order], pairs.pidx[order]
    pairs.q = q[order]
    pairs.finish()


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
        pairs = PairBatch(group.la + group.lb, group.flat(group.p).reshape(e.shape[:2]),
                          group.flat(group.P).reshape((3,) + e.shape[:2]), e, np.zeros((group.n, 1), dtype=np.intp))
        q = np.sqrt(np.abs(diagonal_integrals(pairs)).max(axis=1))
        out[group.shell_a, group.shell_b] = q
        out[group.shell_b, group.shell_a] = q
    return out


def function_families(basis: BasisSet) -> np.ndarray:
    """Family index (shells of one atom sharing exponents) of every basis function, shape (nbf,)."""
    out = np.empty(basis.n_functions, dtype=np.intp)
    off = basis.shell_offsets
    for f, members in enumerate(_families(basis)):
        for s in members:
            out[off[s] : off[s] + basis.shells[s].n_functions(basis.spherical)] = f
    return out




def shell_batches(shells: Sequence[Shell], spherical: bool) -> list[PairBatch]:
    """Single shells as tile-generator batches, each paired with a unit s function of exponent 0.

    This is how the auxiliary shells P of three-centre (μν|P) and
    two-centre (P|Q) integrals enter the tile generator.

    Parameters
    ----------
    shells : sequence of Shell
        The shells, in function order (for example an auxiliary basis).
    spherical : bool
        Real spherical (True) or Cartesian components.

    Returns
    -------
    list of PairBatch
        One finished batch per shape (l, primitives, contractions), rows
        sorted by decreasing Schwarz bound sqrt((P|P)); ``pidx`` holds the
        index of each function in ``shells``' function order.
    """
    sizes = [s.n_functions(spherical) for s in shells]
    offsets = np.concatenate([[0], np.cumsum(sizes, dtype=np.int64)])
    shapes: dict[tuple[int, int, int], list[int]] = {}
    for k, s in enumerate(shells):
        shapes.setdefault((s.l, s.n_primitives, s.n_contractions), []).append(k)
    out = []
    for (l, nprim, _), members in sorted(shapes.items()):
        idx = np.array(members)
        n = idx.size
        exp_a = np.array([shells[k].exponents for k in members])
        center = np.array([shells[k].center for k in members])
        p = exp_a[:, :, None]
        P = np.broadcast_to(center.T[:, :, None, None], (3, n, nprim, 1)).copy()
        group = PairGroup(
            la=l, lb=0, shell_a=idx, shell_b=np.zeros(n, dtype=idx.dtype), exp_a=exp_a, exp_b=np.zeros((n, 1)),
            coef_a=np.array([shells[k].norm_coefficients for k in members]), coef_b=np.ones((n, 1, 1)),
            center_a=center, center_b=center, p=p, P=P, kab=np.ones_like(p),
        )
        e = _fold(group, spherical)
        nf = e.shape[3]
        batch = PairBatch(l, p.reshape(n, nprim), P.reshape(3, n, nprim), e, offsets[idx][:, None] + np.arange(nf))
        _sort_and_finish(batch)
        out.append(batch)
    return out


__all__ = ["pair_index", "prepare_pairs", "screening_threshold", "shell_batches", "schwarz_bounds", "function_families", "diagonal_integrals"]
