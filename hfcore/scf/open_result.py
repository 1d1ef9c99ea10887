"""The records an open-shell (UHF or ROHF) run returns, in the vocabulary of :class:`RHFResult`.

Per-spin quantities carry ``_alpha`` / ``_beta`` suffixes; ``density`` is
the total density, so every analysis that reads ``result.density``,
``result.overlap``, ``result.molecule`` and ``result.basis`` works on
either record.
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from .options import SCFOptions
from .result import SCFIteration

if TYPE_CHECKING:
    from ..basis.shells import BasisSet
    from ..geometry import Molecule
    from .._memory import MemoryBudget
    from .uhf_stability import OpenStabilityReport


def atom_sums(basis: "BasisSet", matrix: np.ndarray, overlap: np.ndarray) -> np.ndarray:
    """Mulliken atom sums Σ_{μ on A} (M S)_μμ of a density-like matrix, shape (natom,).

    With the spin density D_α − D_β these are the Mulliken spin
    populations (the one place they are computed; :mod:`hfcore.analysis.populations`
    calls it).
    """
    per_function = np.einsum("mn,nm->m", matrix, overlap)
    atoms = basis.function_atoms()
    natom = int(max((s.atom for s in basis.shells), default=-1)) + 1
    return np.bincount(atoms, weights=per_function, minlength=natom)


def _homo(occupations: np.ndarray) -> int | None:
    occupied = np.flatnonzero(occupations > 0)
    return int(occupied[-1]) if occupied.size else None


def _lumo(occupations: np.ndarray) -> int | None:
    empty = np.flatnonzero(occupations == 0)
    return int(empty[0]) if empty.size else None


def _energy_at(energies: np.ndarray, index: int | None) -> float | None:
    return None if index is None else float(energies[index])


@dataclass(frozen=True)
class UHFResult:
    """The outcome of an unrestricted (or restricted open-shell) Hartree-Fock run.

    Energies in hartree; matrices in the basis' own functions (nbf) unless
    stated; ``nmo = nbf - n_dropped``.

    Attributes
    ----------
    energy_total, energy_nuclear, energy_one_electron, energy_two_electron, energy_electronic : float
        As in :class:`RHFResult`; the two-electron energy is
        ½ Σ_σ tr(D_σ (J − K_σ)).
    orbital_energies_alpha, orbital_energies_beta : ndarray, shape (nmo,)
        Canonical orbital energies of each spin, ascending.
    coefficients_alpha, coefficients_beta : ndarray, shape (nbf, nmo)
        Orbitals of each spin as columns, S-orthonormal.
    occupations_alpha, occupations_beta : ndarray, shape (nmo,)
        1.0 for occupied, 0.0 for empty orbitals.
    density_alpha, density_beta : ndarray, shape (nbf, nbf)
        C_occ C_occᵀ of each spin.
    fock_alpha, fock_beta : ndarray, shape (nbf, nbf)
        Fock matrices of each spin at the last iteration.
    overlap, core_hamiltonian : ndarray, shape (nbf, nbf)
    converged : bool
    iterations : int
    history : list of SCFIteration
        The gradient is the largest element of the α and β commutators.
    n_dropped : int
    timings : dict of str to float
        "integrals", "guess", "scf", "stability", "total" seconds.
    options : SCFOptions
    message : str
    s_squared : float
        ⟨S²⟩ of the determinant (:func:`hfcore.scf.spin.s_squared`).
    s_squared_exact : float
        S (S + 1) of the multiplicity.
    n_alpha, n_beta : int
        Electrons of each spin.
    method : {"UHF", "ROHF"}
    molecule, basis, jk_mode, eri_memory_bytes, aids, fit_basis, fit_notes, fit_storage, fit_dropped
        As in :class:`RHFResult`.
    stability : OpenStabilityReport or None
        The UHF→UHF stability analysis (and following) of the solution.
    memory_budget, resource_notes
        As in :class:`RHFResult`: the run's memory budget and what was capped.
    warnings : tuple of str
        Findings a face should show (for example a lower unrestricted
        solution of an RHF singlet); empty when there are none.
    """

    energy_total: float
    energy_nuclear: float
    energy_one_electron: float
    energy_two_electron: float
    energy_electronic: float
    orbital_energies_alpha: np.ndarray
    orbital_energies_beta: np.ndarray
    coefficients_alpha: np.ndarray
    coefficients_beta: np.ndarray
    occupations_alpha: np.ndarray
    occupations_beta: np.ndarray
    density_alpha: np.ndarray
    density_beta: np.ndarray
    fock_alpha: np.ndarray
    fock_beta: np.ndarray
    overlap: np.ndarray
    core_hamiltonian: np.ndarray
    converged: bool
    iterations: int
    history: list[SCFIteration]
    n_dropped: int
    timings: dict[str, float]
    options: SCFOptions
    message: str
    s_squared: float
    s_squared_exact: float
    n_alpha: int
    n_beta: int
    method: str = "UHF"
    molecule: "Molecule | None" = None
    basis: "BasisSet | None" = None
    jk_mode: str = "given"
    eri_memory_bytes: int = 0
    aids: tuple[str, ...] = ()
    stability: "OpenStabilityReport | None" = None
    fit_basis: "BasisSet | None" = None
    fit_notes: tuple[str, ...] = ()
    fit_storage: str = ""
    fit_dropped: int = 0
    warnings: tuple[str, ...] = ()
    memory_budget: "MemoryBudget | None" = None
    resource_notes: tuple[str, ...] = ()

    # -- totals and spin -----------------------------------------------------------
    @property
    def density(self) -> np.ndarray:
        """Total density D_α + D_β, shape (nbf, nbf)."""
        return self.density_alpha + self.density_beta

    @property
    def spin_density(self) -> np.ndarray:
        """Spin density D_α − D_β, shape (nbf, nbf)."""
        return self.density_alpha - self.density_beta

    @property
    def multiplicity(self) -> int:
        """2S + 1 with S = (N_α − N_β) / 2."""
        return int(self.n_alpha - self.n_beta + 1)

    @property
    def spin_contamination(self) -> float:
        """⟨S²⟩ − S (S + 1); zero for a pure spin state (ROHF), positive otherwise."""
        return float(self.s_squared - self.s_squared_exact)

    @property
    def n_electrons(self) -> int:
        return int(self.n_alpha + self.n_beta)

    # -- frontier orbitals per spin ------------------------------------------------
    @property
    def homo_alpha(self) -> int | None:
        """Index of the highest occupied α orbital (None without α electrons)."""
        return _homo(self.occupations_alpha)

    @property
    def homo_beta(self) -> int | None:
        """Index of the highest occupied β orbital (None without β electrons)."""
        return _homo(self.occupations_beta)

    @property
    def lumo_alpha(self) -> int | None:
        """Index of the lowest empty α orbital (None if every one is occupied)."""
        return _lumo(self.occupations_alpha)

    @property
    def lumo_beta(self) -> int | None:
        """Index of the lowest empty β orbital (None if every one is occupied)."""
        return _lumo(self.occupations_beta)

    @property
    def homo_energy_alpha(self) -> float | None:
        return _energy_at(self.orbital_energies_alpha, self.homo_alpha)

    @property
    def homo_energy_beta(self) -> float | None:
        return _energy_at(self.orbital_energies_beta, self.homo_beta)

    @property
    def lumo_energy_alpha(self) -> float | None:
        return _energy_at(self.orbital_energies_alpha, self.lumo_alpha)

    @property
    def lumo_energy_beta(self) -> float | None:
        return _energy_at(self.orbital_energies_beta, self.lumo_beta)

    @property
    def homo_energy(self) -> float:
        """The highest occupied orbital energy of either spin (hartree): −ε is the Koopmans ionisation energy."""
        values = [e for e in (self.homo_energy_alpha, self.homo_energy_beta) if e is not None]
        return float(max(values))

    @property
    def lumo_energy(self) -> float | None:
        """The lowest empty orbital energy of either spin (hartree), None without empty orbitals."""
        values = [e for e in (self.lumo_energy_alpha, self.lumo_energy_beta) if e is not None]
        return float(min(values)) if values else None

    @property
    def orbital_energy_convention(self) -> str:
        """What the per-spin orbital energies are."""
        return "eigenvalues of the alpha and beta Fock matrices"

    # -- exports ---------------------------------------------------------------------
    def spin_record(self) -> dict[str, Any]:
        """The ``spin`` object of the JSON record."""
        record: dict[str, Any] = {
            "multiplicity": self.multiplicity,
            "n_alpha": self.n_alpha,
            "n_beta": self.n_beta,
            "s_squared": self.s_squared,
            "s_squared_exact": self.s_squared_exact,
            "spin_contamination": self.spin_contamination,
        }
        if self.basis is not None:
            record["mulliken_spin_populations"] = atom_sums(self.basis, self.spin_density, self.overlap)
        return record

    def to_dict(self, analysis: "Mapping[str, Any] | None" = None) -> dict[str, Any]:
        """The record as JSON-ready dictionaries (numpy arrays left for the writer to turn into lists).

        ``analysis`` (e.g. charges and moments) goes under the key
        ``"analysis"``, as in :meth:`hfcore.scf.RHFResult.to_dict`.

        The layout follows the RHF record's (``hfcore``, ``units``,
        ``molecule``, ``basis``, ``energy``, ``scf``, ``orbitals``,
        ``timings``): ``hfcore.method`` is "UHF" or "ROHF", ``orbitals``
        holds ``alpha`` and ``beta`` parts, and a ``spin`` object is added.

        Raises
        ------
        InputError
            For a result of the SCF on bare matrices (no molecule or basis).
        """
        from .._version import __version__
        from ..errors import InputError

        if self.molecule is None or self.basis is None:
            raise InputError("to_dict needs an open-shell result that carries its molecule and basis (from run_scf)")
        from .result import UNITS, _molecule_record, basis_record, energy_record, scf_common_record

        record = {
            "hfcore": {"version": __version__, "method": self.method},
            "units": UNITS,
            "molecule": {**_molecule_record(self.molecule), "multiplicity": self.multiplicity},
            "basis": basis_record(self),
            "energy": energy_record(self),
            "scf": {
                **scf_common_record(self),
                "stability": None if self.stability is None else self.stability.to_dict(),
            },
            "orbitals": self._orbitals_record(),
            "spin": self.spin_record(),
            "timings": dict(self.timings),
        }
        if analysis:
            record["analysis"] = dict(analysis)
        return record

    def _orbitals_record(self) -> dict[str, Any]:
        return {
            "convention": self.orbital_energy_convention,
            "alpha": {
                "energies": self.orbital_energies_alpha, "occupations": self.occupations_alpha,
                "homo": self.homo_alpha, "lumo": self.lumo_alpha,
            },
            "beta": {
                "energies": self.orbital_energies_beta, "occupations": self.occupations_beta,
                "homo": self.homo_beta, "lumo": self.lumo_beta,
            },
        }

    def to_arrays(self) -> dict[str, np.ndarray]:
        """The per-spin arrays for the npz export, beside the total density.

        Returns
        -------
        dict of str to ndarray
            ``coefficients_alpha``, ``coefficients_beta`` (nbf, nmo);
            ``orbital_energies_alpha``, ``orbital_energies_beta``,
            ``occupations_alpha``, ``occupations_beta`` (nmo,);
            ``density_alpha``, ``density_beta``, ``density`` (total),
            ``fock_alpha``, ``fock_beta``, ``overlap``, ``core_hamiltonian``
            (nbf, nbf); ``energy_total``, ``s_squared``, ``multiplicity`` ().
        """
        arrays = {
            "coefficients_alpha": self.coefficients_alpha,
            "coefficients_beta": self.coefficients_beta,
            "orbital_energies_alpha": self.orbital_energies_alpha,
            "orbital_energies_beta": self.orbital_energies_beta,
            "occupations_alpha": self.occupations_alpha,
            "occupations_beta": self.occupations_beta,
            "density_alpha": self.density_alpha,
            "density_beta": self.density_beta,
            "density": self.density,
            "fock_alpha": self.fock_alpha,
            "fock_beta": self.fock_beta,
            "overlap": self.overlap,
            "core_hamiltonian": self.core_hamiltonian,
            "energy_total": np.float64(self.energy_total),
            "s_squared": np.float64(self.s_squared),
            "multiplicity": np.int64(self.multiplicity),
        }
        return {k: np.asarray(v, order="C") for k, v in arrays.items()}


@dataclass(frozen=True)
class ROHFResult(UHFResult):
    """The outcome of a restricted open-shell run: one set of orbitals, three spaces.

    Besides the fields of :class:`UHFResult` (whose α and β coefficients
    are the same orbitals, occupied 1/1 in the doubly, 1/0 in the singly
    occupied space):

    Attributes
    ----------
    orbital_energies : ndarray, shape (nmo,)
        Eigenvalues of the effective Fock matrix of ``coupling``
        (ascending within each space); see :attr:`orbital_energy_convention`.
    coefficients : ndarray, shape (nbf, nmo)
        The orbitals: doubly occupied, then singly occupied, then empty.
    occupations : ndarray, shape (nmo,)
        2, 1 or 0.
    fock : ndarray, shape (nbf, nbf)
        The effective Fock matrix.
    coupling : str
        Name of the coupling scheme of the effective Fock matrix
        (:data:`hfcore.scf.rohf.COUPLINGS`).
    restriction : str or None
        ``"spherical atom"`` for a lone atom whose orbitals keep one radial
        function per shell (:mod:`hfcore.scf.spherical_atom`); None for
        unrestricted orbital shapes.
    """

    orbital_energies: np.ndarray | None = None
    coefficients: np.ndarray | None = None
    occupations: np.ndarray | None = None
    fock: np.ndarray | None = None
    coupling: str = "guest-saunders"
    restriction: str | None = None

    @property
    def orbital_energy_convention(self) -> str:
        from .couplings import COUPLINGS

        if self.restriction is not None:
            return (
                f"diagonal of the effective Fock matrix of the {self.coupling} coupling "
                f"({COUPLINGS[self.coupling].source}) in the {self.restriction} orbitals (one radial function per "
                "shell), made canonical per angular momentum and occupation with the m-averaged matrix; "
                "the alpha and beta energies are the diagonal of the alpha and beta Fock matrices in these orbitals"
            )
        return (
            f"eigenvalues of the effective Fock matrix of the {self.coupling} coupling ({COUPLINGS[self.coupling].source}); "
            "the alpha and beta energies are the diagonal of the alpha and beta Fock matrices in these orbitals"
        )

    def _orbitals_record(self) -> dict[str, Any]:
        record = super()._orbitals_record()
        record["coupling"] = self.coupling
        record["restriction"] = self.restriction
        record["energies"] = self.orbital_energies
        record["occupations"] = self.occupations
        return record

    def to_arrays(self) -> dict[str, np.ndarray]:
        """As :meth:`UHFResult.to_arrays`, plus ``coefficients``, ``orbital_energies``, ``occupations`` and ``fock``."""
        arrays = super().to_arrays()
        arrays.update(
            coefficients=np.asarray(self.coefficients, order="C"),
            orbital_energies=np.asarray(self.orbital_energies, order="C"),
            occupations=np.asarray(self.occupations, order="C"),
            fock=np.asarray(self.fock, order="C"),
        )
        return arrays


__all__ = ["UHFResult", "ROHFResult"]
