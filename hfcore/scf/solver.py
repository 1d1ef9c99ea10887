"""The RHF iteration on bare matrices: guess orbitals, Fock builds, acceleration, convergence."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..errors import BasisError, ConvergenceError, InputError
from .accelerators import Accelerator, FockStep, build_accelerator
from .jk import JKBuilder
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import RHFResult, SCFIteration

Progress = Callable[[SCFIteration], None]


@dataclass(frozen=True)
class _Evaluation:
    """One density with its Fock matrix and energies."""

    density: np.ndarray
    fock: np.ndarray
    energy_one: float
    energy_two: float

    @property
    def energy_electronic(self) -> float:
        return self.energy_one + self.energy_two


class _Problem:
    """The fixed matrices of one RHF problem and the operations on them."""

    def __init__(self, overlap: np.ndarray, hcore: np.ndarray, jk: JKBuilder, n_occ: int, ortho: Orthogonaliser):
        self.overlap = overlap
        self.hcore = hcore
        self.jk = jk
        self.n_occ = n_occ
        self.ortho = ortho

    def evaluate(self, density: np.ndarray) -> _Evaluation:
        j, k = self.jk.jk(density)
        g = j - 0.5 * k
        fock = self.hcore + g
        return _Evaluation(density, fock, float(np.vdot(density, self.hcore)), 0.5 * float(np.vdot(density, g)))

    def gradient(self, ev: _Evaluation) -> np.ndarray:
        """F D S - S D F in the orthonormal basis, shape (nmo, nmo)."""
        fds = ev.fock @ ev.density @ self.overlap
        return self.ortho.to_orthonormal(fds - fds.T)

    def projector(self, density: np.ndarray) -> np.ndarray:
        """Occupied-space projector in the orthonormal basis: ½ Xᵀ S D S X."""
        sx = self.overlap @ self.ortho.transform
        return 0.5 * sx.T @ density @ sx

    def occupy(self, fock_orthonormal: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Diagonalise and fill the lowest n_occ orbitals: (energies, coefficients, total density)."""
        energies, coefficients = self.ortho.orbitals(fock_orthonormal)
        occ = coefficients[:, : self.n_occ]
        return energies, coefficients, 2.0 * occ @ occ.T


def _checked_square(name: str, matrix: np.ndarray, n: int | None = None) -> np.ndarray:
    m = np.ascontiguousarray(matrix, dtype=np.float64)
    if m.ndim != 2 or m.shape[0] != m.shape[1] or (n is not None and m.shape[0] != n):
        want = f"({n}, {n})" if n is not None else "square"
        raise InputError(f"{name} must be {want}, got shape {m.shape}")
    if not np.all(np.isfinite(m)):
        raise InputError(f"{name} contains non-finite values")
    return m


def solve_rhf(
    overlap: np.ndarray,
    core_hamiltonian: np.ndarray,
    jk: JKBuilder,
    n_electrons: int,
    energy_nuclear: float = 0.0,
    options: SCFOptions | None = None,
    guess_density: np.ndarray | None = None,
    *,
    progress: Progress | None = None,
    accelerator: Accelerator | None = None,
) -> RHFResult:
    """Run closed-shell Roothaan-Hall iterations on given matrices.

    The integrals may come from anywhere; :func:`hfcore.scf.run_rhf` is the
    entry that computes them for a molecule.

    Parameters
    ----------
    overlap : ndarray, shape (nbf, nbf)
        Overlap matrix S.
    core_hamiltonian : ndarray, shape (nbf, nbf)
        H = T + V (hartree).
    jk : JKBuilder
        Object whose ``jk(D)`` returns (J, K) for a symmetric density.
    n_electrons : int
        Even, positive electron count.
    energy_nuclear : float
        Nuclear repulsion added to the electronic energy (hartree).
    options : SCFOptions, optional
        Defaults to ``SCFOptions()``.
    guess_density : ndarray, shape (nbf, nbf), optional
        Starting total density (need not be idempotent nor hold the right
        electron count: one Fock build and diagonalisation turn it into
        orbitals). Without it, the core Hamiltonian gives the orbitals.
    progress : callable, optional
        Called with each :class:`SCFIteration` record as it is made.

    Returns
    -------
    RHFResult
        With ``molecule`` and ``basis`` left as None; timings hold "guess",
        "scf" and "total".

    Raises
    ------
    InputError
        For malformed matrices or an electron count the basis cannot hold.
    ConvergenceError
        If the criteria are not met within ``options.max_iterations``; its
        ``result`` is the unconverged record.
    """
    t0 = time.perf_counter()
    options = options or SCFOptions()
    s = _checked_square("overlap", overlap)
    h = _checked_square("core_hamiltonian", core_hamiltonian, s.shape[0])
    if isinstance(n_electrons, bool) or int(n_electrons) != n_electrons or n_electrons <= 0 or n_electrons % 2:
        raise InputError(f"RHF needs an even, positive number of electrons, got {n_electrons}")
    ortho = Orthogonaliser.from_overlap(s, options.lindep_threshold)
    n_occ = int(n_electrons) // 2
    if n_occ > ortho.n_orbitals:
        raise BasisError(
            f"{n_electrons} electrons need {n_occ} orbitals but the basis leaves only {ortho.n_orbitals} after dropping "
            f"{ortho.n_dropped} near-linearly dependent combinations (overlap eigenvalues below {options.lindep_threshold:g})"
        )
    problem = _Problem(s, h, jk, n_occ, ortho)
    density, guess_energy = _initial_density(problem, guess_density)
    t_guess = time.perf_counter()
    previous = 0.0 if guess_energy is None else float(guess_energy + energy_nuclear)
    if accelerator is None:
        accelerator = build_accelerator(options)
    accelerator.reset()
    state = _iterate(problem, density, previous, energy_nuclear, options, accelerator, progress)
    t_scf = time.perf_counter()
    result = _result(problem, state, energy_nuclear, options)
    timings = {"guess": t_guess - t0, "scf": t_scf - t_guess, "total": time.perf_counter() - t0}
    result = replace(result, timings=timings)
    if not result.converged:
        raise ConvergenceError(result.message, result)
    return result


def _initial_density(problem: _Problem, guess_density: np.ndarray | None) -> tuple[np.ndarray, float | None]:
    """Density of the starting orbitals, and the electronic energy of the guess density (None for the core guess)."""
    if guess_density is None:
        _, _, density = problem.occupy(problem.ortho.to_orthonormal(problem.hcore))
        return density, None
    guess = _checked_square("guess density", guess_density, problem.overlap.shape[0])
    ev = problem.evaluate(0.5 * (guess + guess.T))
    _, _, density = problem.occupy(problem.ortho.to_orthonormal(ev.fock))
    return density, ev.energy_electronic


@dataclass
class _State:
    evaluation: _Evaluation
    history: list[SCFIteration]
    converged: bool


def _iterate(
    problem: _Problem,
    density: np.ndarray,
    previous: float,
    energy_nuclear: float,
    options: SCFOptions,
    accelerator: Accelerator,
    progress: Progress | None,
) -> _State:
    """Iterate from ``density``; ``previous`` is the total energy the first change is measured from."""
    history: list[SCFIteration] = []
    for iteration in range(1, options.max_iterations + 1):
        ev = problem.evaluate(density)
        error = problem.gradient(ev)
        energy = float(ev.energy_electronic + energy_nuclear)
        grad = float(np.max(np.abs(error))) if error.size else 0.0
        converged = abs(energy - previous) < options.energy_tol and grad < options.gradient_tol
        if not converged:
            step = FockStep(iteration, problem.ortho.to_orthonormal(ev.fock), error, problem.projector(ev.density))
            _, _, density = problem.occupy(accelerator.next_fock(step))
        record = SCFIteration(iteration, energy, energy - previous, grad, accelerator.subspace_size)
        history.append(record)
        if progress is not None:
            progress(record)
        if converged:
            return _State(ev, history, True)
        previous = energy
    return _State(ev, history, False)


def _result(problem: _Problem, state: _State, energy_nuclear: float, options: SCFOptions) -> RHFResult:
    ev = state.evaluation
    energies, coefficients, density = problem.occupy(problem.ortho.to_orthonormal(ev.fock))
    occupations = np.zeros(energies.shape[0])
    occupations[: problem.n_occ] = 2.0
    last = state.history[-1]
    n = len(state.history)
    if state.converged:
        message = f"converged in {n} iterations"
    else:
        message = (
            f"SCF did not converge in {n} iterations: last energy {last.energy:.10f} Eh, "
            f"last energy change {last.delta_e:.3e} Eh (tolerance {options.energy_tol:.1e}), "
            f"last gradient {last.gradient_norm:.3e} (tolerance {options.gradient_tol:.1e})"
        )
    return RHFResult(
        energy_total=float(ev.energy_electronic + energy_nuclear),
        energy_nuclear=float(energy_nuclear),
        energy_one_electron=ev.energy_one,
        energy_two_electron=ev.energy_two,
        energy_electronic=ev.energy_electronic,
        orbital_energies=energies,
        coefficients=coefficients,
        occupations=occupations,
        density=density,
        fock=ev.fock,
        overlap=problem.overlap,
        core_hamiltonian=problem.hcore,
        converged=state.converged,
        iterations=n,
        history=state.history,
        n_dropped=problem.ortho.n_dropped,
        timings={},
        options=options,
        message=message,
    )


__all__ = ["solve_rhf", "Progress"]
