"""Shell pairs grouped by shape, with their primitive-pair Gaussian products.

Every integral kind loops over groups of shell pairs that share the angular
momenta, the numbers of primitives and the numbers of contractions, so the
work inside a group is a handful of numpy operations on whole arrays.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..basis.components import component_transform
from ..basis.shells import Shell


@lru_cache(maxsize=4096)
def _einsum_path(subscripts: str, shapes: tuple[tuple[int, ...], ...]) -> list:
    return np.einsum_path(subscripts, *(np.empty(s) for s in shapes), optimize="greedy")[0]


def contract_einsum(subscripts: str, *operands: np.ndarray) -> np.ndarray:
    """``numpy.einsum`` with an optimised contraction order, searched once per shape.

    The order search costs far more than the contraction for the small
    per-group arrays of the integral layer, and the same shapes recur.
    """
    return np.einsum(subscripts, *operands, optimize=_einsum_path(subscripts, tuple(o.shape for o in operands)))


@dataclass(frozen=True)
class PairGroup:
    """Shell pairs (a, b) of one shape and their primitive products.

    Attributes
    ----------
    la, lb : int
        Angular momenta of the first and second shell.
    shell_a, shell_b : ndarray of int, shape (n,)
        Shell indices (into the first and second shell list).
    exp_a, exp_b : ndarray, shape (n, npa) and (n, npb)
        Primitive exponents (bohr⁻²).
    coef_a, coef_b : ndarray, shape (n, nka, npa) and (n, nkb, npb)
        Coefficients of unnormalised primitives (``Shell.norm_coefficients``).
    center_a, center_b : ndarray, shape (n, 3)
        Shell centres (bohr).
    p : ndarray, shape (n, npa, npb)
        Sums of exponents.
    P : ndarray, shape (3, n, npa, npb)
        Gaussian product centres (bohr).
    kab : ndarray, shape (n, npa, npb)
        exp(-mu |A - B|²).
    """

    la: int
    lb: int
    shell_a: np.ndarray
    shell_b: np.ndarray
    exp_a: np.ndarray
    exp_b: np.ndarray
    coef_a: np.ndarray
    coef_b: np.ndarray
    center_a: np.ndarray
    center_b: np.ndarray
    p: np.ndarray
    P: np.ndarray
    kab: np.ndarray

    @property
    def n(self) -> int:
        return int(self.shell_a.shape[0])

    def flat(self, arr: np.ndarray) -> np.ndarray:
        """Reshape a per-primitive-pair array (..., n, npa, npb) to (..., n*npa*npb)."""
        return arr.reshape(arr.shape[: arr.ndim - 3] + (-1,))

    def pa(self) -> np.ndarray:
        """P - A, shape (3, n*npa*npb)."""
        return self.flat(self.P - self.center_a.T[:, :, None, None])

    def pb(self) -> np.ndarray:
        """P - B, shape (3, n*npa*npb)."""
        return self.flat(self.P - self.center_b.T[:, :, None, None])

    def contract(self, prim: np.ndarray, spherical_a: bool, spherical_b: bool) -> np.ndarray:
        """Contract primitive-pair Cartesian quantities to shell-pair function blocks.

        Parameters
        ----------
        prim : ndarray, shape (..., ncart_a, ncart_b, n*npa*npb)
            Integrals over unnormalised x^a y^b z^c primitive pairs.
        spherical_a, spherical_b : bool
            Form of the exposed functions of each shell.

        Returns
        -------
        ndarray, shape (..., n, nka*ncomp_a, nkb*ncomp_b)
        """
        lead = prim.shape[:-3]
        nx, ny = prim.shape[-3:-1]
        npa, npb = self.exp_a.shape[1], self.exp_b.shape[1]
        prim = prim.reshape((-1, nx, ny, self.n, npa, npb))
        ta = component_transform(self.la, spherical_a)
        tb = component_transform(self.lb, spherical_b)
        out = contract_einsum("zxynij,nai,nbj,sx,ty->znasbt", prim, self.coef_a, self.coef_b, ta, tb)
        nfa = out.shape[2] * out.shape[3]
        nfb = out.shape[4] * out.shape[5]
        return np.ascontiguousarray(out.reshape(lead + (self.n, nfa, nfb)))


def build_group(la: int, lb: int, shells_a: Sequence[Shell], shells_b: Sequence[Shell], pairs: np.ndarray) -> PairGroup:
    sa = [shells_a[i] for i in pairs[:, 0]]
    sb = [shells_b[j] for j in pairs[:, 1]]
    exp_a = np.array([s.exponents for s in sa])
    exp_b = np.array([s.exponents for s in sb])
    coef_a = np.array([s.norm_coefficients for s in sa])
    coef_b = np.array([s.norm_coefficients for s in sb])
    center_a = np.array([s.center for s in sa])
    center_b = np.array([s.center for s in sb])
    a = exp_a[:, :, None]
    b = exp_b[:, None, :]
    p = a + b
    mu = a * b / p
    ab2 = np.sum((center_a - center_b) ** 2, axis=1)[:, None, None]
    P = (a * center_a.T[:, :, None, None] + b * center_b.T[:, :, None, None]) / p
    return PairGroup(
        la=la,
        lb=lb,
        shell_a=np.ascontiguousarray(pairs[:, 0]),
        shell_b=np.ascontiguousarray(pairs[:, 1]),
        exp_a=exp_a,
        exp_b=exp_b,
        coef_a=coef_a,
        coef_b=coef_b,
        center_a=center_a,
        center_b=center_b,
        p=p,
        P=P,
        kab=np.exp(-mu * ab2),
    )


def group_pairs(shells_a: Sequence[Shell], shells_b: Sequence[Shell], pairs: np.ndarray) -> list[PairGroup]:
    """Group shell pairs by shape.

    Parameters
    ----------
    shells_a, shells_b : sequence of Shell
    pairs : ndarray of int, shape (npair, 2)
        (index into shells_a, index into shells_b).

    Returns
    -------
    list of PairGroup
        In a deterministic order (sorted by shape key).
    """
    keys: dict[tuple[int, ...], list[int]] = {}
    for k, (i, j) in enumerate(pairs):
        a, b = shells_a[i], shells_b[j]
        key = (a.l, b.l, a.n_primitives, b.n_primitives, a.n_contractions, b.n_contractions)
        keys.setdefault(key, []).append(k)
    return [build_group(key[0], key[1], shells_a, shells_b, pairs[np.array(idx)]) for key, idx in sorted(keys.items())]


__all__ = ["PairGroup", "build_group", "group_pairs", "contract_einsum"]
