"""Integrals over contracted Gaussian shells (McMurchie–Davidson scheme).

Public contract: every function takes a :class:`~hfcore.basis.shells.BasisSet`
and returns matrices in the basis' own form (Cartesian or real spherical,
per ``basis.spherical``), in atomic units, functions ordered as
:mod:`hfcore.basis.shells` documents.

* :func:`overlap`, :func:`kinetic`, :func:`nuclear_attraction`,
  :func:`multipole` — one-electron matrices (:mod:`.one_electron`).
* :func:`compute_eri` → :class:`ERIStore` (packed unique integrals, J/K
  builds), :func:`eri_tensor` (dense), :func:`estimate_eri_memory` (what
  storing them costs) (:mod:`.store`); :class:`DirectERI` recomputes them
  for every J/K build instead (direct mode, :mod:`.direct`);
  :func:`schwarz_bounds` (:mod:`.eri_pairs`).
* :func:`three_center_integrals` (P|μν), :func:`two_center_integrals`
  (P|Q) over a fitting set, :class:`ThreeCenterEngine` (whole or in
  blocks), :func:`estimate_three_center_memory` (:mod:`.three_center`).

Rooms of the two-electron layer: :mod:`.eri_pairs` prepares the screened
pair batches, :mod:`.tiles` is the one tile generator every pass uses
(stored, direct and three-centre), :mod:`.store` and :mod:`.direct` are
the passes, :mod:`hfcore._parallel` the thread pool and worker teams they share.
* :func:`boys` (:mod:`.boys`), :func:`c2s` (:mod:`hfcore.basis.components`).
"""

from __future__ import annotations

from .boys import boys
from .one_electron import kinetic, multipole, nuclear_attraction, overlap
from ..basis.components import c2s
from .direct import DirectERI, DirectPassStats
from .eri_pairs import schwarz_bounds
from .store import ERIStore, compute_eri, estimate_eri_memory, eri_tensor
from .three_center import ThreeCenterEngine, estimate_three_center_memory, three_center_integrals, two_center_integrals

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
    "ThreeCenterEngine",
    "three_center_integrals",
    "two_center_integrals",
    "estimate_three_center_memory",
]
