"""What the SCF needs from the two-electron integrals: J and K for a density."""

from __future__ import annotations

from typing import Protocol

import numpy as np

from ..errors import InputError


class JKBuilder(Protocol):
    """Anything that turns a density into Coulomb and exchange matrices.

    The stored-integral store of :mod:`hfcore.integrals` meets this, and so
    can a direct (integral-recomputing) builder.
    """

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Coulomb and exchange matrices of a density.

        Parameters
        ----------
        density : ndarray, shape (nbf, nbf)
            A symmetric matrix in the atomic-orbital basis (a total density
            or a density change).

        Returns
        -------
        J, K : ndarray, shape (nbf, nbf)
            J_μν = Σ (μν|λσ) D_λσ and K_μν = Σ (μλ|νσ) D_λσ, in hartree
            when D is a density in electrons.
        """
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


class IncrementalJK:
    """A :class:`JKBuilder` that builds J and K from density changes.

    J and K are linear in the density, so J(D_n) = J(D_{n-1}) + J(D_n - D_{n-1}).
    Near convergence the change is small and a density-screened engine
    (such as :class:`hfcore.integrals.DirectERI`) skips most integrals.
    Every ``rebuild_interval`` builds, or after :meth:`reset`, J and K are
    rebuilt from the full density so that round-off cannot pile up.

    Parameters
    ----------
    engine : JKBuilder
        Computes J and K of any symmetric matrix.
    rebuild_interval : int
        Builds between two full rebuilds (the first build is always full).

    Attributes
    ----------
    builds : list of str
        "full" or "change" for every build so far, in order.
    """

    def __init__(self, engine: JKBuilder, rebuild_interval: int = 8) -> None:
        if rebuild_interval < 1:
            raise InputError(f"the rebuild interval must be at least 1, got {rebuild_interval}")
        self.engine = engine
        self.rebuild_interval = int(rebuild_interval)
        self.builds: list[str] = []
        self.reset()

    def reset(self) -> None:
        """Forget the previous density so the next build is a full one."""
        self._density: np.ndarray | None = None
        self._jk: tuple[np.ndarray, np.ndarray] | None = None
        self._since_full = 0

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        d = np.array(density, dtype=np.float64)
        if self._density is None or self._since_full >= self.rebuild_interval:
            j, k = self.engine.jk(d)
            self._since_full = 1
            self.builds.append("full")
        else:
            dj, dk = self.engine.jk(d - self._density)
            j, k = self._jk[0] + dj, self._jk[1] + dk
            self._since_full += 1
            self.builds.append("change")
        self._density, self._jk = d, (j, k)
        return j.copy(), k.copy()


__all__ = ["JKBuilder", "DenseJK", "IncrementalJK"]
