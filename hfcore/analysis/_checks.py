"""Checks shared by the analysis functions."""

from __future__ import annotations

from typing import TYPE_CHECKING

from ..errors import InputError

if TYPE_CHECKING:
    from ..scf.result import RHFResult


def require_placed(result: RHFResult, what: str) -> None:
    """Raise InputError unless the result carries its molecule and basis.

    Results of the SCF on bare matrices have neither, and every analysis
    needs to know which atom each basis function sits on.
    """
    if getattr(result, "molecule", None) is None or getattr(result, "basis", None) is None:
        raise InputError(f"{what} needs an SCF result that carries its molecule and basis (from run_rhf or run_scf)")
