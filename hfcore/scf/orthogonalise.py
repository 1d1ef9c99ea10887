"""An orthonormal basis from the overlap matrix, with near-linear dependence removed."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError


@dataclass(frozen=True)
class Orthogonaliser:
    """Canonical orthogonalisation X = U s^{-1/2} over the kept overlap eigenvectors.

    Canonical rather than symmetric (Löwdin) orthogonalisation is used in
    every case, so a run with and without dropped vectors follows one code
    path; SCF energies do not depend on the choice.

    Attributes
    ----------
    transform : ndarray, shape (nbf, nmo)
        X with Xᵀ S X = 1.
    n_dropped : int
        Number of overlap eigenvectors dropped (eigenvalue below the
        threshold).
    smallest_kept : float
        The smallest overlap eigenvalue kept.
    """

    transform: np.ndarray
    n_dropped: int
    smallest_kept: float

    @classmethod
    def from_overlap(cls, overlap: np.ndarray, threshold: float) -> "Orthogonaliser":
        """Build X from the overlap matrix.

        Parameters
        ----------
        overlap : ndarray, shape (nbf, nbf)
            Symmetric positive semi-definite overlap matrix S.
        threshold : float
            Eigenvalues of S below this are treated as linear dependence.

        Raises
        ------
        InputError
            If no eigenvalue reaches the threshold.
        """
        s = np.asarray(overlap, dtype=np.float64)
        values, vectors = np.linalg.eigh(s)
        keep = values >= threshold
        if not np.any(keep):
            raise InputError(f"every overlap eigenvalue is below lindep_threshold {threshold:g}; the basis is degenerate")
        x = np.ascontiguousarray(vectors[:, keep] / np.sqrt(values[keep]))
        return cls(x, int(np.count_nonzero(~keep)), float(values[keep][0]))

    @property
    def n_orbitals(self) -> int:
        """Dimension of the orthonormal basis (nmo)."""
        return int(self.transform.shape[1])

    def to_orthonormal(self, matrix: np.ndarray) -> np.ndarray:
        """Xᵀ M X: a covariant matrix (Fock, commutator) in the orthonormal basis, shape (nmo, nmo)."""
        return self.transform.T @ matrix @ self.transform

    def orbitals(self, matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Solve F C = S C ε through the orthonormal basis.

        Parameters
        ----------
        matrix : ndarray, shape (nmo, nmo)
            The Fock matrix already in the orthonormal basis.

        Returns
        -------
        energies : ndarray, shape (nmo,)
            Ascending eigenvalues.
        coefficients : ndarray, shape (nbf, nmo)
            S-orthonormal eigenvectors in the original basis.
        """
        energies, vectors = np.linalg.eigh(matrix)
        return energies, np.ascontiguousarray(self.transform @ vectors)


__all__ = ["Orthogonaliser"]
