"""What a run imports at start-up, and the tables that stand in for scipy at import time."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from scipy.special import gammaincc

from pathlib import Path

from hfcore.basis import sto
from hfcore.integrals import boys as _boys_function  # noqa: F401  (the module is looked up below)

BOYS = sys.modules["hfcore.integrals.boys"]
WATER = str(Path(__file__).resolve().parent.parent / "inputs" / "water.xyz")


def _imported_after(code: str) -> set[str]:
    probe = code + "; import sys; print(' '.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    return set(out.split())


def test_a_water_sto3g_run_imports_no_optimizer_no_special_functions_no_constants():
    modules = _imported_after(
        f"from hfcore.cli import main; main(['energy', {WATER!r}, '--basis', 'sto-3g', '--quiet', '--json', '-'])"
    )
    assert not {m for m in modules if m.startswith(("scipy.optimize", "scipy.special", "scipy.constants"))}


def test_the_help_imports_no_optimizer_no_special_functions_no_constants():
    modules = _imported_after("from hfcore.cli import main\ntry:\n    main(['--help'])\nexcept SystemExit:\n    pass")
    assert not {m for m in modules if m.startswith(("scipy.optimize", "scipy.special", "scipy.constants"))}


def test_upper_incomplete_gamma_of_half_orders_equals_scipy():
    # source: scipy.special.gammaincc (regularised upper incomplete gamma function)
    t = np.arange(1.0, 400.0)
    a = np.arange(BOYS.M_MAX + 1.0)[:, None] + 0.5
    reference = gammaincc(a, t)
    ours = BOYS._upper_gamma_half_orders(t)
    shown = reference > 1e-290
    assert np.allclose(ours[shown], reference[shown], rtol=1e-12, atol=0)


def test_boys_switch_points_are_those_of_scipy_gammaincc():
    # source: scipy.special.gammaincc — the definition the switch points had before the closed form
    t = np.arange(1.0, 400.0)
    a = np.arange(BOYS.M_MAX + 1.0)[:, None] + 0.5
    assert np.array_equal(BOYS._T_SWITCH, np.argmax(gammaincc(a, t) < 1e-17, axis=1) + 1.0)


@pytest.mark.parametrize("shell", list(sto.SLATER_SHELLS))
@pytest.mark.parametrize("m", range(1, sto.MAX_GAUSSIANS + 1))
def test_shipped_sto_fit_equals_a_fresh_fit(shell, m):
    # The table is a cache of the fitter's own output (scripts/make_sto_fits.py); fitting again must give it.
    exponents, coefficients, overlaps = sto._fit_unit_now(shell, m)
    table = sto._fit_table()[shell][str(m)]
    assert np.allclose(table["exponents"], exponents, rtol=1e-10, atol=0)
    assert np.allclose(np.array(table["coefficients"]), np.array(coefficients), rtol=1e-9, atol=1e-12)
    assert np.allclose(table["overlaps"], overlaps, rtol=1e-12, atol=0)


def test_a_fit_missing_from_the_table_is_made_by_the_fitter(monkeypatch):
    table = sto._fit_table()["1s"]["3"]
    monkeypatch.setattr(sto, "_fit_table", lambda: {})
    sto._fit_unit.cache_clear()
    try:
        exponents, _, overlaps = sto._fit_unit("1s", 3)
    finally:
        sto._fit_unit.cache_clear()
    assert np.allclose(exponents, table["exponents"], rtol=1e-10, atol=0)
    assert overlaps[0] == pytest.approx(table["overlaps"][0], rel=1e-12)
