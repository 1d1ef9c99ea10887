"""Machine-readable exports of a run: JSON records and .npz arrays, written atomically.

Every file is first written in full to a temporary file in the destination
directory and then moved into place with :func:`os.replace`, so a reader
never sees a half-written file and a failed run leaves nothing behind.
"""

from __future__ import annotations

import io
import json
import math
import os
import tempfile
from collections.abc import Mapping
from dataclasses import MISSING, dataclass, fields
from typing import Any

import numpy as np

from ._version import __version__
from .errors import InputError
from .scf.result import UNITS as RESULT_UNITS

#: Largest basis for which the dense ERI tensor goes into an .npz file: the
#: tensor takes nbf**4 * 8 bytes, 0.8 GB at 100 functions.
ERI_NPZ_MAX_FUNCTIONS: int = 100

#: What the numbers in the exported records mean (the RHF record's own, :data:`hfcore.scf.result.UNITS`).
UNITS: dict[str, str] = RESULT_UNITS

#: Units of the study records: energies and times only (the rows hold no coordinates, dipoles or charges).
COMPARISON_UNITS: dict[str, str] = {
    "energy": "hartree; delta_mEh: millihartree; delta_kcal_mol: kcal/mol",
    "time": "seconds",
}
DIFFERENCE_UNITS: dict[str, str] = {
    "energy": "hartree; keys ending _kJ_mol: kJ/mol; keys ending _kcal_mol: kcal/mol",
    "charges": "e (elementary charge)",
    "time": "seconds",
}


def check_output_path(path: str | os.PathLike) -> str:
    """Fail early if a file cannot be created at ``path``.

    Parameters
    ----------
    path : str or path-like
        Destination of an export.

    Returns
    -------
    str
        The path as a string.

    Raises
    ------
    InputError
        If the directory is missing or not writable, or the path is a directory.
    """
    target = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(target))
    if os.path.isdir(target):
        raise InputError(f"{target}: is a directory; give a file name to write")
    if not os.path.isdir(directory):
        raise InputError(f"{target}: cannot write, directory {directory} does not exist")
    if not os.access(directory, os.W_OK):
        raise InputError(f"{target}: cannot write, directory {directory} is not writable")
    return target


def _creation_mode() -> int:
    """The permissions a newly created file gets under the process umask.

    Temporary files start private (0600); the finished output should carry
    the permissions any other new file of the user would.
    """
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_files_atomically(files: Mapping[str, bytes]) -> None:
    """Write several files so that either all of them appear or none does.

    All contents go to temporary files in their destination directories
    first; only when every one is complete are they moved into place.

    Parameters
    ----------
    files : mapping of str to bytes
        Destination path -> full file content.

    Raises
    ------
    InputError
        If a file cannot be written (the message names it).
    """
    staged: list[tuple[str, str]] = []
    current = ""
    mode = _creation_mode()
    try:
        for current, data in files.items():
            directory = os.path.dirname(os.path.abspath(current))
            handle, temp = tempfile.mkstemp(prefix=".hfcore-", suffix=".part", dir=directory)
            staged.append((temp, current))
            os.chmod(temp, mode)
            with os.fdopen(handle, "wb") as out:
                out.write(data)
                out.flush()
                os.fsync(out.fileno())
        for temp, current in staged:
            os.replace(temp, current)
    except OSError as exc:
        raise InputError(f"{current}: cannot write ({exc.strerror})") from None
    finally:
        for temp, _ in staged:
            if os.path.exists(temp):
                os.unlink(temp)


def write_file_atomically(path: str | os.PathLike, data: bytes | str) -> None:
    """Write one file atomically (see :func:`write_files_atomically`).

    Parameters
    ----------
    path : str or path-like
    data : bytes or str
        Text is encoded as UTF-8.
    """
    payload = data.encode("utf-8") if isinstance(data, str) else data
    write_files_atomically({os.fspath(path): payload})


def _plain(value: Any) -> Any:
    # JSON has no NaN or infinity; a missing number (e.g. the energy change
    # of the first iteration) becomes null rather than invalid JSON.
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    return value


def plain_values(value: Any) -> Any:
    """``value`` with arrays and numpy scalars as plain Python values, ready for :mod:`json`.

    NaN and infinity become ``None`` (JSON ``null``).
    """
    return _plain(value)


def to_json(record: Mapping[str, Any]) -> str:
    """Serialise a record of plain values and arrays as indented JSON text.

    Floats are written with full round-trip precision; NaN and infinity
    become ``null``. The text ends with a newline.
    """
    return json.dumps(_plain(record), indent=2, allow_nan=False) + "\n"


def result_record(result: Any, analysis: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The JSON record of an RHF run: :meth:`hfcore.scf.RHFResult.to_dict`.

    Parameters
    ----------
    result : RHFResult
        A converged (or unconverged) SCF result.
    analysis : mapping, optional
        Extra post-SCF quantities (e.g. Mulliken charges, dipole) stored
        under the key ``"analysis"``.

    Returns
    -------
    dict
        Keys ``hfcore``, ``units``, ``molecule``, ``basis``, ``energy``,
        ``scf``, ``orbitals``, ``timings`` (and ``analysis``); energies in
        hartree, coordinates in bohr.
    """
    return result.to_dict(analysis)


def stability_record(result: Any) -> dict[str, Any]:
    """The ``scf.stability`` object of an RHF run's JSON record (:func:`hfcore.scf.result.stability_record`)."""
    from .scf.result import stability_record as record

    return record(result)


def sto_fit_record(fit: Any) -> dict[str, Any]:
    """The JSON record of a least-squares Slater fit.

    Parameters
    ----------
    fit : STOFit

    Returns
    -------
    dict
        Keys ``hfcore``, ``units`` and ``fit`` (shell, n_gaussians, zeta,
        exponents in bohr⁻², coefficients and overlaps per angular momentum
        letter, coefficients for normalised primitives).
    """
    return {
        "hfcore": {"version": __version__},
        "units": {"exponents": "bohr^-2", "zeta": "bohr^-1", "coefficients": "of normalised primitive Gaussians"},
        "fit": fit.to_dict(),
    }


def comparison_record(comparison: Any) -> dict[str, Any]:
    """The JSON record of a basis comparison: ``hfcore``, ``units``, ``comparison``."""
    return {"hfcore": {"version": __version__}, "units": COMPARISON_UNITS, "comparison": comparison.to_dict()}


def interaction_record(study: Any) -> dict[str, Any]:
    """The JSON record of an interaction study: ``hfcore``, ``units``, ``interaction``."""
    return {"hfcore": {"version": __version__}, "units": DIFFERENCE_UNITS, "interaction": study.to_dict()}


def reaction_record(study: Any) -> dict[str, Any]:
    """The JSON record of a reaction study: ``hfcore``, ``units``, ``reaction``."""
    return {"hfcore": {"version": __version__}, "units": DIFFERENCE_UNITS, "reaction": study.to_dict()}


def result_arrays(result: Any, *, eri_max_functions: int = ERI_NPZ_MAX_FUNCTIONS) -> dict[str, np.ndarray]:
    """The arrays of an RHF run, for prototyping new methods on top of it.

    Parameters
    ----------
    result : RHFResult
    eri_max_functions : int
        Include the dense ERI tensor only up to this many basis functions
        (its size grows as nbf**4 * 8 bytes: 0.8 GB at 100).

    Returns
    -------
    dict of str to ndarray
        ``overlap``, ``kinetic``, ``nuclear_attraction``, ``core_hamiltonian``
        (nbf, nbf); ``coefficients`` (nbf, nmo); ``orbital_energies``,
        ``occupations`` (nmo,); ``density`` (total), ``fock`` (nbf, nbf);
        ``atomic_numbers`` (n_atoms,), ``ghosts`` (n_atoms,) bool; ``coordinates`` (n_atoms, 3) in bohr;
        ``function_atoms``, ``function_l`` (nbf,); ``energy_total`` ();
        ``spherical`` (); and ``eri`` (nbf, nbf, nbf, nbf) in chemists'
        notation (mu nu|lambda sigma) when nbf <= ``eri_max_functions``.
        Energies in hartree.
    """
    from . import integrals

    basis = result.basis
    mol = result.molecule
    # An open-shell record brings its own per-spin arrays (UHFResult.to_arrays).
    orbitals = result.to_arrays() if hasattr(result, "to_arrays") else {
        "coefficients": result.coefficients,
        "orbital_energies": result.orbital_energies,
        "occupations": result.occupations,
        "density": result.density,
        "fock": result.fock,
    }
    arrays = {
        **orbitals,
        "overlap": result.overlap,
        "kinetic": integrals.kinetic(basis),
        "nuclear_attraction": integrals.nuclear_attraction(basis, mol.nuclear_charges, mol.coordinates),
        "core_hamiltonian": result.core_hamiltonian,
        "atomic_numbers": mol.atomic_numbers,
        "ghosts": mol.ghosts,
        "coordinates": mol.coordinates,
        "function_atoms": basis.function_atoms(),
        "function_l": basis.function_l(),
        "energy_total": np.float64(result.energy_total),
        "spherical": np.bool_(basis.spherical),
    }
    if basis.n_functions <= eri_max_functions:
        arrays["eri"] = integrals.eri_tensor(basis)
    return {k: np.asarray(v, order="C") for k, v in arrays.items()}


@dataclass(frozen=True)
class SavedArrays:
    """The arrays of a run as :func:`result_arrays` saves them, read back by :func:`load_arrays`.

    Attributes carry the names of the .npz entries; shapes as in
    :func:`result_arrays` (nbf functions, nmo orbitals, n_atoms atoms).
    Energies in hartree, lengths in bohr. An RHF file has one set of
    orbitals (``coefficients`` ... ``fock``); a UHF file has one per spin
    (``coefficients_alpha`` ... ``fock_beta``) and the others are None; an
    ROHF file has both (its one set of orbitals, and the α and β Fock
    matrices). ``density`` is always the total density.
    """

    overlap: np.ndarray
    kinetic: np.ndarray
    nuclear_attraction: np.ndarray
    core_hamiltonian: np.ndarray
    density: np.ndarray
    atomic_numbers: np.ndarray
    coordinates: np.ndarray
    function_atoms: np.ndarray
    function_l: np.ndarray
    energy_total: float
    spherical: bool
    coefficients: np.ndarray | None = None
    orbital_energies: np.ndarray | None = None
    occupations: np.ndarray | None = None
    fock: np.ndarray | None = None
    eri: np.ndarray | None = None
    coefficients_alpha: np.ndarray | None = None
    coefficients_beta: np.ndarray | None = None
    orbital_energies_alpha: np.ndarray | None = None
    orbital_energies_beta: np.ndarray | None = None
    occupations_alpha: np.ndarray | None = None
    occupations_beta: np.ndarray | None = None
    density_alpha: np.ndarray | None = None
    density_beta: np.ndarray | None = None
    fock_alpha: np.ndarray | None = None
    fock_beta: np.ndarray | None = None
    s_squared: float | None = None
    multiplicity: int = 1

    @property
    def n_functions(self) -> int:
        """nbf, the number of basis functions."""
        return int(self.overlap.shape[0])

    def nuclear_repulsion(self) -> float:
        """Nuclear repulsion energy of the saved geometry (hartree)."""
        from .geometry import nuclear_repulsion

        return nuclear_repulsion(self.atomic_numbers, self.coordinates)


def load_arrays(path: str | os.PathLike) -> SavedArrays:
    """Read an .npz file written by ``hfcore energy --npz`` or :func:`result_arrays`.

    Parameters
    ----------
    path : str or path-like

    Returns
    -------
    SavedArrays
        ``eri`` is None when the file holds no dense tensor (more than
        :data:`ERI_NPZ_MAX_FUNCTIONS` functions).

    Raises
    ------
    InputError
        If the file cannot be read or lacks an entry hfcore writes.
    """
    target = os.fspath(path)
    try:
        with np.load(target, allow_pickle=False) as data:
            arrays = {name: data[name] for name in data.files}
    except (OSError, ValueError) as exc:
        raise InputError(f"{target}: cannot read as .npz ({exc})") from None
    names = [f.name for f in fields(SavedArrays)]
    # one set of orbitals (RHF, ROHF) or one per spin (UHF): either is a complete file
    orbitals = _RESTRICTED_ORBITALS if "coefficients" in arrays or "coefficients_alpha" not in arrays \
        else _SPIN_ORBITALS
    required = [f.name for f in fields(SavedArrays) if f.default is MISSING] + list(orbitals)
    missing = [n for n in required if n not in arrays]
    if missing:
        raise InputError(f"{target}: not an hfcore array file (missing {', '.join(missing)})")
    values = {n: arrays[n] for n in names if n in arrays}
    values["energy_total"] = float(values["energy_total"])
    values["spherical"] = bool(values["spherical"])
    if "s_squared" in values:
        values["s_squared"] = float(values["s_squared"])
    if "multiplicity" in values:
        values["multiplicity"] = int(values["multiplicity"])
    return SavedArrays(**values)


#: The orbital entries of a file with one set of orbitals, and of one with a set per spin.
_RESTRICTED_ORBITALS: tuple[str, ...] = ("coefficients", "orbital_energies", "occupations", "fock")
_SPIN_ORBITALS: tuple[str, ...] = tuple(f"{name}_{spin}" for name in ("coefficients", "orbital_energies",
                                                                    "occupations", "density", "fock")
                                        for spin in ("alpha", "beta"))


def npz_bytes(arrays: Mapping[str, np.ndarray]) -> bytes:
    """The content of an uncompressed .npz file holding ``arrays`` (no pickled objects)."""
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    return buffer.getvalue()


__all__ = [
    "ERI_NPZ_MAX_FUNCTIONS",
    "UNITS",
    "check_output_path",
    "write_files_atomically",
    "write_file_atomically",
    "plain_values",
    "to_json",
    "result_record",
    "sto_fit_record",
    "comparison_record",
    "interaction_record",
    "reaction_record",
    "result_arrays",
    "npz_bytes",
    "SavedArrays",
    "load_arrays",
]
