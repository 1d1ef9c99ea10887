"""The UHF iteration on bare matrices (J. A. Pople and R. K. Nesbet, J. Chem. Phys. 22, 571 (1954)).

Separate α and β orbitals, each the eigenvectors of its own Fock matrix::

    F_σ = H + J(D_α + D_β) − K(D_σ),   E = ½ Σ_σ tr(D_σ (H + F_σ))

Every iteration makes one J and two K from one read of the integrals
(:func:`hfcore.scf.jk.jk_multi`). DIIS (:class:`hfcore.scf.accelerators.DIIS`)
extrapolates the α and β Fock matrices together with one set of
coefficients, from the stacked α and β commutators F D S − S D F as one
error vector. When it stalls, a level shift of the empty orbitals of each
spin, then damping, take over (common practice, as in the RHF solver).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..errors import BasisError, ConvergenceError, InputError
from .accelerators import AID_DAMPING, AID_LEVEL_SHIFT, DIIS, FockStep
from .guess import split_density
from .jk import JKBuilder, jk_multi
from .open_result import UHFResult
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import SCFIteration
from .spin import s_squared, s_squared_exact

from .solver import IterationProgress

#: Rotation (radians) of the α HOMO into the α LUMO in the symmetry-breaking start of a singlet.
BREAK_ANGLE: float = 0.25 * np.pi / 2
#: Iterations over which a stall is judged (as in the RHF solver).
AID_WINDOW: int = 8


@dataclass(frozen=True)
class _Evaluation:
    densities: np.ndarray  # (2, nbf, nbf)
    focks: np.ndarray  # (2, nbf, nbf)
    energy_one: float
    energy_two: float

    @property
    def energy_electronic(self) -> float:
        return self.energy_one + self.energy_two


class UHFProblem:
    """The fixed matrices of one UHF problem and the operations on them.

    Parameters
    ----------
    overlap, hcore : ndarray, shape (nbf, nbf)
    jk : JKBuilder
    n_alpha, n_beta : int
    ortho : Orthogonaliser
    """

    def __init__(self, overlap, hcore, jk: JKBuilder, n_alpha: int, n_beta: int, ortho: Orthogonaliser) -> None:
        self.overlap = overlap
        self.hcore = hcore
        self.jk = jk
        self.n_occ = (int(n_alpha), int(n_beta))
        self.ortho = ortho

    def evaluate(self, densities: np.ndarray) -> _Evaluation:
        j, k = jk_multi(self.jk, densities)
        focks = self.hcore[None] + j[None] - k
        e_one = float(np.vdot(densities.sum(axis=0), self.hcore))
        e_two = 0.5 * float(sum(np.vdot(d, f - self.hcore) for d, f in zip(densities, focks)))
        return _Evaluation(densities, focks, e_one, e_two)

    def gradient(self, ev: _Evaluation) -> np.ndarray:
        """F_σ D_σ S − S D_σ F_σ in the orthonormal basis, stacked, shape (2, nmo, nmo)."""
        out = []
        for d, f in zip(ev.densities, ev.focks):
            fds = f @ d @ self.overlap
            out.append(self.ortho.to_orthonormal(fds - fds.T))
        return np.array(out)

    def orthonormal_focks(self, ev: _Evaluation) -> np.ndarray:
        return np.array([self.ortho.to_orthonormal(f) for f in ev.focks])

    def projectors(self, densities: np.ndarray) -> np.ndarray:
        """Occupied-space projectors Xᵀ S D_σ S X, shape (2, nmo, nmo)."""
        sx = self.overlap @ self.ortho.transform
        return np.array([sx.T @ d @ sx for d in densities])

    def occupy(self, focks_orthonormal: np.ndarray) -> tuple[list[np.ndarray], list[np.ndarray], np.ndarray]:
        """Diagonalise each spin's Fock matrix and fill its lowest orbitals: (energies, coefficients, densities)."""
        energies, coefficients, densities = [], [], []
        for f, n in zip(focks_orthonormal, self.n_occ):
            e, c = self.ortho.orbitals(f)
            energies.append(e)
            coefficients.append(c)
            densities.append(c[:, :n] @ c[:, :n].T)
        return energies, coefficients, np.array(densities)


def _checked_square(name: str, matrix: np.ndarray, n: int | None = None) -> np.ndarray:
    m = np.ascontiguousarray(matrix, dtype=np.float64)
    if m.ndim != 2 or m.shape[0] != m.shape[1] or (n is not None and m.shape[0] != n):
        raise InputError(f"{name} must be square{'' if n is None else f' ({n}, {n})'}, got shape {m.shape}")
    if not np.all(np.isfinite(m)):
        raise InputError(f"{name} contains non-finite values")
    return m


def solve_uhf(
    overlap: np.ndarray,
    core_hamiltonian: np.ndarray,
    jk: JKBuilder,
    n_alpha: int,
    n_beta: int,
    energy_nuclear: float = 0.0,
    options: SCFOptions | None = None,
    guess_densities: np.ndarray | None = None,
    *,
    break_symmetry: bool = False,
    progress: IterationProgress | None = None,
    _solution: int = 0,
) -> UHFResult:
    """Run UHF iterations on given matrices.

    Parameters
    ----------
    overlap, core_hamiltonian : ndarray, shape (nbf, nbf)
        S and H = T + V (hartree).
    jk : JKBuilder
        Its ``jk_multi`` (or ``jk`` per density) gives J of the total and K of each spin.
    n_alpha, n_beta : int
        Electrons of each spin (N_α ≥ N_β by convention, not required).
    energy_nuclear : float
    options : SCFOptions, optional
    guess_densities : ndarray, shape (2, nbf, nbf), optional
        α and β start densities (need not be idempotent: one Fock build
        and diagonalisation turn them into orbitals). Without them the
        core Hamiltonian gives the orbitals.
    break_symmetry : bool
        With N_α = N_β, turn the α HOMO towards the α LUMO by
        :data:`BREAK_ANGLE` in the start, so that a spin-broken solution
        can be reached.
    progress : callable, optional
        Called with each :class:`SCFIteration`.

    Returns
    -------
    UHFResult
        With ``molecule`` and ``basis`` None.

    Raises
    ------
    InputError, BasisError
        Malformed matrices; more electrons of a spin than orbitals.
    ConvergenceError
        No convergence within ``options.max_iterations``; ``.result`` is
        the unconverged record.
    """
    t0 = time.perf_counter()
    options = options or SCFOptions()
    s = _checked_square("overlap", overlap)
    h = _checked_square("core_hamiltonian", core_hamiltonian, s.shape[0])
    if min(n_alpha, n_beta) < 0 or n_alpha + n_beta <= 0:
        raise InputError(f"UHF needs a positive number of electrons, got {n_alpha} alpha and {n_beta} beta")
    ortho = Orthogonaliser.from_overlap(s, options.lindep_threshold)
    if max(n_alpha, n_beta) > ortho.n_orbitals:
        raise BasisError(
            f"{max(n_alpha, n_beta)} electrons of one spin need as many orbitals but the basis leaves only "
            f"{ortho.n_orbitals} after dropping {ortho.n_dropped} near-linearly dependent combinations"
        )
    problem = UHFProblem(s, h, jk, n_alpha, n_beta, ortho)
    densities, guess_energy = _initial_densities(problem, guess_densities, break_symmetry)
    t_guess = time.perf_counter()
    previous = 0.0 if guess_energy is None else float(guess_energy + energy_nuclear)
    ev, history, converged, aids = iterate_uhf(problem, densities, previous, energy_nuclear, options, progress, _solution)
    t_scf = time.perf_counter()
    result = uhf_record(problem, ev, history, converged, energy_nuclear, options)
    timings = {"guess": t_guess - t0, "scf": t_scf - t_guess, "stability": 0.0, "total": time.perf_counter() - t0}
    result = replace(result, timings=timings, aids=tuple(aids))
    if not result.converged:
        raise ConvergenceError(result.message, result)
    return result


def _initial_densities(
    problem: UHFProblem, guess: np.ndarray | None, break_symmetry: bool
) -> tuple[np.ndarray, float | None]:
    if guess is None:
        fock = problem.ortho.to_orthonormal(problem.hcore)
        focks, energy = np.array([fock, fock]), None
    else:
        g = np.asarray(guess, dtype=np.float64)
        n = problem.overlap.shape[0]
        if g.shape != (2, n, n) or not np.all(np.isfinite(g)):
            raise InputError(f"the UHF guess must be finite alpha and beta densities of shape (2, {n}, {n}), got {g.shape}")
        ev = problem.evaluate(0.5 * (g + g.transpose(0, 2, 1)))
        focks, energy = problem.orthonormal_focks(ev), ev.energy_electronic
    _, coefficients, densities = problem.occupy(focks)
    n_a, n_b = problem.n_occ
    if break_symmetry and n_a == n_b and 0 < n_a < coefficients[0].shape[1]:
        c = coefficients[0]
        homo, lumo = c[:, n_a - 1].copy(), c[:, n_a].copy()
        c = c.copy()
        c[:, n_a - 1] = np.cos(BREAK_ANGLE) * homo + np.sin(BREAK_ANGLE) * lumo
        densities[0] = c[:, :n_a] @ c[:, :n_a].T
    return densities, energy


class _Schedule:
    """DIIS, then DIIS with a level shift, then damping with a level shift, when progress stalls.

    Damping ends once the energy settles (four iterations within 1e-5 Eh);
    DIIS with the level shift then finishes from that basin.
    """

    AIDS = ("diis+level_shift", "damping+level_shift", "diis+level_shift")

    def __init__(self, options: SCFOptions) -> None:
        if options.accelerator == "second_order":
            raise InputError("the second_order accelerator serves RHF only; open shells use diis, damping or none")
        self.options = options
        # The chosen accelerator first ("diis", "damping" or "none"), then the automatic aids.
        self.STAGES = (options.accelerator,) + self.AIDS
        self.stage = 0
        self.diis = DIIS(options.max_diis_size, options.diis_start)
        self.previous: np.ndarray | None = None
        self.used: list[str] = []
        self._gradients: list[float] = []
        self._energies: list[float] = []

    @property
    def name(self) -> str:
        return self.STAGES[self.stage]

    @property
    def shifting(self) -> bool:
        """Whether the next step applies a level shift."""
        return self.stage > 0 or self.options.level_shift > 0.0

    def observe(self, energy: float, gradient: float) -> None:
        self._gradients.append(gradient)
        self._energies.append(energy)
        if not self.options.auto_aids or self.stage + 1 >= len(self.STAGES):
            return
        if self.name == "damping+level_shift":
            # Damping has brought the iterations into a basin (the energy settles): extrapolate again.
            e = self._energies
            if len(e) >= 4 and max(abs(np.diff(e[-4:]))) < 1e-5:
                self._advance()
            return
        g = self._gradients
        stalled = len(g) >= 12 and min(g[-AID_WINDOW:]) > 0.5 * min(g[:-AID_WINDOW])
        e = np.array(self._energies[-AID_WINDOW - 1 :])
        rises = int(np.count_nonzero(np.diff(e) > max(self.options.energy_tol, 1e-9)))
        if stalled or (len(e) > AID_WINDOW and rises >= AID_WINDOW // 2):
            self._advance()

    def _advance(self) -> None:
        self.stage += 1
        self.used.append(self.name)
        self.diis = DIIS(self.options.max_diis_size, 1)
        self.previous = None
        self._gradients.clear()
        self._energies.clear()

    def next_focks(self, iteration: int, focks: np.ndarray, errors: np.ndarray, projectors: np.ndarray) -> np.ndarray:
        """The α and β matrices (2, nmo, nmo) to diagonalise next."""
        if self.name in ("damping+level_shift", "damping"):
            factor = AID_DAMPING if self.stage > 0 else self.options.damping
            out = focks if self.previous is None else (1 - factor) * focks + factor * self.previous
            self.previous = out.copy()
        elif self.name == "none":
            out = focks
        else:
            out = self.diis.next_fock(FockStep(iteration, focks, errors, projectors))
            if self.stage == 0 and self.options.damping > 0.0 and iteration < self.options.diis_start:
                out = focks if self.previous is None else (1 - self.options.damping) * focks + self.options.damping * self.previous
                self.previous = out.copy()
        shift = AID_LEVEL_SHIFT if self.stage > 0 else self.options.level_shift
        if shift > 0.0:
            eye = np.eye(focks.shape[1])
            out = out + shift * (eye[None] - projectors)
        return out


def iterate_uhf(
    problem: UHFProblem,
    densities: np.ndarray,
    previous: float,
    energy_nuclear: float,
    options: SCFOptions,
    progress: IterationProgress | None = None,
    solution: int = 0,
) -> tuple[_Evaluation, list[SCFIteration], bool, list[str]]:
    """Iterate from α and β densities (2, nbf, nbf); returns the last evaluation, history, convergence, aids."""
    schedule = _Schedule(options)
    history: list[SCFIteration] = []
    ev = None
    for iteration in range(1, options.max_iterations + 1):
        ev = problem.evaluate(densities)
        errors = problem.gradient(ev)
        energy = float(ev.energy_electronic + energy_nuclear)
        grad = float(np.max(np.abs(errors))) if errors.size else 0.0
        converged = abs(energy - previous) < options.energy_tol and grad < options.gradient_tol
        aid = ""
        if not converged:
            schedule.observe(energy, grad)
            aid = schedule.name
            # The occupied-space projectors are only needed for a level shift.
            projectors = problem.projectors(ev.densities) if schedule.shifting else None
            focks = schedule.next_focks(iteration, problem.orthonormal_focks(ev), errors, projectors)
            _, _, densities = problem.occupy(focks)
        record = SCFIteration(iteration, energy, energy - previous, grad, schedule.diis.subspace_size, aid, solution)
        history.append(record)
        if progress is not None:
            progress(record)
        if converged:
            return ev, history, True, schedule.used
        previous = energy
    return ev, history, False, schedule.used


def uhf_record(
    problem: UHFProblem, ev: _Evaluation, history: list[SCFIteration], converged: bool, energy_nuclear: float,
    options: SCFOptions,
) -> UHFResult:
    """The :class:`UHFResult` of the last evaluation: canonical orbitals of its Fock matrices."""
    energies, coefficients, densities = problem.occupy(problem.orthonormal_focks(ev))
    n_a, n_b = problem.n_occ
    occ = []
    for n, e in zip(problem.n_occ, energies):
        o = np.zeros(e.shape[0])
        o[:n] = 1.0
        occ.append(o)
    last = history[-1]
    if converged:
        message = f"converged in {len(history)} iterations"
    else:
        message = (
            f"SCF did not converge in {len(history)} iterations: last energy {last.energy:.10f} Eh, "
            f"last energy change {last.delta_e:.3e} Eh (tolerance {options.energy_tol:.1e}), "
            f"last gradient {last.gradient_norm:.3e} (tolerance {options.gradient_tol:.1e})"
        )
    return UHFResult(
        energy_total=float(ev.energy_electronic + energy_nuclear),
        energy_nuclear=float(energy_nuclear),
        energy_one_electron=ev.energy_one,
        energy_two_electron=ev.energy_two,
        energy_electronic=ev.energy_electronic,
        orbital_energies_alpha=energies[0],
        orbital_energies_beta=energies[1],
        coefficients_alpha=coefficients[0],
        coefficients_beta=coefficients[1],
        occupations_alpha=occ[0],
        occupations_beta=occ[1],
        density_alpha=densities[0],
        density_beta=densities[1],
        fock_alpha=ev.focks[0],
        fock_beta=ev.focks[1],
        overlap=problem.overlap,
        core_hamiltonian=problem.hcore,
        converged=converged,
        iterations=len(history),
        history=history,
        n_dropped=problem.ortho.n_dropped,
        timings={},
        options=options,
        message=message,
        s_squared=s_squared(coefficients[0][:, :n_a], coefficients[1][:, :n_b], problem.overlap),
        s_squared_exact=s_squared_exact(n_a, n_b),
        n_alpha=n_a,
        n_beta=n_b,
    )


__all__ = ["solve_uhf", "split_density", "UHFProblem", "iterate_uhf", "uhf_record", "BREAK_ANGLE"]
