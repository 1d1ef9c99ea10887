"""Post-SCF analysis of one finished RHF run: populations, multipoles, orbital properties, MP2 and SCS-MP2.

Everything here works on a finished SCF record (:class:`hfcore.scf.RHFResult`,
or, for populations, multipoles, orbital properties and :func:`ump2_energy`,
an open-shell :class:`hfcore.scf.UHFResult` / ``ROHFResult``) and never runs
the SCF itself. The studies over several runs (basis comparison, reaction
and interaction energies) and basis-limit extrapolation are in
:mod:`hfcore.studies`; their old names here still work for one release,
with a DeprecationWarning.
"""

from __future__ import annotations

from .multipoles import (
    DEBYE_ANGSTROM_PER_AU,
    DEBYE_PER_AU,
    centre_of_mass,
    dipole_moment,
    nuclear_charge_centre,
    quadrupole_moment,
    second_moment,
)
from ..units import KCAL_MOL_PER_HARTREE
from .properties import OrbitalProperties, orbital_properties
from .populations import lowdin_charges, lowdin_populations, mulliken_charges, mulliken_populations, mulliken_spin_populations

#: Names that moved to :mod:`hfcore.studies` (served from there with a warning, for one release).
_MOVED_TO_STUDIES = frozenset({
    "compare_bases", "BasisComparison", "BasisLimitEstimate", "ComparisonRow", "basis_limit_estimates",
    "project_density", "interaction_energies", "InteractionStudy", "reaction_energies", "ReactionStudy",
    "cardinal_number", "correlation_consistent", "feller_three_point", "karton_martin_two_point",
})


#: The MP2 names, served from their modules on first use: a run without MP2
#: (the default) does not import the MP2 code.
_MP2_NAMES: dict[str, str] = {
    "SCS_OPPOSITE_SPIN": "mp2", "SCS_SAME_SPIN": "mp2", "MP2Result": "mp2", "core_orbital_count": "mp2",
    "mp2_energy": "mp2", "UMP2Result": "ump2", "check_mp2_reference": "ump2", "ump2_energy": "ump2",
}


def __getattr__(name: str):
    if name in _MP2_NAMES:
        import importlib

        value = getattr(importlib.import_module(f"{__name__}.{_MP2_NAMES[name]}"), name)
        globals()[name] = value  # looked up once
        return value
    if name in _MOVED_TO_STUDIES:
        import importlib
        import warnings

        # Looked up by name at run time: the engine does not import the studies above it.
        studies = importlib.import_module("hfcore.studies")
        warnings.warn(f"hfcore.analysis.{name} is deprecated; use hfcore.studies.{name}", DeprecationWarning,
                      stacklevel=2)
        return getattr(studies, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_MP2_NAMES))


__all__ = [
    "ump2_energy",
    "UMP2Result",
    "check_mp2_reference",
    "mulliken_populations",
    "mulliken_spin_populations",
    "mulliken_charges",
    "lowdin_populations",
    "lowdin_charges",
    "DEBYE_PER_AU",
    "dipole_moment",
    "nuclear_charge_centre",
    "centre_of_mass",
    "DEBYE_ANGSTROM_PER_AU",
    "second_moment",
    "quadrupole_moment",
    "OrbitalProperties",
    "orbital_properties",
    "SCS_OPPOSITE_SPIN",
    "SCS_SAME_SPIN",
    "MP2Result",
    "mp2_energy",
    "core_orbital_count",
    "KCAL_MOL_PER_HARTREE",
]
