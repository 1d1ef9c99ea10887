"""Post-SCF analysis: populations, multipoles, orbital properties, MP2 and
SCS-MP2, basis-limit extrapolation, and drivers over several RHF runs: basis
comparison, interaction and reaction energies.

Everything here except the drivers (:func:`compare_bases`,
:func:`interaction_energies`, :func:`reaction_energies`) works on a
finished :class:`hfcore.scf.RHFResult` (or, for populations, multipoles,
orbital properties and :func:`ump2_energy`, an open-shell
:class:`hfcore.scf.UHFResult`) and never runs the SCF itself.
"""

from __future__ import annotations

from .compare import (
    KCAL_MOL_PER_HARTREE,
    BasisComparison,
    BasisLimitEstimate,
    ComparisonRow,
    basis_limit_estimates,
    compare_bases,
    project_density,
)
from .interaction import InteractionStudy, interaction_energies
from .reactions import ReactionStudy, reaction_energies
from .extrapolation import cardinal_number, correlation_consistent, feller_three_point, karton_martin_two_point
from .mp2 import SCS_OPPOSITE_SPIN, SCS_SAME_SPIN, MP2Result, core_orbital_count, mp2_energy
from .ump2 import UMP2Result, check_mp2_reference, ump2_energy
from .multipoles import (
    DEBYE_ANGSTROM_PER_AU,
    DEBYE_PER_AU,
    centre_of_mass,
    dipole_moment,
    nuclear_charge_centre,
    quadrupole_moment,
    second_moment,
)
from .properties import OrbitalProperties, orbital_properties
from .populations import lowdin_charges, lowdin_populations, mulliken_charges, mulliken_populations, mulliken_spin_populations

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
    "cardinal_number",
    "correlation_consistent",
    "karton_martin_two_point",
    "feller_three_point",
    "KCAL_MOL_PER_HARTREE",
    "ComparisonRow",
    "BasisLimitEstimate",
    "BasisComparison",
    "compare_bases",
    "project_density",
    "basis_limit_estimates",
    "InteractionStudy",
    "interaction_energies",
    "ReactionStudy",
    "reaction_energies",
]
