"""Population analyses of an SCF density: Mulliken and Löwdin charges (any record), Mulliken spin populations (open shells).

Both split the electron count N = tr(D S) over basis functions and then over
the atoms the functions sit on. They depend on the basis and are a
bookkeeping device, not an observable.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import scipy.linalg

from ..errors import InputError
from ._checks import require_placed

if TYPE_CHECKING:
    from ..scf.result import RHFResult


def _density_and_overlap(result: RHFResult) -> tuple[np.ndarray, np.ndarray]:
    require_placed(result, "a population analysis")
    density = np.asarray(result.density, dtype=np.float64)
    overlap = np.asarray(result.overlap, dtype=np.float64)
    nbf = result.basis.n_functions
    if density.shape != (nbf, nbf) or overlap.shape != (nbf, nbf):
        raise InputError(
            f"density {density.shape} and overlap {overlap.shape} do not match the basis ({nbf} functions)"
        )
    return density, overlap


def _atom_charges(result: RHFResult, populations: np.ndarray) -> np.ndarray:
    """Nuclear charge minus the electron population gathered on each atom."""
    atoms = result.basis.function_atoms()
    n_atoms = result.molecule.n_atoms
    electrons = np.bincount(atoms, weights=populations, minlength=n_atoms)
    return result.molecule.nuclear_charges - electrons


def mulliken_populations(result: RHFResult) -> np.ndarray:
    """Mulliken gross population of every basis function.

    Parameters
    ----------
    result : RHFResult
        A finished RHF run (uses ``density``, the total density, and ``overlap``).

    Returns
    -------
    ndarray, shape (nbf,)
        (D S)_μμ in electrons; the entries sum to the electron count.
    """
    density, overlap = _density_and_overlap(result)
    # diag(D S) without forming the product.
    return np.einsum("ij,ji->i", density, overlap)


def mulliken_charges(result: RHFResult) -> np.ndarray:
    """Mulliken partial charge of every atom.

    Parameters
    ----------
    result : RHFResult

    Returns
    -------
    ndarray, shape (n_atoms,)
        Z_A (0 for a ghost atom) minus the Mulliken population of A's
        functions, in units of e;
        the entries sum to the molecular charge.
    """
    return _atom_charges(result, mulliken_populations(result))


def lowdin_populations(result: RHFResult) -> np.ndarray:
    """Löwdin population of every basis function.

    Parameters
    ----------
    result : RHFResult

    Returns
    -------
    ndarray, shape (nbf,)
        (S^½ D S^½)_μμ in electrons, the populations in the symmetrically
        orthogonalised basis.

    Notes
    -----
    Unlike Mulliken populations, these change when single functions are
    rescaled, so they hold for hfcore's convention of unit-normalised
    functions (every Cartesian component included).
    """
    density, overlap = _density_and_overlap(result)
    # S is symmetric positive definite: its square root via eigenvectors stays real and symmetric.
    w, v = scipy.linalg.eigh(overlap)
    root = (v * np.sqrt(np.clip(w, 0.0, None))) @ v.T
    return np.einsum("ij,jk,ki->i", root, density, root)


def lowdin_charges(result: RHFResult) -> np.ndarray:
    """Löwdin partial charge of every atom.

    Parameters
    ----------
    result : RHFResult

    Returns
    -------
    ndarray, shape (n_atoms,)
        Z_A minus the Löwdin population of A's functions, in units of e.
    """
    return _atom_charges(result, lowdin_populations(result))


def mulliken_spin_populations(result) -> np.ndarray:
    """Mulliken spin population of every atom of an open-shell record.

    Parameters
    ----------
    result : UHFResult or ROHFResult
        A finished open-shell run (uses ``density_alpha``, ``density_beta`` and ``overlap``).
        An RHF record has no spin: every population is zero.

    Returns
    -------
    ndarray, shape (natom,)
        Σ_{μ on A} ((D_α − D_β) S)_μμ; the entries sum to N_α − N_β.
    """
    from ..scf.open_result import atom_sums

    _, overlap = _density_and_overlap(result)
    spin = getattr(result, "spin_density", None)
    if spin is None:
        return np.zeros(result.molecule.natom)
    return atom_sums(result.basis, np.asarray(spin, dtype=np.float64), overlap)


__all__ = ["mulliken_populations", "mulliken_charges", "lowdin_populations", "lowdin_charges", "mulliken_spin_populations"]
