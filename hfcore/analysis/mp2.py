"""Closed-shell second-order Møller-Plesset (MP2) correlation energy.

A small prototype of a method built on top of the RHF result: transform the
dense AO two-electron integrals to (ia|jb) over occupied i, j and virtual
a, b canonical orbitals and sum

    E(2) = sum_{ijab} (ia|jb) [2 (ia|jb) - (ib|ja)] / (e_i + e_j - e_a - e_b).

Dense integrals cost nbf⁴ doubles of memory, so this suits small systems.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConvergenceError, InputError
from ._checks import require_placed

if TYPE_CHECKING:
    from ..geometry import Molecule
    from ..scf.result import RHFResult

# Core orbitals per element by row of the periodic table (common practice:
# the noble-gas core of the previous row): (highest Z of the row, core count).
_CORE_BY_ROW = ((2, 0), (10, 1), (18, 5), (36, 9), (54, 18), (86, 27))


@dataclass(frozen=True)
class MP2Result:
    """The MP2 energy of a closed-shell molecule.

    Attributes
    ----------
    correlation : float
        E(2), the second-order correlation energy in hartree (negative).
    total : float
        RHF total energy plus E(2), in hartree.
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
    """

    correlation: float
    total: float
    reference: float
    same_spin: float
    opposite_spin: float
    frozen_core: int
    n_active_occupied: int
    n_virtual: int


def core_orbital_count(molecule: Molecule) -> int:
    """Number of core orbitals by the usual noble-gas-core rule.

    Parameters
    ----------
    molecule : Molecule

    Returns
    -------
    int
        Sum over atoms of the doubly occupied orbitals of the previous
        noble gas (0 for H-He, 1 for Li-Ne, 5 for Na-Ar, ...); ghost atoms
        have no core.
    """
    total = 0
    for z in molecule.atomic_numbers[~molecule.ghosts]:
        z = int(z)
        total += next((count for last, count in _CORE_BY_ROW if z <= last), _CORE_BY_ROW[-1][1])
    return total


def _ovov_integrals(eri: np.ndarray, c_occ: np.ndarray, c_vir: np.ndarray) -> np.ndarray:
    """(ia|jb) from AO (μν|λσ), one index at a time (nbf⁴·o flops at most)."""
    half = np.tensordot(c_occ, eri, axes=([0], [0]))  # (i, ν, λ, σ)
    half = np.tensordot(half, c_vir, axes=([1], [0]))  # (i, λ, σ, a)
    half = np.tensordot(half, c_occ, axes=([1], [0]))  # (i, σ, a, j)
    full = np.tensordot(half, c_vir, axes=([1], [0]))  # (i, a, j, b)
    return np.ascontiguousarray(full)


def mp2_energy(result: RHFResult, *, frozen_core: int = 0) -> MP2Result:
    """Canonical closed-shell MP2 correlation energy from a converged RHF run.

    Parameters
    ----------
    result : RHFResult
        A converged RHF result (uses ``coefficients``, ``orbital_energies``,
        ``occupations``, ``basis`` and ``energy_total``).
    frozen_core : int, optional
        Number of lowest occupied orbitals excluded from the correlation
        treatment (see :func:`core_orbital_count` for the usual choice).

    Returns
    -------
    MP2Result

    Raises
    ------
    ConvergenceError
        If the RHF run did not converge (MP2 needs canonical orbitals).
    InputError
        If ``frozen_core`` is negative or leaves no occupied orbital, or the
        basis has no virtual orbitals.
    """
    from ..integrals import eri_tensor

    require_placed(result, "MP2")
    if not result.converged:
        raise ConvergenceError("MP2 needs a converged RHF result; this one did not converge", result)
    occupied = np.flatnonzero(np.asarray(result.occupations) > 0.0)
    virtual = np.flatnonzero(np.asarray(result.occupations) == 0.0)
    if not 0 <= frozen_core < occupied.size:
        raise InputError(f"frozen_core = {frozen_core} must be between 0 and {occupied.size - 1} (occupied orbitals - 1)")
    if virtual.size == 0:
        raise InputError("the basis has no virtual orbitals, so MP2 has nothing to correlate into")
    active = occupied[frozen_core:]
    coefficients = np.asarray(result.coefficients, dtype=np.float64)
    energies = np.asarray(result.orbital_energies, dtype=np.float64)
    ovov = _ovov_integrals(eri_tensor(result.basis), coefficients[:, active], coefficients[:, virtual])
    e_o, e_v = energies[active], energies[virtual]
    denominator = e_o[:, None, None, None] - e_v[None, :, None, None] + e_o[None, None, :, None] - e_v[None, None, None, :]
    amplitudes = ovov / denominator
    opposite = float(np.einsum("iajb,iajb->", amplitudes, ovov))
    same = opposite - float(np.einsum("iajb,ibja->", amplitudes, ovov))
    correlation = opposite + same
    return MP2Result(
        correlation=correlation,
        total=float(result.energy_total) + correlation,
        reference=float(result.energy_total),
        same_spin=same,
        opposite_spin=opposite,
        frozen_core=int(frozen_core),
        n_active_occupied=int(active.size),
        n_virtual=int(virtual.size),
    )


__all__ = ["MP2Result", "mp2_energy", "core_orbital_count"]
