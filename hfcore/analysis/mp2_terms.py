"""The parts every closed-shell MP2 shares, exact or density-fitted: the record, the orbital spaces, the pair sums.

:mod:`hfcore.analysis.mp2` (from the stored integrals) and
:mod:`hfcore.analysis.ri_mp2` (from fitted ones) both sum Σ (ia|jb)² / Δ and
Σ (ia|jb)(ib|ja) / Δ with :func:`pair_sums` and make the record with
:func:`assemble`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .._deprecation import rename_fields
from ..errors import ConvergenceError, InputError
from ._checks import require_placed

if TYPE_CHECKING:
    from ..scf.result import RHFResult

#: Weights of the opposite-spin and same-spin parts in SCS-MP2
#: (S. Grimme, J. Chem. Phys. 118, 9095 (2003)).
SCS_OPPOSITE_SPIN: float = 6.0 / 5.0
SCS_SAME_SPIN: float = 1.0 / 3.0

@dataclass(frozen=True)
class MP2Result:
    """The MP2 energy of a closed-shell molecule.

    Attributes
    ----------
    correlation : float
        E(2), the second-order correlation energy in hartree (negative).
    energy_total : float
        RHF total energy plus E(2), in hartree (``total`` is its deprecated
        name).
    reference : float
        The RHF total energy the correction was added to, in hartree.
    same_spin : float
        Same-spin part of E(2) in hartree.
    opposite_spin : float
        Opposite-spin part of E(2) in hartree.
    frozen_core : int
        Number of lowest occupied orbitals left out of the correlation.
    n_active_occupied : int
        Correlated occupied orbitals.
    n_virtual : int
        Virtual orbitals.
    scs_correlation : float
        Spin-component-scaled correlation energy, 6/5 of the opposite-spin
        plus 1/3 of the same-spin part (hartree).
    scs_energy_total : float
        RHF total energy plus ``scs_correlation`` (hartree; ``scs_total`` is
        its deprecated name).
    fit_basis_name : str or None
        Name of the fitting set (``fit_basis``) of density-fitted MP2 (None:
        exact integrals); ``fit_name`` is its deprecated name.
    fit_basis_n_functions : int or None
        Functions of that fitting set on the molecule (None: exact
        integrals); ``fit_n_functions`` is its deprecated name.
    """

    correlation: float
    energy_total: float
    reference: float
    same_spin: float
    opposite_spin: float
    frozen_core: int
    n_active_occupied: int
    n_virtual: int
    scs_correlation: float = 0.0
    scs_energy_total: float = 0.0
    fit_basis_name: str | None = None
    fit_basis_n_functions: int | None = None

    def to_dict(self) -> dict[str, float | int]:
        """The record as plain numbers (hartree), for JSON.

        Inside the ``mp2`` object the totals keep their short keys
        ``total`` and ``scs_total``, as ``energy.total`` does; ``fit_name``
        and ``fit_n_functions`` repeat ``fit_basis_name`` and
        ``fit_basis_n_functions`` under their deprecated keys (kept for one release).
        """
        return {
            "correlation": self.correlation,
            "total": self.energy_total,
            "reference": self.reference,
            "same_spin": self.same_spin,
            "opposite_spin": self.opposite_spin,
            "scs_correlation": self.scs_correlation,
            "scs_total": self.scs_energy_total,
            "frozen_core": self.frozen_core,
            "n_active_occupied": self.n_active_occupied,
            "n_virtual": self.n_virtual,
            "fit_basis_name": self.fit_basis_name,
            "fit_basis_n_functions": self.fit_basis_n_functions,
            "fit_name": self.fit_basis_name,
            "fit_n_functions": self.fit_basis_n_functions,
        }


rename_fields(MP2Result, {"total": "energy_total", "scs_total": "scs_energy_total", "fit_name": "fit_basis_name",
                          "fit_n_functions": "fit_basis_n_functions"})


def _pair_map(nbf: int) -> np.ndarray:
    """Packed pair index of every (λ, σ), shape (nbf, nbf)."""
    i = np.arange(nbf)
    hi, lo = np.maximum(i[:, None], i[None, :]), np.minimum(i[:, None], i[None, :])
    return hi * (hi + 1) // 2 + lo


def pair_sums(iajb: np.ndarray, e_i: float, e_occ: np.ndarray, e_vir: np.ndarray) -> tuple[float, float]:
    """One occupied orbital's share of Σ (ia|jb)² / Δ and Σ (ia|jb)(ib|ja) / Δ (hartree).

    Parameters
    ----------
    iajb : ndarray, shape (n_vir, n_occ, n_vir)
        (ia|jb) for this i, indexed [a, j, b].
    e_i : float
        Orbital energy of i (hartree).
    e_occ, e_vir : ndarray, shape (n_occ,) and (n_vir,)
        Active occupied and virtual orbital energies (hartree).
    """
    denominator = e_i + e_occ[None, :, None] - e_vir[:, None, None] - e_vir[None, None, :]
    amplitudes = iajb / denominator
    return float(np.einsum("ajb,ajb->", amplitudes, iajb)), float(np.einsum("ajb,bja->", amplitudes, iajb))


def orbital_spaces(result: RHFResult, frozen_core: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Active occupied and virtual coefficients and energies, after the checks every MP2 needs.

    Returns
    -------
    c_occ : ndarray, shape (nbf, n_active)
    c_vir : ndarray, shape (nbf, n_vir)
    e_occ : ndarray, shape (n_active,)
    e_vir : ndarray, shape (n_vir,)

    Raises
    ------
    ConvergenceError, InputError
        As :func:`mp2_energy`.
    """
    require_placed(result, "MP2")
    if not result.converged:
        raise ConvergenceError("MP2 needs a converged RHF result; this one did not converge", result)
    occupations = np.asarray(result.occupations)
    occupied = np.flatnonzero(occupations > 0.0)
    virtual = np.flatnonzero(occupations == 0.0)
    if not 0 <= frozen_core < occupied.size:
        raise InputError(f"frozen_core = {frozen_core} must be between 0 and {occupied.size - 1} (occupied orbitals - 1)")
    if virtual.size == 0:
        raise InputError("the basis has no virtual orbitals, so MP2 has nothing to correlate into")
    active = occupied[frozen_core:]
    coefficients = np.asarray(result.coefficients, dtype=np.float64)
    energies = np.asarray(result.orbital_energies, dtype=np.float64)
    return (
        np.ascontiguousarray(coefficients[:, active]),
        np.ascontiguousarray(coefficients[:, virtual]),
        energies[active],
        energies[virtual],
    )


def assemble(
    result: RHFResult,
    frozen_core: int,
    n_active: int,
    n_virtual: int,
    opposite: float,
    exchange: float,
    fit_basis_name: str | None = None,
    fit_basis_n_functions: int | None = None,
) -> MP2Result:
    """The MP2 record from Σ (ia|jb)² / Δ (``opposite``) and Σ (ia|jb)(ib|ja) / Δ (``exchange``), hartree."""
    same = opposite - exchange
    correlation = opposite + same
    scs = SCS_OPPOSITE_SPIN * opposite + SCS_SAME_SPIN * same
    reference = float(result.energy_total)
    return MP2Result(
        correlation=correlation,
        energy_total=reference + correlation,
        reference=reference,
        same_spin=same,
        opposite_spin=opposite,
        frozen_core=frozen_core,
        n_active_occupied=int(n_active),
        n_virtual=int(n_virtual),
        scs_correlation=scs,
        scs_energy_total=reference + scs,
        fit_basis_name=fit_basis_name,
        fit_basis_n_functions=fit_basis_n_functions,
    )


__all__ = ["SCS_OPPOSITE_SPIN", "SCS_SAME_SPIN", "MP2Result", "pair_sums", "orbital_spaces", "assemble"]
