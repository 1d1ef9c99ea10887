"""The Boys function F_m(T) against a high-precision evaluation."""

import mpmath
import numpy as np
import pytest

from hfcore.integrals.boys import M_MAX, _T_SWITCH, boys

# Arguments covering the Taylor grid (midpoints and nodes), both sides of
# every switch to the asymptotic form, and very small and very large T.
_T = np.unique(
    np.concatenate(
        [
            [0.0, 1e-14, 1e-8, 1e-3],
            np.linspace(0.0, 2.0, 17) + 1.0 / 32.0,
            np.linspace(2.0, 120.0, 60) + 1.0 / 64.0,
            _T_SWITCH - 1e-9,
            _T_SWITCH + 1e-9,
            [150.0, 1e3, 1e5, 1e9],
        ]
    )
)


def _reference(m: int, t: float) -> float:
    # source: exact identity F_m(T) = 1F1(m+1/2; m+3/2; -T) / (2m+1), evaluated at 40 digits
    with mpmath.workdps(40):
        return float(mpmath.hyp1f1(m + 0.5, m + 1.5, -mpmath.mpf(t)) / (2 * m + 1))


@pytest.fixture(scope="module")
def reference_table() -> np.ndarray:
    return np.array([[_reference(m, t) for t in _T] for m in range(M_MAX + 1)])


@pytest.mark.parametrize("m_max", [0, 1, 4, 8, 16, 24, M_MAX])
def test_relative_error_below_1e13_for_every_order_and_argument(m_max, reference_table):
    values = boys(m_max, _T)
    ref = reference_table[: m_max + 1]
    # source: design notes, common practice: relative error below 1e-13 for every m and T >= 0
    assert np.max(np.abs(values - ref) / ref) < 1e-13


def test_value_at_zero_is_one_over_2m_plus_1():
    values = boys(M_MAX, np.zeros(1))[:, 0]
    # source: exact property F_m(0) = 1/(2m+1)
    np.testing.assert_allclose(values, 1.0 / (2 * np.arange(M_MAX + 1) + 1), rtol=1e-15)


def test_output_shape_follows_the_argument_shape():
    out = boys(3, np.ones((2, 5)))
    assert out.shape == (4, 2, 5)


def test_orders_decrease_and_downward_recursion_holds():
    t = np.linspace(0.0, 80.0, 401)
    f = boys(12, t)
    # source: exact properties: F_{m+1} < F_m for T > 0 and (2m+1) F_m = 2T F_{m+1} + exp(-T)
    assert np.all(f[1:, 1:] < f[:-1, 1:])
    np.testing.assert_allclose((2 * np.arange(12) + 1)[:, None] * f[:-1], 2 * t * f[1:] + np.exp(-t), rtol=1e-14)


def test_order_outside_the_table_is_rejected():
    with pytest.raises(ValueError):
        boys(M_MAX + 1, np.ones(3))
