"""Closed-shell second-order Møller-Plesset (MP2) correlation energy.

With canonical RHF orbitals, occupied i, j and virtual a, b,

    E(2) = sum_{ijab} (ia|jb) [2 (ia|jb) - (ib|ja)] / (e_i + e_j - e_a - e_b),

split into an opposite-spin part sum (ia|jb)² / Δ and a same-spin part
sum (ia|jb) [(ia|jb) - (ib|ja)] / Δ. The spin-component-scaled energy
weighs them 6/5 and 1/3 (S. Grimme, J. Chem. Phys. 118, 9095 (2003)).

The (ia|jb) come from the packed 8-fold store of :class:`ERIStore` and
never from the dense nbf⁴ tensor. One block of occupied orbitals at a
time, the first index is transformed to the occupied orbitals,

    (iν|κ) = sum_μ C_μi (μν|κ)     for every packed pair κ = (λσ), λ >= σ,

one ν at a time from the ν-th column of (μν|κ) gathered out of the store
(a matrix product with the full sum over μ); then, one i at a time, ν goes
to the virtual orbitals and the pair κ is unpacked and transformed to
(j, b). The work array of the block holds n_block · nbf · nbf(nbf+1)/2
numbers, chosen to fit ``memory_bytes``; nothing of size nbf⁴ is formed.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from .._deprecation import rename_keywords
from .._memory import allocate, run_budget
from ..errors import InputError, ResourceError
from .mp2_terms import SCS_OPPOSITE_SPIN, SCS_SAME_SPIN, MP2Result, _pair_map, assemble, orbital_spaces, pair_sums
from .ri_mp2 import ri_mp2_energy

if TYPE_CHECKING:
    from ..basis.family import BasisFamily
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from ..integrals.two_electron import ERIStore
    from ..scf.result import RHFResult

# Core orbitals per element by row of the periodic table (common practice:
# the noble-gas core of the previous row): (highest Z of the row, core count).
_CORE_BY_ROW = ((2, 0), (10, 1), (18, 5), (36, 9), (54, 18), (86, 27))

#: Smallest work-array budget (bytes) when none is given.
_MIN_WORK_BYTES = 32 << 20


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


def _store_columns(packed: np.ndarray, tri: np.ndarray, pairs: np.ndarray, out: np.ndarray) -> None:
    """Rows P of the full symmetric pair matrix (P|κ), for each P in ``pairs``, into ``out``.

    The packed array holds (P|κ) at tri[P] + κ for κ <= P (one contiguous
    stretch) and at tri[κ] + P for κ > P (a strided gather).
    """
    for row, p in zip(out, pairs):
        p = int(p)
        row[: p + 1] = packed[tri[p] : tri[p] + p + 1]
        row[p + 1 :] = packed[tri[p + 1 :] + p]


def _first_quarter(packed: np.ndarray, c_block: np.ndarray) -> np.ndarray:
    """(iν|κ) = Σ_μ C_μi (μν|κ) for the occupied orbitals of ``c_block`` (nbf, n_block).

    Returns
    -------
    ndarray, shape (n_block, nbf, npair)
    """
    nbf = c_block.shape[0]
    npair = nbf * (nbf + 1) // 2
    tri = np.arange(npair, dtype=np.int64) * (np.arange(npair, dtype=np.int64) + 1) // 2
    pairs = _pair_map(nbf)
    column = np.empty((nbf, npair))
    half = allocate("the MP2 half-transformed block", (c_block.shape[1], nbf, npair), zero=False)
    for nu in range(nbf):
        _store_columns(packed, tri, pairs[:, nu], column)
        np.matmul(c_block.T, column, out=half[:, nu, :])
    return half


def _ovov_row(half_i: np.ndarray, c_occ: np.ndarray, c_vir: np.ndarray, a_step: int) -> np.ndarray:
    """(ia|jb) for one occupied i from its (iν|κ), shape (n_vir, n_occ, n_vir), ``a_step`` virtuals at a time."""
    pairs = _pair_map(c_occ.shape[0])
    ia_pair = c_vir.T @ half_i  # (a, κ)
    out = np.empty((c_vir.shape[1], c_occ.shape[1], c_vir.shape[1]))
    for a0 in range(0, c_vir.shape[1], a_step):
        ia_ls = ia_pair[a0 : a0 + a_step][:, pairs]  # (a, λ, σ)
        out[a0 : a0 + a_step] = np.matmul(np.matmul(c_occ.T, ia_ls), c_vir)
    return out


def _opposite_and_exchange(
    packed: np.ndarray,
    c_occ: np.ndarray,
    c_vir: np.ndarray,
    e_occ: np.ndarray,
    e_vir: np.ndarray,
    budget: int,
    progress: Callable[[float], None] | None = None,
) -> tuple[float, float]:
    """Σ (ia|jb)² / Δ and Σ (ia|jb)(ib|ja) / Δ over active i, j and virtual a, b (hartree)."""
    nbf, n_occ = c_occ.shape
    npair = nbf * (nbf + 1) // 2
    block = int(max(1, min(n_occ, budget // (8 * nbf * npair))))
    # Virtual orbitals per unpacking step, so (a, λ, σ) stays within the budget too.
    a_step = int(max(1, min(c_vir.shape[1], budget // (8 * nbf * nbf * 4))))
    opposite = exchange = 0.0
    for start in range(0, n_occ, block):
        half = _first_quarter(packed, c_occ[:, start : start + block])
        for k, i in enumerate(range(start, min(start + block, n_occ))):
            iajb = _ovov_row(half[k], c_occ, c_vir, a_step)
            os_part, x_part = pair_sums(iajb, e_occ[i], e_occ, e_vir)
            opposite += os_part
            exchange += x_part
            if progress is not None:
                progress((i + 1) / n_occ)
        del half
    return opposite, exchange


@rename_keywords({"progress": "fraction_progress"})
def require_store_room(result: RHFResult) -> None:
    """Refuse, before computing it, a store of the run's integrals that exceeds the run's memory budget.

    MP2 of either kind (closed or open shell) without the SCF's own store
    computes a lean one: 8 bytes per unique integral.

    Raises
    ------
    ResourceError
        One line, with the size and the budget (exit code 5).
    """
    nbf = result.basis.n_functions
    need = 8 * (nbf * (nbf + 1) // 2) * (nbf * (nbf + 1) // 2 + 1) // 2
    limit = run_budget(result).bytes
    if need > limit:
        raise ResourceError(
            f"MP2 reads the stored integrals, {need / 2**20:.3g} MiB for {nbf} functions, but "
            f"{limit / 2**20:.3g} MiB are allowed (--memory MIB, memory_limit)"
        )


def mp2_energy(
    result: RHFResult,
    *,
    frozen_core: int = 0,
    eri: ERIStore | None = None,
    memory_bytes: int | None = None,
    fraction_progress: Callable[[float], None] | None = None,
    fit_basis: str | BasisFamily | BasisSet | None = None,
) -> MP2Result:
    """Canonical closed-shell MP2 and SCS-MP2 energies from a converged RHF run.

    Parameters
    ----------
    result : RHFResult
        A converged RHF result (uses ``coefficients``, ``orbital_energies``,
        ``occupations``, ``basis``, ``options.screening`` and
        ``energy_total``).
    frozen_core : int, optional
        Number of lowest occupied orbitals excluded from the correlation
        treatment (see :func:`core_orbital_count` for the usual choice).
    eri : ERIStore, optional
        The basis' stored integrals, if already at hand; otherwise they are
        computed again (8 bytes per unique integral, screened as the SCF
        was; the SCF's own store is gone by then, so the peak memory stays
        near the SCF's).
    memory_bytes : int, optional
        Budget for the work array of one occupied block, in bytes
        (default: half the packed store's size, at least 32 MiB, so the
        peak stays within 1.5 times the SCF's, which held at least the
        store). At least one occupied orbital is done at a time, whatever
        the budget.
    fraction_progress : callable, optional
        Called with the fraction (0..1] of the work done: the integral pass
        (when the store is computed here) as the first half, then each
        occupied orbital.
    fit_basis : str, BasisFamily or BasisSet, optional
        Density-fitted MP2 with this fitting set (a name such as
        ``"cc-pvtz-ri"``, or ``"auto"``; see
        :func:`hfcore.analysis.ri_mp2.ri_mp2_energy`); ``eri`` is then not
        used and ``memory_bytes`` is the budget of the fitted factors.

    Returns
    -------
    MP2Result

    Raises
    ------
    ConvergenceError
        If the RHF run did not converge (MP2 needs canonical orbitals).
    InputError
        If ``frozen_core`` is negative or leaves no occupied orbital, the
        basis has no virtual orbitals, or ``eri`` belongs to another basis.
    ResourceError
        If ``eri`` is not given and the store (8 bytes per unique
        integral) would exceed the run's memory budget (``result.memory_budget``).
    """
    from ..integrals import compute_eri

    frozen_core = int(frozen_core)
    if fit_basis is not None:
        return ri_mp2_energy(result, fit_basis, frozen_core=frozen_core, memory_bytes=memory_bytes,
                             fraction_progress=fraction_progress)
    c_occ, c_vir, e_occ, e_vir = orbital_spaces(result, frozen_core)
    nbf = result.basis.n_functions
    if eri is None:
        require_store_room(result)
        report = None if fraction_progress is None else (lambda fraction: fraction_progress(0.5 * fraction))
        eri = compute_eri(
            result.basis, threshold=result.options.screening, progress=report, threads=result.options.n_threads, lean=True
        )
        start = 0.5
    else:
        start = 0.0
    if eri.n_functions != nbf:
        raise InputError(f"the integral store has {eri.n_functions} functions but the basis has {nbf}")
    budget = max(_MIN_WORK_BYTES, eri.packed.nbytes // 2) if memory_bytes is None else int(memory_bytes)
    done = None if fraction_progress is None else (lambda fraction: fraction_progress(start + (1.0 - start) * fraction))
    opposite, exchange = _opposite_and_exchange(eri.packed, c_occ, c_vir, e_occ, e_vir, budget, done)
    return assemble(result, frozen_core, c_occ.shape[1], c_vir.shape[1], opposite, exchange)


__all__ = ["MP2Result", "mp2_energy", "core_orbital_count", "SCS_OPPOSITE_SPIN", "SCS_SAME_SPIN"]
