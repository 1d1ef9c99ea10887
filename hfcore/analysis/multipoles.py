"""Electric dipole and quadrupole moments of an RHF state.

mu = sum_A Z_A (R_A - O) - sum_{μν} D_μν <μ| r - O |ν>, in atomic units
(e·bohr). For a neutral molecule the value does not depend on the origin O;
for an ion it does, and the default origin is then the centre of mass.

The quadrupole is the traceless (Buckingham) one,

    Θ_ab = ½ sum_A Z_A (3 r_a r_b - r² δ_ab) - ½ sum_{μν} D_μν <μ| 3 r_a r_b - r² δ_ab |ν>,

with r = position - O, in e·bohr²; it depends on the origin unless the
charge and the dipole both vanish.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from .. import elements
from ..errors import InputError
from ..units import DEBYE_ANGSTROM_PER_AU, DEBYE_PER_AU
from ._checks import require_placed

if TYPE_CHECKING:
    from ..geometry import Molecule
    from ..scf.result import RHFResult


def nuclear_charge_centre(molecule: Molecule) -> np.ndarray:
    """Centre of nuclear charge sum_A Z_A R_A / sum_A Z_A (ghost atoms have Z_A = 0).

    Parameters
    ----------
    molecule : Molecule

    Returns
    -------
    ndarray, shape (3,)
        Position in bohr.
    """
    z = molecule.nuclear_charges
    return z @ np.asarray(molecule.coordinates, dtype=np.float64) / z.sum()


def centre_of_mass(molecule: Molecule) -> np.ndarray:
    """Centre of mass with standard atomic weights, sum_A m_A R_A / sum_A m_A (ghost atoms weigh nothing).

    Parameters
    ----------
    molecule : Molecule

    Returns
    -------
    ndarray, shape (3,)
        Position in bohr.
    """
    m = np.array([elements.atomic_weight(int(z)) for z in molecule.atomic_numbers])
    m = np.where(molecule.ghosts, 0.0, m)
    return m @ np.asarray(molecule.coordinates, dtype=np.float64) / m.sum()


def _origin(molecule: Molecule, origin: ArrayLike | None) -> np.ndarray:
    o = centre_of_mass(molecule) if origin is None else np.asarray(origin, dtype=np.float64).reshape(-1)
    if o.shape != (3,) or not np.all(np.isfinite(o)):
        raise InputError(f"the multipole origin must be three finite numbers (bohr), got {origin!r}")
    return o


def dipole_moment(result: RHFResult, origin: ArrayLike | None = None) -> np.ndarray:
    """Electric dipole moment, nuclei and electrons together.

    Parameters
    ----------
    result : RHFResult
        A finished RHF run (uses ``density``, ``basis``, ``molecule``).
    origin : array_like, shape (3,), optional
        Reference point in bohr; the centre of mass (:func:`centre_of_mass`)
        by default. Only charged molecules depend on it.

    Returns
    -------
    ndarray, shape (3,)
        Dipole moment in e·bohr; multiply by :data:`DEBYE_PER_AU` for debye.
    """
    from ..integrals import multipole

    require_placed(result, "the dipole moment")
    molecule = result.molecule
    o = _origin(molecule, origin)
    z = molecule.nuclear_charges
    nuclear = z @ (np.asarray(molecule.coordinates, dtype=np.float64) - o)
    integrals = multipole(result.basis, 1, o)
    electronic = np.einsum("kij,ij->k", integrals, np.asarray(result.density, dtype=np.float64))
    return nuclear - electronic


def second_moment(result: RHFResult, origin: ArrayLike | None = None) -> np.ndarray:
    """Plain second moment of the charge, sum q r_a r_b (nuclei minus electrons).

    Parameters
    ----------
    result : RHFResult
    origin : array_like, shape (3,), optional
        Reference point in bohr; the centre of mass by default.

    Returns
    -------
    ndarray, shape (3, 3)
        Symmetric, in e·bohr².
    """
    from ..integrals import multipole

    require_placed(result, "the quadrupole moment")
    molecule = result.molecule
    o = _origin(molecule, origin)
    z = molecule.nuclear_charges
    r = np.asarray(molecule.coordinates, dtype=np.float64) - o
    nuclear = np.einsum("a,ai,aj->ij", z, r, r)
    # hfcore's Cartesian order for l = 2: xx, xy, xz, yy, yz, zz.
    comps = np.einsum("kij,ij->k", multipole(result.basis, 2, o), np.asarray(result.density, dtype=np.float64))
    xx, xy, xz, yy, yz, zz = comps
    electronic = np.array([[xx, xy, xz], [xy, yy, yz], [xz, yz, zz]])
    return nuclear - electronic


def quadrupole_moment(result: RHFResult, origin: ArrayLike | None = None) -> np.ndarray:
    """Traceless (Buckingham) quadrupole moment Θ = ½ (3 M - tr(M) 1), M the second moment.

    Parameters
    ----------
    result : RHFResult
    origin : array_like, shape (3,), optional
        Reference point in bohr; the centre of mass by default.

    Returns
    -------
    ndarray, shape (3, 3)
        Symmetric and traceless, in e·bohr²; multiply by
        :data:`DEBYE_ANGSTROM_PER_AU` for debye·ångström.
    """
    m = second_moment(result, origin)
    return 0.5 * (3.0 * m - np.trace(m) * np.eye(3))


__all__ = [
    "DEBYE_PER_AU",
    "DEBYE_ANGSTROM_PER_AU",
    "dipole_moment",
    "second_moment",
    "quadrupole_moment",
    "nuclear_charge_centre",
    "centre_of_mass",
]
