"""One single-point run: a request record in, the result record and its JSON dict out.

Every face that runs one molecule in one basis goes through
:func:`run_single`: the ``hfcore energy`` command, each batch job and the
batch pieces of ``interaction`` and ``reaction``. A run is defined by the
fields of its :class:`RunRequest`, never by command-line names, so a batch
job's identity (:meth:`RunRequest.key_fields`) does not change when a flag
is renamed.

In Python::

    from hfcore.runs import RunRequest, run_single
    outcome = run_single(RunRequest("water.xyz", basis="cc-pvdz", mp2=True))
    outcome.record["energy"]["total"], outcome.mp2.energy_total
"""

from __future__ import annotations

import dataclasses
import math
import os
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import elements
from .errors import InputError
from .units import BOHR_IN_ANGSTROM

if TYPE_CHECKING:
    from .basis import BasisSet
    from .geometry import Molecule

#: Open-shell methods a request may name (``None`` lets the electron count decide).
METHODS: tuple[str | None, ...] = (None, "uhf", "rohf")

#: Request fields that do not change a run's result, so are no part of its identity.
_NOT_IN_KEY = frozenset({"geometry", "threads"})


def parse_basis_for(items: Iterable[str]) -> dict[str, str]:
    """Per-element basis choices from ``EL=NAME`` strings.

    Parameters
    ----------
    items : iterable of str
        E.g. ``["H=cc-pvdz", "O=aug-cc-pvdz"]``.

    Returns
    -------
    dict of str to str
        Element symbol (canonical case) -> basis name.

    Raises
    ------
    InputError
        Naming the bad item: no ``=``, an empty name, an unknown element, or
        an element given twice.
    """
    out: dict[str, str] = {}
    for item in items:
        key, sep, name = item.partition("=")
        if not sep or not key.strip() or not name.strip():
            raise InputError(f"--basis-for {item!r}: expected EL=NAME, e.g. H=cc-pvdz")
        try:
            symbol = elements.symbol(elements.atomic_number(key.strip()))
        except KeyError:
            raise InputError(f"--basis-for {item!r}: unknown element {key.strip()!r}") from None
        if symbol in out:
            raise InputError(f"--basis-for {item!r}: element {symbol} given twice")
        out[symbol] = name.strip()
    return out


def _basis_for_pairs(value: Any) -> tuple[tuple[str, str], ...]:
    # Accepts a mapping, "EL=NAME" strings or (EL, NAME) pairs; stored sorted
    # so that the same choice in another order is the same request.
    if isinstance(value, Mapping):
        items = [f"{k}={v}" for k, v in value.items()]
    else:
        items = [item if isinstance(item, str) else f"{item[0]}={item[1]}" for item in value]
    return tuple(sorted(parse_basis_for(items).items()))


def _origin(value: Any) -> tuple[float, float, float] | None:
    if value is None:
        return None
    try:
        xyz = tuple(float(v) for v in value)
    except (TypeError, ValueError):
        raise InputError(f"origin {value!r}: expected three numbers X Y Z") from None
    if len(xyz) != 3:
        raise InputError(f"origin: expected three numbers X Y Z, found {len(xyz)}")
    if not all(math.isfinite(v) for v in xyz):
        text = " ".join(repr(v) if not math.isfinite(v) else f"{v:g}" for v in xyz)
        raise InputError(f"origin {text}: every coordinate must be a finite number")
    return xyz  # type: ignore[return-value]


@dataclass(frozen=True)
class RunRequest:
    """Everything that defines one single-point run (the input of :func:`run_single`).

    ``None`` for an SCF setting means the default of
    :class:`hfcore.scf.SCFOptions`.

    Attributes
    ----------
    geometry : str, os.PathLike or Molecule
        An XYZ file (read with ``units`` and ``charge``) or a molecule
        already read (whose own charge then counts).
    units : {"angstrom", "bohr"}
        Units of the XYZ coordinates and of ``origin``.
    charge : int
        Total molecular charge (for a file).
    multiplicity : int or None
        Spin multiplicity 2S+1; ``None`` means a closed shell (singlet).
    method : {None, "uhf", "rohf"}
        The open-shell method; ``None`` is RHF for a closed shell.
    spherical_atom : bool
        An open-shell lone atom runs as ROHF with equivalence restrictions
        (:mod:`hfcore.scf.spherical_atom`); other systems as without it.
    basis : str
        Basis-set name (ignored when ``basis_file`` is given).
    basis_file : str or None
        A basis file in hfcore's JSON format, replacing ``basis``.
    basis_for : tuple of (str, str)
        Another basis for some elements; a mapping or ``"EL=NAME"`` strings
        are accepted and stored as sorted (symbol, name) pairs.
    zeta : tuple of str
        Slater exponents for fitted STO-nG sets (``"He=2.0925"``, ``"C:2sp=1.80"``).
    spherical : bool or None
        Real spherical (True) or Cartesian (False) d, f, ... functions;
        ``None`` takes the basis set's own convention.
    ghost, atoms : str or None
        1-based atom ranges in file order: atoms that keep their functions
        but have no nucleus and no electrons; atoms to keep (a fragment).
    guess : {"sad", "core"}
    energy_tol, gradient_tol, max_iterations, max_diis_size, lindep_threshold
        SCF settings (see :class:`hfcore.scf.SCFOptions`).
    stability : {"skip", "report", "descend"}
        After convergence: no analysis, analyse and report, or analyse and
        descend to a lower solution when one exists (default).
    direct : bool or None
        Force direct (True) or stored (False) integrals; ``None`` chooses.
    memory_mib : float or None
        Memory the stored integrals may use, MiB.
    fit_basis : str or None
        Density-fitted J and K with this fitting set (or ``"auto"``).
    origin : tuple of float or None
        Origin of the multipoles in ``units``; ``None`` is the centre of mass.
    mp2, frozen_core : bool
        Add the MP2 energies; with a frozen noble-gas core.
    mp2_fit_basis : str or None
        Density-fitted MP2 with this RI set (or ``"auto"``).
    threads : int or None
        Threads for the integral passes and linear algebra (not part of the
        run's identity: the energy does not depend on it beyond ~1e-13 Eh).
    """

    geometry: Any
    units: str = "angstrom"
    charge: int = 0
    multiplicity: int | None = None
    method: str | None = None
    spherical_atom: bool = False
    basis: str = "sto-3g"
    basis_file: str | None = None
    basis_for: tuple[tuple[str, str], ...] = ()
    zeta: tuple[str, ...] = ()
    spherical: bool | None = None
    ghost: str | None = None
    atoms: str | None = None
    guess: str = "sad"
    energy_tol: float | None = None
    gradient_tol: float | None = None
    max_iterations: int | None = None
    max_diis_size: int | None = None
    lindep_threshold: float | None = None
    stability: str = "descend"
    direct: bool | None = None
    memory_mib: float | None = None
    fit_basis: str | None = None
    origin: tuple[float, float, float] | None = None
    mp2: bool = False
    frozen_core: bool = False
    mp2_fit_basis: str | None = None
    threads: int | None = None

    def __post_init__(self) -> None:
        from .scf.stability import check_stability_mode

        put = object.__setattr__
        put(self, "basis_for", _basis_for_pairs(self.basis_for))
        put(self, "zeta", tuple(str(z) for z in self.zeta))
        put(self, "origin", _origin(self.origin))
        put(self, "stability", check_stability_mode(self.stability))
        method = self.method.lower() if isinstance(self.method, str) else self.method
        if method not in METHODS:
            raise InputError(f"unknown method {self.method!r}: choose uhf or rohf (or none for RHF)")
        put(self, "method", method)
        if self.multiplicity is not None and (
            isinstance(self.multiplicity, bool) or not isinstance(self.multiplicity, int) or self.multiplicity < 1
        ):
            raise InputError(f"multiplicity {self.multiplicity!r}: expected a whole number 1 or more (2S+1)")
        if self.spherical_atom and method == "uhf":
            raise InputError("--spherical-atom runs open-shell atoms as ROHF; it cannot be combined with --uhf")
        if self.frozen_core and not self.mp2:
            raise InputError("--frozen-core applies to the MP2 energy only; add --mp2")
        if self.mp2_fit_basis is not None and not self.mp2:
            raise InputError("--mp2-fit-basis applies to the MP2 energy only; add --mp2")

    # -- identity and transport ------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        """Every field but ``geometry`` as plain JSON values (tuples as lists), by field name."""
        out = {}
        for f in dataclasses.fields(self):
            if f.name == "geometry":
                continue
            value = getattr(self, f.name)
            out[f.name] = [list(v) if isinstance(v, tuple) else v for v in value] if isinstance(value, tuple) else value
        return out

    def key_fields(self) -> dict[str, Any]:
        """The canonical fields that define the run's result (the identity of a batch job).

        Every field but the geometry (a job names it by its file's digest)
        and ``threads``; the basis name without regard to case and spaces.
        """
        fields = {k: v for k, v in self.to_dict().items() if k not in _NOT_IN_KEY}
        fields["basis"] = self.basis.strip().lower()
        if not fields.get("spherical_atom"):
            fields.pop("spherical_atom", None)  # keys of jobs from before the option stay as they were
        return fields

    @classmethod
    def from_dict(cls, geometry: Any, fields: Mapping[str, Any]) -> RunRequest:
        """A request from :meth:`to_dict` fields (unknown names are an InputError naming them)."""
        known = {f.name for f in dataclasses.fields(cls)} - {"geometry"}
        unknown = sorted(set(fields) - known)
        if unknown:
            raise InputError(f"unknown run field(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}")
        given = dict(fields)
        if given.get("origin") is not None:
            given["origin"] = tuple(given["origin"])
        return cls(geometry, **given)

    def scf_options(self) -> Any:
        """The :class:`hfcore.scf.SCFOptions` of this request."""
        from .scf import SCFOptions

        names = ("energy_tol", "gradient_tol", "max_iterations", "max_diis_size", "lindep_threshold", "direct",
                 "threads", "fit_basis")
        given = {name: getattr(self, name) for name in names if getattr(self, name) is not None}
        if self.memory_mib is not None:
            given["memory_limit"] = self.memory_mib
        return SCFOptions(stability=self.stability, method=self.method, spherical_atom=self.spherical_atom, **given)


@dataclass(frozen=True)
class RunProgress:
    """Callbacks a face gives :func:`run_single` to show a run as it goes (each optional).

    Attributes
    ----------
    prepared : callable, optional
        ``prepared(molecule, basis, plan)`` once the inputs are checked and
        before any integral (e.g. to print the molecule and basis).
    iteration : callable, optional
        ``iteration(record)`` after each SCF iteration.
    integrals : callable, optional
        ``integrals(fraction)`` during the stored two-electron integral pass.
    mp2 : callable, optional
        ``mp2(fraction)`` during the MP2 integral transformation.
    """

    prepared: Callable[[Any, Any, Any], None] | None = None
    iteration: Callable[[Any], None] | None = None
    integrals: Callable[[float], None] | None = None
    mp2: Callable[[float], None] | None = None


class RunOutcome:
    """What :func:`run_single` returns.

    The analysis and the JSON record are computed on first use (then kept):
    a caller that reads only the SCF result does not pay for the charges and
    multipoles, and every face that shows them (the report, the JSON and
    each batch line) gets the same values as when they were computed at once.

    Attributes
    ----------
    request : RunRequest
    molecule : Molecule
        As run (ghosts and atom selection applied).
    basis : BasisSet
    result : RHFResult
    mp2 : MP2Result or None
        With ``request.mp2``.
    analysis : dict
        Charges, orbital properties and multipoles (atomic units, and the
        units the JSON record states); computed on first use.
    record : dict
        The JSON record (``hfcore energy --json``), as plain values and
        arrays; computed on first use.
    """

    def __init__(self, request: RunRequest, molecule: Any, basis: Any, result: Any, mp2: Any, *,
                 origin: np.ndarray | None = None, kinetic: np.ndarray | None = None,
                 integral_seconds: float = 0.0, mp2_seconds: float | None = None) -> None:
        self.request = request
        self.molecule = molecule
        self.basis = basis
        self.result = result
        self.mp2 = mp2
        self._origin = origin
        self._kinetic = kinetic  # the SCF's own kinetic-energy matrix, when at hand
        self._integral_seconds = integral_seconds  # a pass made before the SCF, not in its timings
        self._mp2_seconds = mp2_seconds
        self._analysis: dict[str, Any] | None = None
        self._record: dict[str, Any] | None = None

    def __repr__(self) -> str:
        return (f"RunOutcome(request={self.request!r}, molecule={self.molecule!r}, basis={self.basis!r}, "
                f"result={self.result!r}, mp2={self.mp2!r})")

    @property
    def analysis(self) -> dict[str, Any]:
        """Charges, orbital properties and multipoles (:func:`analysis_record`), computed once on first use."""
        if self._analysis is None:
            self._analysis = analysis_record(self.result, self._origin, kinetic=self._kinetic)
        return self._analysis

    @property
    def analysed(self) -> bool:
        """Whether the analysis has been computed yet."""
        return self._analysis is not None

    @property
    def record(self) -> dict[str, Any]:
        """The JSON record (``hfcore energy --json``), made once on first use."""
        if self._record is None:
            record = self.result.to_dict(self.analysis)
            for stage in ("integrals", "total"):
                record["timings"][stage] += self._integral_seconds
            if self.mp2 is not None:
                record["mp2"] = self.mp2.to_dict()
                record["timings"]["mp2"] = self._mp2_seconds
            self._record = record
        return self._record

    def arrays(self) -> dict[str, np.ndarray]:
        """The arrays ``hfcore energy --npz`` saves (see :func:`hfcore.export.result_arrays`)."""
        from .export import result_arrays

        return result_arrays(self.result)


# ----------------------------------------------------------------------------
# the steps
# ----------------------------------------------------------------------------


def read_molecule(request: RunRequest) -> Molecule:
    """The molecule of a request: read, ghosts and atom selection applied, the request's multiplicity checked.

    Raises
    ------
    InputError
        For a bad file, bad ranges, or a selection of ghosts only.
    """
    from .geometry import Molecule, parse_atom_ranges, read_xyz

    if isinstance(request.geometry, Molecule):
        molecule = request.geometry
    else:
        molecule = read_xyz(os.fspath(request.geometry), units=request.units, charge=request.charge)
    if request.ghost:
        ghosts = parse_atom_ranges(request.ghost, molecule.n_atoms, "--ghost")
        if len(ghosts) == molecule.n_atoms:
            raise InputError(f"--ghost {request.ghost}: every atom would be a ghost; keep at least one real atom")
        molecule = molecule.with_ghosts(ghosts)
    if request.atoms:
        keep = parse_atom_ranges(request.atoms, molecule.n_atoms, "--atoms")
        if molecule.ghosts[keep].all():
            raise InputError(f"--atoms {request.atoms}: every atom kept is a ghost; keep at least one real atom")
        molecule = molecule.subset(keep, molecule.charge)
    if request.multiplicity is not None:
        # checked against the electrons here, before any integral (geometry.check_multiplicity)
        molecule = molecule.with_multiplicity(request.multiplicity)
    return molecule


def scf_method(request: RunRequest, molecule: Molecule) -> str:
    """The SCF method a request runs: "rhf", "uhf" or "rohf" (:func:`hfcore.scf.spin.resolve_method`).

    RHF for a singlet and UHF otherwise unless the request names one
    (``--rohf`` leaves a closed-shell singlet RHF, as in the studies:
    :func:`hfcore.scf.spin.open_shell_choice`); RHF asked for an open
    shell is refused in one line (exit 2).
    """
    from .scf.spin import open_shell_choice, resolve_method

    if molecule.n_electrons <= 0:  # before any output, as every other input check
        raise InputError(f"{molecule.source}: charge {molecule.charge} leaves {molecule.n_electrons} electrons; "
                         "nothing to compute")
    from .scf.spherical_atom import method_choice

    multiplicity = molecule.spin_multiplicity
    choice = method_choice(molecule, open_shell_choice(multiplicity, request.method), request.spherical_atom)
    return resolve_method(multiplicity, choice)


def open_shell_engine(request: RunRequest, molecule: Molecule | None) -> Callable[..., Any] | None:
    """The SCF runner of an open-shell request (:func:`hfcore.scf.run_scf`), or ``None`` for a closed shell.

    Parameters
    ----------
    request : RunRequest
    molecule : Molecule or None
        The molecule as it will run; ``None`` when a study has several
        (only the request's own spin fields are looked at then).

    Raises
    ------
    InputError
        RHF asked for an open shell (exit code 2).
    """
    from .scf import run_scf

    if molecule is None:
        closed = request.method in (None, "rhf") and request.multiplicity in (None, 1)
    else:
        closed = scf_method(request, molecule) == "rhf"
    return None if closed else run_scf


def build_basis_for(request: RunRequest, molecule: Molecule) -> BasisSet:
    """The orbital basis of a request on its molecule (room for the electrons checked).

    Raises
    ------
    InputError, BasisError
        For an unknown name, a missing element, or a zeta override on a
        basis file.
    """
    from .basis import build_basis, require_room_for
    from .basis.sto import parse_zeta_overrides

    zeta = parse_zeta_overrides(list(request.zeta)) if request.zeta else None
    main: Any = request.basis
    if request.basis_file:
        from .basis.library import load_basis_file

        main = load_basis_file(request.basis_file)
        if zeta:
            raise InputError("--zeta applies only to the fitted STO-nG sets, not to a --basis-file")
    basis = build_basis(molecule, main, spherical=request.spherical, zeta=zeta, per_element=dict(request.basis_for))
    require_room_for(molecule, basis)
    return basis


def basis_function_count(request: RunRequest) -> int:
    """Number of basis functions the run of ``request`` would use.

    Raises
    ------
    HfcoreError
        If the geometry or basis cannot be used.
    """
    return int(build_basis_for(request, read_molecule(request)).n_functions)


def planned_memory(request: RunRequest, budget: Any) -> int:
    """Predicted peak bytes (``JKPlan.peak_bytes``) of the run of ``request``.

    ``budget`` (a :class:`hfcore._memory.MemoryBudget`, e.g. a batch's
    shared one) applies unless the request gives ``memory_mib``.

    Raises
    ------
    HfcoreError
        If the geometry or basis cannot be used, or the run cannot fit
        (a forced mode beyond the budget: ResourceError).
    """
    from ._memory import budget_for
    from .scf import plan_jk

    molecule = read_molecule(request)
    basis = build_basis_for(request, molecule)
    options = request.scf_options()
    fitting = None
    if options.fit_basis is not None:
        from .basis.fitting import fitting_basis

        fitting = fitting_basis(molecule, basis, options.fit_basis)
    own = None if options.memory_limit is None else budget_for(options.memory_limit)
    plan = plan_jk(basis, options, fitting=fitting, n_occupied=molecule.n_electrons // 2, budget=own or budget)
    return int(plan.peak_bytes)


def analysis_record(result: Any, origin: np.ndarray | None = None, *,
                    kinetic: np.ndarray | None = None) -> dict[str, Any]:
    """Charges, orbital properties and multipoles, in the units the JSON record states.

    Parameters
    ----------
    result : RHFResult
    origin : ndarray, shape (3,), optional
        Origin of the multipoles in bohr (default: the centre of mass).
    kinetic : ndarray, shape (nbf, nbf), optional
        The kinetic-energy matrix of ``result.basis`` (hartree), if the SCF's
        own is at hand; computed otherwise.
    """
    from .analysis import (
        DEBYE_ANGSTROM_PER_AU,
        DEBYE_PER_AU,
        centre_of_mass,
        dipole_moment,
        lowdin_charges,
        mulliken_charges,
        orbital_properties,
        quadrupole_moment,
    )

    o = centre_of_mass(result.molecule) if origin is None else np.asarray(origin, dtype=np.float64)
    dipole = dipole_moment(result, o)
    quadrupole = quadrupole_moment(result, o)
    return {
        "mulliken_charges": mulliken_charges(result),
        "lowdin_charges": lowdin_charges(result),
        **orbital_properties(result, kinetic=kinetic).to_dict(),
        "origin_bohr": o,
        "origin_is_centre_of_mass": origin is None,
        "dipole_au": dipole,
        "dipole_debye": dipole * DEBYE_PER_AU,
        "dipole_magnitude_debye": float(np.linalg.norm(dipole)) * DEBYE_PER_AU,
        "quadrupole_au": quadrupole,
        "quadrupole_debye_angstrom": quadrupole * DEBYE_ANGSTROM_PER_AU,
    }


def _mp2(request: RunRequest, result: Any, eri: Any, fit: Any, progress: Callable[[float], None] | None) -> Any:
    from .analysis import core_orbital_count, mp2_energy, ump2_energy

    frozen = core_orbital_count(result.molecule) if request.frozen_core else 0
    if result.method == "UHF":
        fit_basis = None if fit is None else fit.basis
        return ump2_energy(result, frozen_core=frozen, eri=eri, fit_basis=fit_basis, progress=progress)
    if fit is not None:
        return mp2_energy(result, frozen_core=frozen, fit_basis=fit.basis, fraction_progress=progress)
    return mp2_energy(result, frozen_core=frozen, eri=eri, fraction_progress=progress)


def run_single(request: RunRequest, progress: RunProgress | None = None) -> RunOutcome:
    """Run one single point: geometry, basis, SCF, analysis (and MP2 when asked).

    Every input is checked (geometry, spin, basis, fitting sets, memory of a
    forced store) before any integral is computed.

    Parameters
    ----------
    request : RunRequest
    progress : RunProgress, optional
        Callbacks to show the run as it goes; none by default.

    Returns
    -------
    RunOutcome
        The SCF result, the MP2 result, and the JSON record.

    Raises
    ------
    HfcoreError
        InputError (exit 2) for bad input or an open-shell request,
        BasisError (3), ConvergenceError (4), ResourceError (5).
    """
    from .basis import require_room_for
    from .scf import plan_jk, prepare_integrals, run_scf
    from .scf.driver import _checked_guess

    progress = progress or RunProgress()
    molecule = read_molecule(request)
    method = scf_method(request, molecule)
    if request.mp2:
        from .analysis import check_mp2_reference

        check_mp2_reference(method)
    basis = build_basis_for(request, molecule)
    options = dataclasses.replace(request.scf_options(), method=method)  # the method this molecule runs
    from .scf.spherical_atom import check_before_runs

    check_before_runs([(molecule, method, basis.spherical, molecule.source)], options)  # before any output
    fitting = None
    if options.fit_basis is not None:
        from .basis.fitting import fitting_basis

        fitting = fitting_basis(molecule, basis, options.fit_basis)
    # A forced store, or a fitting set, that cannot fit fails before any output; an open shell's
    # fitted exchange runs over the occupied orbitals of both spins.
    n_occupied = molecule.n_electrons // 2 if method == "rhf" else molecule.n_alpha + molecule.n_beta
    plan = plan_jk(basis, options, fitting=fitting, n_occupied=n_occupied)
    mp2_fit = None
    if request.mp2_fit_basis is not None:
        from .basis.fitting import mp2_fitting_basis

        # An unknown set or a missing element fails here, before the SCF.
        mp2_fit = mp2_fitting_basis(molecule, basis, request.mp2_fit_basis)
    scale = BOHR_IN_ANGSTROM if request.units == "angstrom" else 1.0
    origin = None if request.origin is None else np.asarray(request.origin) / scale
    if progress.prepared is not None:
        progress.prepared(molecule, basis, plan)
    # An RHF run's integrals are prepared here rather than inside the SCF: exact MP2 reads the
    # SCF's own store rather than computing it again, the analysis reuses the kinetic-energy
    # matrix, and the record's timings count the pass (the SCF's own do not, as it is given).
    exact_mp2 = request.mp2 and mp2_fit is None
    shared = None
    if method == "rhf" or (exact_mp2 and plan.mode != "direct"):
        require_room_for(molecule, basis)
        _checked_guess(request.guess, basis)  # as the SCF would, but before the integrals
        shared = prepare_integrals(basis, options, progress.integrals, plan=plan, molecule=molecule)
    result = run_scf(molecule, basis, options, guess=request.guess, progress=progress.iteration,
                     integral_progress=progress.integrals, shared=shared, plan=plan)
    mp2_started = time.perf_counter()
    mp2 = None
    if request.mp2:
        engine = shared.engine if exact_mp2 and shared is not None and plan.mode != "direct" else None
        mp2 = _mp2(request, result, engine, mp2_fit, progress.mp2)
    return RunOutcome(
        request, molecule, basis, result, mp2, origin=origin,
        kinetic=None if shared is None else shared.kinetic,
        integral_seconds=0.0 if shared is None else shared.wall_seconds,
        mp2_seconds=None if mp2 is None else time.perf_counter() - mp2_started,
    )


__all__ = [
    "METHODS",
    "RunRequest",
    "RunProgress",
    "RunOutcome",
    "run_single",
    "open_shell_engine",
    "scf_method",
    "read_molecule",
    "build_basis_for",
    "basis_function_count",
    "planned_memory",
    "analysis_record",
    "parse_basis_for",
]
