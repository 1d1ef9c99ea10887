"""Starting densities: superposition of spherically averaged atomic densities (SAD).

Each distinct atom (element plus its shells) gets a small RHF-like SCF of
its own in its own shells with fractional occupations that keep the atomic
density spherical: every set of degenerate orbitals shares its electrons
evenly. For the main-group atoms Li-F and Na-Cl the valence electrons are
moreover spread evenly over the valence s and p orbitals (a valence-averaged
atom, 2s^1 2p^1 2p^1 2p^1 for carbon) rather than filled in energy order;
other atoms are filled in energy order (aufbau).

Why valence averaging: on sixteen small molecules (H2O, NH3, CH4, HF, N2,
CO, H3O+, OH-, H2S, HCl, SiH4, CH2O, LiH, BH3, HCN, NH4+) the molecular SCF
needed 107 iterations in STO-3G with it against 109 with aufbau
occupations, and never more than the reference library's default guess;
in 6-31G* and cc-pVDZ the two differ by at most one iteration in total.

The molecular guess is the block-diagonal sum of these neutral-atom
densities; the SCF driver's first diagonalisation then fixes the electron
count of ions.
"""

from __future__ import annotations

import numpy as np

from .. import integrals
from ..basis.shells import BasisSet, Shell
from .accelerators import DIIS, FockStep
from .jk import JKBuilder
from .orthogonalise import Orthogonaliser

#: Orbital energies closer than this (hartree) belong to one degenerate set.
DEGENERACY_TOL: float = 1e-6
#: The atomic SCF only has to be good enough for a guess.
ATOM_ENERGY_TOL: float = 1e-8
ATOM_MAX_ITERATIONS: int = 60
#: Overlap eigenvalue below which atomic functions are dropped.
ATOM_LINDEP: float = 1e-7

_CACHE: dict[tuple, np.ndarray] = {}


def core_electrons(z: int) -> int | None:
    """Electrons of the noble-gas core of a valence-averaged atom, None for other elements.

    Li-F have a He core (2), Na-Cl a Ne core (10); H, the noble gases and
    heavier atoms are not valence-averaged.
    """
    if 3 <= z <= 9:
        return 2
    if 11 <= z <= 17:
        return 10
    return None


def sad_density(basis: BasisSet, atomic_numbers: np.ndarray, molecular_jk: JKBuilder | None = None) -> np.ndarray:
    """Block-diagonal superposition of neutral-atom densities.

    Parameters
    ----------
    basis : BasisSet
        The molecular basis; the shells of each atom define its atomic SCF.
    atomic_numbers : ndarray of int, shape (natom,)
        Nuclear charges (each atom is neutral in its own SCF); an atom given
        charge 0 (a ghost atom) gets no density.
    molecular_jk : JKBuilder, optional
        The molecule's own two-electron integrals. An atom holding at least
        half of the basis functions takes its J and K from them (a density
        confined to the atom's block needs only the atom's integrals), so
        they are not computed twice; for a lone atom that halves the cost.

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
        if not index or int(z) == 0:
            continue
        start, stop = int(offsets[index[0]]), int(offsets[index[-1] + 1])
        shells = tuple(basis.shells[i] for i in index)
        n = basis.n_functions
        shared = _BlockJK(molecular_jk, start, stop, n) if molecular_jk is not None and 2 * (stop - start) >= n else None
        density[start:stop, start:stop] = atomic_density(int(z), shells, basis.spherical, shared)
    return density


class _BlockJK:
    """J and K of a density confined to one atom's block, from the molecular integrals."""

    def __init__(self, jk: JKBuilder, start: int, stop: int, n: int) -> None:
        self.molecular = jk
        self.block = slice(start, stop)
        self.n = n

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        full = np.zeros((self.n, self.n))
        full[self.block, self.block] = density
        j, k = self.molecular.jk(full)
        return np.ascontiguousarray(j[self.block, self.block]), np.ascontiguousarray(k[self.block, self.block])


def atomic_density(z: int, shells: tuple[Shell, ...], spherical: bool, jk: JKBuilder | None = None) -> np.ndarray:
    """Spherically averaged density of a neutral atom in its own shells, cached.

    Parameters
    ----------
    z : int
        Atomic number.
    shells : tuple of Shell
        The atom's shells (their centre is irrelevant).
    spherical : bool
        Real spherical (True) or Cartesian (False) components.
    jk : JKBuilder, optional
        The atom's two-electron integrals, if already at hand; computed
        otherwise.

    Returns
    -------
    ndarray, shape (nbf_atom, nbf_atom)
        Total density of the atom.
    """
    key = (z, spherical) + tuple((s.l, s.exponents.tobytes(), s.coefficients.tobytes()) for s in shells)
    if key not in _CACHE:
        _CACHE[key] = _atomic_scf(z, shells, spherical, jk)
    return _CACHE[key].copy()


def _atomic_scf(z: int, shells: tuple[Shell, ...], spherical: bool, jk: JKBuilder | None) -> np.ndarray:
    origin = np.zeros(3)
    placed = tuple(Shell(s.l, s.exponents, s.coefficients, origin, 0, s.label) for s in shells)
    atom_basis = BasisSet("atom", placed, spherical)
    s = integrals.overlap(atom_basis)
    h = integrals.kinetic(atom_basis) + integrals.nuclear_attraction(
        atom_basis, np.array([float(z)]), origin.reshape(1, 3)
    )
    if jk is None:
        jk = integrals.compute_eri(atom_basis)
    return fractional_scf(s, h, jk, z, core_electrons(z))


def fractional_scf(
    overlap: np.ndarray, hcore: np.ndarray, jk: JKBuilder, n_electrons: int, n_core: int | None = None
) -> np.ndarray:
    """Closed-shell-like SCF with fractional, spherically averaged occupations.

    Parameters
    ----------
    overlap, hcore : ndarray, shape (nbf, nbf)
        Overlap and core Hamiltonian of the atom.
    jk : JKBuilder
        Coulomb/exchange builder of the atom.
    n_electrons : int
        Electrons to place (any non-negative number, odd allowed).
    n_core : int, optional
        Doubly occupy the lowest orbitals holding this many electrons and
        spread the rest evenly over the next s and p sets; without it (or
        if the orbitals above the core are not an s and a p set) fill in
        energy order.

    Returns
    -------
    ndarray, shape (nbf, nbf)
        Total density after convergence or after ``ATOM_MAX_ITERATIONS``
        (a guess needs no more).
    """
    ortho = Orthogonaliser.from_overlap(overlap, ATOM_LINDEP)
    diis = DIIS(max_size=6)
    density = _fill(ortho, ortho.to_orthonormal(hcore), n_electrons, n_core)
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
        density = _fill(ortho, extrapolated, n_electrons, n_core)
    return density


def _fill(ortho: Orthogonaliser, fock_orthonormal: np.ndarray, n_electrons: float, n_core: int | None) -> np.ndarray:
    """Total density of the orbitals of ``fock_orthonormal`` under the guess occupations."""
    energies, coefficients = ortho.orbitals(fock_orthonormal)
    groups = _degenerate_sets(energies)
    occupations = None if n_core is None else _valence_averaged(groups, n_electrons, n_core)
    if occupations is None:
        occupations = _aufbau(groups, n_electrons)
    return (coefficients * occupations) @ coefficients.T


def _degenerate_sets(energies: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of each run of ascending energies closer than DEGENERACY_TOL."""
    sets = []
    start = 0
    while start < energies.shape[0]:
        stop = start + 1
        while stop < energies.shape[0] and energies[stop] - energies[stop - 1] < DEGENERACY_TOL:
            stop += 1
        sets.append((start, stop))
        start = stop
    return sets


def _aufbau(groups: list[tuple[int, int]], n_electrons: float) -> np.ndarray:
    """Fill the sets in energy order, each sharing its electrons evenly."""
    occupations = np.zeros(groups[-1][1])
    left = float(n_electrons)
    for start, stop in groups:
        if left <= 0:
            break
        placed = min(left, 2.0 * (stop - start))
        occupations[start:stop] = placed / (stop - start)
        left -= placed
    return occupations


def _valence_averaged(groups: list[tuple[int, int]], n_electrons: float, n_core: int) -> np.ndarray | None:
    """Core sets doubly occupied, the valence electrons shared by the next s and p sets.

    Returns None unless the orbitals above the core start with one single
    and one threefold set (an s and a p shell), e.g. in a basis without p
    functions.
    """
    occupations = np.zeros(groups[-1][1])
    filled = 0
    k = 0
    while filled < n_core and k < len(groups):
        start, stop = groups[k]
        occupations[start:stop] = 2.0
        filled += 2 * (stop - start)
        k += 1
    if filled != n_core or k + 1 >= len(groups):
        return None
    (s_start, s_stop), (p_start, p_stop) = groups[k], groups[k + 1]
    if s_stop - s_start != 1 or p_stop - p_start != 3:
        return None
    occupations[s_start:p_stop] = (n_electrons - n_core) / 4.0
    return occupations


def split_density(total: np.ndarray, n_alpha: int, n_beta: int) -> np.ndarray:
    """An α and a β density from a total one, in proportion to the electrons of each spin.

    The atomic-density start of an open shell: the superposition of atomic
    densities carries no spin, so it is shared N_α : N_β; the first
    diagonalisation then fills N_α and N_β orbitals.

    Returns
    -------
    ndarray, shape (2, nbf, nbf)
    """
    n = n_alpha + n_beta
    if n == 0:
        return np.array([0.5 * total, 0.5 * total])
    return np.array([total * (n_alpha / n), total * (n_beta / n)])


__all__ = ["split_density", "sad_density", "atomic_density", "fractional_scf", "core_electrons", "DEGENERACY_TOL"]
