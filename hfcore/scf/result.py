"""The records an RHF run returns: one per iteration and one for the run."""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from .._deprecation import rename_fields
from .._version import __version__
from ..errors import InputError
from .options import SCFOptions

if TYPE_CHECKING:
    from .._memory import MemoryBudget
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from .stability import StabilityReport

#: What the numbers in an RHF run's record (:meth:`RHFResult.to_dict`) mean.
UNITS: dict[str, str] = {
    "energy": "hartree",
    "length": "bohr",
    "orbital_energies": "hartree",
    "dipole": "e*bohr (atomic units); dipole_debye: debye",
    "quadrupole": "e*bohr^2 (atomic units, traceless); quadrupole_debye_angstrom: debye*angstrom",
    "charges": "e (elementary charge)",
    "time": "seconds",
}


@dataclass(frozen=True)
class SCFIteration:
    """What one SCF iteration measured.

    Attributes
    ----------
    iteration : int
        1-based iteration number.
    energy : float
        Total energy (hartree) of the density the iteration's Fock matrix
        was built from.
    delta_e : float
        Change from the previous iteration's energy; for the first
        iteration, the change from the guess density's energy, or the full
        energy when the guess has none (core guess).
    gradient_norm : float
        Largest absolute element of the orbital gradient F D S - S D F in
        the orthonormal basis.
    diis_size : int
        Number of Fock/error pairs the accelerator held after the step
        (0 without DIIS).
    aid : str
        The accelerator that made the next Fock matrix: the chosen one
        (e.g. ``"diis"``) or an automatic aid (``"diis+level_shift"``,
        ``"damping+level_shift"``); empty for the converged iteration.
    solution : int
        0 for the SCF from the guess; k for the SCF started after the k-th
        rotation along an unstable mode (see :mod:`hfcore.scf.stability`).
    """

    iteration: int
    energy: float
    delta_e: float
    gradient_norm: float
    diis_size: int
    aid: str = ""
    solution: int = 0


@dataclass(frozen=True)
class RHFResult:
    """The outcome of a restricted Hartree-Fock run.

    All energies in hartree; matrices in the basis' own functions (nbf of
    them) unless stated. ``nmo = nbf - n_dropped``.

    Attributes
    ----------
    energy_total : float
        Electronic plus nuclear repulsion energy.
    energy_nuclear : float
        Nuclear repulsion energy.
    energy_one_electron : float
        tr(D H), kinetic plus nuclear attraction.
    energy_two_electron : float
        ½ tr(D G) with G = J - ½ K.
    energy_electronic : float
        One- plus two-electron energy.
    orbital_energies : ndarray, shape (nmo,)
        Canonical orbital energies, ascending.
    coefficients : ndarray, shape (nbf, nmo)
        Canonical orbitals as columns, S-orthonormal.
    occupations : ndarray, shape (nmo,)
        2.0 for occupied, 0.0 for virtual orbitals.
    density : ndarray, shape (nbf, nbf)
        Total density 2 C_occ C_occᵀ of the canonical orbitals. It differs
        from the density the energy was evaluated at by less than one SCF
        step (of the order of ``gradient_tol``).
    fock : ndarray, shape (nbf, nbf)
        Fock matrix of the last iteration; ``coefficients`` diagonalise it.
    overlap : ndarray, shape (nbf, nbf)
        Overlap matrix S.
    core_hamiltonian : ndarray, shape (nbf, nbf)
        H = T + V.
    converged : bool
        True if both convergence criteria were met.
    iterations : int
        Number of iterations run.
    history : list of SCFIteration
        One record per iteration.
    n_dropped : int
        Overlap eigenvectors dropped for near-linear dependence.
    timings : dict of str to float
        Wall-clock seconds of the stages "integrals", "guess", "scf" and
        "total".
    molecule : Molecule or None
        The molecule (None when the SCF ran on bare matrices).
    basis : BasisSet or None
        The basis (None when the SCF ran on bare matrices).
    options : SCFOptions
        The settings used.
    message : str
        Why the run stopped, in words.
    jk_mode : {"stored", "stored-lean", "direct", "fitted", "given"}
        How J and K were built: from stored integrals (with an exchange
        kernel, or lean: K from the integrals themselves), by recomputing
        them every iteration, by density fitting, or by a builder handed to
        :func:`solve_rhf`.
    eri_memory_bytes : int
        Predicted memory of the stored integrals (bytes), whichever mode
        ran; 0 when unknown (bare matrices). In fitted mode, the predicted
        peak of the fitted factors.
    aufbau : bool
        True when the occupied space of the density the energy belongs to
        holds the lowest orbitals of its own Fock matrix (no virtual orbital
        below an occupied one).
    aufbau_gap : float
        Lowest virtual minus highest occupied orbital energy of that
        density's Fock matrix (hartree); negative when ``aufbau`` is False,
        +inf without virtual orbitals.
    aids : tuple of str
        Automatic convergence aids switched on during the run, in order
        (empty when the chosen accelerator sufficed).
    stability : StabilityReport or None
        What the stability analysis checked and did; None with
        ``stability="skip"`` or for an unconverged run.
    fit_basis : BasisSet or None
        The fitting set of a fitted run.
    fit_notes : tuple of str
        How the fitting set was chosen (``auto``), and what it lacked.
    fit_storage : {"stored", "blocked", ""}
        Fitted factors kept, or recomputed in blocks every iteration.
    fit_dropped : int
        Metric eigenvectors dropped as near-singular.
    memory_budget : MemoryBudget or None
        The memory budget the run measured once, with the bound that set
        it (None for bare matrices).
    resource_notes : tuple of str
        What was capped to fit the machine (threads beyond the usable
        cores), as the faces print it.
    warnings : tuple of str
        Findings a face should show, e.g. that a lower unrestricted
        solution exists (set by :func:`hfcore.scf.run_scf`).
    """

    energy_total: float
    energy_nuclear: float
    energy_one_electron: float
    energy_two_electron: float
    energy_electronic: float
    orbital_energies: np.ndarray
    coefficients: np.ndarray
    occupations: np.ndarray
    density: np.ndarray
    fock: np.ndarray
    overlap: np.ndarray
    core_hamiltonian: np.ndarray
    converged: bool
    iterations: int
    history: list[SCFIteration]
    n_dropped: int
    timings: dict[str, float]
    options: SCFOptions
    message: str
    molecule: "Molecule | None" = None
    basis: "BasisSet | None" = None
    jk_mode: str = "given"
    eri_memory_bytes: int = 0
    aufbau: bool = True
    aufbau_gap: float = float("inf")
    aids: tuple[str, ...] = ()
    stability: "StabilityReport | None" = None
    fit_basis: "BasisSet | None" = None
    fit_notes: tuple[str, ...] = ()
    fit_storage: str = ""
    fit_dropped: int = 0
    memory_budget: "MemoryBudget | None" = None
    resource_notes: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()

    @property
    def method(self) -> str:
        """"RHF" (the open-shell records say "UHF" or "ROHF")."""
        return "RHF"

    @property
    def n_occupied(self) -> int:
        """Number of doubly occupied orbitals."""
        return int(np.count_nonzero(self.occupations > 0))

    @property
    def homo(self) -> int:
        """Index of the highest occupied orbital."""
        return self.n_occupied - 1

    @property
    def lumo(self) -> int | None:
        """Index of the lowest unoccupied orbital, None if every orbital is occupied."""
        return self.n_occupied if self.n_occupied < self.occupations.shape[0] else None

    @property
    def homo_energy(self) -> float:
        """Orbital energy of the HOMO (hartree)."""
        return float(self.orbital_energies[self.homo])

    @property
    def lumo_energy(self) -> float | None:
        """Orbital energy of the LUMO (hartree), None if there is no virtual orbital."""
        lumo = self.lumo
        return None if lumo is None else float(self.orbital_energies[lumo])

    def to_dict(self, analysis: Mapping[str, Any] | None = None) -> dict[str, Any]:
        """The record as the JSON export writes it.

        Parameters
        ----------
        analysis : mapping, optional
            Extra post-SCF quantities (e.g. Mulliken charges, dipole) stored
            under the key ``"analysis"``.

        Returns
        -------
        dict
            Keys ``hfcore``, ``units``, ``molecule``, ``basis``, ``energy``,
            ``scf``, ``orbitals``, ``timings`` (and ``analysis``); energies in
            hartree, coordinates in bohr; arrays stay numpy arrays
            (:func:`hfcore.export.to_json` writes them as lists).

        Raises
        ------
        InputError
            For a result of the SCF on bare matrices (no molecule or basis).
        """
        if self.molecule is None or self.basis is None:
            raise InputError("to_dict needs an RHF result that carries its molecule and basis (from run_rhf)")
        record = {
            "hfcore": {"version": __version__, "method": self.method},
            "units": UNITS,
            "molecule": _molecule_record(self.molecule),
            "basis": basis_record(self),
            "energy": energy_record(self),
            "scf": self._scf_record(),
            "orbitals": {
                "energies": self.orbital_energies,
                "occupations": self.occupations,
                "homo": self.homo,
                "lumo": self.lumo,
            },
            "timings": dict(self.timings),
        }
        if analysis:
            record["analysis"] = dict(analysis)
        return record

    def _scf_record(self) -> dict[str, Any]:
        return {
            **scf_common_record(self),
            "stability": stability_record(self),
            "aufbau": {"satisfied": self.aufbau, "gap": self.aufbau_gap},
        }


def basis_record(result: Any) -> dict[str, Any]:
    """The ``basis`` object of any SCF record's JSON (RHF, UHF, ROHF)."""
    basis, fit = result.basis, result.fit_basis
    return {
        "name": basis.name,
        "spherical": basis.spherical,
        "n_functions": basis.n_functions,
        "n_shells": basis.n_shells,
        "n_dropped": result.n_dropped,
        "fit_basis_name": None if fit is None else fit.name,
        "fit_basis_n_functions": None if fit is None else fit.n_functions,
        # the deprecated keys of the two above, kept for one release
        "fit_name": None if fit is None else fit.name,
        "fit_n_functions": None if fit is None else fit.n_functions,
    }


def energy_record(result: Any) -> dict[str, Any]:
    """The ``energy`` object of any SCF record's JSON (hartree)."""
    return {
        "total": result.energy_total,
        "nuclear_repulsion": result.energy_nuclear,
        "one_electron": result.energy_one_electron,
        "two_electron": result.energy_two_electron,
        "electronic": result.energy_electronic,
    }


def scf_common_record(result: Any) -> dict[str, Any]:
    """The parts of the ``scf`` object every SCF record's JSON shares (the method adds its stability)."""
    opts = result.options
    budget = getattr(result, "memory_budget", None)
    return {
        "converged": result.converged,
        "iterations": result.iterations,
        "jk_mode": result.jk_mode,
        "eri_memory_bytes": result.eri_memory_bytes,
        "memory_budget": None if budget is None else budget.to_dict(),
        "threads": opts.n_threads,
        "resource_notes": list(getattr(result, "resource_notes", ())),
        "fit_storage": result.fit_storage or None,
        "fit_notes": list(result.fit_notes),
        "fit_metric_dropped": result.fit_dropped,
        "thresholds": {
            "energy_tol": opts.energy_tol,
            "gradient_tol": opts.gradient_tol,
            "max_iterations": opts.max_iterations,
            "max_diis_size": opts.max_diis_size,
            "diis_space": opts.max_diis_size,  # deprecated name, kept for one release
            "lindep_threshold": opts.lindep_threshold,
            "screening": opts.screening,
            "stability_threshold": opts.stability_threshold,
        },
        "aids": list(result.aids),
        "warnings": list(result.warnings),
        "history": [
            {
                "iteration": h.iteration,
                "energy": h.energy,
                "delta_e": h.delta_e,
                "gradient_norm": h.gradient_norm,
                "diis_size": h.diis_size,
                "aid": h.aid,
                "solution": h.solution,
            }
            for h in result.history
        ],
    }


def _molecule_record(mol: Molecule) -> dict[str, Any]:
    return {
        "source": mol.source,
        "comment": mol.comment,
        "charge": mol.charge,
        "n_electrons": mol.n_electrons,
        "symbols": mol.symbols,
        "atomic_numbers": mol.atomic_numbers,
        "ghost_atoms": [int(k) for k in np.flatnonzero(mol.ghosts)],
        "coordinates_bohr": mol.coordinates,
    }


def stability_record(result: RHFResult) -> dict[str, Any]:
    """The ``scf.stability`` object of an RHF run's record.

    ``mode`` is always there; with the analysis off every other key is
    null. Eigenvalues are those of the energy Hessian d²E/dκ² in hartree.
    """
    st = result.stability
    if st is None:
        keys = ("stable", "lowest_eigenvalue", "eigenvalues", "threshold", "solutions", "lowest_eigenvalues",
                "rounds", "hessian_products", "message", "eigenvalues_from", "fitted_products", "screen_fit_basis")
        return {"mode": result.options.stability, **dict.fromkeys(keys)}
    return st.to_dict()


rename_fields(RHFResult, {"eri_bytes": "eri_memory_bytes"})

__all__ = ["SCFIteration", "RHFResult", "UNITS", "stability_record"]
