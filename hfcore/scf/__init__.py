"""The SCF layer: restricted Hartree-Fock on a molecule or on bare matrices.

Three lines::

    mol = hfcore.read_xyz("inputs/water.xyz")
    result = hfcore.scf.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"))
    result.energy_total

:func:`run_rhf` computes the integrals and a guess, then hands them to
:func:`solve_rhf`, which iterates with a pluggable accelerator
(:mod:`hfcore.scf.accelerators`) and returns an :class:`RHFResult`. The
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
