"""Standard molecular Slater exponents of the STO-nG basis sets, H to Ar.

The table holds ζ in bohr⁻¹ for each Slater shell of each element; the
fitted Gaussian expansions of :mod:`hfcore.basis.sto` are scaled by ζ².
Two decimals, as the papers give them.

Sources
-------
H–Ne
    W. J. Hehre, R. F. Stewart and J. A. Pople, J. Chem. Phys. 51, 2657
    (1969), the table of standard molecular exponents. H and Li–F from
    memory; He (1.69) and Ne (9.64 / 2.88) from memory.
Na–Ar
    W. J. Hehre, R. Ditchfield, R. F. Stewart and J. A. Pople, J. Chem.
    Phys. 52, 2769 (1970). Not recalled: recovered from a reference
    library's STO-3G exponents as ζ = sqrt(α_lib / α_fit(ζ = 1)), which
    gives the same two-decimal value for every primitive of a shell.

Every value above was checked the same way against the reference library's
STO-3G data; ``tests/test_sto_fit.py`` repeats that check for STO-3G and
STO-6G.
"""

from __future__ import annotations

from types import MappingProxyType
from collections.abc import Mapping

#: Slater shells in the order the STO-nG sets list them for an element.
SHELL_ORDER: tuple[str, ...] = ("1s", "2sp", "3sp")

_TABLE: dict[int, tuple[float, ...]] = {
    # Z: (ζ 1s, ζ 2sp, ζ 3sp)
    1: (1.24,),
    2: (1.69,),
    3: (2.69, 0.80),
    4: (3.68, 1.15),
    5: (4.68, 1.50),
    6: (5.67, 1.72),
    7: (6.67, 1.95),
    8: (7.66, 2.25),
    9: (8.65, 2.55),
    10: (9.64, 2.88),
    11: (10.61, 3.48, 1.75),
    12: (11.59, 3.90, 1.70),
    13: (12.56, 4.36, 1.70),
    14: (13.53, 4.83, 1.75),
    15: (14.50, 5.31, 1.90),
    16: (15.47, 5.79, 2.05),
    17: (16.43, 6.26, 2.10),
    18: (17.40, 6.74, 2.33),
}

#: Atomic number -> {Slater shell label -> ζ in bohr⁻¹}, shells in :data:`SHELL_ORDER`.
STANDARD_EXPONENTS: Mapping[int, Mapping[str, float]] = MappingProxyType(
    {z: MappingProxyType(dict(zip(SHELL_ORDER, zetas))) for z, zetas in _TABLE.items()}
)

__all__ = ["SHELL_ORDER", "STANDARD_EXPONENTS"]
