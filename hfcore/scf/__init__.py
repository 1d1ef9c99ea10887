"""The SCF layer: restricted Hartree-Fock on a molecule or on bare matrices.

Three lines::

    mol = hfcore.read_xyz("inputs/water.xyz")
    result = hfcore.scf.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"))
    result.energy_total

:func:`run_rhf` computes the integrals and a guess, then hands them to
:func:`solve_rhf`, which iterates with a pluggable accelerator
(:mod:`hfcore.scf.accelerators`, with automatic aids when it stalls),
analyses the stability of the converged solution and follows an
instability to a lower one (:mod:`hfcore.scf.stability`,
:mod:`hfcore.scf.following`), and returns an :class:`RHFResult`. The
layer never prints; pass ``progress`` to watch the iterations.
"""

from __future__ import annotations

from .accelerators import DIIS, Accelerator, Chain, Damping, FockStep, LevelShift, build_accelerator
from .driver import GUESSES, JKPlan, SharedIntegrals, plan_jk, prepare_integrals, run_rhf
from .guess import sad_density
from .jk import DenseJK, IncrementalJK, JKBuilder
from .options import SCFOptions
from .orthogonalise import Orthogonaliser
from .result import RHFResult, SCFIteration
from .solver import solve_rhf
from .stability import StabilityAnalysis, StabilityReport, analyse_stability, rotate_orbitals

__all__ = [
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
    "build_accelerator",
    "JKBuilder",
    "DenseJK",
    "IncrementalJK",
]
