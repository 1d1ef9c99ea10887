"""What the SCF needs from the two-electron integrals: J and K for a density."""

from __future__ import annotations

from typing import Protocol

import numpy as np

from ..errors import InputError


class JKBuilder(Protocol):
    """Anything that turns a density into Coulomb and exchange matrices.

    The stored-integral store of :mod:`hfcore.integrals` meets this, and so
    can a direct (integral-recomputing) builder.

    Several densities at once
    -------------------------
    An open-shell SCF needs, per iteration, one Coulomb matrix of the total
    density and one exchange matrix per spin. A builder may offer
    ``jk_multi(densities)``: ``densities`` has shape (m, nbf, nbf) (m
    symmetric matrices, e.g. D_α and D_β); it returns ``J`` of their
    **sum**, shape (nbf, nbf), and ``K`` of **each**, shape (m, nbf, nbf),
    sharing the work the densities have in common (one pass over a lean
    store, one integral pass of the direct engine, one pass of recomputed
    fitted blocks; J once). Every builder of hfcore has it. A
    builder of one's own needs only :meth:`jk`: :func:`jk_multi` then calls
    ``jk`` once per density and sums the Coulomb parts, which gives the
    same matrices at m times the cost.
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


def jk_multi(builder: JKBuilder, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """J of the sum and K of each of several densities (see :class:`JKBuilder`).

    Parameters
    ----------
    builder : JKBuilder
        Its own ``jk_multi`` is used when it has one; otherwise ``jk`` is
        called once per density.
    densities : ndarray, shape (m, nbf, nbf)
        Symmetric matrices.

    Returns
    -------
    J : ndarray, shape (nbf, nbf)
        Coulomb matrix of ``densities.sum(axis=0)``.
    K : ndarray, shape (m, nbf, nbf)
        Exchange matrix of each density.
    """
    d = np.asarray(densities, dtype=np.float64)
    if d.ndim != 3 or d.shape[1] != d.shape[2]:
        raise InputError(f"jk_multi needs densities of shape (m, nbf, nbf), got {d.shape}")
    own = getattr(builder, "jk_multi", None)
    if own is not None:
        return own(d)
    return jk_multi_by_parts(builder, d)


def jk_multi_by_parts(builder: JKBuilder, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`jk_multi` by one ``jk`` call per density (the fallback for a builder without ``jk_multi``)."""
    j = np.zeros(densities.shape[1:])
    k = np.empty(densities.shape)
    for index, density in enumerate(densities):
        jm, k[index] = builder.jk(density)
        j += jm
    return j, k


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

    def jk_multi(self, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """J of the sum, K of each of densities (m, nbf, nbf), in one pass over the tensor."""
        m, n, _ = densities.shape
        j = (self._square @ densities.sum(axis=0).ravel()).reshape(n, n)
        k = (self._square_exchange() @ densities.reshape(m, n * n).T).T.reshape(m, n, n)
        return j, k

    def _square_exchange(self) -> np.ndarray:
        if not hasattr(self, "_exchange"):
            n = self.eri.shape[0]
            self._exchange = np.ascontiguousarray(self.eri.transpose(0, 2, 1, 3)).reshape(n * n, n * n)
        return self._exchange


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
        self._multi: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
        self._multi_since = 0

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

    def jk_multi(self, densities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """J of the sum and K of each density, from the changes since the previous multi-density build.

        Single- and multi-density builds keep separate histories; a change
        in the number of densities starts a full build.
        """
        d = np.array(densities, dtype=np.float64)
        last = getattr(self, "_multi", None)
        if last is None or last[0].shape != d.shape or self._multi_since >= self.rebuild_interval:
            j, k = jk_multi(self.engine, d)
            self._multi_since = 1
            self.builds.append("full")
        else:
            dj, dk = jk_multi(self.engine, d - last[0])
            j, k = last[1] + dj, last[2] + dk
            self._multi_since += 1
            self.builds.append("change")
        self._multi = (d, j, k)
        return j.copy(), k.copy()


__all__ = ["JKBuilder", "DenseJK", "IncrementalJK", "jk_multi", "jk_multi_by_parts"]
