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

#: J/K modes whose exact products always go through the fitted screen first: measured on
#: benzene 6-31G*, one thread, an exact product costs 1.4–2.2 s in direct mode against 0.03 s
#: fitted after a 0.34 s three-centre pass.
SCREENED_MODES: tuple[str, ...] = ("direct",)
#: Stored integrals of at least this size (bytes) go through the screen too. An exact product
#: reads the whole store, a fitted one costs O(naux nocc nbf²): measured, one thread, on a
#: loaded 2-core machine, benzene cc-pVDZ (a 0.17 GB lean store) 0.04 s either way, so the
#: three-centre pass (0.4 s) would not pay; benzene cc-pVTZ (4.9 GB) 2.7–3.3 s exact against
#: 0.35 s fitted after a 5.8 s three-centre pass, against about 20 products.
SCREENED_STORE_BYTES: int = 1 << 30


def screens(jk_mode: str, eri_bytes: int) -> bool:
    """Whether a run with this J/K mode and store size (bytes) screens its stability searches."""
    if jk_mode in SCREENED_MODES:
        return True
    return jk_mode in ("stored", "stored-lean") and eri_bytes >= SCREENED_STORE_BYTES


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
                       eri_bytes: int = 0, screening: float = 1e-12, threads: int = 1) -> FittedScreen | None:
    """The fitted screen of a run, or None where it does not pay or cannot be had.

    Parameters
    ----------
    molecule : Molecule
    basis : BasisSet
        The orbital basis; its ``fit_basis="auto"`` set is the screen's.
    jk_mode : str
        The run's J/K mode: a screen for :data:`SCREENED_MODES`, and for
        stored integrals of at least :data:`SCREENED_STORE_BYTES`.
    limit_bytes : int
        Memory budget: the fitted factors must fit stored in it (the blocked
        way would recompute the three-centre integrals for every product).
    n_occupied : int
        Occupied orbitals of the largest spin.
    eri_bytes : int
        Size of the stored integrals (``JKPlan.eri_memory_bytes``).
    screening, threads
        Screening threshold and threads of the three-centre pass.

    Returns
    -------
    FittedScreen or None
        None for other modes, a basis with no fitting set for its elements,
        or factors beyond the budget: the analysis then stays exact.
    """
    if not screens(jk_mode, eri_bytes):
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
#: Keyed by id(engine) (a store is a dataclass, not hashable); an entry goes with its engine.
_SCREENS: dict[int, "FittedScreen | None"] = {}


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
    if not screens(shared.plan.mode, shared.plan.eri_memory_bytes):
        return None
    key = id(shared.engine)
    if key not in _SCREENS:
        weakref.finalize(shared.engine, _SCREENS.pop, key, None)
        plan = shared.plan
        # Stored integrals keep their room; the fitted factors must fit beside them.
        room = plan.limit_bytes - (plan.eri_memory_bytes if plan.mode in ("stored", "stored-lean") else 0)
        _SCREENS[key] = make_fitted_screen(
            molecule, shared.basis, plan.mode, room,
            max(molecule.n_alpha, (molecule.n_electrons + 1) // 2), eri_bytes=shared.plan.eri_memory_bytes,
            screening=options.screening,
            threads=options.n_threads,
        )
    return _SCREENS[key]


__all__ = ["SCREENED_MODES", "SCREENED_STORE_BYTES", "FittedScreen", "make_fitted_screen", "screen_for", "screens"]
