"""Starting densities: superposition of spherically averaged atomic densities (SAD).

Each distinct atom (element plus its shells) gets a small RHF-like SCF of
its own in its own shells, with the electrons spread evenly over each set
of degenerate orbitals, so the atomic density stays spherical. The
molecular guess is the block-diagonal sum of these neutral-atom densities;
the SCF driver's first diagonalisation then fixes the electron count of
ions.
"""

from __future__ import annotations

import numpy as np

from .. import integrals
from ..basis.shells import BasisSet, Shell
from .accelerators import DIIS, FockStep
from .orthogonalise import Orthogonaliser

#: Orbital energies closer than this (hartree) belong to one degenerate set.
DEGENERACY_TOL: float = 1e-6
#: The atomic SCF only has to be good enough for a guess.
ATOM_ENERGY_TOL: float = 1e-8
ATOM_MAX_ITERATIONS: int = 60
#: Overlap eigenvalue below which atomic functions are dropped.
ATOM_LINDEP: float = 1e-7

_CACHE: dict[tuple, np.ndarray] = {}


def sad_density(basis: BasisSet, atomic_numbers: np.ndarray) -> np.ndarray:
    """Block-diagonal superposition of neutral-atom densities.

    Parameters
    ----------
    basis : BasisSet
        The molecular basis; the shells of each atom define its atomic SCF.
    atomic_numbers : ndarray of int, shape (natom,)
        Nuclear charges (each atom is neutral in its own SCF).

    Returns
    -------
    ndarray, shape (nbf, nbf)
        Total guess density (electron count = sum of the atomic charges
        that carry basis functions).
    """
    density = np.zeros((basis.n_functions, basis.n_functions))
    offsets = basis.shell_offsets
    for atom, z in enumerate(atomic_numbers):
        index = [i for i, s in enumerate(basis.shells) if s.atom == atom]
        if not index:
            continue
        start, stop = int(offsets[index[0]]), int(offsets[index[-1] + 1])
        shells = tuple(basis.shells[i] for i in index)
        density[start:stop, start:stop] = atomic_density(int(z), shells, basis.spherical)
    return density


def atomic_density(z: int, shells: tuple[Shell, ...], spherical: bool) -> np.ndarray:
    """Spherically averaged density of a neutral atom in its own shells, cached.

    Parameters
    ----------
    z : int
        Atomic number.
    shells : tuple of Shell
        The atom's shells (their centre is irrelevant).
    spherical : bool
        Real spherical (True) or Cartesian (False) components.

    Returns
    -------
    ndarray, shape (nbf_atom, nbf_atom)
        Total density of the atom.
    """
    key = (z, spherical) + tuple((s.l, s.exponents.tobytes(), s.coefficients.tobytes()) for s in shells)
    if key not in _CACHE:
        _CACHE[key] = _atomic_scf(z, shells, spherical)
    return _CACHE[key].copy()


def _atomic_scf(z: int, shells: tuple[Shell, ...], spherical: bool) -> np.ndarray:
    origin = np.zeros(3)
    placed = tuple(Shell(s.l, s.exponents, s.coefficients, origin, 0, s.label) for s in shells)
    atom_basis = BasisSet("atom", placed, spherical)
    s = integrals.overlap(atom_basis)
    h = integrals.kinetic(atom_basis) + integrals.nuclear_attraction(
        atom_basis, np.array([float(z)]), origin.reshape(1, 3)
    )
    eri = integrals.compute_eri(atom_basis)
    return fractional_scf(s, h, eri, z)


def fractional_scf(overlap: np.ndarray, hcore: np.ndarray, jk, n_electrons: int) -> np.ndarray:
    """Closed-shell-like SCF with fractional occupation of degenerate sets.

    Parameters
    ----------
    overlap, hcore : ndarray, shape (nbf, nbf)
        Overlap and core Hamiltonian of the atom.
    jk : JKBuilder
        Coulomb/exchange builder of the atom.
    n_electrons : int
        Electrons to place (any non-negative number, odd allowed).

    Returns
    -------
    ndarray, shape (nbf, nbf)
        Total density after convergence or after ``ATOM_MAX_ITERATIONS``
        (a guess needs no more).
    """
    ortho = Orthogonaliser.from_overlap(overlap, ATOM_LINDEP)
    diis = DIIS(space=6)
    density = _fill(ortho, ortho.to_orthonormal(hcore), n_electrons)
    energy = 0.0
    for iteration in range(1, ATOM_MAX_ITERATIONS + 1):
        j, k = jk.jk(density)
        fock = hcore + j - 0.5 * k
        new_energy = 0.5 * float(np.vdot(density, hcore + fock))
        fds = fock @ density @ overlap
        error = ortho.to_orthonormal(fds - fds.T)
        if abs(new_energy - energy) < ATOM_ENERGY_TOL and np.max(np.abs(error)) < 1e3 * ATOM_ENERGY_TOL:
            break
        energy = new_energy
        extrapolated = diis.next_fock(FockStep(iteration, ortho.to_orthonormal(fock), error, np.zeros_like(error)))
        density = _fill(ortho, extrapolated, n_electrons)
    return density


def _fill(ortho: Orthogonaliser, fock_orthonormal: np.ndarray, n_electrons: float) -> np.ndarray:
    """Aufbau over degenerate sets, each set sharing its electrons evenly."""
    energies, coefficients = ortho.orbitals(fock_orthonormal)
    occupations = np.zeros(energies.shape[0])
    left = float(n_electrons)
    start = 0
    while left > 0 and start < energies.shape[0]:
        stop = start + 1
        while stop < energies.shape[0] and energies[stop] - energies[stop - 1] < DEGENERACY_TOL:
            stop += 1
        placed = min(left, 2.0 * (stop - start))
        occupations[start:stop] = placed / (stop - start)
        left -= placed
        start = stop
    return (coefficients * occupations) @ coefficients.T


__all__ = ["sad_density", "atomic_density", "fractional_scf", "DEGENERACY_TOL"]
