"""Coupling schemes of the ROHF effective Fock matrix: the coefficient table, apart from the solver.

F_eff = A F_α + B F_β in each of the doubly occupied (core), singly
occupied (open) and virtual spaces; the off-diagonal blocks are fixed by the
orbital gradient (:mod:`hfcore.scf.rohf`). The energy does not depend on the
scheme (exact property); only the orbital energies do. Coefficients from
memory, with each scheme's source.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..errors import InputError


@dataclass(frozen=True)
class Coupling:
    """Diagonal-block coefficients (A, B) of F_eff = A F_α + B F_β per space, and where they come from."""

    core: tuple[float, float]
    open: tuple[float, float]
    virtual: tuple[float, float]
    source: str


#: Coupling schemes of the effective Fock matrix, by name.
COUPLINGS: dict[str, Coupling] = {
    "guest-saunders": Coupling((0.5, 0.5), (0.5, 0.5), (0.5, 0.5), "M. F. Guest and V. R. Saunders, Mol. Phys. 28, 819 (1974)"),
    "roothaan": Coupling((-0.5, 1.5), (0.5, 0.5), (1.5, -0.5), "C. C. J. Roothaan, Rev. Mod. Phys. 32, 179 (1960)"),
}


def check_coupling(name: str) -> str:
    """The lower-case coupling name, or InputError naming the choices."""
    key = name.lower() if isinstance(name, str) else name
    if key not in COUPLINGS:
        raise InputError(f"unknown ROHF coupling {name!r}: choose one of {', '.join(COUPLINGS)}")
    return str(key)


__all__ = ["Coupling", "COUPLINGS", "check_coupling"]
