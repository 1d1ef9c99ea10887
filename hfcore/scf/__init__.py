"""The SCF layer: restricted, unrestricted and restricted open-shell Hartree-Fock.

:func:`run_scf` runs the method ``options.method`` chooses (RHF for a
singlet, UHF otherwise, or ROHF) and returns an :class:`RHFResult`,
:class:`UHFResult` or :class:`ROHFResult`.

Three lines::

    mol = hfcore.read_xyz("inputs/water.xyz")
    result = hfcore.scf.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"))
    result.energy_total

:func:`run_rhf` computes the integrals and a guess, then hands them to
:func:`solve_rhf` (both in :mod:`hfcore.scf.driver`), which iterates
with a pluggable accelerator (:mod:`hfcore.scf.solver`,
:mod:`hfcore.scf.accelerators`, with automatic aids when it stalls), then
analyses the stability of the converged solution and follows an
instability to a lower one (:mod:`hfcore.scf.stability`,
:mod:`hfcore.scf.following`), and returns an :class:`RHFResult`. The
layer never prints; pass ``progress`` to watch the iterations.
"""

from __future__ import annotations

from .accelerators import DIIS, Accelerator, Chain, Damping, FockStep, LevelShift, SecondOrder, build_accelerator
from .driver import GUESSES, JKPlan, SharedIntegrals, plan_jk, prepare_integrals, run_rhf, solve_rhf
from .fitted_jk import FittedJK, FittingPlan, plan_fitting
from .guess import sad_density
from .jk import DenseJK, IncrementalJK, JKBuilder
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import RHFResult, SCFIteration
from .solver import IterationProgress
from .stability import StabilityAnalysis, StabilityReport, analyse_stability, rotate_orbitals
from .open_driver import run_rohf, run_scf, run_uhf
from .open_result import ROHFResult, UHFResult
from .rohf import COUPLINGS, solve_rohf
from .uhf import solve_uhf
from .uhf_stability import analyse_uhf_stability, check_rhf_to_uhf
from .jk import jk_multi

__all__ = [
    "run_scf",
    "run_uhf",
    "run_rohf",
    "solve_uhf",
    "solve_rohf",
    "UHFResult",
    "ROHFResult",
    "COUPLINGS",
    "analyse_uhf_stability",
    "check_rhf_to_uhf",
    "jk_multi",
    "run_rhf",
    "plan_jk",
    "JKPlan",
    "SharedIntegrals",
    "prepare_integrals",
    "solve_rhf",
    "GUESSES",
    "sad_density",
    "SCFOptions",
    "RHFResult",
    "SCFIteration",
    "StabilityAnalysis",
    "StabilityReport",
    "analyse_stability",
    "rotate_orbitals",
    "Orthogonaliser",
    "Accelerator",
    "FockStep",
    "DIIS",
    "Damping",
    "LevelShift",
    "Chain",
    "SecondOrder",
    "IterationProgress",
    "build_accelerator",
    "JKBuilder",
    "DenseJK",
    "IncrementalJK",
    "FittedJK",
    "FittingPlan",
    "plan_fitting",
]
