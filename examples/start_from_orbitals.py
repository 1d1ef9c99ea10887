"""Start the SCF from orbitals of one's own, or from a density of another basis.

``run_rhf(..., guess=D)`` accepts any total density D (nbf, nbf) in the
run's basis. Two ways to make one:

* from orbitals C (nbf, n_occ) of your own: D = 2 C Cᵀ — here the
  eigenvectors of the core Hamiltonian, S-orthonormal, from scipy;
* from a finished run in another basis: :func:`hfcore.project_density`
  carries the density across (D_new = S⁻¹ S_new,old D_old S_old,new S⁻¹).

Run:  python examples/start_from_orbitals.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import scipy.linalg

import hfcore
from hfcore import integrals

HERE = Path(__file__).resolve().parent


def density_from_orbitals(orbitals: np.ndarray) -> np.ndarray:
    """Total closed-shell density 2 C Cᵀ of occupied orbitals C, shape (nbf, n_occ)."""
    return 2.0 * orbitals @ orbitals.T


def core_orbitals(molecule: hfcore.Molecule, basis: hfcore.BasisSet) -> np.ndarray:
    """The occupied eigenvectors of H C = S C ε, shape (nbf, n_occ)."""
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, molecule.atomic_numbers, molecule.coordinates)
    _, c = scipy.linalg.eigh(h, s)
    return c[:, : molecule.n_electrons // 2]


def projected_start(molecule: hfcore.Molecule, small: str, large: str) -> tuple[hfcore.RHFResult, hfcore.RHFResult]:
    """Converge in ``small``, carry the density into ``large`` and converge there."""
    first = hfcore.run_rhf(molecule, small)
    basis = hfcore.build_basis(molecule, large)
    start = hfcore.project_density(first.density, first.basis, basis)
    return first, hfcore.run_rhf(molecule, basis, guess=start)


def main() -> None:
    methanol = hfcore.read_xyz(HERE.parent / "inputs" / "methanol.xyz")
    basis = hfcore.build_basis(methanol, "cc-pvdz")
    default = hfcore.run_rhf(methanol, basis)
    own = hfcore.run_rhf(methanol, basis, guess=density_from_orbitals(core_orbitals(methanol, basis)))
    small, projected = projected_start(methanol, "sto-3g", "cc-pvdz")
    print(f"default start (atomic densities)   E = {default.energy_total:.10f} Eh  {default.iterations:3d} iterations")
    print(f"own orbitals (core Hamiltonian)    E = {own.energy_total:.10f} Eh  {own.iterations:3d} iterations")
    print(f"projected from {small.basis.name:<8}            E = {projected.energy_total:.10f} Eh  "
          f"{projected.iterations:3d} iterations")


if __name__ == "__main__":
    main()
