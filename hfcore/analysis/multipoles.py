"""Electric dipole moment of an RHF state.

mu = sum_A Z_A (R_A - O) - sum_{μν} D_μν <μ| r - O |ν>, in atomic units
(e·bohr). For a neutral molecule the value does not depend on the origin O.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike
from scipy import constants

from ..errors import InputError
from ._checks import require_placed

if TYPE_CHECKING:
    from ..geometry import Molecule
    from ..scf.result import RHFResult

#: One atomic unit of electric dipole moment (e·a0) in debye (1 D = 1e-21/c C·m).
DEBYE_PER_AU: float = (
    constants.elementary_charge * constants.physical_constants["Bohr radius"][0] / (1e-21 / constants.speed_of_light)
)


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


def dipole_moment(result: RHFResult, origin: ArrayLike | None = None) -> np.ndarray:
    """Electric dipole moment, nuclei and electrons together.

    Parameters
    ----------
    result : RHFResult
        A finished RHF run (uses ``density``, ``basis``, ``molecule``).
    origin : array_like, shape (3,), optional
        Reference point in bohr; the centre of nuclear charge by default.
        Only charged molecules depend on it.

    Returns
    -------
    ndarray, shape (3,)
        Dipole moment in e·bohr; multiply by :data:`DEBYE_PER_AU` for debye.
    """
    from ..integrals import multipole

    require_placed(result, "the dipole moment")
    molecule = result.molecule
    o = nuclear_charge_centre(molecule) if origin is None else np.asarray(origin, dtype=np.float64).reshape(-1)
    if o.shape != (3,) or not np.all(np.isfinite(o)):
        raise InputError(f"the dipole origin must be three finite numbers (bohr), got {origin!r}")
    z = molecule.nuclear_charges
    nuclear = z @ (np.asarray(molecule.coordinates, dtype=np.float64) - o)
    integrals = multipole(result.basis, 1, o)
    electronic = np.einsum("kij,ij->k", integrals, np.asarray(result.density, dtype=np.float64))
    return nuclear - electronic


__all__ = ["DEBYE_PER_AU", "dipole_moment", "nuclear_charge_centre"]
