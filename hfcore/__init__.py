"""hfcore: a small, fast restricted Hartree-Fock program in Python.

Three lines from a geometry file to an RHF energy::

    import hfcore
    mol = hfcore.read_xyz("inputs/water.xyz")
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "sto-3g"))

Everything is in atomic units (bohr, hartree) except where a name says
otherwise. Results are Hartree-Fock approximations without electron
correlation.
"""

from __future__ import annotations

from .basis import BasisSet, Shell, build_basis, get_family
from .errors import BasisError, ConvergenceError, HfcoreError, InputError, ResourceError
from ._version import __version__
from .geometry import Molecule, parse_xyz, read_xyz


def __getattr__(name: str):
    # The SCF layer is imported lazily so that reading geometries and basis
    # sets stays cheap.
    if name in {"run_rhf", "solve_rhf", "SCFOptions", "RHFResult", "run_scf", "UHFResult", "ROHFResult"}:
        from . import scf

        return getattr(scf, name)
    if name == "mp2_energy":
        from . import analysis

        return getattr(analysis, name)
    if name in {"project_density", "compare_bases", "reaction_energies", "interaction_energies"}:
        from . import studies

        return getattr(studies, name)
    if name in {"load_arrays", "SavedArrays"}:
        from . import export

        return getattr(export, name)
    raise AttributeError(f"module 'hfcore' has no attribute {name!r}")


__all__ = [
    "Molecule",
    "read_xyz",
    "parse_xyz",
    "BasisSet",
    "Shell",
    "build_basis",
    "get_family",
    "run_rhf",
    "run_scf",
    "solve_rhf",
    "SCFOptions",
    "RHFResult",
    "UHFResult",
    "ROHFResult",
    "mp2_energy",
    "project_density",
    "compare_bases",
    "reaction_energies",
    "interaction_energies",
    "load_arrays",
    "SavedArrays",
    "HfcoreError",
    "InputError",
    "BasisError",
    "ConvergenceError",
    "ResourceError",
]
