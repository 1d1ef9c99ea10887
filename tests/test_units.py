"""The unit table equals the CODATA values of scipy.constants."""

from __future__ import annotations

import pytest
from scipy import constants

from hfcore import units

BOHR_M = constants.physical_constants["Bohr radius"][0]
HARTREE_J = constants.physical_constants["Hartree energy"][0]

# source: scipy.constants (CODATA) — each factor computed from it the way its definition reads.
FROM_SCIPY = {
    "BOHR_IN_ANGSTROM": BOHR_M / constants.angstrom,
    "ANGSTROM_IN_BOHR": constants.angstrom / BOHR_M,
    "EV_PER_HARTREE": constants.physical_constants["Hartree energy in eV"][0],
    "KCAL_MOL_PER_HARTREE": HARTREE_J * constants.Avogadro / (1000.0 * constants.calorie),
    "KJ_MOL_PER_HARTREE": HARTREE_J * constants.Avogadro / 1000.0,
    "DEBYE_PER_AU": constants.elementary_charge * BOHR_M * constants.speed_of_light / 1e-21,
    "DEBYE_ANGSTROM_PER_AU": constants.elementary_charge * BOHR_M**2 * constants.speed_of_light / 1e-21 / constants.angstrom,
}


@pytest.mark.parametrize("name", sorted(FROM_SCIPY))
def test_factor_equals_the_one_from_scipy_constants(name):
    assert getattr(units, name) == pytest.approx(FROM_SCIPY[name], rel=1e-15, abs=0)


def test_every_exported_factor_is_checked():
    assert set(units.__all__) == set(FROM_SCIPY)


def test_the_thermochemical_calorie_is_the_one_in_the_table():
    assert constants.calorie == 4.184  # exact property: the thermochemical calorie is 4.184 J
