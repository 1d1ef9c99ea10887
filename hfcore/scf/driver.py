"""RHF on a molecule: integrals, guess, iterations, one record."""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np

from .. import integrals
from ..basis import build_basis
from ..basis.shells import BasisSet
from ..errors import ConvergenceError, InputError
from ..geometry import Molecule
from .guess import sad_density
from .jk import JKBuilder
from .options import SCFOptions
from .result import RHFResult
from .solver import Progress, solve_rhf

GUESSES: tuple[str, ...] = ("sad", "core")


def run_rhf(
    molecule: Molecule,
    basis: BasisSet | str = "sto-3g",
    options: SCFOptions | None = None,
    *,
    guess: str | np.ndarray = "sad",
    progress: Progress | None = None,
) -> RHFResult:
    """Restricted Hartree-Fock energy and orbitals of a closed-shell molecule.

    Parameters
    ----------
    molecule : Molecule
        Geometry in bohr and total charge; must have an even electron count.
    basis : BasisSet or str
        The basis placed on ``molecule``, or a basis name for
        :func:`hfcore.build_basis`.
    options : SCFOptions, optional
        Convergence and acceleration settings (defaults if omitted).
    guess : {"sad", "core"} or ndarray of shape (nbf, nbf)
        Superposition of atomic densities, the bare core Hamiltonian, or a
        total density to start from (for example one projected from another
        basis).
    progress : callable, optional
        Called with each :class:`SCFIteration` as it is made.

    Returns
    -------
    RHFResult
        Timings hold "integrals", "guess", "scf" and "total" seconds.

    Raises
    ------
    InputError
        Open-shell molecule, unknown guess, malformed guess density.
    ConvergenceError
        No convergence within ``options.max_iterations``; ``.result`` holds
        the unconverged record (with molecule and basis filled in).
    """
    t0 = time.perf_counter()
    options = options or SCFOptions()
    molecule.require_closed_shell()
    if isinstance(basis, str):
        basis = build_basis(molecule, basis)
    guess_density = _checked_guess(guess, basis)
    overlap = integrals.overlap(basis)
    hcore = integrals.kinetic(basis) + integrals.nuclear_attraction(
        basis, molecule.atomic_numbers.astype(np.float64), molecule.coordinates
    )
    jk = _jk_builder(basis, options)
    t_integrals = time.perf_counter()
    if isinstance(guess, str) and guess.lower() == "sad":
        guess_density = sad_density(basis, molecule.atomic_numbers, jk)
    t_sad = time.perf_counter() - t_integrals

    def finish(result: RHFResult) -> RHFResult:
        timings = {
            "integrals": t_integrals - t0,
            "guess": t_sad + result.timings["guess"],
            "scf": result.timings["scf"],
            "total": time.perf_counter() - t0,
        }
        return replace(result, molecule=molecule, basis=basis, timings=timings)

    try:
        result = solve_rhf(
            overlap, hcore, jk, molecule.n_electrons, molecule.nuclear_repulsion(), options, guess_density,
            progress=progress,
        )
    except ConvergenceError as exc:
        raise ConvergenceError(str(exc), finish(exc.result)) from None
    return finish(result)


def _checked_guess(guess: str | np.ndarray, basis: BasisSet) -> np.ndarray | None:
    """The user's density (None for a named guess), after checking the choice."""
    if isinstance(guess, str):
        if guess.lower() not in GUESSES:
            raise InputError(f"unknown SCF guess {guess!r}: use one of {', '.join(GUESSES)} or a density matrix")
        return None
    density = np.asarray(guess, dtype=np.float64)
    n = basis.n_functions
    if density.shape != (n, n):
        raise InputError(f"the guess density must have shape ({n}, {n}) for this basis, got {density.shape}")
    return density


def _jk_builder(basis: BasisSet, options: SCFOptions) -> JKBuilder:
    """Stored integrals; the direct mode is reserved in the options but not built yet."""
    if options.direct:
        raise InputError("direct SCF (recomputing integrals every iteration) is not available yet; use direct=False")
    return integrals.compute_eri(basis, threshold=options.screening)


__all__ = ["run_rhf", "GUESSES"]
