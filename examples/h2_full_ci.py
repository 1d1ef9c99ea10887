"""A new method on hfcore's MO integrals: full configuration interaction for two electrons.

For two electrons in a singlet, the exact wavefunction in a basis of n
orthonormal orbitals is Ψ(r1, r2) = Σ_pq C_pq φ_p(r1) φ_q(r2) with C
symmetric, and its Hamiltonian on the products φ_p φ_q is

    H[(pq), (rs)] = h_pr δ_qs + δ_pr h_qs + (pr|qs),

so the full CI energy is the lowest eigenvalue of H on the n(n+1)/2
symmetric products, plus the nuclear repulsion. Along the dissociation
curve of H2 the CI energy goes to twice the hydrogen-atom energy of the same
basis, while RHF, which keeps both electrons in one orbital, stays far above
it (its wavefunction is half ionic at any separation).

Run:  python examples/h2_full_ci.py [FIGURE.png]
"""

from __future__ import annotations

import sys

import numpy as np
import scipy.linalg

import hfcore
from hfcore import integrals

BASIS = "cc-pvdz"


def h2(distance: float) -> hfcore.Molecule:
    """H2 along z with the given bond length in bohr."""
    return hfcore.Molecule(atomic_numbers=[1, 1], coordinates=[[0.0, 0.0, 0.0], [0.0, 0.0, distance]])


def mo_integrals(result: hfcore.RHFResult) -> tuple[np.ndarray, np.ndarray]:
    """One- and two-electron integrals over the run's orbitals: h (n, n) and (pq|rs) (n, n, n, n)."""
    c = result.coefficients
    h = c.T @ result.core_hamiltonian @ c
    eri = integrals.eri_tensor(result.basis)
    return h, np.einsum("up,vq,uvws,wr,st->pqrt", c, c, eri, c, c, optimize=True)


def two_electron_fci(h: np.ndarray, eri: np.ndarray) -> float:
    """Lowest singlet energy of two electrons (electronic part, hartree) from orthonormal-orbital integrals."""
    n = h.shape[0]
    one = np.eye(n)
    full = (np.einsum("pr,qs->pqrs", h, one) + np.einsum("pr,qs->pqrs", one, h) + eri.transpose(0, 2, 1, 3))
    full = full.reshape(n * n, n * n)
    p, q = np.triu_indices(n)
    symmetric = np.zeros((n * n, p.size))
    symmetric[p * n + q, np.arange(p.size)] += 1.0
    symmetric[q * n + p, np.arange(p.size)] += 1.0
    symmetric /= np.linalg.norm(symmetric, axis=0)
    return float(scipy.linalg.eigvalsh(symmetric.T @ full @ symmetric)[0])


def fci_energy(result: hfcore.RHFResult) -> float:
    """Full CI total energy of a two-electron molecule, on the orbitals of its RHF run."""
    h, eri = mo_integrals(result)
    return two_electron_fci(h, eri) + result.energy_nuclear


def hydrogen_atom_energy(basis_name: str = BASIS) -> float:
    """Exact energy of one H atom in the basis: the lowest eigenvalue of H C = S C ε."""
    atom = hfcore.Molecule(atomic_numbers=[1], coordinates=[[0.0, 0.0, 0.0]])
    basis = hfcore.build_basis(atom, basis_name)
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, atom.atomic_numbers, atom.coordinates)
    return float(scipy.linalg.eigvalsh(h, s)[0])


def curve(distances, basis_name: str = BASIS) -> tuple[np.ndarray, np.ndarray]:
    """RHF and full CI total energies (hartree) at each bond length (bohr)."""
    rhf, fci = [], []
    for r in distances:
        result = hfcore.run_rhf(h2(r), basis_name, guess="core")
        rhf.append(result.energy_total)
        fci.append(fci_energy(result))
    return np.array(rhf), np.array(fci)


def plot(distances, rhf, fci, atoms: float, path: str) -> None:
    """The two curves and the separated-atom limit, saved as PNG."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6, 4), dpi=100)
    ax.plot(distances, rhf, "o-", label="RHF")
    ax.plot(distances, fci, "s-", label="full CI")
    ax.axhline(atoms, color="grey", ls="--", label="2 E(H) in the same basis")
    ax.set_xlabel("H–H distance / bohr")
    ax.set_ylabel("energy / Eh")
    ax.set_title(f"H2 dissociation, {BASIS}")
    ax.legend()
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


def main(argv: list[str]) -> None:
    distances = np.array([0.8, 1.0, 1.2, 1.4, 1.6, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0])
    rhf, fci = curve(distances)
    atoms = 2.0 * hydrogen_atom_energy()
    print(f"{'R / bohr':>9}  {'RHF / Eh':>14}  {'full CI / Eh':>14}")
    for r, e_rhf, e_fci in zip(distances, rhf, fci):
        print(f"{r:9.2f}  {e_rhf:14.8f}  {e_fci:14.8f}")
    print(f"2 E(H) in {BASIS}: {atoms:.8f} Eh")
    if argv:
        plot(distances, rhf, fci, atoms, argv[0])
        print(f"wrote {argv[0]}")


if __name__ == "__main__":
    main(sys.argv[1:])
