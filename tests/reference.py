"""The tests' bridge to the reference library (PySCF): same shells, same geometry, tight RHF.

hfcore itself never imports the reference library; only the tests do, through
this module, so that every comparison hands it the very same shells
(exponents and coefficients of normalised primitives), the same coordinates
in bohr, the same charge and the same Cartesian or spherical choice.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
from pyscf import gto, scf

from hfcore import elements
from hfcore.basis import get_family
from hfcore.basis.shells import ElementShell
from hfcore.geometry import Molecule


def family_shells(molecule: Molecule, names: str | Mapping[str, str]) -> dict[str, list[ElementShell]]:
    """Each element's shells, taken from its basis family directly.

    The shells come from the family, not from :func:`hfcore.build_basis`,
    so a comparison still notices a placement that picked the wrong shells.

    Parameters
    ----------
    molecule : Molecule
        The elements to cover.
    names : str or mapping
        One family name for every element, or element symbol -> family name.

    Returns
    -------
    dict
        Element symbol -> list of ElementShell.
    """
    numbers = {elements.symbol(int(z)): int(z) for z in set(molecule.atomic_numbers)}
    per_element = dict.fromkeys(numbers, names) if isinstance(names, str) else names
    return {s: get_family(per_element[s]).element_shells(z) for s, z in numbers.items()}


def _shell_lists(shells: Sequence[ElementShell]) -> list[list]:
    """ElementShells as the reference library's shell lists ``[l, [exponent, c_1, ..., c_k], ...]``."""
    return [
        [es.l, *([float(e), *map(float, es.coefficients[:, k])] for k, e in enumerate(es.exponents))]
        for es in shells
    ]


def reference_mole(molecule: Molecule, shells: Mapping[str, Sequence[ElementShell]], *, spherical: bool) -> gto.Mole:
    """The reference library's molecule carrying exactly the given shells.

    Parameters
    ----------
    molecule : Molecule
        Nuclei, coordinates (bohr) and charge.
    shells : mapping
        Element symbol -> ElementShells, in the order the reference library
        keeps (increasing l) where a test compares matrices element by element.
    spherical : bool
        Real spherical functions for l >= 2 if true, Cartesian otherwise.

    Returns
    -------
    pyscf.gto.Mole
    """
    return _mole(molecule, {s: _shell_lists(shs) for s, shs in shells.items()}, spherical)


def named_reference_mole(molecule: Molecule, name: str, *, spherical: bool) -> gto.Mole:
    """The reference library's molecule in the reference library's own copy of a named set."""
    return _mole(molecule, name, spherical)


def _mole(molecule: Molecule, basis: str | dict, spherical: bool) -> gto.Mole:
    # A ghost atom (basis functions, no nucleus, no electrons) is written "ghost-O"; the
    # reference library then takes the shells of "O" and gives the atom charge 0.
    names = [("ghost-" if g else "") + s for s, g in zip(molecule.symbols, molecule.ghosts)]
    atoms = [(s, tuple(map(float, r))) for s, r in zip(names, molecule.coordinates)]
    return gto.M(
        atom=atoms,
        basis=basis,
        unit="Bohr",
        charge=molecule.charge,
        # The reference library refuses a spin that contradicts the electron
        # count; integral tests use odd-electron nuclei sets.
        spin=molecule.n_electrons % 2,
        cart=not spherical,
        verbose=0,
    )


def reference_rhf(mol: gto.Mole, *, conv_tol: float = 1e-11, conv_tol_grad: float | None = None, callback=None):
    """A converged RHF run of the reference library.

    Parameters
    ----------
    mol : pyscf.gto.Mole
        The molecule, its own integrals.
    conv_tol : float
        Energy convergence in hartree.
    conv_tol_grad : float, optional
        Orbital-gradient convergence; the reference library's default if None.
    callback : callable, optional
        Called by the reference library after each iteration.

    Returns
    -------
    pyscf.scf.hf.RHF
        The run, with ``e_tot`` in hartree.
    """
    mf = scf.RHF(mol)
    mf.conv_tol = conv_tol
    if conv_tol_grad is not None:
        mf.conv_tol_grad = conv_tol_grad
    mf.callback = callback
    mf.kernel()
    assert mf.converged
    return mf


def reference_energy(mol: gto.Mole) -> float:
    """RHF total energy in hartree of the reference library, conv_tol 1e-11."""
    return float(reference_rhf(mol).e_tot)


def unit_norm_scale(mol: gto.Mole) -> np.ndarray:
    """Factors, shape (nao,), that make each of the reference library's functions unit-normalised.

    Its Cartesian components are not all unit functions (xy against xx);
    hfcore's are. Multiply a covariant index (integrals) by the factor and
    divide a contravariant one (densities). All ones for spherical sets.
    """
    return 1.0 / np.sqrt(np.diag(mol.intor("int1e_ovlp")))
