"""Second-order Møller-Plesset energy of a UHF solution (UMP2), exact or density-fitted.

With canonical UHF orbitals of each spin (occupied i, j; empty a, b)::

    E(αα) = ½ Σ_{ijab ∈ α} (ia|jb) [(ia|jb) − (ib|ja)] / (ε_i + ε_j − ε_a − ε_b)
    E(ββ) = the same over β
    E(αβ) = Σ_{ia ∈ α, jb ∈ β} (ia|jb)² / (ε_i + ε_j − ε_a − ε_b)

E(2) = E(αα) + E(ββ) + E(αβ); the spin-component-scaled energy weighs the
opposite-spin part 6/5 and the same-spin parts 1/3 (S. Grimme, J. Chem.
Phys. 118, 9095 (2003)). For a closed shell (C_α = C_β) these are the RHF
MP2 parts of :mod:`.mp2`.

The exact integrals come from the lean packed store in occupied blocks, as
in :mod:`.mp2` and with its memory rules: one first-quarter pass per spin,
the α pass giving both (α α|α α) and (α α|β β). The fitted integrals use
the factors B^P_ia of each spin as in :mod:`.ri_mp2`.

MP2 on an ROHF reference is not offered: :func:`check_mp2_reference`
refuses it in one line before any SCF.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .._memory import run_budget
from ..errors import ConvergenceError, InputError, ResourceError
from ._checks import require_placed
from .mp2 import _MIN_WORK_BYTES, SCS_OPPOSITE_SPIN, SCS_SAME_SPIN, _first_quarter, _pair_map, require_store_room

if TYPE_CHECKING:
    from ..scf.open_result import UHFResult


@dataclass(frozen=True)
class UMP2Result:
    """The UMP2 energy of an open-shell (or any UHF) solution, hartree.

    Attributes
    ----------
    correlation : float
        E(2) = same_spin_alpha + same_spin_beta + opposite_spin.
    energy_total : float
        UHF total energy plus E(2).
    reference : float
        The UHF total energy.
    same_spin_alpha, same_spin_beta : float
        E(αα) and E(ββ).
    same_spin : float
        Their sum.
    opposite_spin : float
        E(αβ).
    scs_correlation, scs_energy_total : float
        6/5 E(αβ) + 1/3 (E(αα) + E(ββ)), and the reference plus it.
    frozen_core : int
        Lowest orbitals of each spin left uncorrelated.
    n_active_occupied, n_virtual : tuple of int
        (α, β) counts.
    fit_name : str or None
    fit_n_functions : int or None
    """

    correlation: float
    energy_total: float
    reference: float
    same_spin_alpha: float
    same_spin_beta: float
    same_spin: float
    opposite_spin: float
    scs_correlation: float
    scs_energy_total: float
    frozen_core: int
    n_active_occupied: tuple[int, int]
    n_virtual: tuple[int, int]
    fit_name: str | None = None
    fit_n_functions: int | None = None

    def to_dict(self) -> dict:
        """The record as plain numbers (hartree), for JSON (keys as in the RHF MP2 record, plus per-spin parts)."""
        return {
            "correlation": self.correlation,
            "total": self.energy_total,
            "reference": self.reference,
            "same_spin": self.same_spin,
            "same_spin_alpha": self.same_spin_alpha,
            "same_spin_beta": self.same_spin_beta,
            "opposite_spin": self.opposite_spin,
            "scs_correlation": self.scs_correlation,
            "scs_total": self.scs_energy_total,
            "frozen_core": self.frozen_core,
            "n_active_occupied": list(self.n_active_occupied),
            "n_virtual": list(self.n_virtual),
            "fit_name": self.fit_name,
            "fit_n_functions": self.fit_n_functions,
        }


def check_mp2_reference(method: str | None) -> None:
    """Refuse MP2 on an ROHF reference in one line (call it before the SCF).

    Parameters
    ----------
    method : {"rhf", "uhf", "rohf"} or None
        The SCF method that will run (:attr:`hfcore.scf.SCFOptions.method`).

    Raises
    ------
    InputError
        For "rohf".
    """
    if method == "rohf":
        raise InputError("MP2 on an ROHF reference is not available; use UHF (--uhf, or method 'uhf') for open-shell MP2")


def _spin_spaces(result: UHFResult, frozen_core: int):
    """Per spin: (c_occ, c_vir, e_occ, e_vir) of the active orbitals."""
    require_placed(result, "UMP2")
    if getattr(result, "method", "") == "ROHF":
        check_mp2_reference("rohf")
    if not result.converged:
        raise ConvergenceError("MP2 needs a converged UHF result; this one did not converge", result)
    spaces = []
    for c, e, occ in (
        (result.coefficients_alpha, result.orbital_energies_alpha, result.occupations_alpha),
        (result.coefficients_beta, result.orbital_energies_beta, result.occupations_beta),
    ):
        occupied, virtual = np.flatnonzero(occ > 0), np.flatnonzero(occ == 0)
        if not 0 <= frozen_core <= occupied.size:
            raise InputError(f"frozen_core = {frozen_core} must be between 0 and {occupied.size} (occupied orbitals of a spin)")
        if virtual.size == 0:
            raise InputError("the basis has no empty orbitals of one spin, so MP2 has nothing to correlate into")
        active = occupied[frozen_core:]
        spaces.append((np.ascontiguousarray(c[:, active]), np.ascontiguousarray(c[:, virtual]), e[active], e[virtual]))
    if spaces[0][0].shape[1] == 0:
        raise InputError(f"frozen_core = {frozen_core} leaves no correlated electron")
    return spaces


def _denominator(e_i: float, e_occ: np.ndarray, e_vir_a: np.ndarray, e_vir_b: np.ndarray) -> np.ndarray:
    """ε_i + ε_j − ε_a − ε_b indexed [a, j, b]."""
    return e_i + e_occ[None, :, None] - e_vir_a[:, None, None] - e_vir_b[None, None, :]


def _same_spin(iajb: np.ndarray, e_i: float, e_occ: np.ndarray, e_vir: np.ndarray) -> float:
    """One occupied orbital's share of E(σσ) from its (ia|jb), [a, j, b]."""
    t = iajb / _denominator(e_i, e_occ, e_vir, e_vir)
    return 0.5 * float(np.einsum("ajb,ajb->", t, iajb) - np.einsum("ajb,bja->", t, iajb))


def _opposite_spin(iajb: np.ndarray, e_i: float, e_occ_b: np.ndarray, e_vir_a: np.ndarray, e_vir_b: np.ndarray) -> float:
    """One α orbital's share of E(αβ) from its (ia|jb), a ∈ α, j b ∈ β, [a, j, b]."""
    return float(np.sum(iajb * iajb / _denominator(e_i, e_occ_b, e_vir_a, e_vir_b)))


def _ovov(half_i: np.ndarray, c_vir_i: np.ndarray, c_occ_j: np.ndarray, c_vir_j: np.ndarray, a_step: int) -> np.ndarray:
    """(ia|jb) for one occupied i from its (iν|κ), [a, j, b]; a from ``c_vir_i``, j and b from the other two."""
    pairs = _pair_map(c_occ_j.shape[0])
    ia_pair = c_vir_i.T @ half_i
    out = np.empty((c_vir_i.shape[1], c_occ_j.shape[1], c_vir_j.shape[1]))
    for a0 in range(0, c_vir_i.shape[1], a_step):
        ia_ls = ia_pair[a0 : a0 + a_step][:, pairs]
        out[a0 : a0 + a_step] = np.matmul(np.matmul(c_occ_j.T, ia_ls), c_vir_j)
    return out


def _assemble(result, frozen_core, spaces, aa, bb, ab, fit_name=None, fit_n=None) -> UMP2Result:
    same = aa + bb
    correlation = same + ab
    scs = SCS_OPPOSITE_SPIN * ab + SCS_SAME_SPIN * same
    reference = float(result.energy_total)
    return UMP2Result(
        correlation=correlation, energy_total=reference + correlation, reference=reference,
        same_spin_alpha=aa, same_spin_beta=bb, same_spin=same, opposite_spin=ab,
        scs_correlation=scs, scs_energy_total=reference + scs, frozen_core=frozen_core,
        n_active_occupied=(spaces[0][0].shape[1], spaces[1][0].shape[1]),
        n_virtual=(spaces[0][1].shape[1], spaces[1][1].shape[1]),
        fit_name=fit_name, fit_n_functions=fit_n,
    )


def ump2_energy(
    result: UHFResult,
    *,
    frozen_core: int = 0,
    eri=None,
    memory_bytes: int | None = None,
    progress: Callable[[float], None] | None = None,
    fit_basis=None,
) -> UMP2Result:
    """UMP2 and SCS-UMP2 energies of a converged UHF run (see the module notes).

    Parameters
    ----------
    result : UHFResult
        A converged UHF result from :func:`hfcore.scf.run_scf`.
    frozen_core : int
        Lowest orbitals of each spin left out (:func:`hfcore.analysis.mp2.core_orbital_count`
        gives the usual number).
    eri : ERIStore, optional
        The stored integrals of the basis; computed (lean) otherwise.
    memory_bytes : int, optional
        As for :func:`hfcore.analysis.mp2_energy`.
    progress : callable, optional
        Fraction (0..1] done.
    fit_basis : str, BasisFamily or BasisSet, optional
        Density-fitted UMP2 with this fitting set (as for
        :func:`hfcore.analysis.ri_mp2.ri_mp2_energy`).

    Returns
    -------
    UMP2Result

    Raises
    ------
    InputError
        An ROHF record; a bad ``frozen_core``; no empty orbitals.
    ConvergenceError
        An unconverged record.
    ResourceError
        The store or the fitted factors exceed the memory limit.
    """
    from ..integrals import compute_eri

    frozen_core = int(frozen_core)
    spaces = _spin_spaces(result, frozen_core)
    if fit_basis is not None:
        return _fitted(result, spaces, frozen_core, fit_basis, memory_bytes, progress)
    nbf = result.basis.n_functions
    if eri is None:
        require_store_room(result)
        eri = compute_eri(result.basis, threshold=result.options.screening, threads=result.options.n_threads, lean=True)
    if eri.n_functions != nbf:
        raise InputError(f"the integral store has {eri.n_functions} functions but the basis has {nbf}")
    budget = max(_MIN_WORK_BYTES, eri.packed.nbytes // 2) if memory_bytes is None else int(memory_bytes)
    (ca_o, ca_v, ea_o, ea_v), (cb_o, cb_v, eb_o, eb_v) = spaces
    npair = nbf * (nbf + 1) // 2
    a_step = int(max(1, budget // (8 * nbf * nbf * 4)))
    total_occ = ca_o.shape[1] + cb_o.shape[1]
    sums = {"aa": 0.0, "bb": 0.0, "ab": 0.0}
    done = 0
    for spin, (c_o, c_v, e_o, e_v) in (("a", spaces[0]), ("b", spaces[1])):
        n_occ = c_o.shape[1]
        block = int(max(1, min(max(n_occ, 1), budget // (8 * nbf * npair))))
        for start in range(0, n_occ, block):
            half = _first_quarter(eri.packed, c_o[:, start : start + block])
            for k, i in enumerate(range(start, min(start + block, n_occ))):
                same = _ovov(half[k], c_v, c_o, c_v, a_step)
                sums[spin + spin] += _same_spin(same, e_o[i], e_o, e_v)
                if spin == "a" and cb_o.shape[1]:
                    mixed = _ovov(half[k], ca_v, cb_o, cb_v, a_step)
                    sums["ab"] += _opposite_spin(mixed, e_o[i], eb_o, ea_v, eb_v)
                done += 1
                if progress is not None:
                    progress(done / total_occ)
            del half
    return _assemble(result, frozen_core, spaces, sums["aa"], sums["bb"], sums["ab"])


def _fitted(result, spaces, frozen_core, fit_basis, memory_bytes, progress) -> UMP2Result:
    from ..basis.fitting import FittingChoice, mp2_fitting_basis
    from ..integrals.three_center import ThreeCenterEngine, two_center_integrals
    from ..scf.fitted_jk import MetricFactor
    from .ri_mp2 import _BLOCK_BYTES

    choice = fit_basis if isinstance(fit_basis, FittingChoice) else mp2_fitting_basis(result.molecule, result.basis, fit_basis)
    aux = choice.basis
    nbf, naux = result.basis.n_functions, aux.n_functions
    (ca_o, ca_v, ea_o, ea_v), (cb_o, cb_v, eb_o, eb_v) = spaces
    ov = [c_o.shape[1] * c_v.shape[1] for c_o, c_v, _, _ in spaces]
    block = int(max(1, min(naux, _BLOCK_BYTES // (16 * nbf * nbf))))
    n_vir_max = max(ca_v.shape[1], cb_v.shape[1])
    need = 8 * naux * sum(ov) + 16 * block * nbf * nbf + 24 * naux * naux + 8 * n_vir_max * max(ov)
    limit = run_budget(result).bytes if memory_bytes is None else int(memory_bytes)
    if need > limit:
        raise ResourceError(
            f"density-fitted MP2 needs about {need / 2**20:.3g} MiB for {naux} fitting functions, but "
            f"{limit / 2**20:.3g} MiB are allowed (--memory MIB, memory_limit)"
        )
    engine = ThreeCenterEngine(result.basis, aux, threshold=result.options.screening)
    pairs = _pair_map(nbf)
    factors = [np.empty((naux, c_o.shape[1], c_v.shape[1])) for c_o, c_v, _, _ in spaces]
    for index, values in engine.blocks(block):
        full = values[:, pairs]
        for f, (c_o, c_v, _, _) in zip(factors, spaces):
            f[index] = np.matmul(np.matmul(c_o.T, full), c_v)
    metric = MetricFactor(two_center_integrals(aux))
    flat = [metric.whiten(f.reshape(naux, -1)) for f in factors]
    sums = [0.0, 0.0, 0.0]
    total = ca_o.shape[1] + cb_o.shape[1]
    for s, (c_o, c_v, e_o, e_v) in enumerate(spaces):
        n_occ, n_vir = c_o.shape[1], c_v.shape[1]
        for i in range(n_occ):
            rows = flat[s][:, i * n_vir : (i + 1) * n_vir]
            sums[s] += _same_spin((rows.T @ flat[s]).reshape(n_vir, n_occ, n_vir), e_o[i], e_o, e_v)
            if s == 0 and cb_o.shape[1]:
                mixed = (rows.T @ flat[1]).reshape(n_vir, cb_o.shape[1], cb_v.shape[1])
                sums[2] += _opposite_spin(mixed, e_o[i], eb_o, ea_v, eb_v)
            if progress is not None:
                progress((i + 1 + s * ca_o.shape[1]) / total)
    return _assemble(result, frozen_core, spaces, sums[0], sums[1], sums[2], aux.name, naux)


__all__ = ["UMP2Result", "ump2_energy", "check_mp2_reference"]
