"""Specification of the fitted STO-nG sets: the fitter, the standard exponents, the family, the plot."""

from __future__ import annotations

import math
import os
import sys

import numpy as np
import pytest
from conftest import assert_valid_png
from scipy.integrate import quad

from hfcore import elements
from hfcore.basis import build_basis, get_family
from hfcore.basis.slater_exponents import STANDARD_EXPONENTS
from hfcore.basis.sto import SLATER_SHELLS, STOFamily, family_for_name, fit_sto, parse_zeta_overrides
from hfcore.errors import BasisError, InputError
from hfcore.geometry import parse_xyz

REL = 1e-5

# source: Szabo & Ostlund, Modern Quantum Chemistry (1996), ch. 3, table of
# least-squares fits to a 1s Slater function with ζ = 1 (from memory, via checks.md)
TEXTBOOK_1S = {
    1: ([0.270950], [1.0]),
    2: ([0.851819, 0.151623], [0.430129, 0.678914]),
    3: ([2.227660, 0.405771, 0.109818], [0.154329, 0.535328, 0.444635]),
}


@pytest.mark.parametrize("n", sorted(TEXTBOOK_1S))
def test_1s_fit_reproduces_textbook_table(n):
    fit = fit_sto("1s", n)
    exponents, coefficients = TEXTBOOK_1S[n]
    # source: Szabo & Ostlund (1996), ch. 3 table (from memory)
    np.testing.assert_allclose(fit.exponents, exponents, rtol=REL)
    np.testing.assert_allclose(fit.coefficients[0], coefficients, rtol=REL)


def test_2sp_sto3g_reproduces_1969_expansion():
    fit = fit_sto("2sp", 3)
    # source: Hehre, Stewart & Pople, J. Chem. Phys. 51, 2657 (1969), STO-3G 2sp, ζ = 1 (from memory)
    np.testing.assert_allclose(fit.exponents, [0.994203, 0.231031, 0.0751386], rtol=REL)
    np.testing.assert_allclose(fit.coefficients[0], [-0.0999672, 0.399513, 0.700115], rtol=REL)
    np.testing.assert_allclose(fit.coefficients[1], [0.155916, 0.607684, 0.391957], rtol=REL)


def test_3sp_sto3g_reproduces_1970_coefficients():
    fit = fit_sto("3sp", 3)
    # source: Hehre, Ditchfield, Stewart & Pople, J. Chem. Phys. 52, 2769 (1970), STO-3G 3sp (from memory)
    np.testing.assert_allclose(fit.coefficients[0], [-0.219620, 0.225595, 0.900398], rtol=REL)
    np.testing.assert_allclose(fit.coefficients[1], [0.0105876, 0.595167, 0.462001], rtol=REL)


def _reference_shells(n_gaussians: int, symbol: str) -> dict[int, list[tuple[np.ndarray, np.ndarray]]]:
    """The reference library's STO-nG shells of an element, grouped by l in its order."""
    from pyscf import gto
    grouped: dict[int, list[tuple[np.ndarray, np.ndarray]]] = {}
    for shell in gto.basis.load(f"sto-{n_gaussians}g", symbol):
        l, primitives = shell[0], np.array(shell[1:], dtype=float)
        grouped.setdefault(l, []).append((primitives[:, 0], primitives[:, 1]))
    return grouped


def _our_shells(n_gaussians: int, z: int) -> dict[int, list[tuple[np.ndarray, np.ndarray]]]:
    grouped: dict[int, list[tuple[np.ndarray, np.ndarray]]] = {}
    for shell in STOFamily(n_gaussians).element_shells(z):
        grouped.setdefault(shell.l, []).append((shell.exponents, shell.coefficients[0]))
    return grouped


def _assert_same_shells(ours, reference):
    assert sorted(ours) == sorted(reference)
    for l in reference:
        assert len(ours[l]) == len(reference[l])
        for (a, c), (a_ref, c_ref) in zip(ours[l], reference[l]):
            np.testing.assert_allclose(a, a_ref, rtol=REL)
            np.testing.assert_allclose(c, c_ref, rtol=REL)


# The reference library's STO-6G entry for Mg is a copy of its Na entry
# (see test_reference_sto6g_magnesium_is_a_copy_of_sodium); Mg is checked there.
CASES = [(n, z) for n in (3, 6) for z in range(1, 19) if not (n == 6 and z == 12)]


@pytest.mark.parametrize("n_gaussians,z", CASES, ids=[f"STO-{n}G-{elements.symbol(z)}" for n, z in CASES])
def test_sto_ng_matches_reference_library(n_gaussians, z):
    reference = _reference_shells(n_gaussians, elements.symbol(z))
    # source: reference library run (PySCF gto.basis.load), same shells, coefficients of normalised primitives
    _assert_same_shells(_our_shells(n_gaussians, z), reference)


def test_reference_sto6g_magnesium_is_a_copy_of_sodium():
    mg, na = _reference_shells(6, "Mg"), _reference_shells(6, "Na")
    # source: reference library run (PySCF gto.basis.load): its Mg STO-6G equals its Na STO-6G
    # primitive for primitive, although the Slater exponents of Mg and Na differ.
    for l in na:
        for (a_mg, c_mg), (a_na, c_na) in zip(mg[l], na[l]):
            np.testing.assert_array_equal(a_mg, a_na)
            np.testing.assert_array_equal(c_mg, c_na)
    # So our Mg is checked as the Na entry rescaled by (ζ_Mg / ζ_Na)² per shell,
    # with the Mg exponents verified on STO-3G above (exact property of the ζ scaling).
    ours = _our_shells(6, 12)
    shells = {0: ["1s", "2sp", "3sp"], 1: ["2sp", "3sp"]}
    for l, names in shells.items():
        for name, (a, c), (a_na, c_na) in zip(names, ours[l], na[l]):
            ratio = (STANDARD_EXPONENTS[12][name] / STANDARD_EXPONENTS[11][name]) ** 2
            np.testing.assert_allclose(a, a_na * ratio, rtol=REL)
            np.testing.assert_allclose(c, c_na, rtol=REL)


def test_standard_exponents_of_first_row_match_1969_table():
    # source: Hehre, Stewart & Pople, J. Chem. Phys. 51, 2657 (1969), standard molecular exponents (from memory)
    published = {
        "H": (1.24,), "He": (1.69,), "Li": (2.69, 0.80), "Be": (3.68, 1.15), "B": (4.68, 1.50),
        "C": (5.67, 1.72), "N": (6.67, 1.95), "O": (7.66, 2.25), "F": (8.65, 2.55), "Ne": (9.64, 2.88),
    }
    for symbol, zetas in published.items():
        assert tuple(STANDARD_EXPONENTS[elements.atomic_number(symbol)].values()) == zetas


@pytest.mark.parametrize("shell", sorted(SLATER_SHELLS))
def test_overlap_never_decreases_with_more_gaussians(shell):
    overlaps = np.array([[fit_sto(shell, n).overlaps[l] for l in SLATER_SHELLS[shell][1]] for n in range(1, 7)])
    # common practice: the optimum with n + 1 Gaussians is at least as good as with n
    assert np.all(np.diff(overlaps, axis=0) > 0)
    assert np.all(overlaps < 1.0)


@pytest.mark.parametrize("shell,n", [("1s", 3), ("2sp", 6), ("3sp", 4), ("2p", 5), ("3d", 2)])
def test_overlap_and_norm_agree_with_independent_quadrature(shell, n):
    fit = fit_sto(shell, n, zeta=1.3)

    def integral(f):
        return quad(lambda r: f(np.array([r]))[0] * r * r, 0.0, np.inf, epsabs=1e-13, epsrel=1e-12, limit=200)[0]

    # exact property: normalised radial functions, and the stored overlap is <Slater|fit>
    assert integral(lambda r: fit.slater_radial(r) ** 2) == pytest.approx(1.0, abs=1e-10)
    for l in fit.angular_momenta:
        assert integral(lambda r: fit.gaussian_radial(r, l) ** 2) == pytest.approx(1.0, abs=1e-10)
        assert integral(lambda r: fit.gaussian_radial(r, l) * fit.slater_radial(r)) == pytest.approx(
            fit.overlaps[l], abs=1e-10
        )


def _best_summed_overlap(shell: str, exponents: np.ndarray) -> float:
    """Summed best overlap for given exponents, from plain quadrature and a linear solve."""
    n, ls = SLATER_SHELLS[shell]
    slater = lambda r: 2.0 ** (n + 0.5) / math.sqrt(math.factorial(2 * n)) * r ** (n - 1) * math.exp(-r)
    total = 0.0
    for l in ls:
        norms = np.sqrt(2.0 * (2.0 * exponents) ** (l + 1.5) / math.gamma(l + 1.5))
        b = np.array([quad(lambda r: nk * r**l * math.exp(-a * r * r) * slater(r) * r * r, 0, np.inf,
                           epsabs=1e-14, epsrel=1e-13)[0] for a, nk in zip(exponents, norms)])
        p = exponents[:, None] + exponents[None, :]
        s = (2.0 * np.sqrt(exponents[:, None] * exponents[None, :]) / p) ** (l + 1.5)
        total += math.sqrt(b @ np.linalg.solve(s, b))
    return total


@pytest.mark.parametrize("shell,n", [("1s", 4), ("2sp", 3), ("3sp", 3), ("2p", 3), ("3d", 2)])
def test_fitted_exponents_are_a_maximum_of_the_overlap(shell, n):
    fit = fit_sto(shell, n)
    best = _best_summed_overlap(shell, np.array(fit.exponents))
    # exact property: the least-squares optimum; moving any exponent by 1 % lowers the summed overlap
    for k in range(n):
        for factor in (0.99, 1.01):
            moved = np.array(fit.exponents)
            moved[k] *= factor
            assert _best_summed_overlap(shell, moved) < best


def test_a_scaled_fit_overlaps_the_scaled_slater_function_as_the_unit_fit_does():
    zeta = 1.72
    unit, scaled = fit_sto("2sp", 4), fit_sto("2sp", 4, zeta=zeta)

    def slater_2(r):
        # the normalised 2s/2p Slater radial function, written out here (exact property):
        # (2ζ)^{5/2} / sqrt(4!) r exp(-ζ r)
        return (2 * zeta) ** 2.5 / math.sqrt(24.0) * r * np.exp(-zeta * r)

    for l in (0, 1):
        overlap = quad(lambda r: scaled.gaussian_radial(np.array([r]), l)[0] * slater_2(r) * r * r, 0.0, np.inf,
                       epsabs=1e-13, epsrel=1e-12, limit=200)[0]
        # source: exact property — R(r; ζ) is ζ^{3/2} R(ζ r; 1), so the scaled fit keeps the unit
        # fit's overlap (checked against the published table above), here by independent quadrature
        assert overlap == pytest.approx(unit.overlaps[l], abs=1e-10)


def test_fit_is_deterministic_when_recomputed():
    from hfcore.basis import sto

    first = fit_sto("3sp", 6)
    sto._fit_unit.cache_clear()
    second = fit_sto("3sp", 6)
    # common practice: the same input gives the same digits
    np.testing.assert_array_equal(first.exponents, second.exponents)
    np.testing.assert_array_equal(first.coefficients[1], second.coefficients[1])


@pytest.mark.parametrize("args", [("4f", 3), ("1s", 0), ("1s", 7), ("1s", 2.5), ("1s", True), ("1s", 3, 0.0), ("1s", 3, -1.0)])
def test_fit_rejects_bad_arguments(args):
    with pytest.raises(InputError):
        fit_sto(*args)


def test_element_shells_follow_occupied_slater_shells():
    family = STOFamily(3)
    # source: Hehre, Stewart & Pople (1969) and Hehre et al. (1970) — one Slater shell per occupied shell,
    # 2s/2p and 3s/3p sharing exponents (from memory)
    layout = {1: [(0, "1s")], 6: [(0, "1s"), (0, "2sp"), (1, "2sp")],
              17: [(0, "1s"), (0, "2sp"), (1, "2sp"), (0, "3sp"), (1, "3sp")]}
    for z, expected in layout.items():
        assert [(s.l, s.label) for s in family.element_shells(z)] == expected
    assert family.elements() == frozenset(range(1, 19))
    with pytest.raises(BasisError):
        family.element_shells(19)


def test_water_minimal_basis_has_seven_functions(water_molecule):
    # common practice: minimal basis, 1s 2s 2p on O and 1s on each H
    assert build_basis(water_molecule, "sto-3g").n_functions == 7


@pytest.mark.parametrize("name", ["sto-3g", "STO-3G", "sto3g", " Sto-3G "])
def test_family_names_accepted(name):
    family = family_for_name(name, None)
    assert isinstance(family, STOFamily) and family.name == "STO-3G"


def test_family_for_name_leaves_other_names_and_rejects_unknown_n():
    assert family_for_name("cc-pvdz", None) is None
    with pytest.raises(BasisError):
        family_for_name("sto-7g", None)
    assert get_family("sto-2g").name == "STO-2G"


def test_element_override_sets_every_shell_and_shell_override_wins():
    family = STOFamily(3, {"C": 6.0, "C:2sp": 1.80, "He": 2.0925})
    assert family.shell_zeta(6, "1s") == 6.0
    assert family.shell_zeta(6, "2sp") == 1.80
    assert family.shell_zeta(7, "2sp") == STANDARD_EXPONENTS[7]["2sp"]
    (he,) = family.element_shells(2)
    # exact property: exponents scale as ζ², coefficients unchanged
    np.testing.assert_allclose(he.exponents, fit_sto("1s", 3).exponents * 2.0925**2, rtol=1e-14)
    s2, p2 = family.element_shells(6)[1:]
    np.testing.assert_allclose(p2.exponents, fit_sto("2sp", 3).exponents * 1.80**2, rtol=1e-14)
    np.testing.assert_array_equal(s2.coefficients[0], fit_sto("2sp", 3).coefficients[0])


def test_override_reaches_build_basis():
    molecule = parse_xyz("2\n\nHe 0 0 0\nH 0 0 0.7743\n", charge=1)
    basis = build_basis(molecule, "sto-3g", zeta={"He": 2.0925})
    np.testing.assert_allclose(basis.shells[0].exponents, fit_sto("1s", 3).exponents * 2.0925**2, rtol=1e-14)
    np.testing.assert_allclose(basis.shells[1].exponents, fit_sto("1s", 3).exponents * 1.24**2, rtol=1e-14)


def test_parse_zeta_overrides_gives_canonical_keys():
    assert parse_zeta_overrides(["he=2.0925", "C:2SP=1.80", "Cl:3sp = 2.2"]) == {
        "He": 2.0925, "C:2sp": 1.80, "Cl:3sp": 2.2,
    }


@pytest.mark.parametrize(
    "item,why",
    [
        ("Xx=1.0", "unknown element"),
        ("He:2sp=1.0", "no '2sp' shell"),
        ("K=1.0", "H to Ar"),
        ("C=-1", "positive"),
        ("C=0", "positive"),
        ("C=nan", "positive"),
        ("C=abc", "not a number"),
        ("C", "expected"),
    ],
)
def test_parse_zeta_overrides_names_the_bad_item(item, why):
    with pytest.raises(InputError) as caught:
        parse_zeta_overrides([item])
    message = str(caught.value)
    assert repr(item) in message and why in message and "\n" not in message


def test_parse_zeta_overrides_rejects_a_repeated_key():
    with pytest.raises(InputError, match="more than once"):
        parse_zeta_overrides(["He=2.0", "he=2.1"])


def test_family_rejects_bad_override_mapping():
    with pytest.raises(InputError, match="unknown element"):
        STOFamily(3, {"Qq": 1.0})


def test_plot_writes_png_atomically(tmp_path):
    from hfcore.plots import plot_sto_fit

    target = tmp_path / "fit.png"
    plot_sto_fit([fit_sto("1s", n) for n in (1, 3, 6)] + [fit_sto("2sp", 3, zeta=1.72)], target)
    assert_valid_png(target)
    # no temporary file left behind
    assert os.listdir(tmp_path) == ["fit.png"]


def test_plot_reports_missing_directory_and_missing_matplotlib(tmp_path, monkeypatch):
    from hfcore.plots import plot_sto_fit

    with pytest.raises(InputError, match="does not exist"):
        plot_sto_fit([fit_sto("1s", 3)], tmp_path / "nowhere" / "fit.png")
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(InputError, match=r"pip install 'hfcore\[plot\]'"):
        plot_sto_fit([fit_sto("1s", 3)], tmp_path / "fit.png")
