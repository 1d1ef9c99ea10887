"""J/K builders taking several densities at once (``jk_multi``): the same matrices as one call per density.

Exact property: J and K are linear in the density, so J of the sum equals the
sum of the J's and each K equals the single-density K, in every J/K mode.
"""

from __future__ import annotations

import numpy as np
import pytest

from hfcore import build_basis, integrals
from hfcore.basis.fitting import fitting_basis
from hfcore.geometry import Molecule
from hfcore.scf.fitted_jk import FittedJK, plan_fitting
from hfcore.scf.jk import DenseJK, IncrementalJK, jk_multi, jk_multi_by_parts

MOLECULE = Molecule(np.array([8, 1]), np.array([[0.0, 0.0, 0.0], [0.0, 0.3, 1.83]]), 0)


@pytest.fixture(scope="module")
def basis():
    return build_basis(MOLECULE, "6-31g")


def _densities(n: int, positive: bool) -> np.ndarray:
    rng = np.random.default_rng(7)
    if positive:
        c = rng.standard_normal((2, n, 4))
        return np.einsum("qik,qjk->qij", c, c)
    d = rng.standard_normal((2, n, n))
    return d + d.transpose(0, 2, 1)


def _builders(basis):
    fit = fitting_basis(MOLECULE, basis, "def2-universal-jkfit")
    return {
        "stored": integrals.compute_eri(basis),
        "stored-lean": integrals.compute_eri(basis, lean=True),
        "stored-lean-2-workers": integrals.compute_eri(basis, lean=True, threads=2),
        "direct": integrals.DirectERI(basis),
        "dense": DenseJK(integrals.eri_tensor(basis)),
        "fitted-stored": FittedJK(basis, fit.basis, plan_fitting(basis, fit.basis, 5, 1 << 30)),
        "fitted-blocked": FittedJK(basis, fit.basis, plan_fitting(basis, fit.basis, 5, 400_000)),
    }


@pytest.mark.parametrize("positive", [True, False])
def test_every_builder_gives_j_of_the_sum_and_k_of_each(basis, positive):
    densities = _densities(basis.n_functions, positive)
    for name, builder in _builders(basis).items():
        j, k = builder.jk_multi(densities)
        j_ref, k_ref = jk_multi_by_parts(builder, densities)  # exact property: linearity
        assert k.shape == densities.shape, name
        assert np.abs(j - j_ref).max() < 1e-11, name
        assert np.abs(k - k_ref).max() < 1e-11, name


def test_a_builder_of_ones_own_with_only_jk_gets_the_fallback(basis):
    store = integrals.compute_eri(basis)

    class OnlyJK:
        calls = 0

        def jk(self, density):
            OnlyJK.calls += 1
            return store.jk(density)

    densities = _densities(basis.n_functions, True)
    j, k = jk_multi(OnlyJK(), densities)
    assert OnlyJK.calls == 2
    j_ref, k_ref = store.jk_multi(densities)
    assert np.abs(j - j_ref).max() < 1e-11 and np.abs(k - k_ref).max() < 1e-11


def test_incremental_multi_builds_follow_the_changes(basis):
    store = integrals.compute_eri(basis)
    incremental = IncrementalJK(integrals.DirectERI(basis), rebuild_interval=3)
    base = _densities(basis.n_functions, True)
    for step in range(5):
        densities = base * (1.0 + 0.05 * step)
        j, k = incremental.jk_multi(densities)
        j_ref, k_ref = store.jk_multi(densities)
        assert np.abs(j - j_ref).max() < 1e-10 and np.abs(k - k_ref).max() < 1e-10
    assert incremental.builds == ["full", "change", "change", "full", "change"]


def test_malformed_stack_is_refused_in_one_line(basis):
    from hfcore.errors import InputError

    with pytest.raises(InputError, match="shape"):
        jk_multi(integrals.compute_eri(basis), np.zeros((basis.n_functions, basis.n_functions)))
