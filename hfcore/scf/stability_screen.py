"""The fitted screen of the stability analyses: a density-fitted J/K builder made once per run where it pays.

Where every exact Hessian product is a full integral pass, the Davidson
search of :mod:`hfcore.scf.stability` (and of the UHF analyses) runs on
fitted products first and uses exact ones only near the threshold
(:func:`hfcore.scf.stability.screened_eigenpairs`). This module decides
where that pays and makes the fitted builder, once for a set of shared
integrals, on first use.

Nothing here prints.
"""

from __future__ import annotations

import time
import weakref
from collections.abc import Callable

from .jk import JKBuilder

#: J/K modes whose exact products go through the fitted screen first (see the module notes):
#: measured on benzene 6-31G*, one thread, an exact product costs 1.4–2.2 s in direct mode
#: against 0.03 s fitted after a 0.34 s three-centre pass; with a lean store 0.04 s either way.
SCREENED_MODES: tuple[str, ...] = ("direct",)


class FittedScreen:
    """The fitted J/K builder of a run's screened stability analyses, made on first use.

    Parameters
    ----------
    make : callable
        Returns the fitted builder (:class:`hfcore.scf.fitted_jk.FittedJK`);
        called at most once, when the first screened analysis starts.
    fit_basis : str
        Name of its fitting set (for the report).

    Attributes
    ----------
    seconds : float
        Wall time spent making the builder.
    """

    def __init__(self, make: Callable[[], JKBuilder], fit_basis: str) -> None:
        self._make = make
        self._builder: JKBuilder | None = None
        self.fit_basis = fit_basis
        self.seconds = 0.0

    def builder(self) -> JKBuilder:
        """The fitted builder (made now if this is the first call)."""
        if self._builder is None:
            t0 = time.perf_counter()
            self._builder = self._make()
            self.seconds = time.perf_counter() - t0
        return self._builder


def make_fitted_screen(molecule, basis, jk_mode: str, limit_bytes: int, n_occupied: int, *,
                       screening: float = 1e-12, threads: int = 1) -> FittedScreen | None:
    """The fitted screen of a run, or None where it does not pay or cannot be had.

    Parameters
    ----------
    molecule : Molecule
    basis : BasisSet
        The orbital basis; its ``fit_basis="auto"`` set is the screen's.
    jk_mode : str
        The run's J/K mode: a screen only for :data:`SCREENED_MODES`.
    limit_bytes : int
        Memory budget: the fitted factors must fit stored in it (the blocked
        way would recompute the three-centre integrals for every product).
    n_occupied : int
        Occupied orbitals of the largest spin.
    screening, threads
        Screening threshold and threads of the three-centre pass.

    Returns
    -------
    FittedScreen or None
        None for other modes, a basis with no fitting set for its elements,
        or factors beyond the budget: the analysis then stays exact.
    """
    if jk_mode not in SCREENED_MODES:
        return None
    from ..basis.fitting import fitting_basis
    from ..errors import HfcoreError
    from .fitted_jk import FittedJK, plan_fitting

    try:
        aux = fitting_basis(molecule, basis, "auto").basis
        plan = plan_fitting(basis, aux, max(1, n_occupied), limit_bytes)
    except HfcoreError:
        return None
    if plan.storage != "stored":
        return None
    return FittedScreen(lambda: FittedJK(basis, aux, plan, threshold=screening, threads=threads),
                        aux.name.split(" (")[0])


#: The screen of each set of shared integrals (keyed by their engine), so that the RHF analysis,
#: the RHF→UHF check and later runs on the same integrals share one three-centre pass.
_SCREENS: "weakref.WeakKeyDictionary[object, FittedScreen | None]" = weakref.WeakKeyDictionary()


def screen_for(shared, molecule, options) -> FittedScreen | None:
    """The fitted screen of a run's shared integrals (:class:`hfcore.scf.driver.SharedIntegrals`), made once.

    Parameters
    ----------
    shared : SharedIntegrals
        Its ``engine``, ``basis`` and ``plan`` (mode and budget) decide.
    molecule : Molecule
        Places the fitting set (the same atoms, ghosts included, for every
        molecule sharing these integrals).
    options : SCFOptions
        Screening threshold and threads of the three-centre pass.

    Returns
    -------
    FittedScreen or None
        See :func:`make_fitted_screen`.
    """
    if shared.plan.mode not in SCREENED_MODES:
        return None
    key = shared.engine
    if key not in _SCREENS:
        _SCREENS[key] = make_fitted_screen(
            molecule, shared.basis, shared.plan.mode, shared.plan.limit_bytes,
            max(molecule.n_alpha, (molecule.n_electrons + 1) // 2), screening=options.screening,
            threads=options.n_threads,
        )
    return _SCREENS[key]


__all__ = ["SCREENED_MODES", "FittedScreen", "make_fitted_screen", "screen_for"]
