"""Basis-set-limit extrapolation: the published formulas, solved exactly."""

from __future__ import annotations

import math

import numpy as np
import pytest

from hfcore.studies.extrapolation import (
    cardinal_number,
    correlation_consistent,
    feller_three_point,
    karton_martin_two_point,
)
from hfcore.errors import InputError


def test_two_point_matches_hand_arithmetic():
    # source: A. Karton and J. M. L. Martin, Theor. Chem. Acc. 115, 330 (2006),
    # E(X) = E_CBS + A (X+1) exp(-9 sqrt X). Hand arithmetic with X = 4, 9
    # (integer square roots): f(4) = 5 e^-18, f(9) = 10 e^-27, so
    # E_CBS = (E9 f4 - E4 f9) / (f4 - f9) = (E9 - 2 E4 e^-9) / (1 - 2 e^-9).
    # E4 = -100, E9 = -100.01, e^-9 = 1.2340980408667956e-4:
    # numerator  = -100.01 + 200 e^-9 = -99.98531803918267
    # denominator = 1 - 2 e^-9        =   0.9997531803918266
    # E_CBS = -100.01000246880544
    assert karton_martin_two_point(-100.0, -100.01, 4, 9) == pytest.approx(-100.01000246880544, abs=1e-11)


def test_two_point_model_passes_through_both_points():
    # source: exact property — the solved model reproduces its inputs.
    e2, e3 = -128.488776, -128.531862
    cbs = karton_martin_two_point(e2, e3, 2, 3)
    a = (e2 - cbs) / (3.0 * math.exp(-9.0 * math.sqrt(2.0)))
    assert cbs + a * 4.0 * math.exp(-9.0 * math.sqrt(3.0)) == pytest.approx(e3, abs=1e-12)
    assert cbs < e3


def test_two_point_rejects_equal_cardinals():
    with pytest.raises(InputError):
        karton_martin_two_point(-1.0, -1.1, 3, 3)


@pytest.mark.parametrize("x", [(2, 3, 4), (3, 4, 5), (2, 4, 5)])
def test_three_point_recovers_synthetic_limit(x):
    # source: exact property — data built from E_CBS + B exp(-C X) give E_CBS back.
    cbs, b, c = -76.0675, 0.93, 1.37
    e = [cbs + b * math.exp(-c * xi) for xi in x]
    assert feller_three_point(*e, *x) == pytest.approx(cbs, abs=1e-10)


def test_three_point_closed_form_for_consecutive_cardinals():
    # source: exact property — with X, X+1, X+2 the limit is (e1 e3 - e2²)/(e1 + e3 - 2 e2).
    e1, e2, e3 = -1.0, -1.5, -1.75
    assert feller_three_point(e1, e2, e3, 2, 3, 4) == pytest.approx(-2.0, abs=1e-14)


@pytest.mark.parametrize(
    "energies",
    [(-1.0, -1.1, -1.05), (-1.0, -1.1, -1.3), (-1.0, -1.0, -1.0)],
    ids=["step changes sign", "steps grow", "no change"],
)
def test_three_point_rejects_non_converging_data(energies):
    with pytest.raises(InputError, match="monotonically"):
        feller_three_point(*energies, 2, 3, 4)


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("cc-pVDZ", 2),
        ("CC-PVTZ", 3),
        ("aug-cc-pVQZ", 4),
        ("cc-pV5Z", 5),
        ("aug-cc-pv6z", 6),
        ("6-31G*", None),
        ("cc-pCVDZ", None),
        ("sto-3g", None),
    ],
)
def test_cardinal_number(name, expected):
    # source: common practice — D, T, Q, 5, 6 map to X = 2..6.
    assert cardinal_number(name) == expected


def test_correlation_consistent_family():
    assert correlation_consistent("aug-cc-pVTZ") == ("aug-cc-pVXZ", 3)
    assert correlation_consistent("cc-pvqz") == ("cc-pVXZ", 4)
    assert correlation_consistent("def2-svp") is None


def test_neon_three_point_limit_is_near_the_numerical_hartree_fock_limit():
    import hfcore

    neon = hfcore.Molecule(np.array([10]), np.zeros((1, 3)))
    names = ["cc-pVDZ", "cc-pVTZ", "cc-pVQZ"]
    energies = []
    for name in names:
        result = hfcore.run_rhf(neon, hfcore.build_basis(neon, name, spherical=True))
        assert result.converged
        energies.append(result.energy_total)
    # source: common practice — the cc-pVXZ energy falls with X (the sets are not nested, so not exact)
    assert energies[0] > energies[1] > energies[2]
    cbs = feller_three_point(*energies, 2, 3, 4)
    # source: C. F. Bunge, J. A. Barrientos, A. V. Bunge, At. Data Nucl. Data Tables 53, 113 (1993),
    # numerical HF limit of Ne, from memory
    assert cbs == pytest.approx(-128.547098, abs=2e-3)
