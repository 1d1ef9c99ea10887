"""Post-SCF analysis: populations, multipoles, MP2, basis-limit extrapolation,
and a driver comparing several basis sets.

Everything here except :func:`compare_bases` works on a finished
:class:`hfcore.scf.RHFResult` and never runs the SCF itself.
"""

from __future__ import annotations

from .extrapolation import cardinal_number, correlation_consistent, feller_three_point, karton_martin_two_point

__all__ = [
    "cardinal_number",
    "correlation_consistent",
    "feller_three_point",
    "karton_martin_two_point",
]
