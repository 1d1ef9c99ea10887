"""hfcore.load_arrays reads back what ``hfcore energy --npz`` writes."""

from __future__ import annotations

import io

import numpy as np
import pytest

import hfcore
from hfcore.cli import main

from conftest import INPUTS


def test_arrays_written_by_the_command_line_reproduce_the_energy(tmp_path):
    path = tmp_path / "hf.npz"
    code = main(["energy", str(INPUTS / "hydrogen_fluoride.xyz"), "--basis", "6-31g*", "--npz", str(path), "--quiet"],
                stdout=io.StringIO(), stderr=io.StringIO())
    assert code == 0
    saved = hfcore.load_arrays(path)
    assert isinstance(saved, hfcore.SavedArrays) and saved.eri is not None
    d, h, eri = saved.density, saved.core_hamiltonian, saved.eri
    j = np.einsum("pqrs,rs->pq", eri, d)
    k = np.einsum("prqs,rs->pq", eri, d)
    energy = np.sum(d * h) + 0.5 * np.sum(d * (j - 0.5 * k)) + saved.nuclear_repulsion()
    # source: exact property — E = tr(D H) + ½ tr(D (J - K/2)) + E_nuc with the saved integrals and density
    assert energy == pytest.approx(saved.energy_total, abs=1e-8)
    # source: exact property — H = T + V as saved
    np.testing.assert_allclose(saved.kinetic + saved.nuclear_attraction, h, atol=1e-12)
    assert saved.n_functions == h.shape[0] and saved.spherical is False


def test_a_file_that_is_not_an_array_file_is_an_input_error(tmp_path):
    other = tmp_path / "other.npz"
    np.savez(other, x=np.zeros(3))
    with pytest.raises(hfcore.InputError, match="missing"):
        hfcore.load_arrays(other)
    with pytest.raises(hfcore.InputError, match="cannot read"):
        hfcore.load_arrays(tmp_path / "absent.npz")
