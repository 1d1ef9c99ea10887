"""The RHF iteration on bare matrices: guess orbitals, Fock builds, acceleration, convergence."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..errors import BasisError, ConvergenceError, InputError
from ..geometry import is_closed_shell
from .accelerators import AID_DAMPING, AID_LEVEL_SHIFT, AID_STAGES, Accelerator, FockStep, build_accelerator
from .jk import JKBuilder
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import RHFResult, SCFIteration
from .second_order import SecondOrderStep
from .stability import plain_builder

Progress = Callable[[SCFIteration], None]

#: Iterations over which progress is judged.
AID_WINDOW: int = 8


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

    def orbitals_of(self, density: np.ndarray) -> np.ndarray:
        """S-orthonormal orbitals (nbf, nmo) whose first n_occ span the occupied space of an idempotent density."""
        _, vectors = np.linalg.eigh(self.projector(density))
        return self.ortho.transform @ vectors[:, ::-1]  # projector eigenvalues descending: occupied first

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
    _solution: int = 0,
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
    accelerator : Accelerator, optional
        Replaces the one ``options`` name; the automatic aids
        (``options.auto_aids``) may still take over from it when it stalls.

    Returns
    -------
    RHFResult
        With ``molecule`` and ``basis`` left as None; timings hold "guess",
        "scf", "stability" and "total". Unless ``options.stability`` is
        "skip", the converged solution has been analysed (and, with
        "descend", left along unstable modes) by
        :func:`hfcore.scf.following.stabilise`.

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
    if not is_closed_shell(n_electrons):
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
    schedule = _AidSchedule(options, accelerator)
    state = _iterate(problem, density, previous, energy_nuclear, options, schedule, progress, _solution)
    t_scf = time.perf_counter()
    result = _result(problem, state, energy_nuclear, options)
    timings = {"guess": t_guess - t0, "scf": t_scf - t_guess, "stability": 0.0, "total": time.perf_counter() - t0}
    result = replace(result, timings=timings, aids=tuple(schedule.used))
    if not result.converged and schedule.used:
        result = replace(result, message=f"{result.message}; automatic aids tried: {', '.join(schedule.used)}")
    if not result.converged:
        raise ConvergenceError(result.message, result)
    if options.stability != "skip" and _solution == 0:
        from .following import stabilise

        result = stabilise(result, jk, int(n_electrons), energy_nuclear, progress=progress)
        result = replace(result, timings={**result.timings, "total": time.perf_counter() - t0})
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


class _AidSchedule:
    """The accelerator in use, and the automatic switch to aids when it stops making progress.

    The iterations count as stalled when the best orbital gradient of the
    last :data:`AID_WINDOW` iterations is not below half the best one
    before them (at least 12 iterations into the current accelerator), and
    as oscillating when the energy rose in half of the last
    :data:`AID_WINDOW` iterations. Either switches on the next of
    :data:`AID_STAGES`: DIIS restarted with a level shift of
    :data:`AID_LEVEL_SHIFT`; then damping by :data:`AID_DAMPING` with the
    shift; then, to the end, trust-region Newton steps on the orbital
    gradient (:mod:`hfcore.scf.second_order`, with the Hessian products of
    the stability analysis). Common practice: a shift separates occupied
    from virtual orbital energies and stops occupations swapping between
    iterations; damping removes oscillation; a second-order step needs no
    extrapolation history, moves downhill even near a saddle point and converges
    fast near the solution, at a few J/K builds per step. The final
    orbitals are never shifted.
    """

    def __init__(self, options: SCFOptions, accelerator: Accelerator | None) -> None:
        self.options = options
        if accelerator is None:
            accelerator = build_accelerator(options)
            self.name = options.accelerator + ("+level_shift" if options.level_shift > 0.0 else "")
        else:
            self.name = type(accelerator).__name__.lower()
        self.accelerator = accelerator
        self.accelerator.reset()
        self.second_order: SecondOrderStep | None = SecondOrderStep() if self.name == "second_order" else None
        self.used: list[str] = []
        self._gradients: list[float] = []
        self._energies: list[float] = []

    def observe(self, energy: float, gradient: float) -> None:
        """Record one iteration; switch to the next aid if the current accelerator is stuck."""
        self._gradients.append(gradient)
        self._energies.append(energy)
        if not self.options.auto_aids or len(self.used) >= len(AID_STAGES):
            return
        g = self._gradients
        stalled = len(g) >= 12 and min(g[-AID_WINDOW:]) > 0.5 * min(g[:-AID_WINDOW])
        e = np.array(self._energies[-AID_WINDOW - 1 :])
        rises = int(np.count_nonzero(np.diff(e) > max(self.options.energy_tol, 1e-9)))
        oscillating = len(e) > AID_WINDOW and rises >= AID_WINDOW // 2
        if stalled or oscillating:
            self._switch(AID_STAGES[len(self.used)])

    def _switch(self, name: str) -> None:
        opts = self.options
        self.second_order = None
        self.accelerator = build_accelerator(opts, name)
        if name == "second_order":
            self.second_order = SecondOrderStep()
        self.name = name
        self.used.append(name)
        self._gradients.clear()
        self._energies.clear()


def _iterate(
    problem: _Problem,
    density: np.ndarray,
    previous: float,
    energy_nuclear: float,
    options: SCFOptions,
    schedule: _AidSchedule,
    progress: Progress | None,
    solution: int = 0,
) -> _State:
    """Iterate from ``density``; ``previous`` is the total energy the first change is measured from."""
    history: list[SCFIteration] = []
    for iteration in range(1, options.max_iterations + 1):
        ev = problem.evaluate(density)
        error = problem.gradient(ev)
        energy = float(ev.energy_electronic + energy_nuclear)
        grad = float(np.max(np.abs(error))) if error.size else 0.0
        converged = abs(energy - previous) < options.energy_tol and grad < options.gradient_tol
        aid = ""
        if not converged:
            schedule.observe(energy, grad)
            aid = schedule.name
            if schedule.second_order is not None:
                orbitals = schedule.second_order.next_orbitals(
                    problem.orbitals_of(ev.density), ev.fock, problem.n_occ, plain_builder(problem.jk), energy
                )
                density = 2.0 * orbitals[:, : problem.n_occ] @ orbitals[:, : problem.n_occ].T
            else:
                step = FockStep(iteration, problem.ortho.to_orthonormal(ev.fock), error, problem.projector(ev.density))
                _, _, density = problem.occupy(schedule.accelerator.next_fock(step))
        record = SCFIteration(
            iteration, energy, energy - previous, grad, schedule.accelerator.subspace_size, aid, solution
        )
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
    aufbau_gap = _aufbau_gap(problem, ev)
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
        aufbau=bool(aufbau_gap > 0.0),
        aufbau_gap=aufbau_gap,
    )


def _aufbau_gap(problem: _Problem, ev: _Evaluation) -> float:
    """Lowest virtual minus highest occupied orbital energy of the density's own Fock matrix (hartree).

    The occupied space is that of the density the energy was evaluated at
    (projector eigenvalues near 1), not the orbitals re-occupied from its
    Fock matrix, so a solution that holds a higher orbital shows a negative gap.
    """
    fock = problem.ortho.to_orthonormal(ev.fock)
    weights, vectors = np.linalg.eigh(problem.projector(ev.density))
    occ, vir = vectors[:, weights > 0.5], vectors[:, weights <= 0.5]
    if occ.shape[1] == 0 or vir.shape[1] == 0:
        return float("inf")
    highest = float(np.linalg.eigvalsh(occ.T @ fock @ occ)[-1])
    lowest = float(np.linalg.eigvalsh(vir.T @ fock @ vir)[0])
    return lowest - highest


__all__ = ["solve_rhf", "Progress", "AID_STAGES", "AID_LEVEL_SHIFT", "AID_DAMPING", "AID_WINDOW"]
