"""Studies over several Hartree–Fock runs (RHF, UHF, ROHF): basis comparison, reaction and interaction energies.

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
    ComparisonPiece,
    ComparisonRow,
    SeriesEstimate,
    assemble_comparison,
    basis_limit_estimates,
    compare_bases,
    comparison_pieces,
    project_density,
    run_comparison_pieces,
    series_estimates,
)
from .extrapolation import cardinal_number, correlation_consistent, feller_three_point, karton_martin_two_point
from .fragments import InteractionPiece, InteractionRow, PieceResult, check_fragments, interaction_pieces
from .interaction import (
    InteractionStudy,
    assemble_interaction,
    interaction_energies,
    run_interaction_pieces,
)
from .pieces import MessageProgress, PieceOutcome
from .reaction import (
    ReactionEstimate,
    ReactionPiece,
    ReactionRow,
    ReactionStudy,
    assemble_reactions,
    load_reactions,
    parse_reaction,
    reaction_energies,
    reaction_pieces,
    run_reaction_pieces,
)

__all__ = [
    "MessageProgress",
    "PieceOutcome",
    "COMPARISON_GUESSES",
    "ComparisonPiece",
    "comparison_pieces",
    "run_comparison_pieces",
    "assemble_comparison",
    "SeriesEstimate",
    "series_estimates",
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
    "InteractionPiece",
    "InteractionRow",
    "PieceResult",
    "InteractionStudy",
    "check_fragments",
    "interaction_pieces",
    "run_interaction_pieces",
    "assemble_interaction",
    "interaction_energies",
    "ReactionPiece",
    "ReactionRow",
    "ReactionEstimate",
    "ReactionStudy",
    "parse_reaction",
    "load_reactions",
    "reaction_pieces",
    "run_reaction_pieces",
    "assemble_reactions",
    "reaction_energies",
]
