"""The SCF layer as a specification.

Most tests drive :func:`hfcore.scf.solve_rhf` with integral matrices from
the reference library (PySCF), so the algorithm is tested apart from
hfcore's own integrals.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest
from pyscf import gto, scf
from reference import reference_energy, reference_rhf

from hfcore.errors import ConvergenceError, InputError
from hfcore.scf import DIIS, DenseJK, FockStep, Orthogonaliser, SCFIteration, SCFOptions, solve_rhf
from hfcore.scf.guess import fractional_scf

WATER = "O 0 0 0.1173; H 0 0.7572 -0.4692; H 0 -0.7572 -0.4692"
HYDROXIDE = "O 0 0 0; H 0 0 0.97"
AMMONIA = "N 0 0 0.1; H 0 0.94 -0.27; H 0.814 -0.47 -0.27; H -0.814 -0.47 -0.27"


@dataclass
class Matrices:
    mol: gto.Mole
    overlap: np.ndarray
    hcore: np.ndarray
    jk: DenseJK

    def solve(self, options: SCFOptions | None = None, **kwargs):
        return solve_rhf(
            self.overlap, self.hcore, self.jk, self.mol.nelectron, self.mol.energy_nuc(), options, **kwargs
        )

    def reference_energy(self) -> float:
        return reference_energy(self.mol)


def _matrices(atom: str, basis, charge: int = 0) -> Matrices:
    mol = gto.M(atom=atom, basis=basis, charge=charge, verbose=0)
    hcore = mol.intor("int1e_kin") + mol.intor("int1e_nuc")
    return Matrices(mol, mol.intor("int1e_ovlp"), hcore, DenseJK(mol.intor("int2e")))


@pytest.fixture(scope="module")
def water_dz() -> Matrices:
    return _matrices(WATER, "cc-pvdz")


@pytest.fixture(scope="module")
def water_dz_result(water_dz):
    return water_dz.solve()


@pytest.mark.parametrize(
    "atom, basis, charge",
    [(WATER, "cc-pvdz", 0), (AMMONIA, "sto-3g", 0), (HYDROXIDE, "6-31g", -1), ("N 0 0 0; N 0 0 1.0977", "cc-pvdz", 0)],
)
def test_energy_matches_reference_library_with_same_integrals(atom, basis, charge):
    m = _matrices(atom, basis, charge)
    result = m.solve()
    # source: reference library run (PySCF), same integrals, conv_tol 1e-11
    assert result.energy_total == pytest.approx(m.reference_energy(), abs=1e-8)
    assert result.converged


def test_a_foreign_starting_density_reaches_the_reference_energy(water_dz):
    # The reference library's own starting density (its default atomic guess),
    # not one of hfcore's: another start, the same solution.
    start = scf.RHF(water_dz.mol).get_init_guess()
    guessed = water_dz.solve(guess_density=start)
    # source: reference library run (PySCF), same integrals, conv_tol 1e-11
    assert guessed.energy_total == pytest.approx(water_dz.reference_energy(), abs=1e-8)


def test_converged_density_is_idempotent(water_dz_result):
    r = water_dz_result
    d, s = r.density, r.overlap
    # exact property: D S D = 2 D for the closed-shell total density
    np.testing.assert_allclose(d @ s @ d, 2.0 * d, atol=1e-10)


def test_density_holds_the_electron_count(water_dz, water_dz_result):
    # exact property: tr(D S) = N for the total density
    assert np.trace(water_dz_result.density @ water_dz_result.overlap) == pytest.approx(water_dz.mol.nelectron, abs=1e-10)


def test_orbitals_are_s_orthonormal(water_dz_result):
    c, s = water_dz_result.coefficients, water_dz_result.overlap
    # exact property: Cᵀ S C = 1
    np.testing.assert_allclose(c.T @ s @ c, np.eye(c.shape[1]), atol=1e-10)


def test_fock_commutes_with_density_at_convergence(water_dz_result):
    r = water_dz_result
    fds = r.fock @ r.density @ r.overlap
    # exact property: F D S = S D F at self-consistency, here to the order of gradient_tol
    assert np.max(np.abs(fds - fds.T)) < 1e-6


def test_orbitals_diagonalise_the_final_fock(water_dz_result):
    r = water_dz_result
    # exact property: canonical orbitals solve F C = S C ε
    np.testing.assert_allclose(r.fock @ r.coefficients, r.overlap @ r.coefficients * r.orbital_energies, atol=1e-10)


def test_energy_components_match_the_reference_library_on_the_same_density(water_dz):
    # Tight thresholds: the parts are evaluated on the density before the last
    # diagonalisation, the record holds the one after it; they differ to the
    # order of the gradient (1e-7 by default, which moves E1 by about 1e-7 Eh).
    r = water_dz.solve(SCFOptions(energy_tol=1e-12, gradient_tol=1e-10))
    mf = scf.RHF(water_dz.mol)
    # source: reference library run (PySCF): E1 = tr(D H), E2 = ½ tr(D G[D]) with its own
    # J/K build, E_nuc from its geometry — each part on hfcore's converged density
    assert r.energy_one_electron == pytest.approx(np.einsum("ij,ji->", mf.get_hcore(), r.density), abs=1e-9)
    assert r.energy_two_electron == pytest.approx(0.5 * np.einsum("ij,ji->", mf.get_veff(water_dz.mol, r.density), r.density), abs=1e-9)
    assert r.energy_nuclear == pytest.approx(water_dz.mol.energy_nuc(), abs=1e-10)
    assert r.energy_total == pytest.approx(water_dz.reference_energy(), abs=1e-8)


def test_occupations_and_frontier_orbitals(water_dz_result):
    r = water_dz_result
    # exact property: ten electrons fill five orbitals in pairs
    assert r.n_occupied == 5
    assert list(r.occupations[:6]) == [2.0, 2.0, 2.0, 2.0, 2.0, 0.0]
    assert (r.homo, r.lumo) == (4, 5)
    # common practice: a bound closed-shell molecule has a negative HOMO and, here, a positive LUMO
    assert r.homo_energy < 0.0 < r.lumo_energy


def test_history_and_progress_agree(water_dz):
    seen: list[SCFIteration] = []
    result = water_dz.solve(progress=seen.append)
    assert seen == result.history
    assert [h.iteration for h in seen] == list(range(1, result.iterations + 1))
    assert seen[-1].energy == pytest.approx(result.energy_total, abs=1e-12)
    assert abs(seen[-1].delta_e) < result.options.energy_tol
    assert seen[-1].gradient_norm < result.options.gradient_tol


def test_timings_are_recorded(water_dz_result):
    assert set(water_dz_result.timings) == {"guess", "scf", "stability", "total"}
    assert all(t >= 0.0 for t in water_dz_result.timings.values())


@pytest.mark.parametrize(
    "options",
    [
        SCFOptions(accelerator="damping", damping=0.3, max_iterations=300),
        SCFOptions(accelerator="none", max_iterations=300),
        SCFOptions(level_shift=0.5, max_iterations=300),
        SCFOptions(damping=0.5, diis_start=4),
    ],
    ids=["damping", "none", "diis+level-shift", "damping-then-diis"],
)
def test_every_accelerator_reaches_the_same_energy(water_dz, water_dz_result, options):
    result = water_dz.solve(options)
    # exact property: acceleration changes the path, not the fixed point
    assert result.energy_total == pytest.approx(water_dz_result.energy_total, abs=1e-9)
    np.testing.assert_allclose(result.orbital_energies, water_dz_result.orbital_energies, atol=1e-6)


def test_diis_needs_fewer_iterations_than_plain_roothaan(water_dz, water_dz_result):
    plain = water_dz.solve(SCFOptions(accelerator="none", max_iterations=300))
    # common practice: DIIS shortens the iteration markedly
    assert water_dz_result.iterations < plain.iterations


def test_near_linear_dependence_is_dropped_and_counted(monkeypatch):
    basis = {"H": gto.basis.parse("H S\n 1.0 1.0\nH S\n 1.00002 1.0\nH S\n 0.2 1.0"), "O": "cc-pvdz"}
    m = _matrices(WATER, basis)
    result = m.solve()
    assert result.n_dropped == 2  # one near-duplicate s function on each H
    assert result.coefficients.shape == (m.mol.nao, m.mol.nao - 2)
    monkeypatch.setattr(scf.hf, "remove_overlap_zero_eigenvalue", True)
    monkeypatch.setattr(scf.hf, "overlap_zero_eigenvalue_threshold", 1e-7)
    # source: reference library run (PySCF) with canonical orthogonalisation at the same threshold
    assert result.energy_total == pytest.approx(reference_energy(m.mol), abs=1e-8)


def test_orthogonaliser_gives_an_orthonormal_basis(water_dz):
    ortho = Orthogonaliser.from_overlap(water_dz.overlap, 1e-7)
    x = ortho.transform
    # exact property: Xᵀ S X = 1
    np.testing.assert_allclose(x.T @ water_dz.overlap @ x, np.eye(ortho.n_orbitals), atol=1e-12)
    assert ortho.n_dropped == 0


def test_non_convergence_raises_with_the_last_state(water_dz):
    with pytest.raises(ConvergenceError) as info:
        water_dz.solve(SCFOptions(max_iterations=2))
    result = info.value.result
    last = result.history[-1]
    message = str(info.value)
    assert "2 iterations" in message
    assert f"{last.energy:.10f}" in message
    assert f"{last.gradient_norm:.3e}" in message
    assert not result.converged and result.iterations == 2


@pytest.mark.parametrize(
    "kwargs",
    [
        {"energy_tol": 0.0},
        {"energy_tol": -1e-8},
        {"gradient_tol": float("nan")},
        {"max_iterations": 0},
        {"max_iterations": 2.5},
        {"max_iterations": True},
        {"max_diis_size": 1},
        {"diis_start": 0},
        {"lindep_threshold": 1.5},
        {"screening": -1e-12},
        {"damping": 1.0},
        {"damping": -0.1},
        {"level_shift": -0.5},
        {"accelerator": "newton"},
        {"accelerator": "damping"},
        {"accelerator": "none", "damping": 0.5},
        {"direct": "yes"},
    ],
)
def test_bad_options_are_refused(kwargs):
    with pytest.raises(InputError):
        SCFOptions(**kwargs)


def test_accelerator_name_is_case_insensitive():
    assert SCFOptions(accelerator="DIIS").accelerator == "diis"


def test_odd_electron_count_is_refused(water_dz):
    with pytest.raises(InputError, match="even"):
        solve_rhf(water_dz.overlap, water_dz.hcore, water_dz.jk, 9, 0.0)


def test_guess_of_wrong_shape_is_refused(water_dz):
    with pytest.raises(InputError, match="guess density"):
        water_dz.solve(guess_density=np.eye(3))


def test_diis_extrapolates_to_zero_error():
    # exact property: errors e and -e combine with weights ½, ½ to zero error
    diis = DIIS(max_size=4)
    e = np.array([[0.0, 1.0], [-1.0, 0.0]])
    f1, f2 = np.diag([1.0, 2.0]), np.diag([3.0, 4.0])
    diis.next_fock(FockStep(1, f1, e, np.zeros((2, 2))))
    out = diis.next_fock(FockStep(2, f2, -e, np.zeros((2, 2))))
    np.testing.assert_allclose(out, 0.5 * (f1 + f2), atol=1e-14)
    assert diis.subspace_size == 2


def test_fractional_atomic_scf_matches_the_spherical_average():
    mol = gto.M(atom="C 0 0 0", basis="cc-pvdz", spin=2, verbose=0)
    density = fractional_scf(
        mol.intor("int1e_ovlp"), mol.intor("int1e_kin") + mol.intor("int1e_nuc"), DenseJK(mol.intor("int2e")), 6
    )
    # exact property: the density holds the atom's electrons
    assert np.trace(density @ mol.intor("int1e_ovlp")) == pytest.approx(6.0, abs=1e-10)
    p = slice(3, 6)  # the first p shell: x, y, z share the two 2p electrons evenly
    # exact property: a spherically averaged density has equal p_x, p_y, p_z blocks
    np.testing.assert_allclose(np.diag(density)[p], np.diag(density)[p][0], atol=1e-10)


# --- the driver on a molecule, with hfcore's own integrals and STO-3G ----------

# Our own geometries in ångström: (XYZ body, charge).
DRIVER_MOLECULES = {
    "H2O": ("O 0 0 0.1173\nH 0 0.7572 -0.4692\nH 0 -0.7572 -0.4692", 0),
    "NH3": ("N 0 0 0.1\nH 0 0.94 -0.27\nH 0.814 -0.47 -0.27\nH -0.814 -0.47 -0.27", 0),
    "CH4": ("C 0 0 0\nH 0.629 0.629 0.629\nH -0.629 -0.629 0.629\nH -0.629 0.629 -0.629\nH 0.629 -0.629 -0.629", 0),
    "HF": ("F 0 0 0\nH 0 0 0.917", 0),
    "N2": ("N 0 0 0\nN 0 0 1.0977", 0),
    "CO": ("C 0 0 0\nO 0 0 1.128", 0),
    "H3O+": ("O 0 0 0.1\nH 0 0.95 -0.25\nH 0.82 -0.475 -0.25\nH -0.82 -0.475 -0.25", 1),
    "OH-": ("O 0 0 0\nH 0 0 0.97", -1),
}


def _driver_molecule(name: str):
    from hfcore.geometry import parse_xyz

    body, charge = DRIVER_MOLECULES[name]
    return parse_xyz(f"{body.count(chr(10)) + 1}\n{name}\n{body}\n", source=name, charge=charge)


def _reference_iterations(name: str) -> int:
    body, charge = DRIVER_MOLECULES[name]
    mol = gto.M(atom=body.replace("\n", ";"), basis="sto-3g", charge=charge, verbose=0)
    cycles = []
    reference_rhf(mol, conv_tol=1e-10, conv_tol_grad=1e-7, callback=lambda env: cycles.append(env["cycle"]))
    return cycles[-1] + 1


@pytest.mark.parametrize("name", list(DRIVER_MOLECULES))
def test_sad_diis_needs_no_more_iterations_than_the_reference_library(name):
    from hfcore.scf import run_rhf

    result = run_rhf(_driver_molecule(name), "sto-3g")
    # source: reference library run (PySCF), its default guess and DIIS, conv_tol 1e-10, conv_tol_grad 1e-7
    assert result.iterations <= _reference_iterations(name)


def _hfcore_matrices(molecule, basis):
    from hfcore import integrals

    hcore = integrals.kinetic(basis) + integrals.nuclear_attraction(
        basis, molecule.atomic_numbers.astype(float), molecule.coordinates
    )
    return integrals.overlap(basis), hcore, integrals.compute_eri(basis)


@pytest.mark.parametrize("name", ["H3O+", "OH-"])
def test_ions_start_from_the_right_electron_count(name):
    from hfcore.basis import build_basis
    from hfcore.scf import sad_density
    from hfcore.scf.solver import _initial_density, _Problem

    molecule = _driver_molecule(name)
    basis = build_basis(molecule, "sto-3g")
    overlap, hcore, jk = _hfcore_matrices(molecule, basis)
    guess = sad_density(basis, molecule.atomic_numbers)
    # exact property: the neutral-atom guess holds sum(Z) electrons, not N
    assert np.trace(guess @ overlap) == pytest.approx(molecule.atomic_numbers.sum(), abs=1e-10)
    problem = _Problem(overlap, hcore, jk, molecule.n_electrons // 2, Orthogonaliser.from_overlap(overlap, 1e-7))
    start, _ = _initial_density(problem, guess)
    # exact property: after the first diagonalisation tr(D S) = N
    assert np.trace(start @ overlap) == pytest.approx(molecule.n_electrons, abs=1e-10)


def test_valence_averaged_atom_shares_its_valence_electrons_evenly():
    mol = gto.M(atom="C 0 0 0", basis="cc-pvdz", spin=2, verbose=0)
    s = mol.intor("int1e_ovlp")
    density = fractional_scf(s, mol.intor("int1e_kin") + mol.intor("int1e_nuc"), DenseJK(mol.intor("int2e")), 6, 2)
    values, vectors = np.linalg.eigh(s)
    root = vectors @ np.diag(np.sqrt(values)) @ vectors.T
    natural = np.sort(np.linalg.eigvalsh(root @ density @ root))[::-1]
    # exact property of the construction: occupations 2 (1s), 1 (2s and three 2p), 0 (the rest)
    np.testing.assert_allclose(natural, [2.0, 1.0, 1.0, 1.0, 1.0] + [0.0] * (natural.size - 5), atol=1e-8)


def test_run_rhf_guesses_agree_and_record_their_timings():
    from hfcore.scf import run_rhf

    molecule = _driver_molecule("H2O")
    sad = run_rhf(molecule, "sto-3g")
    core = run_rhf(molecule, "sto-3g", guess="core")
    given = run_rhf(molecule, "sto-3g", guess=sad.density)
    # exact property: the converged energy does not depend on the start
    assert core.energy_total == pytest.approx(sad.energy_total, abs=1e-9)
    assert given.energy_total == pytest.approx(sad.energy_total, abs=1e-9)
    assert given.iterations <= 2
    assert set(sad.timings) == {"integrals", "guess", "scf", "stability", "total"}
    assert sad.molecule is molecule and sad.basis.n_functions == 7


def test_run_rhf_convergence_error_carries_the_molecule():
    from hfcore.scf import run_rhf

    molecule = _driver_molecule("H2O")
    with pytest.raises(ConvergenceError, match="did not converge in 1 iterations") as info:
        run_rhf(molecule, "sto-3g", SCFOptions(max_iterations=1))
    assert info.value.result.molecule is molecule
    assert "integrals" in info.value.result.timings


@pytest.mark.parametrize(
    "kwargs, match",
    [({"guess": "huckel"}, "unknown SCF guess"), ({"guess": np.eye(2)}, "shape")],
)
def test_run_rhf_refuses_what_it_cannot_do(kwargs, match):
    from hfcore.scf import run_rhf

    with pytest.raises(InputError, match=match):
        run_rhf(_driver_molecule("H2O"), "sto-3g", **kwargs)


def test_run_rhf_refuses_an_open_shell():
    from hfcore.scf import run_rhf

    with pytest.raises(InputError, match="even"):
        run_rhf(_driver_molecule("H2O").with_charge(1), "sto-3g")


def test_sad_from_the_molecular_integrals_equals_sad_from_atomic_ones(monkeypatch):
    from hfcore import integrals
    from hfcore.basis import build_basis
    from hfcore.geometry import Molecule
    from hfcore.scf import guess

    molecule = Molecule(np.array([8, 1]), np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 1.83]]), -1)
    basis = build_basis(molecule, "cc-pvdz")
    monkeypatch.setattr(guess, "_CACHE", {})
    own = guess.sad_density(basis, molecule.atomic_numbers)
    monkeypatch.setattr(guess, "_CACHE", {})
    shared = guess.sad_density(basis, molecule.atomic_numbers, integrals.compute_eri(basis))
    # exact property: a density confined to one atom needs only that atom's integrals
    np.testing.assert_allclose(shared, own, atol=1e-9)


def test_a_ready_accelerator_can_be_plugged_in(water_dz, water_dz_result):
    from hfcore.scf import Chain, LevelShift

    result = water_dz.solve(accelerator=Chain([DIIS(max_size=4), LevelShift(0.3)]))
    # exact property: acceleration changes the path, not the fixed point
    assert result.energy_total == pytest.approx(water_dz_result.energy_total, abs=1e-9)
    assert max(h.diis_size for h in result.history) == 4
