"""Choosing and placing the fitting set of a density-fitted run.

``auto`` picks the exchange-fitting set made for a correlation-consistent
orbital set (cc-pVTZ-JKFIT also for cc-pVDZ, as is common practice) and
def2-universal-JKFIT for every other orbital set, and for any element the
matching set lacks (the cc-pVXZ-JKFIT sets have no He, Li, Be, Ne, Na, Mg
or Ar).
"""

from __future__ import annotations

from dataclasses import dataclass

from .. import elements
from ..errors import InputError
from ..geometry import Molecule
from . import build_basis, get_family
from .family import BasisFamily
from .library import name_key
from .shells import BasisSet

#: The ``fit_basis`` value that picks the set from the orbital basis.
AUTO: str = "auto"
#: The fitting set for orbital sets without a matching one, and for elements it lacks.
UNIVERSAL: str = "def2-universal-JKFIT"
_MATCHING = {
    "cc-pvdz": "cc-pVTZ-JKFIT",
    "cc-pvtz": "cc-pVTZ-JKFIT",
    "cc-pvqz": "cc-pVQZ-JKFIT",
    "cc-pv5z": "cc-pV5Z-JKFIT",
    "aug-cc-pvdz": "cc-pVTZ-JKFIT",
    "aug-cc-pvtz": "cc-pVTZ-JKFIT",
}


@dataclass(frozen=True)
class FittingChoice:
    """The fitting set placed on a molecule and how it was chosen.

    Attributes
    ----------
    basis : BasisSet
        The fitting functions (real spherical unless the set says otherwise).
    notes : tuple of str
        Plain sentences on the choice, e.g. which set ``auto`` took and
        which elements came from def2-universal-JKFIT instead.
    """

    basis: BasisSet
    notes: tuple[str, ...] = ()


def fitting_basis(molecule: Molecule, orbital: BasisSet, choice: str | BasisFamily | BasisSet) -> FittingChoice:
    """Place a fitting set on a molecule.

    Parameters
    ----------
    molecule : Molecule
    orbital : BasisSet
        The orbital basis (its name decides ``auto``).
    choice : str, BasisFamily or BasisSet
        ``"auto"``, a set's name (shipped, or any the optional
        basis-set-exchange package knows), a family, or a placed set.

    Returns
    -------
    FittingChoice

    Raises
    ------
    BasisError
        An unknown name, or a set that lacks an element of the molecule
        (naming the element and the geometry line).
    """
    if isinstance(choice, BasisSet):
        if {s.atom for s in choice.shells} != set(range(molecule.n_atoms)):
            raise InputError("the fitting set given as a BasisSet must have functions on every atom of the molecule")
        return FittingChoice(choice)
    if isinstance(choice, str) and choice.strip().lower() == AUTO:
        return _auto(molecule, orbital)
    family = choice if isinstance(choice, BasisFamily) else get_family(str(choice).strip())
    return FittingChoice(build_basis(molecule, family))


def _auto(molecule: Molecule, orbital: BasisSet) -> FittingChoice:
    main = orbital.name.split(" (")[0]
    match = {name_key(k): v for k, v in _MATCHING.items()}.get(name_key(main))
    if match is None:
        note = f"auto: {UNIVERSAL} (no exchange-fitting set made for {main})"
        return FittingChoice(build_basis(molecule, UNIVERSAL), (note,))
    family = get_family(match)
    present = sorted({int(z) for z in molecule.atomic_numbers})
    lacking = [elements.symbol(z) for z in present if not family.covers(z)]
    notes = [f"auto: {match} for {main}"]
    if lacking:
        notes.append(f"{match} lacks {', '.join(lacking)}: {UNIVERSAL} used for {'it' if len(lacking) == 1 else 'them'}")
    aux = build_basis(molecule, family, per_element=dict.fromkeys(lacking, UNIVERSAL))
    return FittingChoice(aux, tuple(notes))


#: The RI set ``auto`` takes for orbital sets not in :data:`MATCHING_RI`.
DEFAULT_RI: str = "def2-TZVP-RIFIT"
#: The RI set ``auto`` takes for each orbital set (keys compared case-blind).
MATCHING_RI: dict[str, str] = {
    "cc-pvdz": "cc-pVDZ-RIFIT",
    "cc-pvtz": "cc-pVTZ-RIFIT",
    "cc-pvqz": "cc-pVQZ-RIFIT",
    "aug-cc-pvdz": "cc-pVDZ-RIFIT",
    "aug-cc-pvtz": "cc-pVTZ-RIFIT",
    "def2-svp": "def2-SVP-RIFIT",
    "def2-tzvp": "def2-TZVP-RIFIT",
}


def mp2_fitting_basis(molecule: Molecule, orbital: BasisSet, choice: str | BasisFamily | BasisSet) -> FittingChoice:
    """Place the fitting set of a density-fitted MP2.

    Parameters
    ----------
    molecule : Molecule
    orbital : BasisSet
        The orbital basis (its name decides ``auto``).
    choice : str, BasisFamily or BasisSet
        ``"auto"``, a set's name (e.g. ``"cc-pvtz-ri"``), a family or a
        placed set.

    Returns
    -------
    FittingChoice

    Raises
    ------
    BasisError
        An unknown set, or one lacking an element of the molecule.
    """
    if isinstance(choice, str) and choice.strip().lower() == AUTO:
        main = orbital.name.split(" (")[0]
        name = MATCHING_RI.get(main.strip().lower(), DEFAULT_RI)
        placed = fitting_basis(molecule, orbital, name)
        return FittingChoice(placed.basis, (f"auto: {name} for {main}",))
    return fitting_basis(molecule, orbital, choice)


__all__ = ["FittingChoice", "fitting_basis", "mp2_fitting_basis", "AUTO", "UNIVERSAL", "MATCHING_RI", "DEFAULT_RI"]
