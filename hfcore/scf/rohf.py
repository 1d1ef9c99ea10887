"""Restricted open-shell Hartree-Fock (C. C. J. Roothaan, Rev. Mod. Phys. 32, 179 (1960)).

One set of orbitals in three spaces: doubly occupied (c, N_β of them),
singly occupied (o, N_α − N_β, all α) and empty (v). With the α and β
Fock matrices F_α, F_β of the densities D_α = C_{c+o} C_{c+o}ᵀ and
D_β = C_c C_cᵀ, the energy is the UHF expression of those densities, and
it is stationary when these blocks vanish (in the orbital basis)::

    c–o: F_β,     o–v: F_α,     c–v: (F_α + F_β) / 2

A single effective Fock matrix holds those off-diagonal blocks and, on its
diagonal blocks, A F_α + B F_β with coefficients (A, B) per space: a
*coupling scheme*. Its eigenvectors give the next orbitals; at convergence
the energy does not depend on the scheme (exact property), only the
orbital energies (its eigenvalues) do. The schemes offered
(:data:`COUPLINGS`, coefficients from memory):

- "guest-saunders": M. F. Guest and V. R. Saunders, Mol. Phys. 28, 819
  (1974): A = B = ½ in all three spaces (the default, and the one whose
  orbital energies the reference library reports);
- "roothaan": Roothaan's single-matrix form (Rev. Mod. Phys. 32, 179 (1960)):
  (A, B) = (−½, 3/2) core, (½, ½) open, (3/2, −½) virtual.

The iterations extrapolate the effective Fock matrix with DIIS on the ROHF
orbital gradient (the off-diagonal blocks above, as an antisymmetric
matrix in the orthonormal basis).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..errors import BasisError, ConvergenceError, InputError
from .accelerators import AID_LEVEL_SHIFT, DIIS, FockStep
from .jk import JKBuilder
from .couplings import COUPLINGS, Coupling, check_coupling
from .open_result import ROHFResult
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import SCFIteration
from .spin import s_squared, s_squared_exact
from .uhf import UHFProblem, _checked_square

from .solver import IterationProgress


class _ROHF:
    """Effective Fock matrix and orbital gradient of one set of orbitals."""

    def __init__(self, problem: UHFProblem, coupling: Coupling) -> None:
        self.problem = problem
        self.coupling = coupling
        n_a, n_b = problem.n_occ
        self.spaces = (slice(0, n_b), slice(n_b, n_a), slice(n_a, None))
        self.sx = problem.overlap @ problem.ortho.transform

    def densities(self, c: np.ndarray) -> np.ndarray:
        n_a, n_b = self.problem.n_occ
        return np.array([c[:, :n_a] @ c[:, :n_a].T, c[:, :n_b] @ c[:, :n_b].T])

    def blocks(self, c: np.ndarray, focks: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(effective Fock, gradient) in the orbital basis, and U (orthonormal-basis orbitals, C = X U)."""
        fa, fb = c.T @ focks[0] @ c, c.T @ focks[1] @ c
        fc = 0.5 * (fa + fb)
        cs, os_, vs = self.spaces
        eff = np.zeros_like(fa)
        for space, (a, b) in zip(self.spaces, (self.coupling.core, self.coupling.open, self.coupling.virtual)):
            eff[space, space] = a * fa[space, space] + b * fb[space, space]
        grad = np.zeros_like(fa)
        for (r, s), block in (((cs, os_), fb), ((os_, vs), fa), ((cs, vs), fc)):
            eff[r, s] = block[r, s]
            eff[s, r] = block[r, s].T
            grad[r, s] = block[r, s]
            grad[s, r] = -block[r, s].T
        u = self.sx.T @ c
        return eff, grad, u


def solve_rohf(
    overlap: np.ndarray,
    core_hamiltonian: np.ndarray,
    jk: JKBuilder,
    n_alpha: int,
    n_beta: int,
    energy_nuclear: float = 0.0,
    options: SCFOptions | None = None,
    guess_densities: np.ndarray | None = None,
    *,
    coupling: str = "guest-saunders",
    progress: IterationProgress | None = None,
) -> ROHFResult:
    """Run ROHF iterations on given matrices (see the module notes).

    Parameters
    ----------
    overlap, core_hamiltonian : ndarray, shape (nbf, nbf)
    jk : JKBuilder
    n_alpha, n_beta : int
        N_α ≥ N_β: N_β doubly and N_α − N_β singly occupied orbitals.
    energy_nuclear : float
    options : SCFOptions, optional
    guess_densities : ndarray, shape (2, nbf, nbf), optional
        α and β start densities; their Fock matrices' average gives the
        first orbitals. Without them, the core Hamiltonian does.
    coupling : str
        A key of :data:`COUPLINGS`.
    progress : callable, optional

    Returns
    -------
    ROHFResult
        ``stability`` is None: the stability of ROHF solutions is not analysed.

    Raises
    ------
    InputError
        N_α < N_β, unknown coupling, malformed matrices.
    ConvergenceError
        No convergence within ``options.max_iterations``.
    """
    t0 = time.perf_counter()
    options = options or SCFOptions()
    scheme = check_coupling(coupling)
    if options.accelerator != "diis":
        raise InputError(f"ROHF iterates with DIIS on its orbital gradient; the {options.accelerator!r} accelerator is not offered for it")
    if n_alpha < n_beta or n_beta < 0 or n_alpha == 0:
        raise InputError(f"ROHF needs N_alpha >= N_beta >= 0 and some electrons, got {n_alpha} and {n_beta}")
    s = _checked_square("overlap", overlap)
    h = _checked_square("core_hamiltonian", core_hamiltonian, s.shape[0])
    ortho = Orthogonaliser.from_overlap(s, options.lindep_threshold)
    if n_alpha > ortho.n_orbitals:
        raise BasisError(f"{n_alpha} occupied orbitals do not fit the {ortho.n_orbitals} orbitals of the basis")
    problem = UHFProblem(s, h, jk, n_alpha, n_beta, ortho)
    rohf = _ROHF(problem, COUPLINGS[scheme])
    if guess_densities is None:
        start = ortho.to_orthonormal(h)
        previous = 0.0
    else:
        ev0 = problem.evaluate(np.asarray(guess_densities, dtype=np.float64))
        start = ortho.to_orthonormal(0.5 * (ev0.focks[0] + ev0.focks[1]))
        previous = float(ev0.energy_electronic + energy_nuclear)
    _, c = ortho.orbitals(start)
    t_guess = time.perf_counter()
    diis = DIIS(options.max_diis_size, options.diis_start)
    history: list[SCFIteration] = []
    shift = options.level_shift
    aids: list[str] = []
    gradients: list[float] = []
    converged = False
    for iteration in range(1, options.max_iterations + 1):
        ev = problem.evaluate(rohf.densities(c))
        eff, grad_mo, u = rohf.blocks(c, ev.focks)
        error = u @ grad_mo @ u.T
        energy = float(ev.energy_electronic + energy_nuclear)
        grad = float(np.max(np.abs(error))) if error.size else 0.0
        converged = abs(energy - previous) < options.energy_tol and grad < options.gradient_tol
        aid = ""
        if not converged:
            gradients.append(grad)
            if options.auto_aids and not aids and len(gradients) >= 12 and min(gradients[-8:]) > 0.5 * min(gradients[:-8]):
                aids.append("diis+level_shift")
                diis = DIIS(options.max_diis_size, 1)
                shift = AID_LEVEL_SHIFT
            aid = aids[-1] if aids else "diis"
            f_ortho = u @ eff @ u.T
            nxt = diis.next_fock(FockStep(iteration, f_ortho, error, np.zeros_like(error)))
            if shift > 0.0:
                # Raise the open space by half the shift and the empty space by the whole (common practice).
                n_a, n_b = problem.n_occ
                level = np.zeros(u.shape[1])
                level[n_b:n_a], level[n_a:] = 0.5 * shift, shift
                nxt = nxt + (u * level) @ u.T
            _, c = ortho.orbitals(nxt)
        record = SCFIteration(iteration, energy, energy - previous, grad, diis.subspace_size, aid, 0)
        history.append(record)
        if progress is not None:
            progress(record)
        if converged:
            break
        previous = energy
    t_scf = time.perf_counter()
    result = _record(problem, rohf, c, ev, history, converged, energy_nuclear, options, scheme)
    result = replace(
        result, aids=tuple(aids),
        timings={"guess": t_guess - t0, "scf": t_scf - t_guess, "stability": 0.0, "total": time.perf_counter() - t0},
    )
    if not converged:
        raise ConvergenceError(result.message, result)
    return result


def _record(problem, rohf, c, ev, history, converged, energy_nuclear, options, scheme) -> ROHFResult:
    """The record in the canonical orbitals of the effective Fock matrix, taken space by space."""
    eff, _, _ = rohf.blocks(c, ev.focks)
    energies = np.empty(c.shape[1])
    canonical = c.copy()
    for space in rohf.spaces:
        values, vectors = np.linalg.eigh(eff[space, space])
        energies[space] = values
        canonical[:, space] = c[:, space] @ vectors
    n_a, n_b = problem.n_occ
    occ_a, occ_b = np.zeros(c.shape[1]), np.zeros(c.shape[1])
    occ_a[:n_a], occ_b[:n_b] = 1.0, 1.0
    return rohf_record(problem, ev, canonical, energies, occ_a, occ_b, history, converged, energy_nuclear, options,
                       scheme, problem.ortho.n_dropped)


def rohf_record(problem: UHFProblem, ev, coefficients: np.ndarray, energies: np.ndarray, occ_a: np.ndarray,
                occ_b: np.ndarray, history: list[SCFIteration], converged: bool, energy_nuclear: float,
                options: SCFOptions, coupling: str, n_dropped: int, restriction: str | None = None) -> ROHFResult:
    """The ROHF record of final orbitals (columns doubly, singly, then un-occupied) and their energies.

    Parameters
    ----------
    problem : UHFProblem
    ev : the evaluation of the final densities (energies, α and β Fock matrices)
    coefficients : ndarray, shape (nbf, nmo)
    energies : ndarray, shape (nmo,)
        The orbital energies of the effective Fock matrix in these orbitals.
    occ_a, occ_b : ndarray, shape (nmo,)
        α and β occupations (1 or 0).
    history, converged, energy_nuclear, options
        As the solver holds them.
    coupling : str
        The coupling scheme the orbital energies follow.
    n_dropped : int
        Orbitals removed for linear dependence.
    restriction : str or None
        The shape restriction of the orbitals (``"spherical atom"``) or None.
    """
    fa = np.einsum("mi,mn,ni->i", coefficients, ev.focks[0], coefficients)
    fb = np.einsum("mi,mn,ni->i", coefficients, ev.focks[1], coefficients)
    sc = problem.overlap @ coefficients
    # The AO matrix whose representation in the (S-orthonormal) orbitals is diag(energies).
    fock_eff = sc @ np.diag(energies) @ sc.T
    last = history[-1]
    n = len(history)
    message = f"converged in {n} iterations" if converged else (
        f"SCF did not converge in {n} iterations: last energy {last.energy:.10f} Eh, "
        f"last energy change {last.delta_e:.3e} Eh (tolerance {options.energy_tol:.1e}), "
        f"last gradient {last.gradient_norm:.3e} (tolerance {options.gradient_tol:.1e})"
    )
    n_a, n_b = int(np.count_nonzero(occ_a)), int(np.count_nonzero(occ_b))
    return ROHFResult(
        energy_total=float(ev.energy_electronic + energy_nuclear),
        energy_nuclear=float(energy_nuclear),
        energy_one_electron=ev.energy_one,
        energy_two_electron=ev.energy_two,
        energy_electronic=ev.energy_electronic,
        orbital_energies_alpha=fa,
        orbital_energies_beta=fb,
        coefficients_alpha=coefficients,
        coefficients_beta=coefficients,
        occupations_alpha=occ_a,
        occupations_beta=occ_b,
        density_alpha=ev.densities[0],
        density_beta=ev.densities[1],
        fock_alpha=ev.focks[0],
        fock_beta=ev.focks[1],
        overlap=problem.overlap,
        core_hamiltonian=problem.hcore,
        converged=converged,
        iterations=n,
        history=history,
        n_dropped=n_dropped,
        timings={},
        options=options,
        message=message,
        s_squared=s_squared(coefficients[:, occ_a > 0], coefficients[:, occ_b > 0], problem.overlap),
        s_squared_exact=s_squared_exact(n_a, n_b),
        n_alpha=n_a,
        n_beta=n_b,
        method="ROHF",
        orbital_energies=energies,
        coefficients=coefficients,
        occupations=occ_a + occ_b,
        fock=fock_eff,
        coupling=coupling,
        restriction=restriction,
    )


__all__ = ["solve_rohf", "COUPLINGS", "Coupling", "check_coupling"]
