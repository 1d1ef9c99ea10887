"""The half-transform of packed fitted factors and J/K from the thin factors of a transition density."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from hfcore.basis import build_basis
from hfcore.basis.fitting import fitting_basis
from hfcore.geometry import read_xyz
from hfcore.scf.fitted_jk import FittedJK, _half_transform, _half_transform_rows, plan_fitting

INPUTS = Path(__file__).resolve().parent.parent / "inputs"


def _unpacked(b: np.ndarray, n: int) -> np.ndarray:
    first, second = np.tril_indices(n)
    full = np.empty((n, n, b.shape[1]))
    full[first, second] = b
    full[second, first] = b
    return full


@pytest.mark.parametrize("n, n_cols, rank, tile_bytes", [(1, 3, 2, 0), (7, 5, 3, 0), (23, 11, 4, 8 * 23 * 11 * 5), (40, 9, 6, 10**9)])
def test_half_transform_equals_the_contraction_with_the_unpacked_factors(n, n_cols, rank, tile_bytes):
    # Exact property: Σ_ν B_Pμν c_νk with B symmetric in μν, whatever the tile width.
    rng = np.random.default_rng(n)
    b = rng.standard_normal((n * (n + 1) // 2, n_cols))
    c = rng.standard_normal((n, rank))
    expected = np.einsum("mnp,nk->mkp", _unpacked(b, n), c)
    assert np.allclose(_half_transform_rows(b, c, tile_bytes), expected, rtol=0, atol=1e-12)
    assert np.allclose(_half_transform(b, c), expected.transpose(0, 2, 1), rtol=0, atol=1e-12)


@pytest.fixture(scope="module")
def water():
    mol = read_xyz(INPUTS / "water.xyz")
    basis = build_basis(mol, "cc-pvdz")
    return mol, basis, fitting_basis(mol, basis, "cc-pvtz-jkfit").basis


@pytest.mark.parametrize("limit_mib", [4000, 40])
def test_jk_of_thin_factors_equals_jk_of_their_density(water, limit_mib):
    # Exact property: the same fitted integrals contracted two ways (stored, then blocked factors).
    mol, basis, aux = water
    plan = plan_fitting(basis, aux, 5, limit_mib * 2**20)
    assert plan.storage == ("stored" if limit_mib == 4000 else "blocked")
    jk = FittedJK(basis, aux, plan)
    rng = np.random.default_rng(5)
    right = rng.standard_normal((basis.n_functions, 5))
    for _ in range(2):  # the second call reuses the kept half-transform of ``right``
        left = rng.standard_normal((basis.n_functions, 5))
        j, k = jk.jk_transition(left, right)
        j_ref, k_ref = jk.jk(left @ right.T + right @ left.T)
        assert np.allclose(j, j_ref, rtol=0, atol=1e-10)
        assert np.allclose(k, k_ref, rtol=0, atol=1e-10)
    lefts = [rng.standard_normal((basis.n_functions, 5)) for _ in range(3)]
    for (j, k), left in zip(jk.jk_transitions(lefts, right), lefts):
        j_ref, k_ref = jk.jk(left @ right.T + right @ left.T)
        assert np.allclose(j, j_ref, rtol=0, atol=1e-10)
        assert np.allclose(k, k_ref, rtol=0, atol=1e-10)
    jk.release()


class _DensityOnly:
    """The same builder seen through ``jk`` alone (no thin-factor method)."""

    def __init__(self, builder):
        self._builder = builder

    def jk(self, density):
        return self._builder.jk(density)


def test_hessian_products_through_thin_factors_equal_those_through_densities(water):
    # Exact property: the same operator applied two ways (one pass for the block, one J/K build per rotation).
    from hfcore.scf.stability import OrbitalHessian

    mol, basis, aux = water
    jk = FittedJK(basis, aux, plan_fitting(basis, aux, 5, 4000 * 2**20))
    rng = np.random.default_rng(11)
    n = basis.n_functions
    coefficients, _ = np.linalg.qr(rng.standard_normal((n, n)))
    fock = rng.standard_normal((n, n))
    fock = fock + fock.T
    xs = [rng.standard_normal((n - 5, 5)) for _ in range(4)]
    thin = OrbitalHessian(coefficients, fock, 5, jk)
    plain = OrbitalHessian(coefficients, fock, 5, _DensityOnly(jk))
    for ours, theirs in zip(thin.block(xs), [plain(x) for x in xs]):
        assert np.allclose(ours, theirs, rtol=0, atol=1e-9)
    assert thin.products == plain.products == 4
    thin.release()
