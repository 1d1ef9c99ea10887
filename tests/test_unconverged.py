"""An unconverged SCF is a result when asked for one, and an error otherwise."""

from __future__ import annotations

import io

import numpy as np
import pytest

import hfcore
from hfcore.cli import main
from hfcore.errors import ConvergenceError

from conftest import INPUTS


def test_unconverged_run_returns_the_record_when_asked(water_molecule):
    result = hfcore.run_rhf(water_molecule, "sto-3g", hfcore.SCFOptions(max_iterations=2), raise_on_failure=False)
    assert result.converged is False
    assert result.iterations == 2
    assert "converge" in result.message
    assert np.isfinite(result.energy_total)
    assert result.molecule is water_molecule and result.basis is not None


def test_unconverged_run_raises_by_default_with_the_same_record(water_molecule):
    with pytest.raises(ConvergenceError) as info:
        hfcore.run_rhf(water_molecule, "sto-3g", hfcore.SCFOptions(max_iterations=2))
    returned = hfcore.run_rhf(water_molecule, "sto-3g", hfcore.SCFOptions(max_iterations=2), raise_on_failure=False)
    # source: exact property — the same input gives the same digits, raised or returned
    assert info.value.result.energy_total == returned.energy_total
    assert info.value.result.converged is False


def test_converged_run_is_unaffected_by_the_flag(water_molecule):
    strict = hfcore.run_rhf(water_molecule, "sto-3g")
    lenient = hfcore.run_rhf(water_molecule, "sto-3g", raise_on_failure=False)
    # source: exact property — determinism; the flag only matters when the SCF fails
    assert lenient.converged and lenient.energy_total == strict.energy_total


def test_command_line_keeps_exit_code_4(water_molecule):
    err = io.StringIO()
    code = main(["energy", str(INPUTS / "water.xyz"), "--max-iterations", "2"], stdout=io.StringIO(), stderr=err)
    assert code == 4
    assert err.getvalue().startswith("hfcore: error: ") and err.getvalue().count("\n") == 1
