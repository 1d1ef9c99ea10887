"""Chemical equations over geometry files: the syntax, the species, the balance checks.

An equation::

    formaldehyde.xyz + hydrogen.xyz -> methanol.xyz
    2 water.xyz -> water_dimer.xyz
    ammonia.xyz + water.xyz -> ammonium.xyz[+1] + hydroxide.xyz[-1]

Each side is a list of species joined by ``+``; a species is a geometry
file, optionally preceded by a stoichiometric factor (a positive whole
number, decimal or fraction such as ``1/2``, separated by a space) and
optionally followed by square brackets holding its charge (``[+1]``,
``[-2]``; 0 without one) and then its spin in the trade's words
(``[triplet]``, ``[+1 doublet]``: singlet, doublet, triplet, quartet,
quintet, sextet; without a word, 1 for an even and 2 for an odd electron
count). Elements and charge must balance and every spin must fit its
species' electrons (:func:`hfcore.geometry.check_multiplicity`);
:func:`load_reactions` checks all of it when the files are read, before
anything runs. Identical species (same atoms, positions, charge and
multiplicity), in one equation or in several, become one :class:`Species`;
the same file with two spins is two species.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from typing import TYPE_CHECKING

from .. import elements
from ..errors import InputError
from ..geometry import check_multiplicity, default_multiplicity

if TYPE_CHECKING:
    from ..geometry import Molecule

ARROW = "->"
_TERM = re.compile(r"^(?:(?P<coef>\d+(?:\.\d*)?(?:/\d+)?)\s+)?(?P<path>[^\[\]]+?)\s*(?:\[(?P<charge>[^\]]*)\])?$")
# A plus sign between species, not the one inside a charge such as [+1].
_PLUS = re.compile(r"\+(?![^\[]*\])")
#: The spin words an equation takes after the charge, by multiplicity 2S+1.
SPIN_WORDS: dict[str, int] = {"singlet": 1, "doublet": 2, "triplet": 3, "quartet": 4, "quintet": 5, "sextet": 6}


@dataclass(frozen=True)
class Species:
    """One distinct molecule of a set of reactions.

    Attributes
    ----------
    path : str
        The geometry file as written in the equation.
    charge : int
    molecule : Molecule
        Read from ``path`` with ``charge``, carrying ``multiplicity``.
    multiplicity : int
        Spin multiplicity 2S+1 (the word in the equation, else 1 for an
        even and 2 for an odd electron count); None on construction takes
        ``molecule.spin_multiplicity``.
    """

    path: str
    charge: int
    molecule: "Molecule" = field(repr=False)
    multiplicity: int | None = None

    def __post_init__(self) -> None:
        # None takes the molecule's own (its given multiplicity, or the default of its electron count).
        if self.multiplicity is None:
            object.__setattr__(self, "multiplicity", int(self.molecule.spin_multiplicity))

    @property
    def label(self) -> str:
        """The file name, with the charge (when not zero) and the spin (when not a singlet) in brackets."""
        inside = [f"{self.charge:+d}"] if self.charge else []
        if self.multiplicity != 1:
            inside.append(spin_word(self.multiplicity))
        return self.path + (f"[{' '.join(inside)}]" if inside else "")

    @property
    def open_shell(self) -> bool:
        """True unless the species is a singlet."""
        return self.multiplicity != 1

    @property
    def formula(self) -> str:
        """Element counts in the order C, H, then alphabetical (e.g. ``CH4O``)."""
        return _formula(_element_counts(self.molecule, Fraction(1)))


@dataclass(frozen=True)
class Reaction:
    """A balanced equation over species.

    Attributes
    ----------
    text : str
        The equation as given.
    terms : tuple of (int, Fraction)
        Species index and signed stoichiometric factor: negative for a
        reactant, positive for a product. A species on both sides appears
        twice.
    """

    text: str
    terms: tuple[tuple[int, Fraction], ...]

    def energy(self, species_energies: Sequence[float]) -> float:
        """Σ ν E over the terms (hartree), from the energies of all species.

        The factors of each species are added first, so a species on both
        sides with equal factors cancels exactly.
        """
        net: dict[int, Fraction] = {}
        for k, nu in self.terms:
            net[k] = net.get(k, Fraction(0)) + nu
        return float(sum(float(nu) * species_energies[k] for k, nu in net.items() if nu))


def _element_counts(molecule: Molecule, factor: Fraction) -> dict[str, Fraction]:
    counts: dict[str, Fraction] = {}
    for symbol in molecule.symbols:
        counts[symbol] = counts.get(symbol, Fraction(0)) + factor
    return counts


def _formula(counts: dict[str, Fraction]) -> str:
    order = sorted(counts, key=lambda s: (s != "C", s != "H", s))
    return "".join(f"{s}{'' if counts[s] == 1 else counts[s]}" for s in order if counts[s])


def _coefficient(text: str, spec: str) -> Fraction:
    try:
        value = Fraction(text)
    except (ValueError, ZeroDivisionError):
        raise InputError(f"reaction {spec!r}: {text!r} is not a stoichiometric factor") from None
    if value <= 0:
        raise InputError(f"reaction {spec!r}: the stoichiometric factor {text!r} must be positive")
    return value


def spin_word(multiplicity: int) -> str:
    """The trade's word for a multiplicity (``"triplet"``), or ``"multiplicity M"`` beyond sextet."""
    for word, m in SPIN_WORDS.items():
        if m == multiplicity:
            return word
    return f"multiplicity {multiplicity}"


def _charge_and_spin(text: str, spec: str) -> tuple[int, int | None]:
    """(charge, multiplicity or None) from the inside of a species' brackets, e.g. ``+1 doublet``."""
    words = text.split()
    charge = 0
    if words and words[0][0] in "+-0123456789":
        try:
            charge = int(words.pop(0))
        except ValueError:
            raise InputError(f"reaction {spec!r}: the charge [{text}] must be a whole number such as [+1] or [-2]") from None
    if not words:
        return charge, None
    if len(words) > 1:
        raise InputError(f"reaction {spec!r}: cannot read [{text}]; write the charge then one spin word, e.g. [+1 doublet]")
    word = words[0].lower()
    if word not in SPIN_WORDS:
        raise InputError(
            f"reaction {spec!r}: unknown spin {words[0]!r} in [{text}]: the charge must be a whole number such as [+1] "
            f"or [-2], the spin after it one of {', '.join(SPIN_WORDS)}, e.g. [triplet] or [+1 doublet]"
        )
    return charge, SPIN_WORDS[word]


def parse_reaction(spec: str) -> tuple[list[tuple[Fraction, str, int]], list[tuple[Fraction, str, int]]]:
    """Split an equation into (factor, path, charge) terms, without reading any file.

    The spin words are checked but left out; :func:`parse_equation` keeps them.

    Raises
    ------
    InputError
        As :func:`parse_equation`.
    """
    left, right = parse_equation(spec)
    return [t[:3] for t in left], [t[:3] for t in right]


def parse_equation(spec: str) -> tuple[list[tuple[Fraction, str, int, int | None]], list[tuple[Fraction, str, int, int | None]]]:
    """Split an equation into its terms, spins included, without reading any file.

    Parameters
    ----------
    spec : str
        ``"[factor] file[charge spin] + ... -> [factor] file[charge spin] + ..."``.

    Returns
    -------
    (reactants, products)
        Each a list of (factor, path, charge, multiplicity); the
        multiplicity is ``None`` where no spin word was written.

    Raises
    ------
    InputError
        If there is not exactly one ``->``, a side is empty, a term is
        malformed or a spin word unknown.
    """
    if spec.count(ARROW) != 1:
        raise InputError(f"reaction {spec!r}: write one '->' between reactants and products, e.g. 'a.xyz + b.xyz -> c.xyz'")
    sides = []
    for side in spec.split(ARROW):
        terms = []
        for item in _PLUS.split(side):
            item = item.strip()
            if not item:
                raise InputError(f"reaction {spec!r}: a species is missing (an empty side or a '+' with nothing beside it)")
            match = _TERM.match(item)
            if match is None:
                raise InputError(f"reaction {spec!r}: cannot read {item!r}; write '[factor] file[charge]', e.g. '2 water.xyz' or 'ammonium.xyz[+1]'")
            coef = _coefficient(match["coef"], spec) if match["coef"] else Fraction(1)
            charge, multiplicity = (
                _charge_and_spin(match["charge"], spec) if match["charge"] is not None else (0, None)
            )
            terms.append((coef, match["path"].strip(), charge, multiplicity))
        sides.append(terms)
    return sides[0], sides[1]


def _signed(q: Fraction) -> str:
    return "0" if q == 0 else f"{'+' if q > 0 else ''}{q}"


def _check_balance(spec: str, sides: list[list[tuple[Fraction, Species]]]) -> None:
    totals = []
    for terms in sides:
        counts: dict[str, Fraction] = {}
        charge = Fraction(0)
        for coef, species in terms:
            for symbol, n in _element_counts(species.molecule, coef).items():
                counts[symbol] = counts.get(symbol, Fraction(0)) + n
            charge += coef * species.charge
        totals.append((counts, charge))
    (left, q_left), (right, q_right) = totals
    for symbol in sorted(set(left) | set(right), key=elements.atomic_number):
        a, b = left.get(symbol, Fraction(0)), right.get(symbol, Fraction(0))
        if a != b:
            raise InputError(f"reaction {spec!r} is not balanced: {symbol} {a} on the left, {b} on the right")
    if q_left != q_right:
        raise InputError(
            f"reaction {spec!r} is not balanced in charge: {_signed(q_left)} on the left, {_signed(q_right)} on the right"
        )


def load_reactions(specs: Sequence[str], *, units: str = "angstrom") -> tuple[tuple[Species, ...], tuple[Reaction, ...]]:
    """Read the geometries of one or more equations and check their balance.

    Parameters
    ----------
    specs : sequence of str
        Equations (see the module notes for the syntax).
    units : {"angstrom", "bohr"}
        Units of every geometry file.

    Returns
    -------
    (tuple of Species, tuple of Reaction)
        Distinct species in order of first appearance (identical geometry,
        charge and multiplicity count once), and the reactions over them.

    Raises
    ------
    InputError
        A malformed equation, an unknown spin word, a missing or bad file,
        an element or charge imbalance, or a spin that does not fit a
        species' electrons.
    """
    from ..geometry import read_xyz

    if isinstance(specs, str):
        specs = [specs]
    if not specs:
        raise InputError("give at least one reaction, e.g. 'formaldehyde.xyz + hydrogen.xyz -> methanol.xyz'")
    species: list[Species] = []
    keys: dict[tuple, int] = {}
    reactions = []
    for spec in specs:
        reactants, products = parse_equation(spec)
        sides: list[list[tuple[Fraction, Species]]] = []
        terms: list[tuple[int, Fraction]] = []
        for sign, side in ((-1, reactants), (1, products)):
            resolved = []
            for coef, path, charge, given in side:
                molecule = read_xyz(path, units=units, charge=charge)
                multiplicity = _spin_of(spec, path, charge, given, molecule.n_electrons)
                key = (molecule.atomic_numbers.tobytes(), molecule.coordinates.tobytes(), charge, multiplicity)
                if key not in keys:
                    keys[key] = len(species)
                    species.append(Species(path, charge, molecule.with_multiplicity(multiplicity), multiplicity))
                resolved.append((coef, species[keys[key]]))
                terms.append((keys[key], sign * coef))
            sides.append(resolved)
        _check_balance(spec, sides)
        reactions.append(Reaction(spec, tuple(terms)))
    return tuple(species), tuple(reactions)


def _spin_of(spec: str, path: str, charge: int, given: int | None, n_electrons: int) -> int:
    """The multiplicity of one species, checked against its electrons (one line naming the equation)."""
    where = f"reaction {spec!r}: {path}"
    if n_electrons <= 0:
        raise InputError(f"{where}" + (f"[{charge:+d}]" if charge else "") + f" has {n_electrons} electrons; nothing to compute: check its charge")
    if given is None:
        return default_multiplicity(n_electrons)
    inside = (f"{charge:+d} " if charge else "") + spin_word(given)
    return check_multiplicity(n_electrons, given, f"{where}[{inside}]")


__all__ = ["ARROW", "SPIN_WORDS", "spin_word", "Species", "parse_equation", "Reaction", "parse_reaction", "load_reactions"]
