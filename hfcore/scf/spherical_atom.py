"""Restricted open-shell Hartree-Fock of a lone atom with equivalence restrictions.

A Gaussian-basis ROHF determinant of an open-shell atom, such as O ³P with
2p_x² 2p_y 2p_z, is free to give the doubly and the singly occupied p
orbitals different radial parts. It then breaks the atom's spherical
symmetry and may lie *below* the numerical Hartree-Fock limit, which is
defined with one radial function per shell, shared by all its m
components (the equivalence restrictions of R. K. Nesbet, Proc. R. Soc. A
230, 312 (1955), from memory). Measured with the reference library's
integrals: unrestricted ROHF of O in cc-pVQZ lies 1.4 mEh below the limit
of C. F. Bunge, J. A. Barrientos and A. V. Bunge, At. Data Nucl. Data
Tables 53, 113 (1993).

This module optimises the same determinant under those restrictions, so
its energy is comparable with published atomic limits:

* The orbitals are radial functions of each angular momentum l times the
  2l + 1 real solid harmonics; the coefficients of radial orbital r of l
  are the same for every m component (``c_l[:, r]``).
* The determinant is the ground term's high-spin one of the aufbau
  configuration (s¹ or p^k outside closed shells, Hund's rules): the open
  shell's α electrons fill its first components, the β ones the first of
  those. With equivalent orbitals, every such determinant is a pure
  component of the term (²S, ²P, ³P or ⁴S), so its energy is the term
  energy.
* That energy, E(c), is minimised over rotations of the radial orbitals
  within each l, C_l = C_l⁰ exp(K_l), by quasi-Newton steps (BFGS) on the
  exact gradient: the orbital derivative 2 F_σ φ summed over the m
  components of a radial orbital, taken through the exponential with its
  Fréchet derivative (the adjoint of d exp at K is d exp at Kᵀ).

The energy is the ROHF energy of the determinant (the UHF expression of its
α and β densities), so any J/K mode serves. The solution is an ordinary
:class:`~hfcore.scf.open_result.ROHFResult` whose ``restriction`` is
``"spherical atom"``; its orbital energies are the diagonal of the
Guest-Saunders effective Fock matrix (½(F_α + F_β) within a space) in the
restricted orbitals, made canonical per l and occupation with the
m-averaged matrix.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg

from ..basis.shells import BasisSet
from ..errors import BasisError, ConvergenceError, InputError
from .jk import JKBuilder
from .open_result import ROHFResult
from .rohf import rohf_record
from .options import SCFOptions
from .result import SCFIteration
from .solver import IterationProgress
from .uhf import UHFProblem, _checked_square

#: The restriction label carried by the result.
RESTRICTION = "spherical atom"
#: Aufbau subshells covered: (n, l, capacity), up to 4s (20 electrons).
_AUFBAU: tuple[tuple[int, int, int], ...] = ((1, 0, 2), (2, 0, 2), (2, 1, 6), (3, 0, 2), (3, 1, 6), (4, 0, 2))
_LETTERS = "spdfghi"
#: Extra rounds beyond max_iterations (each restarts from the orbitals reached).
_ROUNDS = 8


def _gradient(values: np.ndarray, scale: np.ndarray) -> float:
    """Largest radial-rotation gradient per m component and spin pair (Eh)."""
    return float(np.max(np.abs(values) / scale, initial=0.0))


@dataclass(frozen=True)
class AtomConfiguration:
    """The occupied shells of a lone atom's ground term.

    Attributes
    ----------
    closed : dict of int to int
        Number of doubly occupied radial orbitals per angular momentum.
    open_l : int or None
        Angular momentum of the open subshell (None for a closed shell).
    open_alpha, open_beta : int
        α and β electrons in the open subshell (high spin: α first).
    label : str
        E.g. "1s2 2s2 2p4".
    """

    closed: dict[int, int]
    open_l: int | None
    open_alpha: int
    open_beta: int
    label: str

    @property
    def multiplicity(self) -> int:
        """2S + 1 of the high-spin determinant."""
        return self.open_alpha - self.open_beta + 1

    @property
    def n_alpha(self) -> int:
        return sum(n * (2 * l + 1) for l, n in self.closed.items()) + self.open_alpha

    @property
    def n_beta(self) -> int:
        return sum(n * (2 * l + 1) for l, n in self.closed.items()) + self.open_beta


def ground_configuration(n_electrons: int) -> AtomConfiguration:
    """The aufbau configuration and Hund's high-spin occupation for ``n_electrons`` (1–20).

    Raises
    ------
    InputError
        No electrons, or more than 20 (the 3d shell is not covered).
    """
    if not 1 <= n_electrons <= 20:
        raise InputError(
            f"the spherical-atom run covers atoms and ions with 1 to 20 electrons (s and p shells), not {n_electrons}"
        )
    closed: dict[int, int] = {}
    left = n_electrons
    parts = []
    for n, l, capacity in _AUFBAU:
        take = min(left, capacity)
        if take == 0:
            break
        parts.append(f"{n}{_LETTERS[l]}{take}")
        left -= take
        if take == capacity:
            closed[l] = closed.get(l, 0) + 1
            continue
        n_m = 2 * l + 1
        alpha = min(take, n_m)
        return AtomConfiguration(closed, l, alpha, take - alpha, " ".join(parts))
    return AtomConfiguration(closed, None, 0, 0, " ".join(parts))


def applies_to(molecule, options: SCFOptions) -> bool:
    """Whether ``options.spherical_atom`` changes the run of ``molecule``: an open-shell lone atom.

    Closed-shell atoms and every other system run as without the option.
    """
    return bool(options.spherical_atom) and len(molecule.atomic_numbers) == 1 and molecule.spin_multiplicity != 1


def method_choice(molecule, method: str | None, spherical_atom: bool) -> str | None:
    """The method choice of a run once ``spherical_atom`` is applied: ROHF for an open-shell lone atom.

    Raises
    ------
    InputError
        UHF asked for such an atom.
    """
    if not (spherical_atom and len(molecule.atomic_numbers) == 1 and molecule.spin_multiplicity != 1):
        return method
    if method == "uhf":
        raise InputError(f"{molecule.source}: the spherical-atom run is restricted open-shell; it cannot be UHF")
    return "rohf"


def check_spherical_atom(n_atoms: int, n_ghosts: int, spherical: bool, n_electrons: int, multiplicity: int,
                         source: str) -> AtomConfiguration:
    """Refuse, before any integral, a system the spherical-atom run cannot describe.

    Parameters
    ----------
    n_atoms, n_ghosts : int
        Atoms of the molecule and how many of them are ghosts.
    spherical : bool
        Whether the basis uses real spherical components.
    n_electrons, multiplicity : int
    source : str
        The geometry's name, for the message.

    Returns
    -------
    AtomConfiguration

    Raises
    ------
    InputError
        Not a lone atom, Cartesian functions, more than 20 electrons, or a
        multiplicity other than the ground term's.
    """
    if n_atoms != 1 or n_ghosts:
        raise InputError(f"{source}: the spherical-atom run needs a lone atom without ghosts, got {n_atoms} atoms")
    if not spherical:
        raise InputError(
            f"{source}: the spherical-atom run needs real spherical functions; a Cartesian d shell holds an s function"
        )
    config = ground_configuration(n_electrons)
    if multiplicity != config.multiplicity:
        raise InputError(
            f"{source}: the spherical-atom run describes the high-spin ground term of {config.label} "
            f"(multiplicity {config.multiplicity}), not multiplicity {multiplicity}"
        )
    return config


def check_before_runs(runs, options: SCFOptions) -> None:
    """Check every spherical-atom run of a study or command before its first integral.

    Parameters
    ----------
    runs : iterable of (Molecule, str or None, bool, str)
        Each run's molecule, method choice (as for :attr:`SCFOptions.method`),
        whether its basis is real spherical, and its label for messages.
    options : SCFOptions
        Nothing is checked unless ``options.spherical_atom``.

    Raises
    ------
    InputError
        As :func:`check_spherical_atom`, or UHF asked for such an atom.
    """
    if not options.spherical_atom:
        return
    for molecule, method, spherical, label in runs:
        if method_choice(molecule, method, True) == "rohf" and applies_to(molecule, options):
            check_spherical_atom(molecule.n_atoms, int(np.count_nonzero(molecule.ghosts)), spherical,
                                 molecule.n_electrons, molecule.spin_multiplicity, label)


def radial_layout(basis: BasisSet) -> dict[int, np.ndarray]:
    """The basis functions of each angular momentum, by component and radial function.

    Returns
    -------
    dict of int to ndarray, shape (2l + 1, n_radial)
        ``layout[l][m, k]`` is the index of the basis function of component
        m of radial function k (shells in order, contractions within).
    """
    if not basis.spherical:
        raise InputError("the spherical-atom run needs real spherical functions")
    columns: dict[int, list[np.ndarray]] = {}
    for shell, start in zip(basis.shells, basis.shell_offsets[:-1]):
        n_m = 2 * shell.l + 1
        for c in range(shell.n_contractions):
            columns.setdefault(shell.l, []).append(int(start) + c * n_m + np.arange(n_m))
    return {l: np.array(cols).T for l, cols in sorted(columns.items())}


class _Determinant:
    """The restricted orbitals of one atom and their occupations: build, energy, gradient."""

    def __init__(self, problem: UHFProblem, layout: dict[int, np.ndarray], config: AtomConfiguration) -> None:
        self.problem = problem
        self.layout = layout
        self.config = config

    def occupations(self, l: int, n_radial: int) -> np.ndarray:
        """α and β occupation of each (radial orbital, component) of l, shape (2, n_radial, 2l + 1)."""
        n_m = 2 * l + 1
        occ = np.zeros((2, n_radial, n_m))
        n_closed = self.config.closed.get(l, 0)
        occ[:, :n_closed, :] = 1.0
        if l == self.config.open_l:
            occ[0, n_closed, : self.config.open_alpha] = 1.0
            occ[1, n_closed, : self.config.open_beta] = 1.0
        return occ

    def classes(self, l: int, n_radial: int) -> np.ndarray:
        """0 doubly occupied, 1 open, 2 empty, per radial orbital of l."""
        n_closed = self.config.closed.get(l, 0)
        out = np.full(n_radial, 2)
        out[:n_closed] = 0
        if l == self.config.open_l:
            out[n_closed] = 1
        return out

    def densities(self, radial: dict[int, np.ndarray]) -> np.ndarray:
        nbf = self.problem.overlap.shape[0]
        d = np.zeros((2, nbf, nbf))
        for l, c in radial.items():
            occ = self.occupations(l, c.shape[1])
            for m, rows in enumerate(self.layout[l]):
                for s in range(2):
                    cm = c[:, occ[s, :, m] > 0]
                    d[s][np.ix_(rows, rows)] += cm @ cm.T
        return d

    def energy_gradient(self, radial: dict[int, np.ndarray]):
        """(evaluation, dE/dc_l per l) at the radial orbitals ``radial``."""
        ev = self.problem.evaluate(self.densities(radial))
        grads = {}
        for l, c in radial.items():
            occ = self.occupations(l, c.shape[1])
            g = np.zeros_like(c)
            for m, rows in enumerate(self.layout[l]):
                for s in range(2):
                    g += 2.0 * (ev.focks[s][np.ix_(rows, rows)] @ c) * occ[s, :, m]
            grads[l] = g
        return ev, grads


def _block(matrix: np.ndarray, rows: np.ndarray) -> np.ndarray:
    return matrix[np.ix_(rows, rows)]


def _start(det: _Determinant, guess_densities: np.ndarray | None, lindep: float) -> dict[int, np.ndarray]:
    """Radial orbitals of the m-averaged Fock matrix of the start (or of the core Hamiltonian)."""
    problem = det.problem
    if guess_densities is None:
        fock = problem.hcore
    else:
        fock = problem.evaluate(np.asarray(guess_densities, dtype=np.float64)).focks.mean(axis=0)
    radial = {}
    for l, rows in det.layout.items():
        s_l = _block(problem.overlap, rows[0])
        f_l = np.mean([_block(fock, r) for r in rows], axis=0)
        w, v = np.linalg.eigh(s_l)
        keep = w > lindep
        x = v[:, keep] / np.sqrt(w[keep])
        _, u = np.linalg.eigh(x.T @ f_l @ x)
        radial[l] = x @ u
    return radial


def solve_spherical_atom(
    overlap: np.ndarray,
    core_hamiltonian: np.ndarray,
    jk: JKBuilder,
    layout: dict[int, np.ndarray],
    config: AtomConfiguration,
    energy_nuclear: float = 0.0,
    options: SCFOptions | None = None,
    guess_densities: np.ndarray | None = None,
    *,
    progress: IterationProgress | None = None,
) -> ROHFResult:
    """Minimise the ground-term ROHF energy of a lone atom over equivalence-restricted orbitals.

    Parameters
    ----------
    overlap, core_hamiltonian : ndarray, shape (nbf, nbf)
    jk : JKBuilder
    layout : dict of int to ndarray
        :func:`radial_layout` of the basis.
    config : AtomConfiguration
        :func:`ground_configuration` of the electron count.
    energy_nuclear : float
        Zero for a lone atom; kept for the common signature.
    options : SCFOptions, optional
        ``gradient_tol`` bounds the largest radial-rotation gradient (Eh),
        ``max_iterations`` the quasi-Newton steps.
    guess_densities : ndarray, shape (2, nbf, nbf), optional
        α and β start densities (their mean Fock matrix, averaged over m,
        gives the first orbitals); the core Hamiltonian without them.
    progress : callable, optional
        Called with each step's :class:`SCFIteration`.

    Returns
    -------
    ROHFResult
        With ``restriction == "spherical atom"`` and no stability analysis.

    Raises
    ------
    ConvergenceError
        The gradient did not fall below ``gradient_tol`` within ``max_iterations`` steps.
    """
    import scipy.optimize  # only this solver uses it

    t0 = time.perf_counter()
    options = options or SCFOptions()
    s = _checked_square("overlap", overlap)
    h = _checked_square("core_hamiltonian", core_hamiltonian, s.shape[0])
    from .orthogonalise import Orthogonaliser

    ortho = Orthogonaliser.from_overlap(s, options.lindep_threshold)
    if config.n_alpha > ortho.n_orbitals:
        raise BasisError(f"{config.n_alpha} occupied orbitals do not fit the {ortho.n_orbitals} orbitals of the basis")
    problem = UHFProblem(s, h, jk, config.n_alpha, config.n_beta, ortho)
    det = _Determinant(problem, layout, config)
    radial = _start(det, guess_densities, options.lindep_threshold)
    t_guess = time.perf_counter()
    pairs = {}
    for l, c in radial.items():
        kinds = det.classes(l, c.shape[1])
        pairs[l] = [(r, q) for r in range(c.shape[1]) for q in range(r + 1, c.shape[1]) if kinds[r] != kinds[q]]
    n_params = sum(len(p) for p in pairs.values())
    # dE/dκ of a radial pair sums 4 F_pq over the 2l + 1 components: per component, the
    # gradient is on the scale of an RHF orbital-gradient element, which gradient_tol bounds.
    scale = np.array([4.0 * (2 * l + 1) for l in radial for _ in pairs[l]])
    history: list[SCFIteration] = []
    cache: dict[bytes, tuple] = {}

    def rotations(x: np.ndarray) -> dict[int, np.ndarray]:
        out, k = {}, 0
        for l, c in radial.items():
            kappa = np.zeros((c.shape[1], c.shape[1]))
            for r, q in pairs[l]:
                kappa[r, q], kappa[q, r] = x[k], -x[k]
                k += 1
            out[l] = kappa
        return out

    def objective(x: np.ndarray, base: dict[int, np.ndarray]):
        kappas = rotations(x)
        trial = {l: base[l] @ scipy.linalg.expm(kappas[l]) for l in base}
        ev, grads = det.energy_gradient(trial)
        g = []
        for l in base:
            gk = scipy.linalg.expm_frechet(kappas[l].T, base[l].T @ grads[l], compute_expm=False)
            g.extend(gk[r, q] - gk[q, r] for r, q in pairs[l])
        g = np.asarray(g, dtype=np.float64)
        energy = float(ev.energy_electronic + energy_nuclear)
        cache[x.tobytes()] = (energy, g, ev, trial)
        return energy, g

    def record(x: np.ndarray) -> None:
        if x.tobytes() not in cache:  # the accepted point of a line search is normally cached
            objective(x, base)
        energy, g, _, _ = cache[x.tobytes()]
        previous = history[-1].energy if history else energy
        step = SCFIteration(len(history) + 1, energy, energy - previous, _gradient(g, scale), 0, "quasi-newton", 0)
        history.append(step)
        if progress is not None:
            progress(step)

    x0 = np.zeros(n_params)
    steps_left = options.max_iterations
    converged = False
    inverse = None  # BFGS's inverse Hessian, kept when its line search stalls at round-off
    # BFGS restarts from the orbitals it reached, so the exponential stays near zero. Near
    # convergence the energy changes fall below its round-off and a line search can stall;
    # then quasi-Newton steps with the last inverse Hessian, judged by the gradient, finish.
    for _ in range(_ROUNDS + options.max_iterations):
        base = radial
        objective(x0, base)
        state = cache[x0.tobytes()]
        if not history:
            record(x0)
        converged = _gradient(state[1], scale) < options.gradient_tol
        if converged or steps_left <= 0:
            break
        if inverse is not None:
            x1 = -inverse @ state[1]
            objective(x1, base)
            if _gradient(cache[x1.tobytes()][1], scale) < _gradient(state[1], scale):
                record(x1)
                radial = cache[x1.tobytes()][3]
                steps_left -= 1
                cache.clear()
                continue
            inverse = None
        answer = scipy.optimize.minimize(
            objective, x0, args=(base,), jac=True, method="BFGS", callback=record,
            options={"gtol": 0.1 * options.gradient_tol * scale.min(initial=1.0), "maxiter": steps_left,
                     "norm": np.inf},
        )
        steps_left -= max(1, int(answer.nit))
        if answer.x.tobytes() in cache:
            radial = cache[answer.x.tobytes()][3]
        if answer.status != 0:
            inverse = np.asarray(answer.hess_inv)
        cache.clear()
    _, _, ev, radial = state
    t_scf = time.perf_counter()
    result = _record(det, radial, ev, history, converged, energy_nuclear, options)
    result = replace(
        result,
        timings={"guess": t_guess - t0, "scf": t_scf - t_guess, "stability": 0.0, "total": time.perf_counter() - t0},
    )
    if not converged:
        raise ConvergenceError(result.message, result)
    return result


def _canonical(det: _Determinant, radial: dict[int, np.ndarray], focks: np.ndarray) -> dict[int, np.ndarray]:
    """Radial orbitals turned, within each occupation class of each l, to diagonalise the m-averaged ½(F_α + F_β)."""
    mean = 0.5 * (focks[0] + focks[1])
    out = {}
    for l, c in radial.items():
        f_l = np.mean([c.T @ _block(mean, rows) @ c for rows in det.layout[l]], axis=0)
        kinds = det.classes(l, c.shape[1])
        turned = c.copy()
        for kind in (0, 1, 2):
            members = np.flatnonzero(kinds == kind)
            if members.size > 1:
                _, u = np.linalg.eigh(f_l[np.ix_(members, members)])
                turned[:, members] = c[:, members] @ u
        out[l] = turned
    return out


def _record(det: _Determinant, radial, ev, history, converged, energy_nuclear, options) -> ROHFResult:
    """The ROHF record: orbitals doubly occupied, then singly, then empty, each space in ascending energy."""
    problem = det.problem
    radial = _canonical(det, radial, ev.focks)
    nbf = problem.overlap.shape[0]
    columns, occ_a, occ_b = [], [], []
    for l, c in radial.items():
        occ = det.occupations(l, c.shape[1])
        for r in range(c.shape[1]):
            for m, rows in enumerate(det.layout[l]):
                v = np.zeros(nbf)
                v[rows] = c[:, r]
                columns.append(v)
                occ_a.append(occ[0, r, m])
                occ_b.append(occ[1, r, m])
    coefficients = np.array(columns).T
    occ_a, occ_b = np.array(occ_a), np.array(occ_b)
    mean = 0.5 * (ev.focks[0] + ev.focks[1])
    energies = np.einsum("mi,mn,ni->i", coefficients, mean, coefficients)
    space = np.where(occ_b > 0, 0, np.where(occ_a > 0, 1, 2))
    order = np.lexsort((energies, space))
    coefficients, energies = coefficients[:, order], energies[order]
    occ_a, occ_b = occ_a[order], occ_b[order]
    return rohf_record(problem, ev, coefficients, energies, occ_a, occ_b, history, converged, energy_nuclear, options,
                       "guest-saunders", nbf - coefficients.shape[1], RESTRICTION)


__all__ = ["AtomConfiguration", "applies_to", "method_choice", "check_before_runs", "ground_configuration", "check_spherical_atom", "radial_layout",
           "solve_spherical_atom", "RESTRICTION"]
