"""Human-readable tables of energy differences: interaction and reaction energies.

A room of its own beside :mod:`hfcore.cli.report` so that the single-molecule
report stays short. As there, every function returns text and computes no
physics; unit factors come from :mod:`hfcore.units`.
"""

from __future__ import annotations

from typing import Any

from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .report import atom_ranges, heading


def _units(value: float) -> str:
    """One energy difference in hartree, kJ/mol and kcal/mol, fixed widths."""
    return f"{value:14.8f} {value * KJ_MOL_PER_HARTREE:11.3f} {value * KCAL_MOL_PER_HARTREE:11.3f}"


_UNIT_HEAD = f"{'Eh':>14} {'kJ/mol':>11} {'kcal/mol':>11}"


def format_interaction(study: Any) -> str:
    """Fragments, fragment energies and the raw and corrected interaction energies per basis.

    Parameters
    ----------
    study : InteractionStudy
        From :func:`hfcore.studies.interaction_energies`.
    """
    n = len(study.fragments)
    lines = [heading("Fragments")]
    spins = study.fragment_multiplicities or (1,) * n
    for k, (atoms, charge, spin) in enumerate(zip(study.fragments, study.fragment_charges, spins), start=1):
        text = f"charge {charge:+d}" if charge else "charge 0"
        lines.append(f"  fragment {k}   atoms {atom_ranges(atoms):<12} {text:<10} multiplicity {spin}")
    how = "as given" if study.multiplicity_rule == "given" else \
        "from the high-spin coupling of the fragments, 1 + Σ (M_i − 1)"
    lines.append(f"  complex: multiplicity {study.multiplicity} ({how})")
    lines.append(heading("Total energies / Eh"))
    head = f"  {'basis':<14} {'functions':>9} {'complex':>17}"
    for k in range(1, n + 1):
        head += f" {f'frag {k} own':>17} {f'frag {k} full':>17}"
    lines.append(head)
    for row in study.rows:
        text = f"  {row.basis:<14} {row.n_functions:>9} {row.energy_complex:17.10f}"
        for own, full in zip(row.fragments_own_basis, row.fragments_full_basis):
            text += f" {own:17.10f} {full:17.10f}"
        lines.append(text)
    lines.append("  own: the fragment alone in its own basis; full: in the complex's basis, partners as ghost atoms")
    for title, attr in (
        ("Raw interaction energy  E(complex) − Σ E(fragment, own basis)", "raw"),
        ("Counterpoise-corrected interaction energy  E(complex) − Σ E(fragment, full basis)", "counterpoise"),
        ("Basis-set superposition error  corrected − raw", "superposition_error"),
    ):
        lines.append(heading(title))
        lines.append(f"  {'basis':<14} {_UNIT_HEAD}")
        for row in study.rows:
            lines.append(f"  {row.basis:<14} {_units(getattr(row, attr))}")
        if attr != "superposition_error":
            lines.append(f"  basis limit: {study.limit(attr).describe('kJ/mol')}")
    lines.append(f"\n  counterpoise correction: {study.citation}")
    methods = list(dict.fromkeys(p.method for p in study.pieces if p.method))
    if len(methods) > 1 or methods[:1] not in ([], ["RHF"]):
        lines.append("  methods: " + ", ".join(f"{p.piece.label} in {p.piece.basis} {p.method}" for p in study.pieces
                                               if p.piece.basis == study.rows[0].basis))
    runs = len(study.pieces)
    reused = sum(p.reused_integrals for p in study.pieces)
    cost = f"  {runs} SCF runs in {study.wall_seconds:.2f} s"
    if study.batch:
        cost = f"  {runs} SCF runs as batch jobs, {sum(p.wall_seconds for p in study.pieces):.2f} s of job time"
    if reused:
        cost += (
            f"; {reused} full-basis fragment runs reused the complex's integrals "
            f"(about {study.integral_seconds_saved:.2f} s of integral work not repeated)"
        )
    lines.append(cost)
    return "\n".join(lines)


def _weighted_functions(row: Any, reaction: Any) -> str:
    """Σ |ν| × functions over the species of a reaction (``2 water -> dimer`` counts water twice)."""
    total = float(sum(abs(nu) * row.species_functions[k] for k, nu in reaction.terms))
    return f"{total:.0f}" if total.is_integer() else f"{total:.1f}"


def format_reactions(study: Any) -> str:
    """Species, their energies per basis, and each reaction energy with its basis-limit estimates.

    Parameters
    ----------
    study : ReactionStudy
        From :func:`hfcore.studies.reaction_energies`.
    """
    lines = [heading("Species")]
    width = max(len(s.label) for s in study.species)
    methods = study.rows[0].species_methods if study.rows else ()
    lines.append(f"  {'#':>3}  {'species':<{width}}  {'formula':<10} {'charge':>6} {'multiplicity':>12}  method")
    for k, s in enumerate(study.species, start=1):
        charge = f"{s.charge:>+6d}" if s.charge else f"{0:>6d}"
        method = methods[k - 1] if methods else ""
        lines.append(f"  {k:>3}  {s.label:<{width}}  {s.formula:<10} {charge} {s.multiplicity:>12d}  {method}".rstrip())
    lines.append(heading("Total energies / Eh"))
    lines.append(f"  {'#':>8} " + " ".join(f"{row.basis:>17}" for row in study.rows))
    for k in range(len(study.species)):
        lines.append(f"  {k + 1:>8} " + " ".join(f"{row.species_energies[k]:17.10f}" for row in study.rows))
    lines.append(f"  {'time / s':>8} " + " ".join(f"{row.wall_seconds:17.2f}" for row in study.rows))
    spread, limits = study.spread(), study.limits()
    for r, reaction in enumerate(study.reactions):
        title = "Reaction energy" if len(study.reactions) == 1 else f"Reaction {r + 1}"
        lines.append(heading(f"{title}  {reaction.text}"))
        lines.append(f"  {'basis':<14} {'functions':>9} {_UNIT_HEAD}   {'Δ / kJ/mol':>11} {'Δ / kcal/mol':>12}")
        for row in study.rows:
            d = row.deltas[r]
            lines.append(
                f"  {row.basis:<14} {_weighted_functions(row, reaction):>9} {_units(row.reaction_energies[r])}   "
                f"{d * KJ_MOL_PER_HARTREE:11.3f} {d * KCAL_MOL_PER_HARTREE:12.3f}"
            )
        lines.append("  functions: basis functions of each species times its stoichiometric factor, summed over "
                     "both sides")
        lines.append(f"  Δ: change from {study.reference_basis}")
        if study.estimates:
            lines.append("  basis-limit estimates from the extrapolated totals:")
            labels = [f"{est.method} ({', '.join(est.bases)})" for est in study.estimates]
            width = max([24] + [len(label) for label in labels])  # the numbers of the block in one column
            for label, est in zip(labels, study.estimates):
                lines.append(f"  {label:<{width}} {_units(est.reaction_energies[r])}")
            if spread is not None:
                lines.append(f"  {'spread of the two':<{width}} {_units(spread[r])}")
        lines.append(f"  basis limit: {limits[r].describe('kJ/mol')}")
    if study.estimates:
        lines.append("")
        for citation in dict.fromkeys(e.citation for e in study.estimates):
            lines.append(f"  {citation}")
    lines += [f"  note: {note}" for note in study.notes]
    kinds = "/".join(dict.fromkeys(methods)) if methods else "Hartree–Fock"
    lines.append(f"  ΔE = Σ ν E(products) − Σ ν E(reactants), {kinds} totals at the given geometries (no zero-point "
                 "energy)")
    if any(s.open_shell for s in study.species):
        lines.append("  Hartree–Fock misses electron correlation: energies of reactions that break or make electron "
                     "pairs, such as atomization, can be far from experiment")
    return "\n".join(lines)


__all__ = ["format_interaction", "format_reactions"]
