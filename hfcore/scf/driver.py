"""The SCF entry points: RHF on bare matrices (:func:`solve_rhf`) and on a molecule (:func:`run_rhf`).

:func:`solve_rhf` converges (:mod:`hfcore.scf.solver`) and then analyses
and follows instabilities (:mod:`hfcore.scf.following`); :func:`run_rhf`
computes the integrals and a guess first.
"""

from __future__ import annotations

import contextlib

import time
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .. import integrals
from .._deprecation import rename_fields
from ..basis import build_basis, require_room_for
from ..basis.fitting import FittingChoice, fitting_basis
from ..basis.shells import BasisSet
from ..errors import ConvergenceError, InputError, ResourceError
from ..geometry import Molecule
from .._memory import MemoryBudget, budget_for, budget_in_force
from .._parallel import blas_threads, can_fork, thread_note
from ..integrals.store import EXCHANGE_KERNEL_LIMIT_BYTES, STORE_LIMIT_BYTES
from .fitted_jk import FittedJK, FittingPlan, plan_fitting
from .guess import sad_density
from .jk import IncrementalJK, JKBuilder
from .options import SCFOptions
from .result import RHFResult
from .following import stabilise
from .stability_screen import FittedScreen, screen_for
from .solver import IterationProgress, converge_rhf
from .accelerators import Accelerator

GUESSES: tuple[str, ...] = ("sad", "core")


def solve_rhf(
    overlap: np.ndarray,
    core_hamiltonian: np.ndarray,
    jk: JKBuilder,
    n_electrons: int,
    energy_nuclear: float = 0.0,
    options: SCFOptions | None = None,
    guess_density: np.ndarray | None = None,
    *,
    progress: IterationProgress | None = None,
    accelerator: Accelerator | None = None,
    screen: "FittedScreen | None" = None,
) -> RHFResult:
    """Run closed-shell Roothaan-Hall iterations on given matrices, then check the solution's stability.

    The integrals may come from anywhere; :func:`run_rhf` is the entry that
    computes them for a molecule.

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
    screen : FittedScreen, optional
        Fitted products for the stability search first
        (:func:`hfcore.scf.stability.screened_eigenpairs`).

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
    result = converge_rhf(
        overlap, core_hamiltonian, jk, n_electrons, energy_nuclear, options, guess_density,
        progress=progress, accelerator=accelerator,
    )
    if options.stability == "skip":
        return result
    result = stabilise(result, jk, int(n_electrons), energy_nuclear, progress=progress, screen=screen)
    return replace(result, timings={**result.timings, "total": time.perf_counter() - t0})


def run_rhf(
    molecule: Molecule,
    basis: BasisSet | str = "sto-3g",
    options: SCFOptions | None = None,
    *,
    guess: str | np.ndarray = "sad",
    progress: IterationProgress | None = None,
    integral_progress: Callable[[float], None] | None = None,
    shared: "SharedIntegrals | None" = None,
    raise_on_failure: bool = True,
    plan: "JKPlan | None" = None,
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
    integral_progress : callable, optional
        Called with the fraction (0..1] of the stored-integral pass done;
        the direct mode has no such pass (its cost shows per iteration).
    shared : SharedIntegrals, optional
        The overlap, kinetic and two-electron integrals of ``basis`` from
        :func:`prepare_integrals`, reused instead of computed again; only
        the nuclear attraction of ``molecule`` is computed. Several
        molecules that differ only in their ghost atoms and charge share
        one basis and so one set (a counterpoise calculation).
    raise_on_failure : bool, optional
        True (default): an SCF that does not converge raises
        :class:`ConvergenceError`. False: the unconverged record is returned
        instead, with ``converged=False`` and ``message`` saying why, so a
        prototyping loop can inspect it.
    plan : JKPlan, optional
        The plan from :func:`plan_jk` for this basis and these options,
        when the caller made one already (so the memory budget is measured
        once per run); ignored with ``shared``.

    Returns
    -------
    RHFResult
        Timings hold "integrals", "guess", "scf", "stability" and "total"
        seconds; ``stability`` and ``aufbau`` say what was checked after
        convergence (see ``options.stability``);
        ``jk_mode`` and ``eri_memory_bytes`` say how J and K were built
        (see :func:`plan_jk`); ``memory_budget`` is the budget the run
        measured once and ``resource_notes`` what was capped to fit.

    Raises
    ------
    InputError
        Open-shell molecule, unknown guess, malformed guess density.
    ResourceError
        Stored integrals forced (``options.direct=False``) beyond the
        memory budget, or a ``memory_limit`` above a hard bound, raised
        before any is computed; an allocation the system refuses (one line
        naming the array, its size and the budget).
    ConvergenceError
        No convergence within ``options.max_iterations`` (unless
        ``raise_on_failure`` is False); ``.result`` holds the unconverged
        record (with molecule and basis filled in).
    """
    options = options or SCFOptions()
    with blas_threads(options.n_threads), contextlib.ExitStack() as blas:
        return _run_rhf(molecule, basis, options, guess, progress, integral_progress, shared, raise_on_failure, blas,
                        plan)


def placed(result: Any, molecule: Molecule, basis: BasisSet, plan: "JKPlan", jk: Any, integral_seconds: float,
           guess_seconds: float, started: float) -> Any:
    """A solver's record (RHF, UHF or ROHF) put on its molecule: basis, J/K plan, memory, fitting and whole-run timings.

    ``guess_seconds`` is the atomic start made before the solver ran;
    ``started`` the ``time.perf_counter()`` of the run's start.
    """
    timings = {
        "integrals": integral_seconds,
        "guess": guess_seconds + result.timings.get("guess", 0.0),
        "scf": result.timings.get("scf", 0.0),
        "stability": result.timings.get("stability", 0.0),
        "total": time.perf_counter() - started,
    }
    fitted = {}
    if plan.fitting is not None:
        fitted = {
            "fit_basis": plan.fit_basis, "fit_notes": plan.fit_notes, "fit_storage": plan.fitting.storage,
            "fit_dropped": getattr(jk, "n_dropped", 0),
        }
    return replace(
        result, molecule=molecule, basis=basis, timings=timings, jk_mode=plan.mode,
        eri_memory_bytes=plan.eri_memory_bytes, memory_budget=plan.budget, resource_notes=plan.notes, **fitted,
    )


def scf_blas_threads(plan: "JKPlan", options: SCFOptions) -> int:
    """BLAS threads for the SCF iterations of a plan.

    With a lean store on worker processes (:class:`hfcore._parallel.WorkerTeam`)
    the K builds already fill the cores; threaded BLAS on the SCF's small
    matrices then only adds idle threads spinning on them (measured on a
    2-core machine, benzene/cc-pVDZ: 67 ms per J/K build with two BLAS
    threads, 41 ms with one). Every other mode keeps ``options.n_threads``.
    """
    if plan.mode == "stored-lean" and options.n_threads > 1 and can_fork():
        return 1
    return options.n_threads


def _run_rhf(
    molecule: Molecule,
    basis: BasisSet | str,
    options: SCFOptions,
    guess: str | np.ndarray,
    progress: IterationProgress | None,
    integral_progress: Callable[[float], None] | None,
    shared: "SharedIntegrals | None",
    raise_on_failure: bool = True,
    blas: contextlib.ExitStack | None = None,
    plan: "JKPlan | None" = None,
) -> RHFResult:
    t0 = time.perf_counter()
    molecule.require_closed_shell()
    if isinstance(basis, str):
        basis = build_basis(molecule, basis)
    require_room_for(molecule, basis)
    guess_density = _checked_guess(guess, basis)
    if shared is None:
        shared = prepare_integrals(basis, options, integral_progress, molecule=molecule, plan=plan)
    elif shared.basis is not basis:
        raise InputError("shared integrals belong to another basis; build them with prepare_integrals(basis)")
    overlap = shared.overlap
    hcore = shared.kinetic + integrals.nuclear_attraction(basis, molecule.nuclear_charges, molecule.coordinates)
    plan = shared.plan
    jk = shared.jk_builder()
    if blas is not None:
        blas.enter_context(blas_threads(scf_blas_threads(plan, options)))
    t_integrals = time.perf_counter()
    if isinstance(guess, str) and guess.lower() == "sad":
        # Ghost atoms enter with charge 0, which gives them no density.
        guess_density = sad_density(basis, np.where(molecule.ghosts, 0, molecule.atomic_numbers), jk)
        if isinstance(jk, IncrementalJK):
            # The SCF starts from a full build, not from a change to an atom's density.
            jk.reset()
    t_sad = time.perf_counter() - t_integrals

    def finish(result: RHFResult) -> RHFResult:
        return placed(result, molecule, basis, plan, jk, t_integrals - t0, t_sad, t0)

    try:
        with _budget_context(plan):
            result = solve_rhf(
                overlap, hcore, jk, molecule.n_electrons, molecule.nuclear_repulsion(), options, guess_density,
                progress=progress, screen=screen_for(shared, molecule, options),
            )
    except ConvergenceError as exc:
        if exc.result is None:
            raise
        if not raise_on_failure:
            return finish(exc.result)
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


@dataclass(frozen=True)
class JKPlan:
    """How an RHF run will build J and K, decided before any integral is computed.

    Attributes
    ----------
    mode : {"stored", "stored-lean", "direct", "fitted"}
        Store the integrals once with an exchange kernel beside them
        (16 bytes per unique integral, the fastest builds), store them alone
        and build K from them directly (8 bytes), recompute them every
        iteration, or fit them (``options.fit_basis``).
    eri_memory_bytes : int
        Memory the stored integrals need (bytes), from
        :func:`hfcore.integrals.estimate_eri_memory`: the lean size for
        "stored-lean", the size with the exchange kernel otherwise; in
        fitted mode the predicted peak of the fitted way chosen.
    limit_bytes : int
        The budget they were measured against (bytes): ``budget.bytes``,
        capped at :data:`hfcore.integrals.store.STORE_LIMIT_BYTES`.
    fitting : FittingPlan or None
        Stored or blocked fitted factors (fitted mode only).
    fit_basis : BasisSet or None
        The fitting set (fitted mode only).
    fit_notes : tuple of str
        How it was chosen.
    budget : MemoryBudget or None
        The run's memory budget, measured once (:func:`hfcore._memory.resolve_budget`):
        its size, the bound that set it and that rule in words.
    notes : tuple of str
        What was capped to fit the machine (e.g. threads beyond the usable
        cores), for the faces to print as they are.
    peak_bytes : int
        Predicted peak of the run's large arrays (bytes): the stored
        integrals or fitted factors of the mode chosen (none when direct)
        and the SCF's own matrices. A batch reserves this much of its
        shared budget while the run goes.
    """

    mode: str
    eri_memory_bytes: int
    limit_bytes: int
    fitting: FittingPlan | None = None
    fit_basis: BasisSet | None = None
    fit_notes: tuple[str, ...] = ()
    budget: MemoryBudget | None = None
    notes: tuple[str, ...] = ()
    peak_bytes: int = 0


rename_fields(JKPlan, {"eri_bytes": "eri_memory_bytes"})


def plan_jk(
    basis: BasisSet, options: SCFOptions | None = None, *, fitting: FittingChoice | None = None, n_occupied: int = 1,
    budget: MemoryBudget | None = None,
) -> JKPlan:
    """Choose stored, lean stored, direct or fitted J/K builds for a basis, per ``options``.

    Parameters
    ----------
    basis : BasisSet
    options : SCFOptions, optional
        ``direct=True`` forces the direct mode. Otherwise the integrals are
        stored with their exchange kernel if that fits within
        ``memory_limit`` and within
        :data:`hfcore.integrals.store.EXCHANGE_KERNEL_LIMIT_BYTES` (beyond
        it the kernel costs more than it saves), else stored alone
        ("stored-lean") if that fits; else ``direct=None`` goes direct and
        ``direct=False`` fails.
    fitting : FittingChoice, optional
        The placed fitting set when ``options.fit_basis`` is set (from
        :func:`hfcore.basis.fitting.fitting_basis`); the plan is then
        "fitted", with stored or blocked factors per :func:`plan_fitting`.
    n_occupied : int
        Doubly occupied orbitals (sizes the blocked fitted way).
    budget : MemoryBudget, optional
        The memory budget; by default measured now from
        ``options.memory_limit`` and the system's bounds (once: the plan
        keeps it for the run).

    Returns
    -------
    JKPlan

    Raises
    ------
    ResourceError
        If stored integrals are forced (``direct=False``) and not even the
        lean store fits, fitted ones do not fit even in blocks, or
        ``options.memory_limit`` exceeds a hard bound (cgroup, rlimit).
    InputError
        If ``options.fit_basis`` is set but no ``fitting`` is given.
    """
    options = options or SCFOptions()
    if options.fit_basis is not None and fitting is None:
        raise InputError("plan_jk: options.fit_basis is set; pass fitting=fitting_basis(molecule, basis, choice)")
    budget = budget_for(options.memory_limit) if budget is None else budget
    notes = tuple(note for note in (thread_note(options.threads),) if note)
    limit = min(budget.bytes, STORE_LIMIT_BYTES)
    if options.fit_basis is not None:
        fplan = plan_fitting(basis, fitting.basis, n_occupied, limit)
        return JKPlan("fitted", fplan.need_bytes, limit, fplan, fitting.basis, fitting.notes, budget, notes,
                      fplan.need_bytes + _scf_matrix_bytes(basis, options))
    need = integrals.estimate_eri_memory(basis)
    lean = integrals.estimate_eri_memory(basis, lean=True)
    if options.direct:
        mode = "direct"
    elif need <= min(limit, EXCHANGE_KERNEL_LIMIT_BYTES):
        mode = "stored"
    elif lean <= limit:
        mode = "stored-lean"
    elif options.direct is None:
        mode = "direct"
    else:
        raise ResourceError(
            f"stored integrals for {basis.n_functions} functions need {lean / 2**20:.3g} MiB "
            f"({need / 2**20:.3g} MiB with the exchange kernel) but {limit / 2**20:.3g} MiB are allowed; "
            f"use the direct mode (--direct, direct=True) or raise the limit (--memory MIB, memory_limit)"
        )
    stored = {"stored": need, "stored-lean": lean}.get(mode, 0)
    return JKPlan(mode, lean if mode == "stored-lean" else need, limit, budget=budget, notes=notes,
                  peak_bytes=stored + _scf_matrix_bytes(basis, options))


def _scf_matrix_bytes(basis: BasisSet, options: SCFOptions) -> int:
    """The SCF's own (nbf, nbf) matrices: DIIS keeps a Fock and an error matrix per pair, plus about 16 more."""
    n = basis.n_functions
    return 8 * n * n * (2 * options.max_diis_size + 16)


def _budget_context(plan: JKPlan) -> contextlib.AbstractContextManager:
    """A refused allocation inside names the plan's budget (see :func:`hfcore._memory.allocate`)."""
    return contextlib.nullcontext() if plan.budget is None else budget_in_force(plan.budget)


@dataclass(frozen=True)
class SharedIntegrals:
    """The integrals of a basis that do not depend on the nuclear charges.

    Made by :func:`prepare_integrals`; handed to :func:`run_rhf` for each
    molecule on the same basis (the same atoms, some of them ghosts).

    Attributes
    ----------
    basis : BasisSet
    overlap, kinetic : ndarray, shape (nbf, nbf)
        Overlap S and kinetic energy T (hartree).
    plan : JKPlan
        How J and K are built.
    engine : JKBuilder
        The builder :func:`run_rhf` would make: the stored integrals, or the
        direct mode's incremental builder (copied fresh for every run).
    wall_seconds : float
        Wall-clock time it took to compute them (``seconds`` is its deprecated name).
    """

    basis: BasisSet
    overlap: np.ndarray
    kinetic: np.ndarray
    plan: JKPlan
    engine: JKBuilder
    wall_seconds: float

    def jk_builder(self) -> JKBuilder:
        """A J/K builder for one SCF run: the store itself, or a fresh incremental builder on the same engine."""
        if isinstance(self.engine, IncrementalJK):
            return IncrementalJK(self.engine.engine, self.engine.rebuild_interval)
        return self.engine


rename_fields(SharedIntegrals, {"seconds": "wall_seconds"})


def prepare_integrals(
    basis: BasisSet, options: SCFOptions | None = None, integral_progress: Callable[[float], None] | None = None,
    *, molecule: Molecule | None = None, plan: JKPlan | None = None,
) -> SharedIntegrals:
    """Overlap, kinetic and two-electron integrals of a basis, for one or more RHF runs.

    Parameters
    ----------
    basis : BasisSet
    options : SCFOptions, optional
        ``direct``, ``memory_limit`` and ``screening`` choose how the
        two-electron part is built (see :func:`plan_jk`).
    integral_progress : callable, optional
        As for :func:`run_rhf`.
    molecule : Molecule, optional
        Needed with ``options.fit_basis``, to place the fitting set on the
        same atoms (ghosts included) and size the blocked fitted way.
    plan : JKPlan, optional
        A plan already made by :func:`plan_jk` for this basis and options
        (the budget is then not measured again).

    Returns
    -------
    SharedIntegrals

    Raises
    ------
    ResourceError
        As :func:`plan_jk`.
    InputError
        ``options.fit_basis`` without ``molecule``.
    """
    t0 = time.perf_counter()
    options = options or SCFOptions()
    if plan is None:
        plan = _plan_for(basis, options, molecule)
    with blas_threads(options.n_threads), _budget_context(plan):
        overlap = integrals.overlap(basis)
        kinetic = integrals.kinetic(basis)
        engine = _jk_builder(basis, options, plan, integral_progress)
    return SharedIntegrals(basis, overlap, kinetic, plan, engine, time.perf_counter() - t0)


def _plan_for(basis: BasisSet, options: SCFOptions, molecule: Molecule | None) -> JKPlan:
    """:func:`plan_jk` for a basis, placing the fitting set on ``molecule`` when ``options.fit_basis`` asks."""
    if options.fit_basis is None:
        return plan_jk(basis, options)
    if molecule is None:
        raise InputError("prepare_integrals: options.fit_basis needs the molecule (molecule=...) to place the fitting set")
    fitting = fitting_basis(molecule, basis, options.fit_basis)
    return plan_jk(basis, options, fitting=fitting, n_occupied=molecule.n_electrons // 2)


def _jk_builder(
    basis: BasisSet, options: SCFOptions, plan: JKPlan, integral_progress: Callable[[float], None] | None
) -> JKBuilder:
    if plan.mode == "fitted":
        return FittedJK(basis, plan.fit_basis, plan.fitting, threshold=options.screening, threads=options.n_threads)
    if plan.mode == "direct":
        engine = integrals.DirectERI(basis, threshold=options.screening, threads=options.n_threads)
        return IncrementalJK(engine, options.rebuild_interval)
    return integrals.compute_eri(
        basis, threshold=options.screening, progress=integral_progress, threads=options.n_threads,
        lean=plan.mode == "stored-lean",
    )


__all__ = ["run_rhf", "plan_jk", "JKPlan", "GUESSES", "SharedIntegrals", "prepare_integrals"]
