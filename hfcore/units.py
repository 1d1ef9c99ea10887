"""Unit conversion factors from CODATA 2022 values, in one place.

hfcore works in atomic units (bohr, hartree, e·bohr); these factors turn
them into the units the human report and some JSON fields use. The base
values are written here as a table (importing ``scipy.constants`` costs a
noticeable part of a small run's start-up); ``tests/test_units.py`` proves
that every factor equals the one computed from ``scipy.constants``.
"""

from __future__ import annotations

#: CODATA 2022 values used below (SI): the Bohr radius (m), the Hartree energy
#: (J and eV), and the exact defining constants.
_BOHR_M: float = 5.29177210544e-11
_HARTREE_J: float = 4.359744722206e-18
_HARTREE_EV: float = 27.211386245981
_AVOGADRO: float = 6.02214076e23
_ELEMENTARY_CHARGE: float = 1.602176634e-19
_SPEED_OF_LIGHT: float = 299792458.0
_ANGSTROM_M: float = 1e-10

#: One bohr in ångström.
BOHR_IN_ANGSTROM: float = _BOHR_M / _ANGSTROM_M
#: One ångström in bohr.
ANGSTROM_IN_BOHR: float = 1.0 / BOHR_IN_ANGSTROM
#: One hartree in electronvolts.
EV_PER_HARTREE: float = _HARTREE_EV
#: One hartree per particle in kcal/mol (thermochemical calorie, 4.184 J).
KCAL_MOL_PER_HARTREE: float = _HARTREE_J * _AVOGADRO / 4184.0
#: One hartree per particle in kJ/mol.
KJ_MOL_PER_HARTREE: float = _HARTREE_J * _AVOGADRO / 1000.0
#: One atomic unit of electric dipole moment (e·a0) in debye (1 D = 1e-21/c C·m).
DEBYE_PER_AU: float = _ELEMENTARY_CHARGE * _BOHR_M / (1e-21 / _SPEED_OF_LIGHT)
#: One atomic unit of electric quadrupole moment (e·a0²) in debye·ångström.
DEBYE_ANGSTROM_PER_AU: float = DEBYE_PER_AU * BOHR_IN_ANGSTROM

__all__ = [
    "BOHR_IN_ANGSTROM",
    "ANGSTROM_IN_BOHR",
    "EV_PER_HARTREE",
    "KCAL_MOL_PER_HARTREE",
    "KJ_MOL_PER_HARTREE",
    "DEBYE_PER_AU",
    "DEBYE_ANGSTROM_PER_AU",
]
