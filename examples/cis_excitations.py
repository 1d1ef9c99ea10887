"""A second method on hfcore's MO integrals: CIS (Tamm-Dancoff) singlet excitation energies.

With canonical RHF orbitals (occupied i, j; virtual a, b), the singlet
single excitations couple through

    A[ia, jb] = δ_ij δ_ab (ε_a - ε_i) + 2 (ia|jb) - (ij|ab),

and the eigenvalues of A are the CIS excitation energies (hartree); the
triplets have A[ia, jb] = δ_ij δ_ab (ε_a - ε_i) - (ij|ab).

Run:  python examples/cis_excitations.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import scipy.linalg

import hfcore
from hfcore import integrals
from hfcore.units import EV_PER_HARTREE

HERE = Path(__file__).resolve().parent


def cis_matrix(result: hfcore.RHFResult, *, triplet: bool = False) -> np.ndarray:
    """The CIS matrix A, shape (n_occ n_vir, n_occ n_vir), pairs (i, a) with a running fastest."""
    n_occ = result.n_occupied
    c_occ, c_vir = result.coefficients[:, :n_occ], result.coefficients[:, n_occ:]
    eri = integrals.eri_tensor(result.basis)
    ovov = np.einsum("ui,va,uvws,wj,sb->iajb", c_occ, c_vir, eri, c_occ, c_vir, optimize=True)
    oovv = np.einsum("ui,vj,uvws,wa,sb->ijab", c_occ, c_occ, eri, c_vir, c_vir, optimize=True)
    eps = result.orbital_energies
    n_vir = eps.size - n_occ
    gaps = (eps[None, n_occ:] - eps[:n_occ, None]).reshape(-1)
    coupling = -oovv.transpose(0, 2, 1, 3) if triplet else 2.0 * ovov - oovv.transpose(0, 2, 1, 3)
    return np.diag(gaps) + coupling.reshape(n_occ * n_vir, n_occ * n_vir)


def cis_energies(result: hfcore.RHFResult, n_states: int = 5, *, triplet: bool = False) -> np.ndarray:
    """The lowest ``n_states`` CIS excitation energies in hartree."""
    return scipy.linalg.eigvalsh(cis_matrix(result, triplet=triplet))[:n_states]


def main() -> None:
    water = hfcore.read_xyz(HERE.parent / "inputs" / "water.xyz")
    result = hfcore.run_rhf(water, "6-31g")
    print(f"{'state':>5}  {'singlet / eV':>12}  {'triplet / eV':>12}")
    for k, (s, t) in enumerate(zip(cis_energies(result), cis_energies(result, triplet=True)), start=1):
        print(f"{k:5d}  {s * EV_PER_HARTREE:12.4f}  {t * EV_PER_HARTREE:12.4f}")


if __name__ == "__main__":
    main()
