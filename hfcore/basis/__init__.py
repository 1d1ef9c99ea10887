"""Basis sets: shell records, families of published and fitted sets, placement on molecules.

The three-line use::

    mol = hfcore.read_xyz("inputs/water.xyz")
    basis = hfcore.build_basis(mol, "sto-3g")
    basis.n_functions

See :mod:`hfcore.basis.shells` for the ordering and normalisation
conventions every family follows.
"""

from __future__ import annotations

from collections.abc import Mapping

from .. import elements
from ..errors import BasisError
from ..geometry import Molecule
from .family import BasisFamily
from .shells import BasisSet, ElementShell, Shell


def get_family(name: str, zeta: Mapping[str, float] | None = None) -> BasisFamily:
    """Find a basis family by name.

    Parameters
    ----------
    name : str
        ``"sto-1g"`` ... ``"sto-6g"`` for hfcore's fitted Slater sets, or the
        name of a published set (case-insensitive, usual spellings).
    zeta : mapping, optional
        Slater exponent overrides for the fitted STO-nG family, keys
        ``"He"`` (all shells of He) or ``"C:2sp"`` (one shell).

    Returns
    -------
    BasisFamily

    Raises
    ------
    BasisError
        If no family of that name is known.
    """
    from . import sto

    family = sto.family_for_name(name, zeta)
    if family is not None:
        return family
    if zeta:
        raise BasisError(f"--zeta applies only to the fitted STO-nG sets, not to {name!r}")
    from . import library

    return library.find_family(name)


def build_basis(
    molecule: Molecule,
    basis: str | BasisFamily = "sto-3g",
    *,
    spherical: bool | None = None,
    zeta: Mapping[str, float] | None = None,
    per_element: Mapping[str, str | BasisFamily] | None = None,
) -> BasisSet:
    """Place basis functions on every atom of a molecule.

    Parameters
    ----------
    molecule : Molecule
    basis : str or BasisFamily
        The basis for all elements not named in ``per_element``.
    spherical : bool, optional
        Real spherical (True) or Cartesian (False) functions; default is the
        main family's convention.
    zeta : mapping, optional
        Slater exponent overrides (fitted STO-nG only), see :func:`get_family`.
    per_element : mapping, optional
        Element symbol -> basis name or family, for mixed basis sets.

    Returns
    -------
    BasisSet

    Raises
    ------
    BasisError
        If a family does not cover an element of the molecule (the message
        names the geometry file and the line of the first such atom).
    """
    main = basis if isinstance(basis, BasisFamily) else get_family(basis, zeta)
    overrides: dict[int, BasisFamily] = {}
    for key, value in (per_element or {}).items():
        try:
            z = elements.atomic_number(str(key))
        except KeyError:
            raise BasisError(f"unknown element {key!r} in a per-element basis") from None
        overrides[z] = value if isinstance(value, BasisFamily) else get_family(value)
    sph = main.default_spherical if spherical is None else bool(spherical)
    cache: dict[int, list[ElementShell]] = {}
    shells: list[Shell] = []
    for atom, (z, r) in enumerate(zip(molecule.atomic_numbers, molecule.coordinates)):
        z = int(z)
        family = overrides.get(z, main)
        if z not in cache:
            if not family.covers(z):
                line = molecule.line_of(atom)
                where = f"{molecule.source}:{line}" if line else molecule.source
                raise BasisError(f"{where}: basis {family.name} does not cover element {elements.symbol(z)}")
            cache[z] = family.element_shells(z)
        for es in cache[z]:
            shells.append(Shell(es.l, es.exponents, es.coefficients, r, atom, es.label))
    name = main.name
    if overrides:
        name += " (" + ", ".join(f"{elements.symbol(z)}: {f.name}" for z, f in sorted(overrides.items())) + ")"
    return BasisSet(name, tuple(shells), sph)


def require_room_for(molecule: Molecule, basis: BasisSet) -> None:
    """Refuse, before any integral is computed, a basis with fewer functions than occupied orbitals.

    Parameters
    ----------
    molecule : Molecule
        Supplies the electron count (sum of Z minus the charge).
    basis : BasisSet
        The basis placed on it.

    Raises
    ------
    BasisError
        If ``basis.n_functions`` is below ``n_electrons / 2``. (Removing
        near-linear dependence can leave fewer orbitals still; the SCF
        checks that count after the overlap is known.)
    """
    n_occ = (molecule.n_electrons + 1) // 2
    if basis.n_functions < n_occ:
        raise BasisError(
            f"{molecule.source}: {molecule.n_electrons} electrons need {n_occ} orbitals but basis {basis.name} "
            f"has only {basis.n_functions} functions on this molecule; use a larger basis"
        )


__all__ = ["BasisSet", "Shell", "ElementShell", "BasisFamily", "build_basis", "get_family", "require_room_for"]
