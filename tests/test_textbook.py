"""The minimal-basis H2 and HeH+ worked examples, run through the command line.

Source of every expected value: A. Szabo and N. S. Ostlund, *Modern Quantum
Chemistry* (Dover, 1996), chapter 3, the minimal-basis H2 and HeH+
calculations — values from memory (see ../shared/checks.md). Tolerances are
set by the digits the book prints: four decimals for the H2 energies
(1e-4 Eh), three for its orbital energies (1e-3 Eh); the HeH+ energies
are printed to six decimals but the book rounds its contraction
coefficients to six digits, so a run with exactly fitted contractions lands
within about 1e-5 Eh (2e-5 Eh allowed).
"""

from __future__ import annotations

import json

import pytest
from conftest import hfcore_process


def energy_json(tmp_path, xyz: str, *args: str) -> dict:
    (tmp_path / "mol.xyz").write_text(xyz)
    proc = hfcore_process("energy", "mol.xyz", "--basis", "sto-3g", "--units", "bohr", "--json", "-", *args, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


@pytest.fixture(scope="module")
def h2(tmp_path_factory) -> dict:
    # No --zeta: the book's zeta(H) = 1.24 is hfcore's default H exponent, so the default run must match it.
    return energy_json(tmp_path_factory.mktemp("h2"), "2\nH2, R = 1.4 bohr\nH 0 0 0\nH 0 0 1.4\n")


@pytest.fixture(scope="module")
def heh(tmp_path_factory) -> dict:
    return energy_json(
        tmp_path_factory.mktemp("heh"),
        "2\nHeH+, R = 1.4632 bohr\nHe 0 0 0\nH 0 0 1.4632\n",
        "--zeta",
        "He=2.0925",
        "--charge",
        "1",
    )


def test_h2_uses_two_basis_functions_and_two_electrons(h2):
    # source: Szabo & Ostlund (1996), ch. 3 — the minimal basis is one 1s function per atom
    assert h2["basis"]["n_functions"] == 2
    assert h2["molecule"]["n_electrons"] == 2
    assert h2["scf"]["converged"] is True


def test_h2_electronic_energy(h2):
    # source: Szabo & Ostlund (1996), ch. 3, H2 STO-3G at R = 1.4 bohr (from memory)
    assert h2["energy"]["electronic"] == pytest.approx(-1.8310, abs=1e-4)


def test_h2_total_energy(h2):
    # source: Szabo & Ostlund (1996), ch. 3, H2 STO-3G at R = 1.4 bohr (from memory)
    assert h2["energy"]["total"] == pytest.approx(-1.1167, abs=1e-4)


def test_h2_orbital_energies(h2):
    # source: Szabo & Ostlund (1996), ch. 3, H2 STO-3G orbital energies (from memory)
    assert h2["orbitals"]["energies"] == pytest.approx([-0.578, 0.670], abs=1e-3)
    assert h2["orbitals"]["occupations"] == [2.0, 0.0]


def test_heh_cation_electronic_energy(heh):
    # source: Szabo & Ostlund (1996), ch. 3, HeH+ STO-3G, zeta(He) = 2.0925, zeta(H) = 1.24, R = 1.4632 bohr (from memory)
    assert heh["energy"]["electronic"] == pytest.approx(-4.227529, abs=2e-5)


def test_heh_cation_total_energy(heh):
    # source: Szabo & Ostlund (1996), ch. 3, HeH+ STO-3G, zeta(He) = 2.0925, zeta(H) = 1.24, R = 1.4632 bohr (from memory)
    assert heh["energy"]["total"] == pytest.approx(-2.860662, abs=2e-5)


def test_heh_cation_charge_and_nuclear_repulsion(heh):
    assert heh["molecule"]["charge"] == 1 and heh["molecule"]["n_electrons"] == 2
    # source: exact property — Z_He Z_H / R = 2 / 1.4632 hartree
    assert heh["energy"]["nuclear_repulsion"] == pytest.approx(2 / 1.4632, rel=1e-14)
