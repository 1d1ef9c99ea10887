"""Any Hartree-Fock variant on a molecule: RHF, UHF or ROHF from one entry, :func:`run_scf`.

The method comes from ``options.method`` (see :func:`hfcore.scf.spin.resolve_method`):
RHF for a singlet and UHF otherwise by default. RHF runs exactly as
:func:`hfcore.scf.run_rhf`; UHF and ROHF share its integrals
(:func:`hfcore.scf.prepare_integrals`), its atomic-density start (split
into α and β) and its J/K modes.
"""

from __future__ import annotations

import contextlib
import time
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from .. import integrals
from ..basis import build_basis, require_room_for
from ..basis.shells import BasisSet
from ..errors import ConvergenceError, InputError
from ..geometry import Molecule
from .._parallel import blas_threads
from ..basis.fitting import fitting_basis
from .driver import JKPlan, SharedIntegrals, placed, _checked_guess, _jk_builder, plan_jk, prepare_integrals, run_rhf, scf_blas_threads
from .guess import sad_density
from .jk import IncrementalJK
from .open_result import ROHFResult, UHFResult
from .options import SCFOptions
from .result import RHFResult
from .solver import IterationProgress
from .spin import resolve_method
from .stability_screen import screen_for
from .guess import split_density
from .uhf import solve_uhf


def run_scf(
    molecule: Molecule,
    basis: BasisSet | str = "sto-3g",
    options: SCFOptions | None = None,
    *,
    guess: str | np.ndarray = "sad",
    progress: IterationProgress | None = None,
    integral_progress: Callable[[float], None] | None = None,
    shared: SharedIntegrals | None = None,
    raise_on_failure: bool = True,
    plan: JKPlan | None = None,
) -> RHFResult | UHFResult | ROHFResult:
    """Hartree-Fock energy and orbitals of a molecule of any multiplicity.

    Parameters
    ----------
    molecule : Molecule
        Geometry, charge and multiplicity (``molecule.spin_multiplicity``).
    basis : BasisSet or str
    options : SCFOptions, optional
        ``options.method`` chooses "rhf", "uhf" or "rohf"; None means RHF
        for a singlet and UHF otherwise. RHF on a non-singlet is refused.
    guess : {"sad", "core"} or ndarray
        As for :func:`run_rhf`; for UHF/ROHF an array may be a total
        density (nbf, nbf), shared between the spins in proportion to
        their electrons, or α and β densities (2, nbf, nbf).
    progress, integral_progress, shared, raise_on_failure, plan
        As for :func:`run_rhf` (``plan``: the J/K plan made beforehand, e.g.
        to refuse a forced mode that cannot fit before any output).

    Notes
    -----
    A singlet run as UHF starts from the spin-symmetric atomic density and,
    with the default ``stability="descend"``, leaves the closed-shell
    solution along its lowest unstable UHF mode (the RHF→UHF instability)
    into the broken-symmetry solution. With ``"report"`` or ``"skip"`` the
    start itself breaks the symmetry instead (the α HOMO turned towards the
    α LUMO, :data:`hfcore.scf.uhf.BREAK_ANGLE`). Measured on N2 at 2.2 Å
    (cc-pVDZ): following reaches the reference library's broken-symmetry
    solution in 19 iterations, the turned start alone did not converge in
    100, so following is the default route.

    Returns
    -------
    RHFResult, UHFResult or ROHFResult
        ``UHFResult.stability`` holds the UHF→UHF analysis; an
        ``RHFResult`` of a singlet is the plain RHF record (its RHF→UHF
        check is :func:`hfcore.scf.uhf_stability.check_rhf_to_uhf`).

    Raises
    ------
    InputError
        RHF on a non-singlet; an unknown guess; as :func:`run_rhf`.
    ConvergenceError, ResourceError
        As :func:`run_rhf`.
    """
    options = options or SCFOptions()
    method = resolve_method(molecule.spin_multiplicity, _method_choice(molecule, options))
    if method == "rhf":
        return _run_rhf_checked(molecule, basis, options, guess, progress, integral_progress, shared, raise_on_failure,
                                plan)
    return run_open_shell(
        molecule, basis, options, method=method, guess=guess, progress=progress,
        integral_progress=integral_progress, shared=shared, raise_on_failure=raise_on_failure, plan=plan,
    )


def _method_choice(molecule: Molecule, options: SCFOptions) -> str | None:
    """``options.method``, or ROHF for an open-shell lone atom under ``spherical_atom``."""
    from .spherical_atom import method_choice

    return method_choice(molecule, options.method, options.spherical_atom)


def _run_rhf_checked(molecule, basis, options, guess, progress, integral_progress, shared, raise_on_failure,
                     plan=None) -> RHFResult:
    """RHF, then (unless stability is "skip") the RHF→UHF test; a lower unrestricted solution becomes a warning."""
    if options.stability == "skip":
        return run_rhf(
            molecule, basis, options, guess=guess, progress=progress, integral_progress=integral_progress,
            shared=shared, raise_on_failure=raise_on_failure, plan=plan,
        )
    molecule.require_closed_shell()
    if isinstance(basis, str):
        basis = build_basis(molecule, basis)
    if shared is None:
        require_room_for(molecule, basis)
        shared = prepare_integrals(basis, options, integral_progress, molecule=molecule, plan=plan)
    result = run_rhf(
        molecule, basis, options, guess=guess, progress=progress, shared=shared, raise_on_failure=raise_on_failure
    )
    if not result.converged:
        return result
    from .uhf_stability import check_rhf_to_uhf, rhf_to_uhf_warning

    t0 = time.perf_counter()
    with blas_threads(options.n_threads):
        analysis = check_rhf_to_uhf(result, shared.jk_builder(), screen=screen_for(shared, molecule, options))
    warning = rhf_to_uhf_warning(analysis)
    timings = {**result.timings, "stability": result.timings.get("stability", 0.0) + time.perf_counter() - t0}
    timings["total"] = result.timings.get("total", 0.0) + time.perf_counter() - t0
    # The spin-flipping products kept for the check have served; the record does not carry them on.
    stability = None if result.stability is None else replace(result.stability, spin_flip_space=None)
    return replace(result, warnings=result.warnings + ((warning,) if warning else ()), timings=timings,
                   stability=stability)


def run_uhf(molecule: Molecule, basis: BasisSet | str = "sto-3g", options: SCFOptions | None = None, **kwargs) -> UHFResult:
    """:func:`run_scf` with method "uhf" (any multiplicity, singlets included)."""
    return run_open_shell(molecule, basis, options or SCFOptions(), method="uhf", **kwargs)


def run_rohf(molecule: Molecule, basis: BasisSet | str = "sto-3g", options: SCFOptions | None = None, **kwargs) -> ROHFResult:
    """:func:`run_scf` with method "rohf"; ``coupling=`` names the effective-Fock scheme."""
    return run_open_shell(molecule, basis, options or SCFOptions(), method="rohf", **kwargs)


def run_open_shell(
    molecule: Molecule,
    basis: BasisSet | str,
    options: SCFOptions,
    *,
    method: str,
    guess: str | np.ndarray = "sad",
    progress: IterationProgress | None = None,
    integral_progress: Callable[[float], None] | None = None,
    shared: SharedIntegrals | None = None,
    raise_on_failure: bool = True,
    coupling: str = "guest-saunders",
    plan: JKPlan | None = None,
) -> UHFResult | ROHFResult:
    """UHF or ROHF on a molecule (see :func:`run_scf`)."""
    if method not in ("uhf", "rohf"):
        raise InputError(f"run_open_shell runs 'uhf' or 'rohf', not {method!r}")
    with blas_threads(options.n_threads), contextlib.ExitStack() as blas:
        t0 = time.perf_counter()
        n = molecule.n_electrons
        if n <= 0:
            raise InputError(f"{molecule.source}: charge {molecule.charge} leaves {n} electrons; nothing to compute")
        if isinstance(basis, str):
            basis = build_basis(molecule, basis)
        require_room_for(molecule, basis)
        restricted = _spherical_setup(molecule, basis, options, method)
        user_guess = _open_guess(guess, basis)
        if shared is None:
            shared = _prepare_open(basis, options, integral_progress, molecule, plan)
        elif shared.basis is not basis:
            raise InputError("shared integrals belong to another basis; build them with prepare_integrals(basis)")
        hcore = shared.kinetic + integrals.nuclear_attraction(basis, molecule.nuclear_charges, molecule.coordinates)
        plan, jk = shared.plan, shared.jk_builder()
        blas.enter_context(blas_threads(scf_blas_threads(plan, options)))
        t_integrals = time.perf_counter()
        n_a, n_b = molecule.n_alpha, molecule.n_beta
        if user_guess is not None and user_guess.ndim == 2:
            user_guess = split_density(user_guess, n_a, n_b)
        if user_guess is None and isinstance(guess, str) and guess.lower() == "sad":
            total = sad_density(basis, np.where(molecule.ghosts, 0, molecule.atomic_numbers), jk)
            if isinstance(jk, IncrementalJK):
                jk.reset()
            user_guess = split_density(total, n_a, n_b)
        t_sad = time.perf_counter() - t_integrals

        def finish(result):
            return placed(result, molecule, basis, plan, jk, t_integrals - t0, t_sad, t0)

        try:
            if method == "uhf":
                result = solve_uhf(
                    shared.overlap, hcore, jk, n_a, n_b, molecule.nuclear_repulsion(), options, user_guess,
                    break_symmetry=(n_a == n_b and options.stability != "descend"), progress=progress,
                )
                if options.stability != "skip":
                    from .uhf_stability import stabilise_uhf

                    # converging and following stay apart (as for RHF); finish() times the whole run
                    result = stabilise_uhf(result, jk, molecule.nuclear_repulsion(), progress=progress,
                                           screen=screen_for(shared, molecule, options))
            elif restricted is not None:
                from .spherical_atom import solve_spherical_atom

                result = solve_spherical_atom(
                    shared.overlap, hcore, jk, *restricted, molecule.nuclear_repulsion(), options, user_guess,
                    progress=progress,
                )
            else:
                from .rohf import solve_rohf

                result = solve_rohf(
                    shared.overlap, hcore, jk, n_a, n_b, molecule.nuclear_repulsion(), options, user_guess,
                    coupling=coupling, progress=progress,
                )
        except ConvergenceError as exc:
            if exc.result is None:
                raise
            if not raise_on_failure:
                return finish(exc.result)
            raise ConvergenceError(str(exc), finish(exc.result)) from None
        return finish(result)


def _spherical_setup(molecule: Molecule, basis: BasisSet, options: SCFOptions, method: str):
    """(radial layout, configuration) of a spherical-atom run, checked before any integral; None otherwise."""
    from .spherical_atom import applies_to, check_spherical_atom, radial_layout

    if method != "rohf" or not applies_to(molecule, options):
        return None
    config = check_spherical_atom(
        len(molecule.atomic_numbers), int(np.count_nonzero(molecule.ghosts)), basis.spherical,
        molecule.n_electrons, molecule.spin_multiplicity, molecule.source,
    )
    return radial_layout(basis), config


def _prepare_open(
    basis: BasisSet, options: SCFOptions, integral_progress: Callable[[float], None] | None, molecule: Molecule,
    plan: JKPlan | None = None,
) -> SharedIntegrals:
    """:func:`prepare_integrals` for an open shell: a fitted plan is sized for N_α + N_β exchange columns."""
    if options.fit_basis is None or plan is not None:
        return prepare_integrals(basis, options, integral_progress, molecule=molecule, plan=plan)
    t0 = time.perf_counter()
    fitting = fitting_basis(molecule, basis, options.fit_basis)
    # Both spins' occupied orbitals go through one half-transform (FittedJK.jk_multi).
    plan = plan_jk(basis, options, fitting=fitting, n_occupied=molecule.n_alpha + molecule.n_beta)
    with blas_threads(options.n_threads):
        overlap, kinetic = integrals.overlap(basis), integrals.kinetic(basis)
        engine = _jk_builder(basis, options, plan, integral_progress)
    return SharedIntegrals(basis, overlap, kinetic, plan, engine, time.perf_counter() - t0)


def _open_guess(guess: str | np.ndarray, basis: BasisSet) -> np.ndarray | None:
    """The user's start: α and β densities (2, nbf, nbf) or a total one (nbf, nbf); None for a named guess."""
    if isinstance(guess, str):
        _checked_guess(guess, basis)
        return None
    g = np.asarray(guess, dtype=np.float64)
    n = basis.n_functions
    if g.shape == (2, n, n):
        return g
    return _checked_guess(g, basis)


__all__ = ["run_scf", "run_uhf", "run_rohf", "run_open_shell"]
