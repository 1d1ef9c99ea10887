"""Convergence accelerators: DIIS, Fock damping, level shifting and second-order steps.

Every accelerator meets one contract (see :class:`Accelerator`), so the
solver treats them alike and runs them in a chain; :data:`ACCELERATORS` is
the one registry of their names.
"""

from __future__ import annotations

import warnings
from abc import ABC, abstractmethod
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from .second_order import SecondOrderStep
from .stability import plain_builder

if TYPE_CHECKING:
    from .options import SCFOptions


@dataclass(frozen=True)
class FockStep:
    """What an accelerator sees in one iteration; matrices in the orthonormal basis.

    Attributes
    ----------
    iteration : int
        1-based iteration number.
    fock : ndarray, shape (nmo, nmo)
        The Fock matrix built from the current density (or the output of the
        previous accelerator in the chain).
    error : ndarray, shape (nmo, nmo)
        The orbital gradient F D S - S D F of the current density, in the
        orthonormal basis (antisymmetric).
    projector : ndarray, shape (nmo, nmo)
        Projector onto the currently occupied orbitals (half the density).
    energy : float
        Total energy of the current density (hartree; NaN if not given).
    fock_ao, density_ao : ndarray, shape (nbf, nbf), optional
        The current Fock matrix and total density in the atomic-orbital
        basis, for methods that step the orbitals themselves.
    """

    iteration: int
    fock: np.ndarray
    error: np.ndarray
    projector: np.ndarray
    energy: float = float("nan")
    fock_ao: np.ndarray | None = field(default=None, repr=False)
    density_ao: np.ndarray | None = field(default=None, repr=False)


class Accelerator(ABC):
    """Base class of SCF convergence accelerators.

    The solver asks each iteration for :meth:`next_density`. A Fock-matrix
    accelerator (DIIS, damping, level shift) implements only
    :meth:`next_fock`, which receives a :class:`FockStep` and returns the
    symmetric matrix (nmo, nmo) whose eigenvectors become the next
    orbitals; the base :meth:`next_density` diagonalises it and fills the
    lowest orbitals. A method that moves the orbitals itself (such as
    :class:`SecondOrder`) overrides :meth:`next_density` instead and
    raises in :meth:`next_fock`. It may keep state between calls;
    :meth:`reset` clears it. An accelerator that holds a subspace reports
    its size in :attr:`subspace_size`. Accelerators never print and never
    change the arrays they are given.

    An instance goes to :func:`hfcore.scf.solve_rhf` as ``accelerator=``;
    to make one selectable by name, add the name to
    :data:`ACCELERATORS` with the stages it builds, and to
    :data:`ACCELERATOR_NAMES`.
    """

    def next_density(self, step: FockStep, problem: Any) -> np.ndarray:
        """The next total density in the atomic-orbital basis.

        Parameters
        ----------
        step : FockStep
            The current iteration.
        problem : object
            The solver's fixed matrices: ``problem.occupy(fock_orthonormal)``
            returns (energies, coefficients, density) of the lowest
            ``problem.n_occ`` orbitals, ``problem.orbitals_of(density)`` the
            S-orthonormal orbitals (nbf, nmo) spanning a density's occupied
            space, and ``problem.jk`` is the J/K builder.

        Returns
        -------
        ndarray, shape (nbf, nbf)
        """
        _, _, density = problem.occupy(self.next_fock(step))
        return density

    @abstractmethod
    def next_fock(self, step: FockStep) -> np.ndarray:
        """The matrix to diagonalise for the next orbitals.

        Parameters
        ----------
        step : FockStep
            The current iteration's Fock matrix, orbital gradient and
            occupied-space projector, all in the orthonormal basis.

        Returns
        -------
        ndarray, shape (nmo, nmo)
            A symmetric matrix in hartree, in the same orthonormal basis.
        """

    def reset(self) -> None:
        """Forget everything stored from earlier iterations."""

    @property
    def subspace_size(self) -> int:
        """Number of stored vectors (0 for accelerators without a subspace)."""
        return 0


class DIIS(Accelerator):
    """Pulay's direct inversion in the iterative subspace.

    Stores Fock matrices with their commutator errors and returns the
    combination sum c_i F_i (sum c_i = 1) that minimises the norm of
    sum c_i e_i.

    Parameters
    ----------
    max_size : int
        Maximum number of stored pairs (the most the iteration history's
        ``diis_size`` can reach); the oldest is dropped first.
    start : int
        First iteration at which to extrapolate; before it the current Fock
        matrix is returned unchanged (but stored).
    space : int, optional
        Deprecated name of ``max_size``, kept for one release (warns).
    """

    def __init__(self, max_size: int = 8, start: int = 1, *, space: int | None = None) -> None:
        if space is not None:
            warnings.warn("DIIS(space=...) is deprecated; use max_size", DeprecationWarning, stacklevel=2)
            max_size = space
        self.max_size = max_size
        self.start = start
        self._focks: deque[np.ndarray] = deque(maxlen=max_size)
        self._errors: deque[np.ndarray] = deque(maxlen=max_size)

    @property
    def space(self) -> int:
        """Deprecated name of :attr:`max_size` (warns)."""
        warnings.warn("DIIS.space is deprecated; use max_size", DeprecationWarning, stacklevel=2)
        return self.max_size

    def reset(self) -> None:
        self._focks.clear()
        self._errors.clear()

    @property
    def subspace_size(self) -> int:
        return len(self._focks)

    def next_fock(self, step: FockStep) -> np.ndarray:
        self._focks.append(step.fock.copy())
        self._errors.append(step.error.copy())
        if step.iteration < self.start or len(self._focks) < 2:
            return step.fock
        weights = self._weights()
        return sum(w * f for w, f in zip(weights, self._focks))

    def _weights(self) -> np.ndarray:
        """DIIS coefficients of the stored pairs, dropping the oldest while the equations are singular."""
        while len(self._errors) > 1:
            weights = _diis_coefficients(np.array([e.ravel() for e in self._errors]))
            if weights is not None:
                return weights
            self._focks.popleft()
            self._errors.popleft()
        return np.ones(1)


def _diis_coefficients(errors: np.ndarray) -> np.ndarray | None:
    """Solve the bordered DIIS equations for errors of shape (n, nmo*nmo); None if singular."""
    n = errors.shape[0]
    gram = errors @ errors.T
    # Scaling by the largest diagonal element keeps the bordered matrix well
    # conditioned as the errors shrink towards convergence.
    scale = float(np.max(np.diag(gram)))
    if not scale > 0.0:
        return None
    b = np.zeros((n + 1, n + 1))
    b[:n, :n] = gram / scale
    b[n, :n] = b[:n, n] = -1.0
    rhs = np.zeros(n + 1)
    rhs[n] = -1.0
    try:
        solution = np.linalg.solve(b, rhs)
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.isfinite(solution)) or np.linalg.cond(b) > 1e14:
        return None
    return solution[:n]


class Damping(Accelerator):
    """Fock damping: return (1 - factor) F + factor F_previous.

    Parameters
    ----------
    factor : float
        Weight of the previous output, in (0, 1).
    stop : int or None
        First iteration at which damping no longer applies (None: never
        stops). Used to damp only the iterations before DIIS starts.
    """

    def __init__(self, factor: float, stop: int | None = None) -> None:
        self.factor = factor
        self.stop = stop
        self._previous: np.ndarray | None = None

    def reset(self) -> None:
        self._previous = None

    def next_fock(self, step: FockStep) -> np.ndarray:
        if self.stop is not None and step.iteration >= self.stop:
            return step.fock
        if self._previous is None:
            out = step.fock
        else:
            out = (1.0 - self.factor) * step.fock + self.factor * self._previous
        self._previous = out.copy()
        return out


class LevelShift(Accelerator):
    """Raise the virtual space by a constant: F + shift (1 - P).

    Parameters
    ----------
    shift : float
        The shift in hartree (positive).
    """

    def __init__(self, shift: float) -> None:
        self.shift = shift

    def next_fock(self, step: FockStep) -> np.ndarray:
        n = step.fock.shape[0]
        return step.fock + self.shift * (np.eye(n) - step.projector)


class Chain(Accelerator):
    """Several accelerators applied in order, each to the previous one's output."""

    def __init__(self, stages: list[Accelerator]) -> None:
        self.stages = list(stages)

    def reset(self) -> None:
        for stage in self.stages:
            stage.reset()

    @property
    def subspace_size(self) -> int:
        return max((stage.subspace_size for stage in self.stages), default=0)

    def next_fock(self, step: FockStep) -> np.ndarray:
        fock = step.fock
        for stage in self.stages:
            fock = stage.next_fock(replace(step, fock=fock))
        return fock

    def next_density(self, step: FockStep, problem: Any) -> np.ndarray:
        # A chain of one stage is that stage, which may move the orbitals itself.
        if len(self.stages) == 1:
            return self.stages[0].next_density(step, problem)
        return super().next_density(step, problem)


class SecondOrder(Accelerator):
    """Trust-region Newton steps on the orbital gradient instead of a Fock matrix to diagonalise.

    Each call takes one step of :class:`hfcore.scf.second_order.SecondOrderStep`
    from the orbitals of the current density (Hessian products by J/K builds
    on transition densities, a few per step). It needs no extrapolation
    history, moves downhill even near a saddle point and converges fast
    near the solution; it is the last automatic aid (:data:`AID_STAGES`).
    """

    def __init__(self) -> None:
        self._step = SecondOrderStep()

    def reset(self) -> None:
        self._step = SecondOrderStep()

    @property
    def hessian_products(self) -> int:
        """Hessian products (J/K builds) made since the last reset."""
        return self._step.products

    def next_fock(self, step: FockStep) -> np.ndarray:
        raise NotImplementedError("second-order steps move the orbitals themselves: call next_density")

    def next_density(self, step: FockStep, problem: Any) -> np.ndarray:
        if step.fock_ao is None or step.density_ao is None:
            raise ValueError("a second-order step needs the FockStep's fock_ao and density_ao")
        n_occ = problem.n_occ
        orbitals = self._step.next_orbitals(
            problem.orbitals_of(step.density_ao), step.fock_ao, n_occ, plain_builder(problem.jk), step.energy
        )
        return 2.0 * orbitals[:, :n_occ] @ orbitals[:, :n_occ].T


#: Level shift (hartree) and damping factor the automatic aids use.
AID_LEVEL_SHIFT: float = 0.5
AID_DAMPING: float = 0.5


def _diis_stages(options: SCFOptions) -> list[Accelerator]:
    stages: list[Accelerator] = [DIIS(options.max_diis_size, options.diis_start)]
    if options.damping > 0.0:
        stages.append(Damping(options.damping, stop=options.diis_start))
    return stages


#: Every accelerator name, chosen (:data:`ACCELERATOR_NAMES`) or switched on
#: automatically (:data:`AID_STAGES`), and the stages it builds from the
#: options.
ACCELERATORS: dict[str, Callable[[SCFOptions], list[Accelerator]]] = {
    "diis": _diis_stages,
    "damping": lambda options: [Damping(options.damping)],
    "second_order": lambda options: [SecondOrder()],
    "none": lambda options: [],
    "diis+level_shift": lambda options: [DIIS(options.max_diis_size, 1), LevelShift(AID_LEVEL_SHIFT)],
    "damping+level_shift": lambda options: [Damping(AID_DAMPING), LevelShift(AID_LEVEL_SHIFT)],
}
#: Names accepted for :attr:`SCFOptions.accelerator`.
ACCELERATOR_NAMES: tuple[str, ...] = ("diis", "damping", "second_order", "none")
#: Automatic aids in the order they are switched on.
AID_STAGES: tuple[str, ...] = ("diis+level_shift", "damping+level_shift", "second_order")


def build_accelerator(options: SCFOptions, name: str | None = None) -> Accelerator:
    """The accelerator chain of a name in :data:`ACCELERATORS`.

    ``"diis"`` gives DIIS (with damping before ``diis_start`` if
    ``damping > 0``), ``"damping"`` gives damping alone, ``"none"`` plain
    Roothaan iterations; for these a positive ``level_shift`` adds a level
    shift last. ``"second_order"`` gives :class:`SecondOrder`, which has no
    Fock matrix to shift. The automatic aids (:data:`AID_STAGES`) bring
    their own level shift.

    Parameters
    ----------
    options : SCFOptions
    name : str, optional
        An accelerator or aid name (default: ``options.accelerator``).

    Returns
    -------
    Chain
    """
    chosen = options.accelerator if name is None else name
    stages = ACCELERATORS[chosen](options)
    if chosen in ACCELERATOR_NAMES and chosen != "second_order" and options.level_shift > 0.0:
        stages.append(LevelShift(options.level_shift))
    return Chain(stages)


__all__ = [
    "ACCELERATORS",
    "ACCELERATOR_NAMES",
    "AID_STAGES",
    "AID_LEVEL_SHIFT",
    "AID_DAMPING",
    "Accelerator", "FockStep", "DIIS", "Damping", "LevelShift", "Chain", "SecondOrder", "build_accelerator"]
