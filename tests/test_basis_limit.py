"""The basis-limit record against published numerical Hartree–Fock limits, and its honesty rules.

Energies: ``tests/data/basis_limit_energies.json`` holds hfcore's RHF energies
of the closed-shell calibration systems in cc-pVXZ and aug-cc-pVXZ (X = D..5)
and the reference library's energies for the same runs (same
basis-set-exchange shells, spherical, conv_tol 1e-11), cross-checked here.
The open-shell atoms C, N, O and F are run live with hfcore's
equivalence-restricted ("spherical atom") ROHF, the kind of value their
published limits are; the reference library has no such run to store.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import run_main

from hfcore.studies.basis_limit import (
    FAST_FORM_LAST_TRUSTED,
    basis_limit,
    inverse_power_two_point,
    slow_form_ratio,
    slowest_tail,
)
from hfcore.studies.compare import compare_bases
from hfcore.studies.extrapolation import feller_three_point, karton_martin_two_point
from hfcore.basis import build_basis
from hfcore.geometry import Molecule
from hfcore.scf import run_rhf

DATA = json.loads((Path(__file__).parent / "data" / "basis_limit_energies.json").read_text(encoding="utf-8"))
OURS, REFERENCE = DATA["hfcore"], DATA["reference_library"]

# Published numerical Hartree–Fock limits, from memory (checks.md):
# atoms: C. F. Bunge, J. A. Barrientos and A. V. Bunge, At. Data Nucl. Data Tables 53, 113 (1993)
# (for C, N, O, F the restricted open-shell values of their ground terms, one radial function per shell);
# H2 at R = 1.4 bohr: F. Jensen, J. Chem. Phys. 110, 6601 (1999).
CLOSED_LIMITS = {"He": -2.861680, "Be": -14.573023, "Ne": -128.547098, "Mg": -199.614636, "Ar": -526.817513,
                 "H2": -1.133629571}
OPEN_LIMITS = {"C": -37.688619, "N": -54.400934, "O": -74.809398, "F": -99.409349}
LIMITS = {**CLOSED_LIMITS, **OPEN_LIMITS}
GEOMETRIES = {"He": ([2], [[0.0, 0.0, 0.0]]), "Be": ([4], [[0.0, 0.0, 0.0]]), "Ne": ([10], [[0.0, 0.0, 0.0]]),
              "Mg": ([12], [[0.0, 0.0, 0.0]]), "Ar": ([18], [[0.0, 0.0, 0.0]]),
              "H2": ([1, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4]])}
#: atomic number and multiplicity of the open-shell ground terms C ³P, N ⁴S, O ³P, F ²P
OPEN_SHELL = {"C": (6, 3), "N": (7, 4), "O": (8, 3), "F": (9, 2)}
FIRST_ROW = ("Be", "C", "N", "O", "F", "Ne")
FAMILIES = ("cc-pV{}Z", "aug-cc-pV{}Z")
OPEN_SHELL_FAMILY = "cc-pV{}Z"
RANGES = {"DZ-QZ": "DTQ", "DZ-5Z": "DTQ5"}


@pytest.fixture(scope="module")
def energies():
    """Closed shells from the stored hfcore runs; C, N, O, F run now in cc-pVXZ, X = D..5 (about a minute).

    The aug-cc-pVXZ rows of the open-shell atoms (aug-cc-pV5Z runs take half a minute each) are in the
    calibration table of docs/basis-limits.md, from ``scripts/calibrate_limits.py``.
    """
    from hfcore import SCFOptions, run_scf

    out = {system: dict(by_basis) for system, by_basis in OURS.items()}
    for symbol, (z, multiplicity) in OPEN_SHELL.items():
        atom = Molecule(np.array([z]), np.zeros((1, 3)), 0, source=symbol, multiplicity=multiplicity)
        for x in "DTQ5":
            name = OPEN_SHELL_FAMILY.format(x)
            result = run_scf(atom, name, SCFOptions(method="rohf", spherical_atom=True))
            assert result.converged, (symbol, name)
            out.setdefault(symbol, {})[name] = float(result.energy_total)
    return out


def _families(system: str) -> tuple[str, ...]:
    return (OPEN_SHELL_FAMILY,) if system in OPEN_SHELL else FAMILIES


#: every (system, family) of the calibration run here
CASES = [(system, family) for system in LIMITS for family in _families(system)]


def _series(system: str, family: str, letters: str, energies=OURS) -> list[tuple[str, float, bool]]:
    return [(family.format(x), energies[system][family.format(x)], True) for x in letters]


def _record(system, family, span, energies=OURS):
    return basis_limit(_series(system, family, RANGES[span], energies))


def test_stored_energies_agree_with_the_reference_library():
    for system, by_basis in OURS.items():
        for name, energy in by_basis.items():
            # source: reference library run (PySCF RHF, same shells, conv_tol 1e-11), stored beside ours
            assert abs(energy - REFERENCE[system][name]) < 1e-8, (system, name)


@pytest.mark.parametrize("system", ["He", "Be", "Ne"])
def test_hfcore_reproduces_the_reference_library_energies_up_to_5z(system):
    z, xyz = GEOMETRIES[system]
    molecule = Molecule(np.array(z), np.array(xyz), 0, source=system)
    for x in "DTQ5":
        name = f"cc-pV{x}Z"
        result = run_rhf(molecule, build_basis(molecule, name), guess="core")
        # source: reference library run (PySCF RHF, same basis-set-exchange shells), stored in tests/data
        assert abs(result.energy_total - REFERENCE[system][name]) < 1e-8, name


@pytest.mark.parametrize("symbol", list(OPEN_SHELL))
def test_open_shell_atoms_lie_above_their_restricted_limits(energies, symbol):
    # published restricted open-shell limits (Bunge et al. 1993, from memory); exact property (variational
    # principle): an equivalence-restricted ROHF energy in a finite basis lies above the restricted limit
    for x in "DTQ5":
        assert energies[symbol][OPEN_SHELL_FAMILY.format(x)] > OPEN_LIMITS[symbol], (symbol, x)


@pytest.mark.parametrize("span", list(RANGES))
@pytest.mark.parametrize("system, family", CASES)
def test_interval_contains_the_published_limit(energies, system, span, family):
    record = _record(system, family, span, energies)
    # source: published numerical HF limits (Bunge et al. 1993; Jensen 1999), values from memory
    assert abs(record.energy_total - LIMITS[system]) <= record.uncertainty, record


@pytest.mark.parametrize("system, family", [c for c in CASES if c[0] in FIRST_ROW])
def test_first_row_width_to_quadruple_zeta_is_at_most_3_mEh(energies, system, family):
    assert _record(system, family, "DZ-QZ", energies).uncertainty <= 3e-3


@pytest.mark.parametrize("system, family", [c for c in CASES if c[0] in FIRST_ROW])
def test_first_row_width_to_quintuple_zeta_is_at_most_1_mEh(energies, system, family):
    assert _record(system, family, "DZ-5Z", energies).uncertainty <= 1e-3


@pytest.mark.parametrize("system", list(LIMITS))
def test_quintuple_zeta_narrows_the_interval(energies, system):
    for family in _families(system):
        assert (_record(system, family, "DZ-5Z", energies).uncertainty
                < _record(system, family, "DZ-QZ", energies).uncertainty)


@pytest.mark.parametrize("system", list(LIMITS))
def test_interval_stays_below_the_largest_basis_energy(energies, system):
    for family in _families(system):
        for span, letters in RANGES.items():
            record = _record(system, family, span, energies)
            top = energies[system][family.format(letters[-1])]
            # exact property (variational principle): the limit lies below every finite-basis energy
            # (centre + half-width rebuilds the cut end to a few units in the last place)
            assert record.energy_total + record.uncertainty <= top + 4 * abs(np.spacing(top))


def test_record_names_the_chosen_estimate_and_its_bases():
    record = _record("Ne", "cc-pV{}Z", "DZ-5Z")
    assert record.method in ("two-point", "three-point")
    assert record.chosen.startswith(record.method) and all(b in record.chosen for b in record.bases)
    assert record.bases[-1] == "cc-pV5Z"
    e = [OURS["Ne"][f"cc-pV{x}Z"] for x in "DTQ5"]
    # exact property: the candidates are the published forms solved through the largest bases
    two, three = karton_martin_two_point(e[2], e[3], 4, 5), feller_three_point(*e[1:], 3, 4, 5)
    assert record.candidate == pytest.approx({"two-point": two, "three-point": three}[record.method], abs=1e-12)
    # the rule: the interval reaches both forms, the slowest continuation and, from 5Z on, the 5Z energy itself
    low = record.energy_total - record.uncertainty
    for value in (two, three, record.slow_estimate):
        assert value >= low - 1e-15
    assert record.cut and record.energy_total + record.uncertainty == pytest.approx(e[3], abs=1e-12)
    # the slowest continuation lies below the fast forms but above the slow inverse-power form: Ne's own step
    # ratios (0.27, then 0.28) rise slowly, far from the X^-3.4 form's 0.32, 0.41, ...
    assert inverse_power_two_point(e[2], e[3], 4, 5) < record.slow_estimate < min(two, three)


def test_slowest_continuation_of_an_inverse_power_series_is_its_limit():
    # exact property: a series E(X) = E_inf + A X^-3.4 has the slow form's ratios, whatever the trend says,
    # so the summed steps beyond the largest basis are exactly its remaining error
    e_inf, a = -10.0, 0.3
    e = [e_inf + a * x**-3.4 for x in (2, 3, 4, 5)]
    record = basis_limit([(f"cc-pV{c}Z", v, True) for c, v in zip("DTQ5", e)])
    assert record.slow_estimate == pytest.approx(e_inf, abs=1e-13)
    # with three bases (one ratio: no trend known) the slowest continuation is the slow form itself
    three = basis_limit([(f"cc-pV{c}Z", v, True) for c, v in zip("DTQ", e)])
    assert three.slow_estimate == pytest.approx(inverse_power_two_point(e[1], e[2], 3, 4), abs=1e-13)
    assert three.slow_estimate == pytest.approx(e_inf, abs=1e-13)


def test_slowest_continuation_of_a_geometric_series_is_its_limit():
    # exact property: constant step ratio r, below the slow form's; the tail is the geometric sum r / (1 - r)
    e_inf, b, r = -5.0, 0.02, 0.25
    e = [e_inf + b * r**x for x in (2, 3, 4, 5)]
    record = basis_limit([(f"cc-pV{c}Z", v, True) for c, v in zip("DTQ5", e)])
    assert record.slow_estimate == pytest.approx(e_inf, abs=1e-13)
    # ... and the three-point form, exact for this series, agrees
    assert feller_three_point(*e[1:], 3, 4, 5) == pytest.approx(e_inf, abs=1e-13)


def test_slowest_continuation_keeps_the_largest_ratio_seen_and_carries_a_rising_one():
    # falling ratios (0.3, then 0.15) are not trusted to keep falling: the tail is geometric with 0.3
    assert slowest_tail([1.0, 0.3, 0.045], 5) == pytest.approx(0.3 / 0.7, rel=1e-12)
    # a rising ratio (0.2, then 0.22: rate 1.1) is carried on: 0.242, 0.2662, ... while under the slow form's
    tau = slowest_tail([1.0, 0.2, 0.044], 5)
    expected, term, ratio = 0.0, 1.0, 0.22
    for x in range(6, 20_000):
        ratio = min(ratio * 1.1, slow_form_ratio(x))
        term *= ratio
        expected += term
    assert tau == pytest.approx(expected, rel=1e-9)
    assert 0.22 / 0.78 < tau < 1.0 / ((5 / 4) ** 3.4 - 1.0)
    # steps that do not shrink leave no bound; a zero last step leaves nothing to add
    assert slowest_tail([1.0, 1.2], 3) == math.inf
    assert slowest_tail([0.0, 0.0], 3) == 0.0
    assert slowest_tail([0.0, 1e-4], 3) == math.inf


def test_slow_form_ratios_rise_towards_one():
    ratios = [slow_form_ratio(x) for x in range(3, 40)]
    # exact property of X^-3.4: successive steps shrink ever more slowly
    assert all(0.0 < a < b < 1.0 for a, b in zip(ratios, ratios[1:]))


def test_fastest_continuation_is_the_largest_basis_from_quintuple_zeta_on():
    assert FAST_FORM_LAST_TRUSTED == 4
    # A difference of energies (no variational cut), steps 2.0, 0.6, 0.2 mEh, ending at 5Z: the interval reaches
    # the 5Z value itself on the fast side.
    series = [("cc-pVDZ", -0.0300, True), ("cc-pVTZ", -0.0320, True), ("cc-pVQZ", -0.0326, True),
              ("cc-pV5Z", -0.0328, True)]
    record = basis_limit(series, bounded_above=False)
    assert not record.cut
    assert record.energy_total + record.uncertainty >= -0.0328 - 1e-16
    # ending at QZ, the fast side stops at the two-point form instead (which lies below the QZ value)
    record = basis_limit(series[:3], bounded_above=False)
    two = karton_martin_two_point(-0.0320, -0.0326, 3, 4)
    assert record.energy_total + record.uncertainty < -0.0326
    assert record.energy_total + record.uncertainty >= two - 1e-16


def test_a_difference_whose_steps_change_sign_reaches_both_sides():
    series = [("cc-pVDZ", -0.0300, True), ("cc-pVTZ", -0.0320, True), ("cc-pVQZ", -0.0318, True)]
    record = basis_limit(series, bounded_above=False)
    tau = slowest_tail([-0.0020, 0.0002], 4)
    # the rule: where the steps change sign, the slowest continuation is taken on both sides of the QZ value
    assert record.energy_total - record.uncertainty <= -0.0318 - tau * 0.0002 + 1e-16
    assert record.energy_total + record.uncertainty >= -0.0318 + tau * 0.0002 - 1e-16


def test_steps_that_do_not_shrink_give_a_note():
    record = basis_limit([("cc-pVDZ", -1.0, True), ("cc-pVTZ", -1.001, True), ("cc-pVQZ", -1.003, True)],
                         bounded_above=True)
    assert record.energy_total is None and "do not shrink" in record.note


def test_smallest_uncertainty_is_chosen_over_both_families():
    mixed = _series("Ne", "cc-pV{}Z", "DTQ") + [(n, e, True) for n, e, _ in _series("Ne", "aug-cc-pV{}Z", "DTQ5")]
    record = basis_limit(mixed)
    assert record.family == "aug-cc-pVXZ"
    assert record.uncertainty == _record("Ne", "aug-cc-pV{}Z", "DZ-5Z").uncertainty


@pytest.mark.parametrize(
    "series, fragment",
    [
        ([("cc-pVDZ", -1.1, True)], "only one cardinal number"),
        ([("cc-pVDZ", -1.1, True), ("cc-pVQZ", -1.2, True)], "no two consecutive cardinal numbers"),
        ([("sto-3g", -1.1, False), ("6-31g", -1.12, False)], "not a correlation-consistent series"),
        ([("cc-pVDZ", -1.2, True), ("cc-pVTZ", -1.1, True)], "the energy rises"),
        ([("cc-pVDZ", math.nan, True), ("cc-pVTZ", -1.1, True)], "only one cardinal number"),
        ([], "not a correlation-consistent series"),
    ],
)
def test_bases_that_cannot_support_an_estimate_give_a_note(series, fragment):
    record = basis_limit(series)
    assert record.energy_total is None and record.uncertainty is None
    assert fragment in record.note and "\n" not in record.note
    assert record.to_dict()["energy_total"] is None


def test_three_point_failure_leaves_the_two_point_candidate_with_a_note():
    # a difference whose steps change sign (0.002, then -0.0005): no exponential through it, but the steps shrink
    series = [("cc-pVDZ", -1.0, True), ("cc-pVTZ", -1.002, True), ("cc-pVQZ", -1.0015, True)]
    record = basis_limit(series, bounded_above=False)
    assert record.method == "two-point" and "three-point candidate left out" in record.note


def test_a_difference_is_not_cut_at_the_largest_basis():
    # A reaction energy series rising towards the limit: no variational bound applies.
    series = [("cc-pVDZ", -0.050, True), ("cc-pVTZ", -0.046, True), ("cc-pVQZ", -0.045, True)]
    record = basis_limit(series, bounded_above=False)
    assert record.available and not record.cut
    assert record.energy_total + record.uncertainty > -0.045


def test_compare_json_carries_the_limit_record(tmp_path):
    (tmp_path / "he.xyz").write_text("1\nhelium\nHe 0 0 0\n")
    code, out, err = run_main("compare", str(tmp_path / "he.xyz"), "--basis", "cc-pvdz,cc-pvtz,cc-pvqz", "--json", "-")
    assert code == 0, err
    limit = json.loads(out)["comparison"]["limit"]
    assert set(limit) >= {"energy_total", "uncertainty", "rule", "bases", "chosen"}
    # source: published numerical HF limit of He (Bunge et al. 1993), from memory
    assert abs(limit["energy_total"] - LIMITS["He"]) <= limit["uncertainty"]


def test_compare_report_prints_e_plus_minus_u(tmp_path):
    (tmp_path / "he.xyz").write_text("1\nhelium\nHe 0 0 0\n")
    code, out, err = run_main("compare", str(tmp_path / "he.xyz"), "--basis", "cc-pvdz,cc-pvtz")
    assert code == 0, err
    line = next(x for x in out.splitlines() if "basis limit:" in x)
    assert " ± " in line and "Eh" in line and "two-point (cc-pvdz, cc-pvtz)" in line
    molecule = Molecule(np.array([2]), np.zeros((1, 3)), 0, source="He")
    note = compare_bases(molecule, ["cc-pvdz"]).to_dict()["limit"]
    assert note["energy_total"] is None and "only one cardinal number" in note["note"]


def test_compare_plot_draws_the_limit_as_a_band(tmp_path, monkeypatch):
    from matplotlib.axes import Axes

    from conftest import assert_valid_png
    from hfcore.plots import plot_comparison

    spans = []
    original = Axes.axhspan
    monkeypatch.setattr(Axes, "axhspan", lambda self, lo, hi, **kw: spans.append((lo, hi)) or original(self, lo, hi, **kw))
    molecule = Molecule(np.array([2]), np.zeros((1, 3)), 0, source="He")
    comparison = compare_bases(molecule, ["cc-pvdz", "cc-pvtz"])
    plot_comparison(comparison, tmp_path / "he.png")
    assert_valid_png(tmp_path / "he.png")
    limit = comparison.limit
    assert spans == [pytest.approx((limit.energy_total - limit.uncertainty, limit.energy_total + limit.uncertainty),
                                   abs=1e-15)]
