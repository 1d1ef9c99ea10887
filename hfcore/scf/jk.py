"""What the SCF needs from the two-electron integrals: J and K for a density."""

from __future__ import annotations

from typing import Protocol

import numpy as np


class JKBuilder(Protocol):
    """Anything that turns a density into Coulomb and exchange matrices.

    The stored-integral store of :mod:`hfcore.integrals` meets this, and so
    can a direct (integral-recomputing) builder.
    """

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """J_μν = Σ (μν|λσ) D_λσ and K_μν = Σ (μλ|νσ) D_λσ for a symmetric D, each (nbf, nbf)."""
        ...


class DenseJK:
    """A :class:`JKBuilder` over a dense ERI tensor, for small systems and tests.

    Parameters
    ----------
    eri : ndarray, shape (nbf, nbf, nbf, nbf)
        Two-electron integrals (μν|λσ) in chemists' notation.
    """

    def __init__(self, eri: np.ndarray) -> None:
        self.eri = np.ascontiguousarray(eri, dtype=np.float64)
        n = self.eri.shape[0]
        self._square = self.eri.reshape(n * n, n * n)

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        n = density.shape[0]
        j = (self._square @ density.ravel()).reshape(n, n)
        k = np.einsum("mlns,ls->mn", self.eri, density, optimize=True)
        return j, k


__all__ = ["JKBuilder", "DenseJK"]
