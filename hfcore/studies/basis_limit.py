"""One basis-limit record: the best estimate, its uncertainty, the rule and the bases.

The rule (``docs/basis-limits.md`` shows its calibration)
----------------------------------------------------------
For a series of energies E(X) in a correlation-consistent family, with X_top
the largest cardinal number present and X_top − 1 (and X_top − 2) present
too, each published fast form gives a *candidate*:

* two-point, E(X) = E_CBS + A (X + 1) exp(−9 √X), from (X_top − 1, X_top)
  (Karton and Martin 2006);
* three-point, E(X) = E_CBS + B exp(−C X), from (X_top − 2, X_top − 1, X_top)
  (Feller 1992).

Both forms assume the basis error falls off exponentially; where it falls
off more slowly they stop short of the limit, and where it falls off faster
they overshoot it. The yardstick of "more slowly" is the inverse-power form
E(X) = E_CBS + A X^−α with α = 3.4 for Hartree–Fock energies (D. G. Truhlar,
Chem. Phys. Lett. 294, 45 (1998), from memory), solved through the same two
largest bases: a *slow* estimate. The three forms disagree by as much as the
behaviour of the series beyond the largest basis is unknown, so the interval
of a candidate c reaches the farthest of them:

    c ± max |c − E_form|   over the two-point, three-point and slow estimates,

cut from above, for a total energy, at E(X_top): the variational principle
puts the limit below every finite-basis energy (exact property). The record's
energy is the centre of what is left and its uncertainty the half-width. Of
the candidates the one with the smallest uncertainty is chosen, and the
record says which. Nothing in the rule is fitted to a system: each form is
driven by the step from the largest basis, E(X_top − 1) − E(X_top) (and the
step before it), and the width is the distance between published forms.

For a difference of energies (a reaction or an interaction energy) the same
rule runs on the difference's own series, where errors partly cancel, without
the variational cut (a difference has no variational bound).

Where the bases cannot support an estimate (no correlation-consistent
family, one cardinal number, no consecutive pair) the record carries a note
and no numbers, never an exception.

Open shells: :func:`basis_limit` takes plain (name, energy) series, so UHF or
ROHF totals go through the same rule once those runs exist; only the
calibration table (``scripts/calibrate_limits.py``) has to grow.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from ..errors import InputError
from ..units import KCAL_MOL_PER_HARTREE, KJ_MOL_PER_HARTREE
from .extrapolation import (
    FELLER_CITATION,
    KARTON_MARTIN_CITATION,
    correlation_consistent,
    feller_three_point,
    karton_martin_two_point,
)

#: Exponent of the slow inverse-power form for Hartree–Fock energies.
SLOW_POWER: float = 3.4
#: Citation of the slow form.
TRUHLAR_CITATION = "D. G. Truhlar, Chem. Phys. Lett. 294, 45 (1998)"
#: One-line statement of the rule, carried by every record.
RULE = (
    "candidate ± its largest distance to the two-point, three-point and inverse-power (X^-3.4) estimates"
    " from the largest bases, cut at the largest basis' energy for a total energy; centre and half-width"
    " of that interval; the candidate with the smallest half-width is chosen"
)


def inverse_power_two_point(e_x: float, e_y: float, x: float, y: float, power: float = SLOW_POWER) -> float:
    """Two-point basis-limit energy of the inverse-power form E(X) = E_CBS + A X^-power.

    Parameters
    ----------
    e_x, e_y : float
        Energies (hartree) at cardinal numbers ``x`` and ``y``.
    x, y : float
        Different positive cardinal numbers.
    power : float
        The exponent (3.4 for Hartree–Fock energies, Truhlar 1998).

    Returns
    -------
    float
        E_CBS in hartree.
    """
    if x <= 0 or y <= 0 or x == y:
        raise InputError(f"two-point extrapolation needs two different positive cardinal numbers, got {x} and {y}")
    fx, fy = x**-power, y**-power
    return (e_y * fx - e_x * fy) / (fx - fy)


@dataclass(frozen=True)
class BasisLimit:
    """The basis-limit record of one series.

    Attributes
    ----------
    energy_total : float or None
        Best estimate in hartree (a total energy, or a difference for a
        reaction or interaction record); None when no estimate is possible.
    uncertainty : float or None
        Half-width of the interval in hartree: the limit is expected in
        ``energy_total ± uncertainty``.
    rule : str
        How both numbers were made (:data:`RULE`).
    chosen : str or None
        The candidate the record rests on, e.g.
        ``"three-point (cc-pVDZ, cc-pVTZ, cc-pVQZ)"``.
    method : str or None
        ``"two-point"`` or ``"three-point"``.
    family : str or None
        ``"cc-pVXZ"`` or ``"aug-cc-pVXZ"``.
    bases : tuple of str
        The bases the candidate used, by increasing cardinal number.
    candidate : float or None
        The chosen formula's own value (hartree), before centring.
    slow_estimate : float or None
        The inverse-power estimate from the two largest bases (hartree).
    cut : bool
        Whether the variational bound cut the interval.
    note : str or None
        Why there is no estimate, or what was left out.
    citations : tuple of str
    """

    energy_total: float | None
    uncertainty: float | None
    rule: str = RULE
    chosen: str | None = None
    method: str | None = None
    family: str | None = None
    bases: tuple[str, ...] = ()
    candidate: float | None = None
    slow_estimate: float | None = None
    cut: bool = False
    note: str | None = None
    citations: tuple[str, ...] = ()

    @property
    def available(self) -> bool:
        """Whether the record holds an estimate."""
        return self.energy_total is not None

    def describe(self, unit: str = "Eh") -> str:
        """One line for a report: ``"E ± u Eh (chosen, cut at ...)"`` or the note.

        Parameters
        ----------
        unit : {"Eh", "kJ/mol", "kcal/mol"}
            Unit of the printed numbers.
        """
        if not self.available:
            return str(self.note)
        scale, digits = _UNITS[unit]
        cut = f", cut at {self.bases[-1]}" if self.cut else ""
        return (f"{self.energy_total * scale:.{digits}f} ± {self.uncertainty * scale:.{digits}f} {unit} "
                f"(from the {self.chosen} candidate{cut})")

    def to_dict(self) -> dict:
        """Plain, JSON-ready form (hartree; tuples as lists)."""
        return {
            "energy_total": self.energy_total,
            "uncertainty": self.uncertainty,
            "rule": self.rule,
            "chosen": self.chosen,
            "method": self.method,
            "family": self.family,
            "bases": list(self.bases),
            "candidate": self.candidate,
            "slow_estimate": self.slow_estimate,
            "cut_at_largest_basis": self.cut,
            "note": self.note,
            "citations": list(self.citations),
        }


_UNITS = {"Eh": (1.0, 6), "kJ/mol": (KJ_MOL_PER_HARTREE, 2), "kcal/mol": (KCAL_MOL_PER_HARTREE, 2)}


def _none(note: str) -> BasisLimit:
    return BasisLimit(None, None, note=note)


def _group(series: Sequence[tuple[str, float, bool]]) -> dict[tuple[str, bool], dict[int, tuple[str, float]]]:
    groups: dict[tuple[str, bool], dict[int, tuple[str, float]]] = {}
    for name, value, spherical in series:
        found = correlation_consistent(name)
        if found is not None and math.isfinite(value):
            groups.setdefault((found[0], bool(spherical)), {})[found[1]] = (name, float(value))
    return groups


def _candidates(family: str, members: dict[int, tuple[str, float]], bounded: bool) -> tuple[list[BasisLimit], list[str]]:
    top = max(members)
    if top - 1 not in members:
        return [], [f"{family}: no two consecutive cardinal numbers ending at the largest basis {members[top][0]}"]
    (n1, e1), (n2, e2) = members[top - 1], members[top]
    if bounded and e2 > e1:
        return [], [f"{family}: the energy rises from {n1} to {n2}, so the series does not converge from above"]
    slow = inverse_power_two_point(e1, e2, top - 1, top)
    found = [("two-point", (n1, n2), karton_martin_two_point(e1, e2, top - 1, top), KARTON_MARTIN_CITATION)]
    notes = []
    if top - 2 in members:
        n0, e0 = members[top - 2]
        try:
            found.append(("three-point", (n0, n1, n2), feller_three_point(e0, e1, e2, top - 2, top - 1, top),
                          FELLER_CITATION))
        except InputError as exc:
            notes.append(f"{family}: three-point candidate left out: {exc}")
    values = [value for _, _, value, _ in found] + [slow]
    out = []
    for method, bases, value, citation in found:
        half = max(abs(value - other) for other in values)
        low, high = value - half, value + half
        cut = bounded and high > e2
        if cut:
            high = e2
        out.append(BasisLimit(
            energy_total=0.5 * (low + high), uncertainty=0.5 * (high - low), chosen=f"{method} ({', '.join(bases)})",
            method=method, family=family, bases=bases, candidate=value, slow_estimate=slow, cut=cut,
            citations=(citation, TRUHLAR_CITATION),
        ))
    return out, notes


def basis_limit(series: Sequence[tuple[str, float, bool]], *, bounded_above: bool = True) -> BasisLimit:
    """The basis-limit record of a series of energies over basis names.

    Parameters
    ----------
    series : sequence of (str, float, bool)
        (basis name, energy in hartree, spherical) per basis; names outside
        the cc-pVXZ and aug-cc-pVXZ families are ignored, non-finite
        energies (unconverged runs) left out.
    bounded_above : bool
        True for total energies, which the variational principle bounds by
        the largest basis' energy; False for differences of energies.

    Returns
    -------
    BasisLimit
        The candidate with the smallest uncertainty over families and
        spherical/Cartesian groups; a record with a note and no numbers if
        no candidate exists.
    """
    groups = _group(series)
    if not groups:
        return _none("none: the bases are not a correlation-consistent series (cc-pVXZ or aug-cc-pVXZ)")
    candidates: list[BasisLimit] = []
    notes: list[str] = []
    for (family, _), members in groups.items():
        if len(members) < 2:
            name = next(iter(members.values()))[0]
            notes.append(f"{family}: only one cardinal number ({name}); an estimate needs two consecutive ones")
            continue
        found, why = _candidates(family, members, bounded_above)
        candidates += found
        notes += why
    if not candidates:
        return _none("none: " + "; ".join(notes))
    best = min(candidates, key=lambda c: (c.uncertainty, c.method != "three-point"))
    note = "; ".join(notes) if notes else None
    return BasisLimit(**{**best.__dict__, "note": note})


__all__ = ["SLOW_POWER", "TRUHLAR_CITATION", "RULE", "BasisLimit", "basis_limit", "inverse_power_two_point"]
