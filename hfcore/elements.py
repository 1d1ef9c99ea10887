"""Chemical elements: symbols, atomic numbers and standard atomic weights.

Atomic weights are the IUPAC conventional/abridged standard atomic weights
(IUPAC Commission on Isotopic Abundances and Atomic Weights, "Standard atomic
weights of the elements 2021", Pure Appl. Chem. 95, 1 (2023); values from
memory, rounded to the abridged precision). They are used only for centres
of mass, never for energies.
"""

from __future__ import annotations

SYMBOLS: tuple[str, ...] = (
    "X",  # index 0: placeholder so SYMBOLS[Z] is the symbol of element Z
    "H", "He",
    "Li", "Be", "B", "C", "N", "O", "F", "Ne",
    "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar",
    "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn",
    "Ga", "Ge", "As", "Se", "Br", "Kr",
)

ATOMIC_WEIGHTS: tuple[float, ...] = (
    0.0,
    1.008, 4.0026,
    6.94, 9.0122, 10.81, 12.011, 14.007, 15.999, 18.998, 20.180,
    22.990, 24.305, 26.982, 28.085, 30.974, 32.06, 35.45, 39.95,
    39.098, 40.078, 44.956, 47.867, 50.942, 51.996, 54.938, 55.845,
    58.933, 58.693, 63.546, 65.38, 69.723, 72.630, 74.922, 78.971,
    79.904, 83.798,
)

MAX_Z: int = len(SYMBOLS) - 1

_BY_SYMBOL = {s.lower(): z for z, s in enumerate(SYMBOLS) if z > 0}


def atomic_number(token: str) -> int:
    """Return the atomic number for an element symbol or number.

    Parameters
    ----------
    token : str
        An element symbol in any letter case (``"c"``, ``"CL"``) or an atomic
        number written as an integer (``"6"``).

    Returns
    -------
    int
        The atomic number, 1 <= Z <= ``MAX_Z``.

    Raises
    ------
    KeyError
        If the token names no known element.
    """
    t = token.strip()
    # isdecimal and isascii, not isdigit: "²" is a digit that int() refuses.
    if t.isascii() and t.isdecimal():
        z = int(t)
        if 1 <= z <= MAX_Z:
            return z
        raise KeyError(token)
    return _BY_SYMBOL[t.lower()]


def symbol(z: int) -> str:
    """Return the element symbol of atomic number ``z`` (1 <= z <= MAX_Z)."""
    if not 1 <= z <= MAX_Z:
        raise KeyError(z)
    return SYMBOLS[z]


def atomic_weight(z: int) -> float:
    """Return the standard atomic weight of element ``z`` in daltons."""
    if not 1 <= z <= MAX_Z:
        raise KeyError(z)
    return ATOMIC_WEIGHTS[z]
