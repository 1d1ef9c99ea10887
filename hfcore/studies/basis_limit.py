"""One basis-limit record: the best estimate, its uncertainty, the rule and the bases.

The rule (``docs/basis-limits.md`` shows its calibration)
----------------------------------------------------------
For a series of energies E(X) in a correlation-consistent family, X_top the
largest cardinal number present and the consecutive ones below it, write
δ_X = E(X − 1) − E(X) for the steps and r_X = δ_X / δ_(X−1) for the ratios of
successive steps. Each published fast form gives a *candidate*:

* two-point, E(X) = E_CBS + A (X + 1) exp(−9 √X), from (X_top − 1, X_top)
  (Karton and Martin 2006);
* three-point, E(X) = E_CBS + B exp(−C X), from (X_top − 2, X_top − 1, X_top)
  (Feller 1992): a geometric tail with the last ratio, δ r / (1 − r).

Two *continuations* bound what lies beyond the largest basis:

* the **slowest continuation** sums the steps beyond X_top with the series'
  own ratios carried on: each next ratio is the last one times the ratio's
  own rate of change r_X / r_(X−1), but never below the largest ratio seen
  (in none of the three forms does the ratio fall with X: constant for the
  three-point form, rising for the two others; so a falling ratio is not
  trusted to keep falling) and never above the ratio of the slow
  inverse-power form E(X) = E_CBS + A X^−3.4 at the same X (D. G. Truhlar,
  Chem. Phys. Lett. 294, 45 (1998), from memory), unless the largest ratio
  seen is already above it. With fewer than two ratios the ratio's trend is
  unknown and the slow form's ratios are used, so the slowest continuation
  is the slow form through the two largest bases (as far as it is not faster
  than the one ratio seen). The sum of a series whose ratios are bounded is
  bounded by the corresponding geometric or inverse-power sum (exact
  property of series);
* the **fastest continuation** is, up to X_top = 4, the two-point form (the
  interval reaches the candidates and no further; the calibration limits
  all lie below the two-point estimate at quadruple-zeta); from X_top = 5 on, where the calibration shows the
  published forms overshooting (first-row atoms converge faster than all of
  them beyond quintuple-zeta: Ne's step ratio is 0.27 and 0.28 up to 5Z and
  below 0.1 after it, with no sign of it before), no step at all: the
  largest basis' energy itself.

The interval of a candidate c reaches the farthest of the other estimates:

    c ± max |c − E_other|   over the two-point, three-point, slowest and fastest estimates,

cut from above, for a total energy, at E(X_top): the variational principle
puts the limit below every finite-basis energy (exact property). The record's
energy is the centre of what is left and its uncertainty the half-width. Of
the candidates the one with the smallest uncertainty is chosen, and the
record says which. Nothing in the rule is fitted to a system: every estimate
is the last step δ_(X_top) times a factor that comes from a published form
or from the series' own ratios.

For a difference of energies (a reaction or an interaction energy) the same
rule runs on the difference's own series, where errors partly cancel, without
the variational cut (a difference has no variational bound). Where its steps
change sign, the slowest continuation is taken on both sides of E(X_top).

Where the bases cannot support an estimate (no correlation-consistent
family, one cardinal number, no consecutive pair, steps that do not shrink)
the record carries a note and no numbers, never an exception.

Open shells: :func:`basis_limit` takes plain (name, energy) series, so
restricted open-shell totals of atoms go through the same rule; the
calibration (``scripts/calibrate_limits.py``) includes C, N, O and F as
equivalence-restricted ("spherical atom") ROHF energies, the kind of value
the numerical limits are.
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
#: From this largest cardinal number on, the fastest continuation is the largest basis' energy itself.
FAST_FORM_LAST_TRUSTED: int = 4
#: One-line statement of the rule, carried by every record.
RULE = (
    "candidate ± its largest distance to the two-point and three-point estimates and to the slowest and fastest"
    " continuations beyond the largest basis (slowest: the series' own step ratios carried on, at least the largest"
    " seen, at most the X^-3.4 form's; fastest: the two-point form up to QZ, no further step from 5Z on), cut at"
    " the largest basis' energy for a total energy; centre and half-width of that interval; the candidate with the"
    " smallest half-width is chosen"
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


def slow_form_ratio(x: int, power: float = SLOW_POWER) -> float:
    """Step ratio δ_x / δ_(x−1) of the inverse-power form E(X) = E_CBS + A X^-power.

    Parameters
    ----------
    x : int
        Cardinal number, at least 3.
    power : float
        The exponent (3.4 for Hartree–Fock energies, Truhlar 1998).

    Returns
    -------
    float
        The ratio, in (0, 1); it rises towards 1 with x.
    """
    return ((x - 1) ** -power - x**-power) / ((x - 2) ** -power - (x - 1) ** -power)


def _slow_form_tail(x: int, power: float = SLOW_POWER) -> float:
    """Sum of the inverse-power form's steps beyond x, in units of its step δ_x."""
    return 1.0 / ((x / (x - 1)) ** power - 1.0)


def slowest_tail(steps: Sequence[float], x_top: int, power: float = SLOW_POWER, max_terms: int = 100_000) -> float:
    """Sum of the steps beyond the largest basis along the slowest continuation, in units of the last step.

    Parameters
    ----------
    steps : sequence of float
        Steps δ_X = E(X − 1) − E(X) (hartree) of consecutive cardinal numbers
        ending at ``x_top``, in increasing X; only their sizes matter.
    x_top : int
        Cardinal number of the largest basis.
    power : float
        Exponent of the slow inverse-power form whose ratios cap the trend.
    max_terms : int
        Safety bound on the number of summed steps.

    Returns
    -------
    float
        τ ≥ 0 with E(X_top) − E_lim ≤ τ |δ_(X_top)| along the slowest
        continuation; ``math.inf`` when the steps do not shrink (a ratio of
        at least 1), 0 when the last step is zero.

    Notes
    -----
    Next ratio = max(largest ratio seen, min(slow form's ratio, last ratio ×
    the ratio's rate of change)); with fewer than two ratios the rate is
    unknown and the slow form's ratio applies (at least the ratio seen). Once
    the slow form's ratios alone decide, the rest of the sum is the slow
    form's closed-form tail.
    """
    sizes = [abs(float(d)) for d in steps]
    if not sizes or sizes[-1] == 0.0:
        return 0.0
    # a step that follows a zero one has grown without bound; zero after zero stays zero
    ratios = [b / a if a > 0.0 else (math.inf if b > 0.0 else 0.0) for a, b in zip(sizes, sizes[1:])]
    largest = max(ratios, default=0.0)
    if largest >= 1.0:
        return math.inf
    rate = ratios[-1] / ratios[-2] if len(ratios) >= 2 and ratios[-2] > 0.0 else math.inf
    last = ratios[-1] if ratios else None
    tail, term = 0.0, 1.0
    for x in range(x_top + 1, x_top + 1 + max_terms):
        cap = slow_form_ratio(x, power)
        trend = math.inf if last is None or rate == math.inf else last * rate
        ratio = max(largest, min(cap, trend))
        term *= ratio
        if ratio == cap and cap >= largest and (trend >= cap) and (rate == math.inf or rate >= _cap_growth(x, power)):
            # From here on the slow form's ratios decide every step: add its closed-form tail.
            return tail + term * (1.0 + _slow_form_tail(x, power))
        tail += term
        last = ratio
        if term <= 1e-16 * tail:
            break
    return tail


def _cap_growth(x: int, power: float) -> float:
    """Largest growth factor of the slow form's ratio from x on (it shrinks with x)."""
    return slow_form_ratio(x + 1, power) / slow_form_ratio(x, power)


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
        The slowest continuation's estimate (hartree): E(X_top) minus the
        summed steps beyond the largest basis (:func:`slowest_tail`); with
        three bases or fewer, the inverse-power form through the two largest
        unless the one ratio seen is slower. Where the steps change sign, the
        one in the direction of the last step.
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


def _run_below(members: dict[int, tuple[str, float]], top: int) -> list[float]:
    """Energies of the consecutive cardinal numbers ending at ``top``, by increasing X."""
    low = top
    while low - 1 in members:
        low -= 1
    return [members[x][1] for x in range(low, top + 1)]


def _continuations(members: dict[int, tuple[str, float]], top: int) -> tuple[list[float], float]:
    """The slowest-continuation estimates (one, or two where the steps change sign) and the fastest one."""
    energies = _run_below(members, top)
    steps = [a - b for a, b in zip(energies, energies[1:])]
    last, e_top = steps[-1], energies[-1]
    tau = slowest_tail(steps, top)
    monotone = all(d * last > 0.0 for d in steps) or last == 0.0
    reach = tau * abs(last)
    slow = [e_top - math.copysign(reach, last)] if monotone else [e_top - math.copysign(reach, last),
                                                                  e_top + math.copysign(reach, last)]
    (n1, e1), (n2, e2) = members[top - 1], members[top]
    fast = karton_martin_two_point(e1, e2, top - 1, top) if top <= FAST_FORM_LAST_TRUSTED else e_top
    return slow, fast


def _candidates(family: str, members: dict[int, tuple[str, float]], bounded: bool) -> tuple[list[BasisLimit], list[str]]:
    top = max(members)
    if top - 1 not in members:
        return [], [f"{family}: no two consecutive cardinal numbers ending at the largest basis {members[top][0]}"]
    (n1, e1), (n2, e2) = members[top - 1], members[top]
    if bounded and e2 > e1:
        return [], [f"{family}: the energy rises from {n1} to {n2}, so the series does not converge from above"]
    slow, fast = _continuations(members, top)
    if not all(math.isfinite(v) for v in slow):
        return [], [f"{family}: the steps between consecutive bases do not shrink, so no interval can be given"]
    found = [("two-point", (n1, n2), karton_martin_two_point(e1, e2, top - 1, top), KARTON_MARTIN_CITATION)]
    notes = []
    if top - 2 in members:
        n0, e0 = members[top - 2]
        try:
            found.append(("three-point", (n0, n1, n2), feller_three_point(e0, e1, e2, top - 2, top - 1, top),
                          FELLER_CITATION))
        except InputError as exc:
            notes.append(f"{family}: three-point candidate left out: {exc}")
    values = [value for _, _, value, _ in found] + slow + [fast]
    out = []
    for method, bases, value, citation in found:
        half = max(abs(value - other) for other in values)
        low, high = value - half, value + half
        cut = bounded and high > e2
        if cut:
            high = e2
        out.append(BasisLimit(
            energy_total=0.5 * (low + high), uncertainty=0.5 * (high - low), chosen=f"{method} ({', '.join(bases)})",
            method=method, family=family, bases=bases, candidate=value, slow_estimate=slow[0], cut=cut,
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


__all__ = [
    "SLOW_POWER",
    "FAST_FORM_LAST_TRUSTED",
    "TRUHLAR_CITATION",
    "RULE",
    "BasisLimit",
    "basis_limit",
    "inverse_power_two_point",
    "slow_form_ratio",
    "slowest_tail",
]
