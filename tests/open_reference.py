"""The tests' bridge to the reference library (PySCF) for open shells: same shells, same spin, tight UHF/ROHF."""

from __future__ import annotations

from pyscf import scf
from reference import family_shells, reference_mole

from hfcore.basis import build_basis
from hfcore.geometry import Molecule


def open_reference_mole(molecule: Molecule, basis_name: str):
    """The reference library's molecule with hfcore's shells of ``basis_name`` and the molecule's 2S."""
    spherical = build_basis(molecule, basis_name).spherical
    mol = reference_mole(molecule, family_shells(molecule, basis_name), spherical=spherical)
    mol.spin = molecule.n_alpha - molecule.n_beta
    mol.build()
    return mol


def reference_open_scf(mol, method: str = "uhf", *, auxbasis=None, conv_tol: float = 1e-12):
    """A converged UHF or ROHF run of the reference library (energy to 1e-12, gradient to 1e-8)."""
    mf = (scf.UHF if method == "uhf" else scf.ROHF)(mol)
    if auxbasis is not None:
        mf = mf.density_fit(auxbasis=auxbasis)
    mf.conv_tol = conv_tol
    mf.conv_tol_grad = 1e-8
    mf.verbose = 0
    mf.kernel()
    assert mf.converged
    return mf
