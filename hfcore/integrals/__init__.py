"""Integrals over contracted Gaussian shells (McMurchie–Davidson scheme).

Public contract: every function takes a :class:`~hfcore.basis.shells.BasisSet`
and returns matrices in the basis' own form (Cartesian or real spherical,
per ``basis.spherical``), in atomic units, functions ordered as
:mod:`hfcore.basis.shells` documents.

* :func:`overlap`, :func:`kinetic`, :func:`nuclear_attraction`,
  :func:`multipole` — one-electron matrices (:mod:`.one_electron`).
* :func:`compute_eri` → :class:`ERIStore` (packed unique integrals, J/K
  builds), :func:`eri_tensor` (dense), :func:`schwarz_bounds`
  (:mod:`.two_electron`); :class:`DirectERI` recomputes them for every
  J/K build instead (direct mode), :func:`estimate_eri_memory` predicts
  what storing them costs.
* :func:`boys` (:mod:`.boys`), :func:`c2s` (:mod:`.spherical`).
"""

from __future__ import annotations

from .boys import boys
from .one_electron import kinetic, multipole, nuclear_attraction, overlap
from .spherical import c2s
from .two_electron import DirectERI, DirectPassStats, ERIStore, compute_eri, estimate_eri_memory, eri_tensor, schwarz_bounds

__all__ = [
    "boys",
    "c2s",
    "overlap",
    "kinetic",
    "nuclear_attraction",
    "multipole",
    "ERIStore",
    "compute_eri",
    "estimate_eri_memory",
    "DirectERI",
    "DirectPassStats",
    "eri_tensor",
    "schwarz_bounds",
]
