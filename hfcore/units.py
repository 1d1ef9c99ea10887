"""Unit conversion factors, all from scipy.constants (CODATA), in one place.

hfcore works in atomic units (bohr, hartree, e·bohr); these factors turn
them into the units the human report and some JSON fields use.
"""

from __future__ import annotations

from scipy import constants

_BOHR_M: float = constants.physical_constants["Bohr radius"][0]

#: One bohr in ångström.
BOHR_IN_ANGSTROM: float = _BOHR_M / constants.angstrom
#: One ångström in bohr.
ANGSTROM_IN_BOHR: float = 1.0 / BOHR_IN_ANGSTROM
#: One hartree in electronvolts.
EV_PER_HARTREE: float = constants.physical_constants["Hartree energy in eV"][0]
#: One hartree per particle in kcal/mol (thermochemical calorie, 4.184 J).
KCAL_MOL_PER_HARTREE: float = constants.physical_constants["Hartree energy"][0] * constants.Avogadro / 4184.0
#: One hartree per particle in kJ/mol.
KJ_MOL_PER_HARTREE: float = constants.physical_constants["Hartree energy"][0] * constants.Avogadro / 1000.0
#: One atomic unit of electric dipole moment (e·a0) in debye (1 D = 1e-21/c C·m).
DEBYE_PER_AU: float = constants.elementary_charge * _BOHR_M / (1e-21 / constants.speed_of_light)
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
