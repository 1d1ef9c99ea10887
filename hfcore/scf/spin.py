"""Spin bookkeeping of open-shell SCF runs: the method choice and ⟨S²⟩.

⟨S²⟩ of a single determinant with α orbitals C_α and β orbitals C_β
(A. Szabo and N. S. Ostlund, *Modern Quantum Chemistry*, eq. 2.271, from
memory)::

    ⟨S²⟩ = S_z (S_z + 1) + N_β − Σ_ij |(C_α,i)ᵀ S C_β,j|²

over occupied α orbitals i and β orbitals j, with S_z = (N_α − N_β) / 2.
A pure spin state gives S (S + 1) with S = S_z; the excess is the spin
contamination.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

#: Method names as records and JSON write them.
METHOD_LABELS: dict[str, str] = {"rhf": "RHF", "uhf": "UHF", "rohf": "ROHF"}


def resolve_method(multiplicity: int, method: str | None) -> str:
    """The Hartree-Fock variant to run: ``method``, or RHF for a singlet and UHF otherwise.

    Parameters
    ----------
    multiplicity : int
        2S + 1 of the molecule (already checked against its electrons).
    method : {"rhf", "uhf", "rohf"} or None
        The choice in :attr:`SCFOptions.method`.

    Returns
    -------
    str
        "rhf", "uhf" or "rohf".

    Raises
    ------
    InputError
        RHF asked for a multiplicity other than 1.
    """
    if method is None:
        return "rhf" if multiplicity == 1 else "uhf"
    if method == "rhf" and multiplicity != 1:
        raise InputError(
            f"RHF describes singlets only, but the multiplicity is {multiplicity}; choose method 'uhf' or 'rohf'"
        )
    return method


def open_shell_choice(multiplicity: int, choice: str | None) -> str | None:
    """A run's open-shell choice (``--uhf`` / ``--rohf``) as the method of one molecule: the one rule.

    The choice names the method of an open shell; a closed-shell singlet
    stays RHF unless the choice is UHF (which may then break its spin
    symmetry), since ROHF of a closed shell is RHF.

    Returns
    -------
    str or None
        The value for :attr:`SCFOptions.method` (None: the default, RHF for a singlet).
    """
    name = choice.lower() if isinstance(choice, str) else choice
    if multiplicity == 1 and name != "uhf":
        return None
    return name


def s_squared(c_alpha_occ: np.ndarray, c_beta_occ: np.ndarray, overlap: np.ndarray) -> float:
    """⟨S²⟩ of the determinant of the given occupied orbitals (Szabo and Ostlund eq. 2.271).

    Parameters
    ----------
    c_alpha_occ : ndarray, shape (nbf, n_alpha)
    c_beta_occ : ndarray, shape (nbf, n_beta)
    overlap : ndarray, shape (nbf, nbf)

    Returns
    -------
    float
        Dimensionless (units of ħ²).
    """
    n_alpha, n_beta = c_alpha_occ.shape[1], c_beta_occ.shape[1]
    sz = 0.5 * (n_alpha - n_beta)
    cross = c_alpha_occ.T @ overlap @ c_beta_occ
    return float(sz * (sz + 1.0) + n_beta - np.sum(cross * cross))


def s_squared_exact(n_alpha: int, n_beta: int) -> float:
    """S (S + 1) for S = (N_α − N_β) / 2, the value of a pure spin state."""
    s = 0.5 * (n_alpha - n_beta)
    return float(s * (s + 1.0))


__all__ = [
    "open_shell_choice", "resolve_method", "s_squared", "s_squared_exact", "METHOD_LABELS"]
