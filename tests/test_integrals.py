"""Integral layer: one- and two-electron integrals against the reference library, and exact properties."""

import numpy as np
import pytest
from pyscf import gto
from pyscf.df import incore as df_incore
from reference import reference_mole, unit_norm_scale

from hfcore.basis.components import _cartesian_gram, cartesian_components
from hfcore.basis.shells import BasisSet, ElementShell, Shell
from hfcore.integrals import (
    c2s,
    compute_eri,
    eri_tensor,
    kinetic,
    multipole,
    nuclear_attraction,
    overlap,
    schwarz_bounds,
)
from hfcore.elements import atomic_number
from hfcore.errors import InputError, ResourceError
from hfcore.geometry import Molecule
from hfcore.integrals import store as eri_store
from hfcore.integrals.eri_pairs import prepare_pairs, shell_batches
from hfcore.integrals.tiles import batch_pairs, iter_tiles

# Three centres carrying s, p, d, f and g shells; He's s shell and Be's d
# shell are generally contracted (two functions sharing exponents). He's
# second p shell shares the exponents of its s shell (like an sp shell) and
# Li's second s shell those of its f shell, so shell families are exercised.
# Shells are listed by increasing l, the order the reference library uses.
_ATOMS = [("He", (0.0, 0.0, 0.0)), ("Li", (0.3, -0.4, 1.9)), ("Be", (-1.2, 0.8, 0.5))]
_SHELLS = {
    "He": [
        ElementShell(0, [3.1, 0.6, 0.15], [[0.3, 0.5, 0.4], [0.0, -0.6, 1.0]]),
        ElementShell(1, [1.1, 0.3], [[0.6, 0.5]]),
        ElementShell(1, [3.1, 0.6, 0.15], [[0.2, 0.6, 0.5]]),
        ElementShell(2, [0.8], [[1.0]]),
    ],
    "Li": [
        ElementShell(0, [1.3], [[1.0]]),
        ElementShell(0, [0.9, 0.35], [[0.3, 0.8]]),
        ElementShell(1, [0.5], [[1.0]]),
        ElementShell(3, [0.9, 0.35], [[0.4, 0.7]]),
    ],
    "Be": [
        ElementShell(0, [0.7], [[1.0]]),
        ElementShell(2, [1.5, 0.4], [[0.5, 0.6], [1.0, -0.3]]),
        ElementShell(4, [1.2], [[1.0]]),
    ],
}
_MOLECULE = Molecule(np.array([atomic_number(sym) for sym, _ in _ATOMS]), np.array([r for _, r in _ATOMS]))
TOL = 1e-10


def _hfcore_basis(atoms, shells, spherical: bool) -> BasisSet:
    placed = [
        Shell(es.l, es.exponents, es.coefficients, np.array(r), k, es.label)
        for k, (sym, r) in enumerate(atoms)
        for es in shells[sym]
    ]
    return BasisSet("test", tuple(placed), spherical)


class Case:
    """hfcore basis, reference molecule and the rescaling to unit-norm functions."""

    def __init__(self, spherical: bool):
        self.spherical = spherical
        self.basis = _hfcore_basis(_ATOMS, _SHELLS, spherical)
        self.mol = reference_mole(_MOLECULE, _SHELLS, spherical=spherical)
        self.suffix = "_sph" if spherical else "_cart"
        self.scale = unit_norm_scale(self.mol)

    def ref1(self, name: str) -> np.ndarray:
        m = self.mol.intor(name + self.suffix)
        return m * self.scale[..., :, None] * self.scale[..., None, :]


@pytest.fixture(scope="module", params=[False, True], ids=["cartesian", "spherical"])
def case(request) -> Case:
    return Case(request.param)


@pytest.fixture(scope="module")
def dense_eri(case) -> np.ndarray:
    return eri_tensor(case.basis)


@pytest.fixture(scope="module")
def store(case):
    return compute_eri(case.basis, threshold=0.0)


@pytest.fixture(scope="module")
def reference_eri(case) -> np.ndarray:
    """The reference library's (PySCF int2e) tensor, rescaled to hfcore's unit-norm functions."""
    s = case.scale
    ref = case.mol.intor("int2e" + case.suffix)
    return ref * s[:, None, None, None] * s[None, :, None, None] * s[None, None, :, None] * s[None, None, None, :]


def _small_basis() -> BasisSet:
    atoms = [("Li", (0.0, 0.0, 0.0)), ("Li", (0.0, 1.0, 2.0))]
    return _hfcore_basis(atoms, {"Li": [_SHELLS["Li"][0], _SHELLS["Li"][2], _SHELLS["He"][3]]}, True)


def test_function_count_matches_reference(case):
    # source: reference library run (PySCF Mole.nao), same shells
    assert case.basis.n_functions == case.mol.nao


def test_overlap_matches_reference_library(case):
    # source: reference library run (PySCF int1e_ovlp), same shells
    np.testing.assert_allclose(overlap(case.basis), case.ref1("int1e_ovlp"), rtol=0, atol=TOL)


def test_kinetic_matches_reference_library(case):
    # source: reference library run (PySCF int1e_kin), same shells
    np.testing.assert_allclose(kinetic(case.basis), case.ref1("int1e_kin"), rtol=0, atol=TOL)


def test_nuclear_attraction_matches_reference_library(case):
    v = nuclear_attraction(case.basis, case.mol.atom_charges(), case.mol.atom_coords())
    # source: reference library run (PySCF int1e_nuc), same shells and nuclei
    np.testing.assert_allclose(v, case.ref1("int1e_nuc"), rtol=0, atol=TOL)


def test_dipole_integrals_match_reference_library(case):
    origin = (0.1, 0.2, -0.3)
    with case.mol.with_common_orig(origin):
        ref = case.ref1("int1e_r")
    # source: reference library run (PySCF int1e_r about the same origin), same shells
    np.testing.assert_allclose(multipole(case.basis, 1, origin), ref, rtol=0, atol=TOL)


def test_second_moments_match_reference_library(case):
    origin = (-0.2, 0.4, 0.1)
    with case.mol.with_common_orig(origin):
        ref = case.ref1("int1e_rr").reshape(3, 3, case.mol.nao, case.mol.nao)
    axes = [[ax for ax in range(3) for _ in range(power[ax])] for power in cartesian_components(2)]
    expected = np.stack([ref[i, j] for i, j in axes])
    # source: reference library run (PySCF int1e_rr), components xx, xy, xz, yy, yz, zz
    np.testing.assert_allclose(multipole(case.basis, 2, origin), expected, rtol=0, atol=TOL)


def test_cross_overlap_matches_reference_library(case):
    other_shells = {
        "He": [ElementShell(0, [0.9], [[1.0]]), ElementShell(2, [0.5], [[1.0]])],
        "Li": [ElementShell(1, [0.7, 0.2], [[0.5, 0.5]])],
        "Be": [ElementShell(3, [0.6], [[1.0]])],
    }
    other = _hfcore_basis(_ATOMS, other_shells, case.spherical)
    other_mol = reference_mole(_MOLECULE, other_shells, spherical=case.spherical)
    other_scale = unit_norm_scale(other_mol)
    ref = gto.intor_cross("int1e_ovlp" + case.suffix, case.mol, other_mol) * case.scale[:, None] * other_scale[None, :]
    # source: reference library run (PySCF intor_cross int1e_ovlp), same shells
    np.testing.assert_allclose(overlap(case.basis, other), ref, rtol=0, atol=TOL)


def test_electron_repulsion_matches_reference_library(dense_eri, reference_eri):
    # source: reference library run (PySCF int2e), same shells, every element
    np.testing.assert_allclose(dense_eri, reference_eri, rtol=0, atol=TOL)


def test_electron_repulsion_does_not_depend_on_the_order_of_the_shells(case, dense_eri):
    # The packed store computes each unique quartet once, in a canonical shell
    # order, and the unpacking copies it to its symmetric partners, so the
    # symmetry of one tensor says nothing. With the shells listed in reverse
    # every quartet is computed in another order (bra and ket, and the pairs
    # within them, swapped), by other recursion paths.
    shells = case.basis.shells[::-1]
    reversed_basis = BasisSet("reversed", shells, case.spherical)
    off = case.basis.shell_offsets
    order = np.concatenate([np.arange(off[i], off[i + 1]) for i in reversed(range(case.basis.n_shells))])
    expected = dense_eri[np.ix_(order, order, order, order)]
    # source: exact property — (ij|kl) is a property of the four functions, not of their labels
    np.testing.assert_allclose(eri_tensor(reversed_basis), expected, rtol=0, atol=1e-12)


def test_store_jk_equals_contraction_of_the_reference_tensor(case, store, reference_eri):
    rng = np.random.default_rng(7)
    d = rng.standard_normal((case.basis.n_functions,) * 2)
    d = d + d.T
    j, k = store.jk(d)
    # source: reference library run (PySCF int2e), contracted by the definitions
    # J_mn = sum (mn|ls) D_ls, K_mn = sum (ml|ns) D_ls (exact property)
    np.testing.assert_allclose(j, np.einsum("mnls,ls->mn", reference_eri, d), rtol=0, atol=1e-9)
    np.testing.assert_allclose(k, np.einsum("mlns,ls->mn", reference_eri, d), rtol=0, atol=1e-9)


def test_store_reports_its_memory():
    basis = _small_basis()
    store = compute_eri(basis)
    n = basis.n_functions
    npair = n * (n + 1) // 2
    # source: exact property: npair(npair+1)/2 unique quartets, 8 bytes each
    assert store.nbytes == 8 * npair * (npair + 1) // 2
    store.jk(np.eye(n))
    assert store.nbytes == 2 * 8 * npair * (npair + 1) // 2


def test_progress_reports_fractions_up_to_one():
    seen = []
    compute_eri(_small_basis(), progress=seen.append)
    assert seen and seen[-1] == pytest.approx(1.0)
    assert all(b >= a for a, b in zip(seen, seen[1:]))


def test_schwarz_bounds_bound_every_integral(case, reference_eri):
    q = schwarz_bounds(case.basis)
    off = case.basis.shell_offsets
    # source: reference library run (PySCF int2e) for the integrals being bounded
    e = np.abs(reference_eri)
    n = case.basis.n_shells
    # Largest |(ab|cd)| per shell quartet.
    block = np.maximum.reduceat(np.maximum.reduceat(np.maximum.reduceat(np.maximum.reduceat(e, off[:-1], 0), off[:-1], 1), off[:-1], 2), off[:-1], 3)
    bound = q[:, :, None, None] * q[None, None, :, :]
    # source: exact property (Cauchy-Schwarz inequality for the Coulomb metric)
    assert np.all(block <= bound * (1 + 1e-10) + 1e-12)
    diag = np.array([[block[a, b, a, b] for b in range(n)] for a in range(n)])
    # the bound is the tightest of its kind: sqrt of the largest diagonal (ab|ab)
    np.testing.assert_allclose(q, np.sqrt(diag), rtol=1e-9, atol=1e-12)


def _spread_case():
    atoms = [("H", (0.0, 0.0, 0.0)), ("H", (0.0, 0.0, 7.0)), ("H", (0.0, 9.0, 14.0)), ("H", (12.0, 9.0, 14.0))]
    shells = {"H": [ElementShell(0, [40.0, 6.0, 1.2, 0.3], [[0.1, 0.3, 0.5, 0.3]]), ElementShell(1, [2.0, 0.4], [[0.5, 0.6]]), ElementShell(2, [1.0], [[1.0]])]}
    return _hfcore_basis(atoms, shells, True)


def test_screening_at_1e12_moves_j_and_k_by_less_than_1e10():
    basis = _spread_case()
    exact = compute_eri(basis, threshold=0.0)
    screened = compute_eri(basis, threshold=1e-12)
    # The screening must actually skip something here, or the test says nothing.
    assert np.count_nonzero(screened.packed == 0.0) > np.count_nonzero(exact.packed == 0.0)
    rng = np.random.default_rng(3)
    c = rng.standard_normal((basis.n_functions, 5))
    d = c @ c.T
    for a, b in zip(exact.jk(d), screened.jk(d)):
        # source: design notes, common practice: Schwarz screening at 1e-12 must not move results beyond 1e-10
        assert np.max(np.abs(a - b)) < 1e-10


def test_negative_threshold_is_rejected():
    with pytest.raises(InputError):
        compute_eri(_small_basis(), threshold=-1.0)


def test_dense_tensor_beyond_the_memory_limit_is_refused(monkeypatch):
    store = compute_eri(_small_basis())
    monkeypatch.setattr(eri_store, "DENSE_LIMIT_BYTES", 1024)
    with pytest.raises(ResourceError):
        store.to_dense()


def test_spherical_transform_rows_are_orthonormal():
    for l in range(5):
        t = c2s(l)
        # source: exact property: real solid harmonics of one shell are orthonormal
        np.testing.assert_allclose(t @ _cartesian_gram(l) @ t.T, np.eye(2 * l + 1), atol=1e-13)


_AUX_SHELLS = {
    "He": [ElementShell(0, [2.0, 0.5], [[0.6, 0.5]]), ElementShell(2, [0.9], [[1.0]])],
    "Li": [ElementShell(1, [0.7, 0.2], [[0.5, 0.5]]), ElementShell(4, [0.6], [[1.0]])],
    "Be": [ElementShell(3, [0.6, 0.3], [[0.7, 0.4], [0.2, 0.9]])],
}


def _tile_pass(first, second=None, shape=None):
    """Integrals of a whole unscreened tile pass, each tile written under its pidx labels."""
    out = np.zeros(shape)
    for g1, g2 in batch_pairs(first, second):
        for tile in iter_tiles(g1, g2, 0.0):
            block = tile.integrals().reshape(tile.bra.pidx[tile.brows].size, -1)
            rows, cols = tile.bra.pidx[tile.brows].ravel(), tile.ket.pidx[tile.krows].ravel()
            if second is not None and any(tile.bra is b for b in second):
                rows, cols, block = cols, rows, block.T
            out[rows[:, None], cols[None, :]] = block
            if second is None:
                out[cols[:, None], rows[None, :]] = block.T
    return out


def test_three_centre_tiles_match_reference_library(case):
    aux = _hfcore_basis(_ATOMS, _AUX_SHELLS, case.spherical)
    aux_mol = reference_mole(_MOLECULE, _AUX_SHELLS, spherical=case.spherical)
    n, naux = case.basis.n_functions, aux.n_functions
    packed = _tile_pass(prepare_pairs(case.basis, 0.0), shell_batches(aux.shells, case.spherical),
                        (n * (n + 1) // 2, naux))
    i, j = np.tril_indices(n)
    ours = np.zeros((n, n, naux))
    ours[i, j], ours[j, i] = packed, packed
    s, t = case.scale, unit_norm_scale(aux_mol)
    ref = df_incore.aux_e2(case.mol, aux_mol, "int3c2e" + case.suffix, aosym="s1").reshape(n, n, naux)
    ref = ref * s[:, None, None] * s[None, :, None] * t[None, None, :]
    # source: reference library run (PySCF int3c2e), same shells, every element
    np.testing.assert_allclose(ours, ref, rtol=0, atol=TOL)


def test_two_centre_tiles_match_reference_library(case):
    aux = _hfcore_basis(_ATOMS, _AUX_SHELLS, case.spherical)
    aux_mol = reference_mole(_MOLECULE, _AUX_SHELLS, spherical=case.spherical)
    naux = aux.n_functions
    ours = _tile_pass(shell_batches(aux.shells, case.spherical), shape=(naux, naux))
    t = unit_norm_scale(aux_mol)
    ref = aux_mol.intor("int2c2e" + case.suffix) * t[:, None] * t[None, :]
    # source: reference library run (PySCF int2c2e), same shells, every element
    np.testing.assert_allclose(ours, ref, rtol=0, atol=TOL)
