"""The basis-limit record against published numerical Hartree–Fock limits, and its honesty rules.

Energies: ``tests/data/basis_limit_energies.json`` holds hfcore's RHF energies
of the calibration systems in cc-pVXZ and aug-cc-pVXZ (X = D..5) and the
reference library's energies for the same runs (same basis-set-exchange
shells, spherical, conv_tol 1e-11), cross-checked once when the file was
written. The estimate and interval logic runs here on them; a live run
recomputes part of them with hfcore.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import run_main

from hfcore.studies.basis_limit import basis_limit, inverse_power_two_point
from hfcore.studies.compare import compare_bases
from hfcore.studies.extrapolation import feller_three_point, karton_martin_two_point
from hfcore.basis import build_basis
from hfcore.geometry import Molecule
from hfcore.scf import run_rhf

DATA = json.loads((Path(__file__).parent / "data" / "basis_limit_energies.json").read_text(encoding="utf-8"))
OURS, REFERENCE = DATA["hfcore"], DATA["reference_library"]

# Published numerical Hartree–Fock limits, from memory (checks.md):
# atoms: C. F. Bunge, J. A. Barrientos and A. V. Bunge, At. Data Nucl. Data Tables 53, 113 (1993);
# H2 at R = 1.4 bohr: F. Jensen, J. Chem. Phys. 110, 6601 (1999).
LIMITS = {"He": -2.861680, "Be": -14.573023, "Ne": -128.547098, "Mg": -199.614636, "Ar": -526.817513,
          "H2": -1.133629571}
GEOMETRIES = {"He": ([2], [[0.0, 0.0, 0.0]]), "Be": ([4], [[0.0, 0.0, 0.0]]), "Ne": ([10], [[0.0, 0.0, 0.0]]),
              "Mg": ([12], [[0.0, 0.0, 0.0]]), "Ar": ([18], [[0.0, 0.0, 0.0]]),
              "H2": ([1, 1], [[0.0, 0.0, 0.0], [0.0, 0.0, 1.4]])}
FIRST_ROW = ("Be", "Ne")
FAMILIES = ("cc-pV{}Z", "aug-cc-pV{}Z")
RANGES = {"DZ-QZ": "DTQ", "DZ-5Z": "DTQ5"}


def _series(system: str, family: str, letters: str, energies=OURS) -> list[tuple[str, float, bool]]:
    return [(family.format(x), energies[system][family.format(x)], True) for x in letters]


def _record(system, family, span):
    return basis_limit(_series(system, family, RANGES[span]))


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


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("span", list(RANGES))
@pytest.mark.parametrize("system", list(LIMITS))
def test_interval_contains_the_published_limit(system, span, family):
    record = _record(system, family, span)
    # source: published numerical HF limits (Bunge et al. 1993; Jensen 1999), values from memory
    assert abs(record.energy_total - LIMITS[system]) <= record.uncertainty, record


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("system", FIRST_ROW)
def test_first_row_width_to_quadruple_zeta_is_at_most_3_mEh(system, family):
    assert _record(system, family, "DZ-QZ").uncertainty <= 3e-3


@pytest.mark.parametrize("family", FAMILIES)
def test_beryllium_width_to_quintuple_zeta_is_at_most_1_mEh(family):
    assert _record("Be", family, "DZ-5Z").uncertainty <= 1e-3


@pytest.mark.xfail(strict=True, reason="target not met: Ne DZ-5Z half-width is 1.3-1.5 mEh (docs/basis-limits.md)")
@pytest.mark.parametrize("family", FAMILIES)
def test_neon_width_to_quintuple_zeta_is_at_most_1_mEh(family):
    assert _record("Ne", family, "DZ-5Z").uncertainty <= 1e-3


@pytest.mark.parametrize("system", list(LIMITS))
def test_quintuple_zeta_narrows_the_interval(system):
    for family in FAMILIES:
        assert _record(system, family, "DZ-5Z").uncertainty < _record(system, family, "DZ-QZ").uncertainty


@pytest.mark.parametrize("system", list(LIMITS))
def test_interval_stays_below_the_largest_basis_energy(system):
    for family in FAMILIES:
        for span, letters in RANGES.items():
            record = _record(system, family, span)
            top = OURS[system][family.format(letters[-1])]
            # exact property (variational principle): the limit lies below every finite-basis energy
            # (centre + half-width rebuilds the cut end to a few units in the last place)
            assert record.energy_total + record.uncertainty <= top + 4 * abs(np.spacing(top))


def test_record_names_the_chosen_estimate_and_its_bases():
    record = _record("Ne", "cc-pV{}Z", "DZ-5Z")
    assert record.method in ("two-point", "three-point")
    assert record.chosen.startswith(record.method) and all(b in record.chosen for b in record.bases)
    assert record.bases[-1] == "cc-pV5Z"
    e = [OURS["Ne"][f"cc-pV{x}Z"] for x in "TQ5"]
    # exact property: the candidates are the published forms solved through the largest bases
    expected = {"two-point": karton_martin_two_point(e[1], e[2], 4, 5),
                "three-point": feller_three_point(*e, 3, 4, 5)}[record.method]
    assert record.candidate == pytest.approx(expected, abs=1e-12)
    assert record.slow_estimate == pytest.approx(inverse_power_two_point(e[1], e[2], 4, 5), abs=1e-12)
    # the interval reaches the other published form and the slow one (the rule)
    other = {"two-point": expected, "three-point": karton_martin_two_point(e[1], e[2], 4, 5)}
    for value in (other["two-point"], record.slow_estimate):
        assert value >= record.energy_total - record.uncertainty - 1e-15


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
    record = basis_limit([("cc-pVDZ", -1.0, True), ("cc-pVTZ", -1.001, True), ("cc-pVQZ", -1.003, True)])
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
