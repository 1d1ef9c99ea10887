"""Settings of the SCF driver, checked once when they are made."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .._deprecation import rename_fields
from .._memory import FALLBACK_HEADROOM_BYTES, MEMORY_FRACTION, MemoryPaths, resolve_budget
from ..errors import InputError
from .accelerators import ACCELERATOR_NAMES
from .stability import check_stability_mode



def _positive(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise InputError(f"SCF option {name} must be a positive finite number, got {value!r}")
    return float(value)


def _count(name: str, value: object, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise InputError(f"SCF option {name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


#: Names accepted for :attr:`SCFOptions.method`.
METHODS: tuple[str, ...] = ("rhf", "uhf", "rohf")

#: Budget in MiB when no memory bound can be read (half of the assumed headroom).
FALLBACK_MEMORY_MIB: float = MEMORY_FRACTION * FALLBACK_HEADROOM_BYTES / 2**20


def default_memory_limit(meminfo: str = "/proc/meminfo") -> float:
    """The default budget in MiB, measured now: half of the least memory bound.

    The SCF driver measures it once per run (:func:`hfcore._memory.resolve_budget`,
    recorded as ``JKPlan.budget`` and ``RHFResult.memory_budget``); this is
    the same measure for a caller who wants the figure.

    Parameters
    ----------
    meminfo : str
        The kernel's memory report; when it is missing or has no
        ``MemAvailable`` line (and no other bound applies),
        :data:`FALLBACK_MEMORY_MIB` is used.
    """
    return resolve_budget(paths=MemoryPaths(meminfo=meminfo)).bytes / 2**20


@dataclass(frozen=True)
class SCFOptions:
    """Convergence, acceleration and numerical settings of an RHF run.

    Parameters
    ----------
    energy_tol : float
        Converged when the energy changes by less than this between two
        iterations (hartree) ...
    gradient_tol : float
        ... and the largest absolute element of the orbital gradient, the
        commutator F D S - S D F in the orthonormal basis, is below this.
    max_iterations : int
        Give up (``ConvergenceError``) after this many iterations.
    max_diis_size : int
        Most Fock/error pairs DIIS keeps (at least 2); the number it holds
        in each iteration is ``SCFIteration.diis_size``.
    diis_start : int
        First iteration (1-based) at which DIIS extrapolates; it stores
        pairs from the first iteration on.
    lindep_threshold : float
        Overlap eigenvalues below this mark near-linear dependence; their
        eigenvectors are dropped from the orthonormal basis.
    screening : float
        Schwarz threshold for two-electron integrals (hartree).
    damping : float
        Fock damping factor in [0, 1): the Fock matrix used is
        ``(1 - damping) F_new + damping F_previous``. With the ``"damping"``
        accelerator it applies every iteration and must be positive; with
        ``"diis"`` it applies only before ``diis_start``.
    level_shift : float
        Raise the virtual orbital energies by this much (hartree) while
        iterating; the final orbitals are unshifted.
    accelerator : {"diis", "damping", "second_order", "none"}
        The convergence accelerator; ``"second_order"`` takes trust-region
        Newton steps on the orbital gradient
        (:mod:`hfcore.scf.second_order`) instead of diagonalising a Fock
        matrix, at a few extra J/K builds per iteration.
    direct : bool or None
        Recompute two-electron integrals every iteration instead of storing
        them (True), store them (False), or let hfcore choose (None): stored
        when :func:`hfcore.integrals.estimate_eri_memory` fits within
        ``memory_limit``, direct otherwise.
    memory_limit : float or None
        Memory the stored integrals (or fitted factors, MP2 blocks) may
        take, in MiB (2^20 bytes). None means "measure at run time": the
        driver resolves it once per run to half of the least of the
        available memory, the cgroup limit and the address-space and data
        rlimits (:mod:`hfcore._memory`); the plan and the result record
        the budget and which bound set it. A value above the headroom of
        a hard bound (cgroup, rlimit) is refused when the run starts.
    stability : {"descend", "report", "skip"}
        After convergence, analyse the internal (real RHF→RHF) stability of
        the solution (:mod:`hfcore.scf.stability`). ``"descend"`` also leaves
        an unstable solution along its lowest Hessian mode and converges
        again, up to ``stability_rounds`` times; ``"report"`` only reports;
        ``"skip"`` skips the analysis (the old spellings ``follow``, ``check``
        and ``off`` still work for one release, with a DeprecationWarning).
        The default is the same in every J/K
        mode, since a wrong state costs more than the check. ``"descend"``
        seeks only the lowest eigenvalue, to a residual of 1e-3 (about 10
        J/K builds on a stable molecule); ``"report"`` reports the lowest
        three, to 1e-4 (20-30 builds), except in direct mode, where each
        build is a full integral pass and only the lowest is sought.
    stability_threshold : float
        A solution is stable when the lowest eigenvalue of the energy
        Hessian d²E/dκ² is at least ``-stability_threshold`` (hartree).
    stability_rounds : int
        Most rotations ``"descend"`` makes before reporting the solution it
        holds (as unstable, if it still is).
    auto_aids : bool
        When the iterations stall or oscillate, switch on convergence aids
        (level shifting, then damping) automatically; each switch is
        recorded in the history and in ``RHFResult.aids``.
    rebuild_interval : int
        In direct mode J and K are built from the density change of each
        iteration; every this many builds they are rebuilt from the full
        density so round-off cannot accumulate.
    threads : int or None
        Threads of the integral passes (stored and direct) and of BLAS
        (when ``threadpoolctl`` is installed); None means the cores this
        process may use, and a larger count is capped at them
        (:func:`hfcore._parallel.resolve_threads`; the run's record notes it). The integral passes give the same bits for any
        number; threaded BLAS may move the energy's last digits (~1e-13 Eh).
    fit_basis : str, BasisFamily, BasisSet or None
        Density-fitted J and K with this fitting set: ``"auto"`` (see
        :func:`hfcore.basis.fitting.fitting_basis`), a set's name such as
        ``"cc-pvtz-jkfit"``, a family or a placed set. None (default) uses
        the exact integrals. Excludes ``direct``.
    method : {"rhf", "uhf", "rohf"} or None
        The Hartree-Fock variant for :func:`hfcore.scf.run_scf`. None
        (default) runs RHF on a singlet and UHF on any other multiplicity;
        RHF on a non-singlet is refused. One field, so UHF and ROHF cannot
        both be chosen.
    spherical_atom : bool
        Run an open-shell lone atom as ROHF with equivalence restrictions:
        one radial function per shell, shared by its m components, as the
        numerical Hartree-Fock limits of atoms assume
        (:mod:`hfcore.scf.spherical_atom`). Other systems, and closed-shell
        atoms, run as without it. With ``method="uhf"`` such an atom is refused.

    ``diis_space`` is the deprecated name of ``max_diis_size``, kept for
    one release: ``SCFOptions(diis_space=N)`` still works (with a
    DeprecationWarning) and ``options.diis_space`` reads ``max_diis_size``.

    Raises
    ------
    InputError
        On any value out of range, naming the option.
    """

    energy_tol: float = 1e-10
    gradient_tol: float = 1e-7
    max_iterations: int = 100
    max_diis_size: int = 8
    diis_start: int = 1
    lindep_threshold: float = 1e-7
    screening: float = 1e-12
    damping: float = 0.0
    level_shift: float = 0.0
    accelerator: str = "diis"
    direct: bool | None = None
    memory_limit: float | None = None
    rebuild_interval: int = 8
    stability: str = "descend"
    stability_threshold: float = 1e-5
    stability_rounds: int = 4
    auto_aids: bool = True
    threads: int | None = None
    fit_basis: Any = None
    method: str | None = None
    spherical_atom: bool = False

    def __post_init__(self) -> None:
        for name in ("energy_tol", "gradient_tol", "lindep_threshold"):
            object.__setattr__(self, name, _positive(name, getattr(self, name)))
        object.__setattr__(self, "max_iterations", _count("max_iterations", self.max_iterations, 1))
        object.__setattr__(self, "max_diis_size", _count("max_diis_size", self.max_diis_size, 2))
        object.__setattr__(self, "diis_start", _count("diis_start", self.diis_start, 1))
        self._check_ranges()
        self._check_accelerator()
        if self.direct is not None and not isinstance(self.direct, bool):
            raise InputError(f"SCF option direct must be True, False or None, got {self.direct!r}")
        if self.memory_limit is not None:
            object.__setattr__(self, "memory_limit", _positive("memory_limit", self.memory_limit))
        object.__setattr__(self, "rebuild_interval", _count("rebuild_interval", self.rebuild_interval, 1))
        object.__setattr__(self, "stability", check_stability_mode(self.stability))
        object.__setattr__(self, "stability_threshold", _positive("stability_threshold", self.stability_threshold))
        object.__setattr__(self, "stability_rounds", _count("stability_rounds", self.stability_rounds, 1))
        if not isinstance(self.auto_aids, bool):
            raise InputError(f"SCF option auto_aids must be True or False, got {self.auto_aids!r}")
        if self.threads is not None:
            object.__setattr__(self, "threads", _count("threads", self.threads, 1))
        self._check_fit_basis()
        if self.method is not None:
            name = self.method.lower() if isinstance(self.method, str) else self.method
            if name not in METHODS:
                raise InputError(f"unknown SCF method {self.method!r}: choose one of {', '.join(METHODS)}")
            object.__setattr__(self, "method", name)
        if not isinstance(self.spherical_atom, bool):
            raise InputError(f"SCF option spherical_atom must be True or False, got {self.spherical_atom!r}")

    def _check_fit_basis(self) -> None:
        from ..basis.family import BasisFamily
        from ..basis.shells import BasisSet

        value = self.fit_basis
        if value is None:
            return
        if isinstance(value, str):
            if not value.strip():
                raise InputError("SCF option fit_basis must name a fitting set or be 'auto', not an empty string")
        elif not isinstance(value, (BasisFamily, BasisSet)):
            raise InputError(f"SCF option fit_basis must be a name, a BasisFamily or a BasisSet, got {value!r}")
        if self.direct is not None:
            raise InputError("SCF options fit_basis and direct exclude each other: fitted J and K need no stored or direct integrals")

    @property
    def memory_limit_bytes(self) -> int:
        """Deprecated: the budget in bytes, measured anew on every access.

        A run resolves its budget once (``JKPlan.budget``,
        ``RHFResult.memory_budget``); read it there.
        """
        import warnings

        warnings.warn("SCFOptions.memory_limit_bytes measures the system on every access; read the run's "
                      "budget (plan.budget, result.memory_budget) instead", DeprecationWarning, stacklevel=2)
        from .._memory import budget_for

        return budget_for(self.memory_limit).bytes

    @property
    def n_threads(self) -> int:
        """The thread count to use: ``threads``, or the cores this process may use."""
        from .._parallel import resolve_threads

        return resolve_threads(self.threads)

    def _check_ranges(self) -> None:
        if self.lindep_threshold >= 1.0:
            raise InputError(f"SCF option lindep_threshold must be below 1, got {self.lindep_threshold!r}")
        from ..integrals.eri_pairs import screening_threshold

        object.__setattr__(self, "screening", screening_threshold(self.screening, "SCF option screening"))
        for name, low, high in (("damping", 0.0, 1.0), ("level_shift", 0.0, math.inf)):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not (low <= value < high):
                raise InputError(f"SCF option {name} must be a number in [{low}, {high}), got {value!r}")
            object.__setattr__(self, name, float(value))

    def _check_accelerator(self) -> None:
        name = self.accelerator.lower() if isinstance(self.accelerator, str) else self.accelerator
        if name not in ACCELERATOR_NAMES:
            raise InputError(f"unknown SCF accelerator {self.accelerator!r}: choose one of {', '.join(ACCELERATOR_NAMES)}")
        object.__setattr__(self, "accelerator", name)
        if name == "damping" and self.damping == 0.0:
            raise InputError("the 'damping' accelerator needs a damping factor in (0, 1), e.g. damping=0.5")
        if name in ("none", "second_order") and self.damping > 0.0:
            raise InputError(f"damping > 0 needs accelerator 'damping' or 'diis', not {name!r}")
        if name == "second_order" and self.level_shift > 0.0:
            raise InputError("a level shift applies to Fock-matrix accelerators, not to 'second_order'")


rename_fields(SCFOptions, {"diis_space": "max_diis_size"})

__all__ = ["SCFOptions", "METHODS", "ACCELERATOR_NAMES", "default_memory_limit", "MEMORY_FRACTION", "FALLBACK_MEMORY_MIB"]
