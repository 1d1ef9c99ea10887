"""RHF energies of the demo molecules held fixed across refactoring: a regression guard.

The stored values are hfcore's own earlier results, computed with the code at
commit 98172fa (before the studies moved to ``hfcore.studies`` and the SCF
entry point was split into converging and following), with default options.
They are not an outside reference: they say only that the refactored paths
(``run_rhf``, ``compare_bases``, ``reaction_energies``, ``interaction_energies``)
still give the same numbers, to 1e-10 Eh. Each stored value is also
cross-checked against a reference library run on the same shells and geometry
(source: reference library run, to 1e-8 Eh, the project's agreement rule).
"""

from __future__ import annotations

import pytest
from conftest import INPUTS, read_input
from reference import family_shells, reference_energy, reference_mole

import hfcore

#: Charges of the demo ions (inputs/README.md).
CHARGES = {"ammonium": 1, "hydroxide": -1}

#: hfcore's own RHF total energies (hartree) at commit 98172fa, default SCFOptions (regression guard).
FROZEN: dict[tuple[str, str], float] = {
    ("water", "sto-3g"): -74.96304857620731,
    ("water", "6-31g"): -75.98397884613425,
    ("ammonia", "sto-3g"): -55.45403854411158,
    ("ammonia", "6-31g"): -56.161063008757154,
    ("methane", "sto-3g"): -39.72681010035426,
    ("methane", "6-31g"): -40.180488685598974,
    ("hydrogen_fluoride", "sto-3g"): -98.57078005813707,
    ("hydrogen_fluoride", "6-31g"): -99.98340893197566,
    ("formaldehyde", "sto-3g"): -112.35379817178975,
    ("formaldehyde", "6-31g"): -113.8072569422597,
    ("methanol", "sto-3g"): -113.54551700077425,
    ("methanol", "6-31g"): -114.98655332270542,
    ("hydrogen_cyanide", "sto-3g"): -91.67518664482989,
    ("hydrogen_cyanide", "6-31g"): -92.82799662351977,
    ("fluoromethane", "sto-3g"): -137.16812154410422,
    ("fluoromethane", "6-31g"): -138.99355793203497,
    ("hydrogen_sulfide", "sto-3g"): -394.31154752320265,
    ("hydrogen_sulfide", "6-31g"): -398.6266770334903,
    ("hydrogen_chloride", "sto-3g"): -455.13483515803995,
    ("hydrogen_chloride", "6-31g"): -460.0369304573946,
    ("ammonium", "sto-3g"): -55.8668003941877,
    ("ammonium", "6-31g"): -56.516241882952606,
    ("hydroxide", "sto-3g"): -74.05632818929904,
    ("hydroxide", "6-31g"): -75.31152860932214,
    ("hydrogen", "sto-3g"): -1.1167061373240001,
    ("hydrogen", "6-31g"): -1.1267403373994158,
    ("water_dimer", "sto-3g"): -149.9339805088863,
    ("water_dimer", "6-31g"): -151.9775639047228,
    ("ammonia_water", "sto-3g"): -130.4263638260931,
    ("ammonia_water", "6-31g"): -132.15866634045858,
}

MOLECULES = list(dict.fromkeys(name for name, _ in FROZEN))
BASES = ("sto-3g", "6-31g")
TOLERANCE = 1e-10


def _molecule(name: str) -> hfcore.Molecule:
    return read_input(name, charge=CHARGES.get(name, 0))


@pytest.mark.parametrize("name, basis", list(FROZEN))
def test_run_rhf_gives_the_stored_energy_and_the_reference_library_agrees(name, basis):
    molecule = _molecule(name)
    result = hfcore.run_rhf(molecule, basis)
    assert result.converged
    assert result.energy_total == pytest.approx(FROZEN[(name, basis)], abs=TOLERANCE)
    # source: reference library run on the same shells and geometry (cross-check of the stored value)
    spherical = hfcore.build_basis(molecule, basis).spherical
    reference = reference_energy(reference_mole(molecule, family_shells(molecule, basis), spherical=spherical))
    assert FROZEN[(name, basis)] == pytest.approx(reference, abs=1e-8)


@pytest.mark.parametrize("name", MOLECULES)
def test_compare_bases_rows_give_the_stored_energies(name):
    # The 6-31G run starts from the STO-3G density projected into it: another start, the same solution.
    comparison = hfcore.compare_bases(_molecule(name), list(BASES))
    for row in comparison.rows:
        assert row.converged
        assert row.energy_total == pytest.approx(FROZEN[(name, row.basis)], abs=TOLERANCE), row.basis
    assert comparison.rows[1].guess == "projected from sto-3g"


def test_reaction_study_species_and_reaction_energies_come_from_the_stored_totals():
    equation = (f"{INPUTS / 'fluoromethane.xyz'} + {INPUTS / 'water.xyz'} -> "
                f"{INPUTS / 'methanol.xyz'} + {INPUTS / 'hydrogen_fluoride.xyz'}")
    study = hfcore.reaction_energies([equation], list(BASES))
    names = ["fluoromethane", "water", "methanol", "hydrogen_fluoride"]
    assert [s.path for s in study.species] == [str(INPUTS / f"{n}.xyz") for n in names]
    for row in study.rows:
        frozen = [FROZEN[(n, row.basis)] for n in names]
        assert list(row.species_energies) == pytest.approx(frozen, abs=TOLERANCE)
        # exact property: ΔE = Σ ν E(products) − Σ ν E(reactants)
        expected = frozen[2] + frozen[3] - frozen[0] - frozen[1]
        assert row.reaction_energies[0] == pytest.approx(expected, abs=4 * TOLERANCE)


#: The water dimer's fragments (atoms 1-3 and 4-6), each alone and in the full basis, at commit 98172fa
#: (hfcore's own earlier values, regression guard); the complex is FROZEN[("water_dimer", basis)].
FROZEN_FRAGMENTS: dict[str, tuple[tuple[float, float], tuple[float, float]]] = {
    "sto-3g": ((-74.96304852784367, -74.96304861254086), (-74.96321010477055, -74.96948014071265)),
    "6-31g": ((-75.98397883788166, -75.98397883185173), (-75.98447837398871, -75.98517545538066)),
}


@pytest.mark.parametrize("basis", BASES)
def test_interaction_study_complex_and_fragments_give_the_stored_energies(basis):
    # The fragments in the full basis run on the complex's integrals, from their own-basis densities.
    study = hfcore.interaction_energies(_molecule("water_dimer"), [[0, 1, 2], [3, 4, 5]], [basis])
    row = study.rows[0]
    own, full = FROZEN_FRAGMENTS[basis]
    assert row.energy_complex == pytest.approx(FROZEN[("water_dimer", basis)], abs=TOLERANCE)
    assert list(row.fragments_own_basis) == pytest.approx(own, abs=TOLERANCE)
    assert list(row.fragments_full_basis) == pytest.approx(full, abs=TOLERANCE)
    # exact property: the counterpoise correction is E(AB) minus the fragments in the full basis
    assert row.counterpoise == pytest.approx(FROZEN[("water_dimer", basis)] - sum(full), abs=3 * TOLERANCE)
    assert study.pieces and all(p.reused_integrals for p in study.pieces if p.piece.kind == "full basis")
