"""Properties in the report and the JSON: quadrupole, orbital gap, Koopmans, virial ratio, origin choice."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest

import hfcore
from hfcore.analysis import centre_of_mass, dipole_moment, lowdin_charges, orbital_properties, quadrupole_moment
from hfcore.cli import main

from reference import family_shells, reference_mole, reference_rhf

from conftest import INPUTS
TIGHT = dict(energy_tol=1e-12, gradient_tol=1e-9)


@pytest.fixture(scope="module", params=[("water", 0), ("hydroxide", -1)])
def pair(request):
    name, charge = request.param
    mol = hfcore.read_xyz(INPUTS / f"{name}.xyz", charge=charge)
    result = hfcore.run_rhf(mol, hfcore.build_basis(mol, "cc-pvdz"), hfcore.SCFOptions(**TIGHT))
    ref = reference_rhf(reference_mole(mol, family_shells(mol, "cc-pvdz"), spherical=True), conv_tol=1e-12, conv_tol_grad=1e-9)
    return result, ref


def _reference_second_moment(ref, origin):
    mol = ref.mol
    with mol.with_common_origin(origin):
        rr = mol.intor("int1e_rr").reshape(3, 3, mol.nao, mol.nao)
    electronic = np.einsum("abij,ji->ab", rr, ref.make_rdm1())
    r = mol.atom_coords() - origin
    return np.einsum("a,ai,aj->ij", mol.atom_charges(), r, r) - electronic


def test_quadrupole_matches_reference_library(pair):
    result, ref = pair
    origin = centre_of_mass(result.molecule)
    m = _reference_second_moment(ref, origin)
    expected = 0.5 * (3 * m - np.trace(m) * np.eye(3))
    # source: reference library run (PySCF second-moment integrals and its density), Buckingham definition
    np.testing.assert_allclose(quadrupole_moment(result), expected, atol=1e-6, rtol=0)
    # source: exact property — the Buckingham quadrupole is traceless and symmetric
    q = quadrupole_moment(result)
    assert np.trace(q) == pytest.approx(0.0, abs=1e-10)
    np.testing.assert_allclose(q, q.T, atol=1e-12)


def test_dipole_about_the_centre_of_mass_matches_reference_library(pair):
    result, ref = pair
    origin = centre_of_mass(result.molecule)
    mol = ref.mol
    with mol.with_common_origin(origin):
        r = mol.intor("int1e_r")
    expected = mol.atom_charges() @ (mol.atom_coords() - origin) - np.einsum("kij,ji->k", r, ref.make_rdm1())
    # source: reference library run (PySCF dipole integrals about the same origin and its density)
    np.testing.assert_allclose(dipole_moment(result), expected, atol=1e-7, rtol=0)


def test_gap_koopmans_and_virial_match_reference_library(pair):
    result, ref = pair
    props = orbital_properties(result)
    n_occ = result.n_occupied
    eps = ref.mo_energy
    kinetic = float(np.einsum("ij,ji->", ref.mol.intor("int1e_kin"), ref.make_rdm1()))
    # source: reference library run (PySCF orbital energies, kinetic integrals and density)
    assert props.homo_lumo_gap == pytest.approx(eps[n_occ] - eps[n_occ - 1], abs=1e-7)
    assert props.koopmans_ionisation == pytest.approx(-eps[n_occ - 1], abs=1e-7)
    assert props.kinetic == pytest.approx(kinetic, abs=1e-7)
    assert props.virial_ratio == pytest.approx(-(ref.e_tot - kinetic) / kinetic, abs=1e-8)


def test_lowdin_charges_sum_to_the_charge(pair):
    result, _ = pair
    # source: exact property — Löwdin populations keep the electron count
    assert lowdin_charges(result).sum() == pytest.approx(result.molecule.charge, abs=1e-9)


def test_quadrupole_of_ion_shifts_with_origin_as_the_exact_formula_says(pair):
    result, _ = pair
    d = np.array([0.4, -0.3, 0.7])
    o = centre_of_mass(result.molecule)
    q0, mu0 = result.molecule.charge, dipole_moment(result, o)
    # source: exact property — with r' = r - d, the second moment M' = M - mu d^T - d mu^T + Q d d^T
    m0 = hfcore.analysis.second_moment(result, o)
    expected = m0 - np.outer(mu0, d) - np.outer(d, mu0) + q0 * np.outer(d, d)
    np.testing.assert_allclose(hfcore.analysis.second_moment(result, o + d), expected, atol=1e-9)


def test_json_carries_the_properties_and_says_the_origin():
    out, err = io.StringIO(), io.StringIO()
    code = main(["energy", str(INPUTS / "hydroxide.xyz"), "--charge", "-1", "--json", "-"], stdout=out, stderr=err)
    assert code == 0, err.getvalue()
    analysis = json.loads(out.getvalue())["analysis"]
    for key in ("lowdin_charges", "homo_lumo_gap", "koopmans_ionisation", "virial_ratio", "quadrupole_au",
                "quadrupole_debye_angstrom", "origin_bohr"):
        assert key in analysis
    assert analysis["origin_is_centre_of_mass"] is True


def test_origin_flag_is_read_in_the_geometry_units():
    out = io.StringIO()
    code = main(["energy", str(INPUTS / "hydroxide.xyz"), "--charge", "-1", "--origin", "0", "0", "1",
                 "--json", "-"], stdout=out, stderr=io.StringIO())
    assert code == 0
    analysis = json.loads(out.getvalue())["analysis"]
    # source: exact property — 1 Å is 1/0.529177... bohr (CODATA, scipy.constants)
    np.testing.assert_allclose(analysis["origin_bohr"], [0.0, 0.0, 1.0 / 0.529177210903], rtol=1e-9)
    assert analysis["origin_is_centre_of_mass"] is False
