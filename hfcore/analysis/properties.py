"""One-number properties of an SCF state (RHF, UHF or ROHF): orbital gap, Koopmans ionisation energy, virial ratio.

For an open-shell record the HOMO is the highest occupied orbital of either
spin and the LUMO the lowest empty one (``UHFResult.homo_energy``,
``lumo_energy``)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError
from ._checks import require_placed

if TYPE_CHECKING:
    from ..scf.result import RHFResult


@dataclass(frozen=True)
class OrbitalProperties:
    """Properties read off the canonical orbitals and the energy parts.

    Attributes
    ----------
    homo_lumo_gap : float or None
        ε(LUMO) - ε(HOMO) in hartree; None without virtual orbitals.
    koopmans_ionisation : float
        -ε(HOMO) in hartree, the Koopmans estimate of the first vertical
        ionisation energy.
    kinetic : float
        Electronic kinetic energy T = tr(D T) in hartree.
    potential : float
        Potential energy V = E_total - T in hartree (nuclear attraction,
        electron repulsion and nuclear repulsion).
    virial_ratio : float
        -V / T; 2 for an exact or fully variational state at equilibrium
        (virial theorem), close to 2 in a good basis.
    """

    homo_lumo_gap: float | None
    koopmans_ionisation: float
    kinetic: float
    potential: float
    virial_ratio: float

    def to_dict(self) -> dict[str, float | None]:
        """The record as plain numbers (hartree), for JSON."""
        return {
            "homo_lumo_gap": self.homo_lumo_gap,
            "koopmans_ionisation": self.koopmans_ionisation,
            "kinetic": self.kinetic,
            "potential": self.potential,
            "virial_ratio": self.virial_ratio,
        }


def orbital_properties(result: RHFResult, kinetic: np.ndarray | None = None) -> OrbitalProperties:
    """HOMO-LUMO gap, Koopmans ionisation energy and virial ratio of an RHF run.

    Parameters
    ----------
    result : RHFResult
        A finished run that carries its basis (the kinetic energy matrix is
        needed for the virial ratio).
    kinetic : ndarray, shape (nbf, nbf), optional
        The kinetic-energy matrix of ``result.basis`` in hartree, when the
        caller has it (e.g. from the SCF's own integrals); computed otherwise.

    Returns
    -------
    OrbitalProperties
    """
    require_placed(result, "the virial ratio")
    if kinetic is None:
        from ..integrals import kinetic as kinetic_matrix

        kinetic = kinetic_matrix(result.basis)
    nbf = result.basis.n_functions
    if np.shape(kinetic) != (nbf, nbf):
        raise InputError(f"the kinetic-energy matrix has shape {np.shape(kinetic)}; the basis has {nbf} functions")
    lumo = result.lumo_energy
    gap = None if lumo is None else lumo - result.homo_energy
    t = float(np.sum(np.asarray(result.density) * kinetic))
    v = float(result.energy_total) - t
    return OrbitalProperties(
        homo_lumo_gap=gap,
        koopmans_ionisation=-result.homo_energy,
        kinetic=t,
        potential=v,
        virial_ratio=-v / t,
    )


__all__ = ["OrbitalProperties", "orbital_properties"]
