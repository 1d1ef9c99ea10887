"""Integrals over contracted Gaussian shells (McMurchie–Davidson scheme).

Public contract: every function takes a :class:`~hfcore.basis.shells.BasisSet`
and returns matrices in the basis' own form (Cartesian or real spherical,
per ``basis.spherical``), in atomic units.
"""

from __future__ import annotations

from .boys import boys
from .one_electron import kinetic, multipole, nuclear_attraction, overlap
from .spherical import c2s
from .two_electron import ERIStore, compute_eri, eri_tensor, schwarz_bounds

__all__ = [
    "boys",
    "c2s",
    "overlap",
    "kinetic",
    "nuclear_attraction",
    "multipole",
    "ERIStore",
    "compute_eri",
    "eri_tensor",
    "schwarz_bounds",
]
