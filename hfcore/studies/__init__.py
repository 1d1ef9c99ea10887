"""Studies over several RHF runs: basis comparison, reaction and interaction energies.

Each study lists the SCF runs it needs as plain data (its pieces), has them
run (in this process, or by a runner the caller passes in, such as the batch
machinery) and assembles its record from their energies. Equations,
fragments and basis-limit extrapolation live here with them.
"""

from __future__ import annotations

from .compare import (
    COMPARISON_GUESSES,
    BasisComparison,
    BasisLimitEstimate,
    ComparisonRow,
    basis_limit_estimates,
    compare_bases,
    project_density,
)
from .extrapolation import cardinal_number, correlation_consistent, feller_three_point, karton_martin_two_point
from .interaction import InteractionStudy, interaction_energies
from .reaction import ReactionStudy, load_reactions, parse_reaction, reaction_energies

__all__ = [
    "COMPARISON_GUESSES",
    "ComparisonRow",
    "BasisLimitEstimate",
    "BasisComparison",
    "compare_bases",
    "project_density",
    "basis_limit_estimates",
    "cardinal_number",
    "correlation_consistent",
    "karton_martin_two_point",
    "feller_three_point",
    "InteractionStudy",
    "interaction_energies",
    "ReactionStudy",
    "parse_reaction",
    "load_reactions",
    "reaction_energies",
]
