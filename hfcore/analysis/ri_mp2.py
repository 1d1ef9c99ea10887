"""Density-fitted closed-shell MP2.

The occupied-virtual products are fitted in a fitting set {P} with the
Coulomb metric (M. Feyereisen, G. Fitzgerald and A. Komornicki, Chem. Phys.
Lett. 208, 359 (1993)):

    B^P_ia = Σ_Q (ia|Q) [M^{-1/2}]_QP,      (ia|jb) ≈ Σ_P B^P_ia B^P_jb,

with M_PQ = (P|Q) factored by :class:`~hfcore.scf.fitted_jk.MetricFactor`
(Cholesky, or eigenvectors above its threshold when the metric is near
singular). The three-centre integrals (P|μν) are computed a block of
fitting functions at a time and transformed to (P|ia) at once, so the
largest arrays are B (8 n_fit · o · v bytes) and one block; then (ia|jb) is
formed one occupied orbital i at a time (v · o · v numbers) and summed by
the same pair sums and assembly as the exact MP2 (:mod:`.mp2_terms`).

The fitting sets made for this are the cc-pVXZ-RI sets (F. Weigend,
A. Köhn and C. Hättig, J. Chem. Phys. 116, 3175 (2002)) and the def2 RI
sets (shipped as cc-pVDZ-RIFIT ... def2-TZVP-RIFIT). ``auto`` takes
cc-pVXZ-RIFIT for cc-pVXZ and aug-cc-pVXZ (X = D, T, Q; the augmented RI
sets are not shipped), def2-SVP-RIFIT for def2-SVP, and def2-TZVP-RIFIT
for every other orbital set.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from .._memory import allocate, run_budget
from ..basis.fitting import DEFAULT_RI, MATCHING_RI, FittingChoice, mp2_fitting_basis
from .._deprecation import rename_keywords
from ..errors import ResourceError
from .mp2_terms import MP2Result, _pair_map, assemble, orbital_spaces, pair_sums

if TYPE_CHECKING:
    from ..basis.family import BasisFamily
    from ..basis.shells import BasisSet
    from ..scf.result import RHFResult

#: Bytes of one block of unpacked three-centre integrals (P|μν).
_BLOCK_BYTES = 32 << 20


@rename_keywords({"progress": "fraction_progress"})
def ri_mp2_energy(
    result: RHFResult,
    fit_basis: str | BasisFamily | BasisSet | FittingChoice,
    *,
    frozen_core: int = 0,
    memory_bytes: int | None = None,
    fraction_progress: Callable[[float], None] | None = None,
) -> MP2Result:
    """Density-fitted MP2 and SCS-MP2 energies from a converged RHF run.

    Parameters
    ----------
    result : RHFResult
        A converged RHF result.
    fit_basis : str, BasisFamily, BasisSet or FittingChoice
        The fitting set (see :func:`mp2_fitting_basis`).
    frozen_core : int, optional
        Lowest occupied orbitals left uncorrelated.
    memory_bytes : int, optional
        Budget for the fitted factors B (8 n_fit · o · v bytes) and one
        integral block (default: the run's memory budget, ``result.memory_budget``).
    fraction_progress : callable, optional
        Called with the fraction (0..1] done: the three-centre pass as the
        first half, then each occupied orbital.

    Returns
    -------
    MP2Result
        With ``fit_basis_name`` and ``fit_basis_n_functions`` set.

    Raises
    ------
    ConvergenceError, InputError
        As :func:`hfcore.analysis.mp2_energy`.
    BasisError
        An unknown fitting set or one lacking an element.
    ResourceError
        If the fitted factors exceed the budget.
    """
    from ..integrals.three_center import ThreeCenterEngine, two_center_integrals
    from ..scf.fitted_jk import MetricFactor

    frozen_core = int(frozen_core)
    c_occ, c_vir, e_occ, e_vir = orbital_spaces(result, frozen_core)
    choice = fit_basis if isinstance(fit_basis, FittingChoice) else mp2_fitting_basis(result.molecule, result.basis, fit_basis)
    fit_set = choice.basis
    nbf, n_occ, n_vir, n_fit = c_occ.shape[0], c_occ.shape[1], c_vir.shape[1], fit_set.n_functions
    block = int(max(1, min(n_fit, _BLOCK_BYTES // (16 * nbf * nbf))))
    need = 8 * n_fit * n_occ * n_vir + 16 * block * nbf * nbf + 24 * n_fit * n_fit + 8 * n_vir * n_occ * n_vir
    limit = run_budget(result).bytes if memory_bytes is None else int(memory_bytes)
    if need > limit:
        raise ResourceError(
            f"density-fitted MP2 needs about {need / 2**20:.3g} MiB for {n_fit} fitting functions, but "
            f"{limit / 2**20:.3g} MiB are allowed (--memory MIB, memory_limit)"
        )
    engine = ThreeCenterEngine(result.basis, fit_set, threshold=result.options.screening)
    pairs = _pair_map(nbf)
    factors = allocate("the density-fitted MP2 factors", (n_fit, n_occ, n_vir), zero=False)
    done = 0
    for index, values in engine.blocks(block):
        full = values[:, pairs]  # (nblock, nbf, nbf)
        factors[index] = np.matmul(np.matmul(c_occ.T, full), c_vir)
        done += index.size
        if fraction_progress is not None:
            fraction_progress(0.5 * done / n_fit)
    metric = MetricFactor(two_center_integrals(fit_set))
    flat = metric.whiten(factors.reshape(n_fit, n_occ * n_vir))  # (n_kept, o·v), in place
    opposite = exchange = 0.0
    for i in range(n_occ):
        iajb = (flat[:, i * n_vir : (i + 1) * n_vir].T @ flat).reshape(n_vir, n_occ, n_vir)
        os_part, x_part = pair_sums(iajb, e_occ[i], e_occ, e_vir)
        opposite += os_part
        exchange += x_part
        if fraction_progress is not None:
            fraction_progress(0.5 + 0.5 * (i + 1) / n_occ)
    return assemble(result, frozen_core, n_occ, n_vir, opposite, exchange, fit_set.name, n_fit)


__all__ = ["ri_mp2_energy", "mp2_fitting_basis", "MATCHING_RI", "DEFAULT_RI"]
