"""h functions (l = 5) in every orbital-side integral path, against the reference library."""

import numpy as np
import pytest
from pyscf.df import incore as df_incore
from reference import reference_mole, unit_norm_scale

from hfcore.basis.components import c2s, cartesian_components, _cartesian_gram
from hfcore.basis.shells import MAX_L, BasisSet, ElementShell, Shell
from hfcore.elements import atomic_number
from hfcore.geometry import Molecule
from hfcore.integrals import (
    DirectERI,
    compute_eri,
    eri_tensor,
    kinetic,
    nuclear_attraction,
    overlap,
    three_center_integrals,
    two_center_integrals,
)

# Two centres: He carries s, p and a one-primitive h shell; Li a d shell and a
# generally contracted h shell (two functions sharing two exponents). Shells
# are listed by increasing l, the order the reference library uses.
_ATOMS = [("He", (0.0, 0.0, 0.0)), ("Li", (0.4, -0.3, 1.7))]
_SHELLS = {
    "He": [
        ElementShell(0, [2.1, 0.4], [[0.5, 0.6]]),
        ElementShell(1, [0.9], [[1.0]]),
        ElementShell(5, [1.3], [[1.0]]),
    ],
    "Li": [
        ElementShell(2, [0.8], [[1.0]]),
        ElementShell(5, [1.6, 0.5], [[0.6, 0.5], [1.0, -0.4]]),
    ],
}
# A fitting set reaching i functions (l = 6), the highest a fitting set may carry.
_AUX_SHELLS = {
    "He": [ElementShell(0, [1.5], [[1.0]]), ElementShell(6, [1.1], [[1.0]])],
    "Li": [ElementShell(3, [0.7], [[1.0]]), ElementShell(5, [0.9, 0.4], [[0.6, 0.5]])],
}
_MOLECULE = Molecule(np.array([atomic_number(s) for s, _ in _ATOMS]), np.array([r for _, r in _ATOMS]))
TOL = 1e-10


def _placed(shells, spherical: bool) -> BasisSet:
    out = [Shell(es.l, es.exponents, es.coefficients, np.array(r), k) for k, (s, r) in enumerate(_ATOMS) for es in shells[s]]
    return BasisSet("h-test", tuple(out), spherical)


class Case:
    def __init__(self, spherical: bool):
        self.spherical = spherical
        self.suffix = "_sph" if spherical else "_cart"
        self.basis = _placed(_SHELLS, spherical)
        self.mol = reference_mole(_MOLECULE, _SHELLS, spherical=spherical)
        self.scale = unit_norm_scale(self.mol)

    def ref1(self, name: str) -> np.ndarray:
        return self.mol.intor(name + self.suffix) * self.scale[:, None] * self.scale[None, :]


@pytest.fixture(scope="module", params=[False, True], ids=["cartesian", "spherical"])
def case(request) -> Case:
    return Case(request.param)


@pytest.fixture(scope="module")
def reference_eri(case) -> np.ndarray:
    s = case.scale
    ref = case.mol.intor("int2e" + case.suffix)
    return np.einsum("ijkl,i,j,k,l->ijkl", ref, s, s, s, s)


def test_orbital_sets_reach_h_functions():
    # source: common practice — cc-pV5Z carries h functions on B–Ar
    assert MAX_L == 5


def test_h_function_count_matches_reference(case):
    # source: reference library run (Mole.nao), same shells: 21 Cartesian or 11 spherical h functions
    assert case.basis.n_functions == case.mol.nao


def test_spherical_h_rows_are_orthonormal():
    t = c2s(5)
    assert t.shape == (11, len(cartesian_components(5)))
    # source: exact property — unit-normalised, mutually orthogonal real solid harmonics
    np.testing.assert_allclose(t @ _cartesian_gram(5) @ t.T, np.eye(11), rtol=0, atol=1e-13)


@pytest.mark.parametrize("name, ours", [("int1e_ovlp", overlap), ("int1e_kin", kinetic)])
def test_h_one_electron_matrices_match_reference_library(case, name, ours):
    # source: reference library run (PySCF int1e_ovlp / int1e_kin), same shells, every element
    np.testing.assert_allclose(ours(case.basis), case.ref1(name), rtol=0, atol=TOL)


def test_h_nuclear_attraction_matches_reference_library(case):
    v = nuclear_attraction(case.basis, case.mol.atom_charges(), case.mol.atom_coords())
    # source: reference library run (PySCF int1e_nuc), same shells and nuclei
    np.testing.assert_allclose(v, case.ref1("int1e_nuc"), rtol=0, atol=TOL)


def test_h_electron_repulsion_matches_reference_library(case, reference_eri):
    # source: reference library run (PySCF int2e), same shells, every element
    np.testing.assert_allclose(eri_tensor(case.basis), reference_eri, rtol=0, atol=TOL)


@pytest.mark.parametrize("path", ["stored", "lean", "direct"])
def test_h_jk_builds_match_the_reference_tensor(case, reference_eri, path):
    rng = np.random.default_rng(11)
    d = rng.standard_normal((case.basis.n_functions,) * 2)
    d = d + d.T
    if path == "direct":
        builder = DirectERI(case.basis, threshold=0.0)
    else:
        builder = compute_eri(case.basis, threshold=0.0, lean=path == "lean")
    j, k = builder.jk(d)
    # source: reference library run (PySCF int2e), contracted by the definitions
    # J_mn = (mn|ls) D_ls and K_mn = (ml|ns) D_ls (exact property)
    np.testing.assert_allclose(j, np.einsum("mnls,ls->mn", reference_eri, d), rtol=0, atol=1e-9)
    np.testing.assert_allclose(k, np.einsum("mlns,ls->mn", reference_eri, d), rtol=0, atol=1e-9)


def test_h_three_and_two_centre_integrals_match_reference_library(case):
    aux = _placed(_AUX_SHELLS, case.spherical)
    aux_mol = reference_mole(_MOLECULE, _AUX_SHELLS, spherical=case.spherical)
    s, t = case.scale, unit_norm_scale(aux_mol)
    n, naux = case.basis.n_functions, aux.n_functions
    ref3 = df_incore.aux_e2(case.mol, aux_mol, "int3c2e" + case.suffix, aosym="s1").reshape(n, n, naux)
    ref3 = np.einsum("ijp,i,j,p->pij", ref3, s, s, t)
    ref2 = aux_mol.intor("int2c2e" + case.suffix) * t[:, None] * t[None, :]
    # source: reference library run (PySCF int3c2e and int2c2e), same shells, every element
    np.testing.assert_allclose(three_center_integrals(case.basis, aux), ref3, rtol=0, atol=TOL)
    np.testing.assert_allclose(two_center_integrals(aux), ref2, rtol=0, atol=TOL)
