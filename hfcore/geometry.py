"""Reading molecular geometries and the quantities that depend on them alone.

Input validation happens here, once: every later stage may assume a
``Molecule`` is well formed (at least one atom, known elements, finite
coordinates within :data:`MAX_COORDINATE_ANGSTROM` of the origin, a whole
number charge; the XYZ reader also refuses two nuclei on top of each other).
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable
from dataclasses import dataclass, field, replace

import numpy as np

from . import elements
from ._deprecation import rename_fields
from .errors import InputError
from .units import ANGSTROM_IN_BOHR, BOHR_IN_ANGSTROM

#: Two nuclei closer than this (in ångström) are taken as a typing error.
MIN_DISTANCE_ANGSTROM: float = 0.1

#: Largest coordinate magnitude accepted, in ångström: every |x|, |y|, |z|
#: must be at most this. Real molecules span tens of ångström; the bound keeps
#: every distance and every exponent-times-distance² product of the integrals
#: far from floating-point overflow.
MAX_COORDINATE_ANGSTROM: float = 1.0e4

#: A geometry file larger than this (bytes) is refused unread: 64 MiB is
#: about a million atom lines, and the bound keeps a device such as
#: /dev/zero from being read for ever.
MAX_FILE_BYTES: int = 64 * 2**20

_UNITS = {"angstrom": ANGSTROM_IN_BOHR, "bohr": 1.0}


@dataclass(frozen=True)
class Molecule:
    """A molecule: nuclei, positions and total charge.

    Attributes
    ----------
    atomic_numbers : ndarray of int, shape (natom,)
        Nuclear charges Z.
    coordinates : ndarray of float64, shape (natom, 3)
        Nuclear positions in bohr.
    charge : int
        Total molecular charge (electrons = sum(Z) - charge).
    source : str
        Where the geometry came from (file path), for messages.
    comment : str
        The comment line of the XYZ file.
    ghosts : ndarray of bool, shape (natom,)
        Ghost atoms (all False by default): a ghost keeps the basis
        functions of its element at its position but has no nuclear charge
        and brings no electrons (see :meth:`with_ghosts`).
    multiplicity : int or None
        Spin multiplicity 2S + 1. None (default) means 1 for an even
        electron count and 2 for an odd one; :attr:`spin_multiplicity`
        gives the value in force. Checked against the electron count by
        :func:`check_multiplicity` (parity, 2S <= N).
    """

    atomic_numbers: np.ndarray
    coordinates: np.ndarray
    charge: int = 0
    source: str = "<memory>"
    comment: str = ""
    _line_numbers: tuple[int, ...] = field(default=(), repr=False, compare=False)
    ghosts: np.ndarray | None = None
    multiplicity: int | None = None

    def __post_init__(self) -> None:
        z, xyz = _checked_arrays(self.atomic_numbers, self.coordinates, self.source)
        charge = self.charge
        whole = isinstance(charge, (int, np.integer)) or (
            isinstance(charge, (float, np.floating)) and math.isfinite(charge) and charge == int(charge)
        )
        if isinstance(charge, bool) or not whole:
            raise InputError(f"{self.source}: the charge must be a whole number, got {charge!r}")
        z.setflags(write=False)
        xyz.setflags(write=False)
        object.__setattr__(self, "atomic_numbers", z)
        object.__setattr__(self, "coordinates", xyz)
        object.__setattr__(self, "charge", int(charge))
        ghosts = np.zeros(z.shape[0], dtype=bool) if self.ghosts is None else np.asarray(self.ghosts, dtype=bool).reshape(-1)
        if ghosts.shape[0] != z.shape[0]:
            raise InputError(f"{self.source}: {ghosts.shape[0]} ghost flags for {z.shape[0]} atoms")
        ghosts = ghosts.copy()
        ghosts.setflags(write=False)
        object.__setattr__(self, "ghosts", ghosts)
        if self.multiplicity is not None:
            m = self.multiplicity
            if isinstance(m, bool) or not isinstance(m, (int, np.integer)):
                raise InputError(f"{self.source}: the multiplicity must be a whole number 2S+1 >= 1, got {m!r}")
            object.__setattr__(self, "multiplicity", int(m))
            check_multiplicity(self.n_electrons, int(m), self.source)

    @property
    def spin_multiplicity(self) -> int:
        """The multiplicity 2S + 1 in force: the given one, or 1 (even) / 2 (odd electron count)."""
        return default_multiplicity(self.n_electrons) if self.multiplicity is None else int(self.multiplicity)

    @property
    def n_alpha(self) -> int:
        """Electrons of spin α, (N + 2S) / 2 (the larger set)."""
        return (self.n_electrons + self.spin_multiplicity - 1) // 2

    @property
    def n_beta(self) -> int:
        """Electrons of spin β, (N - 2S) / 2."""
        return (self.n_electrons - self.spin_multiplicity + 1) // 2

    def with_multiplicity(self, multiplicity: int | None) -> "Molecule":
        """A copy with another multiplicity (None: the default for its electron count)."""
        return replace(self, multiplicity=multiplicity)

    @property
    def n_atoms(self) -> int:
        """Number of atoms (ghosts included); ``natom`` is its deprecated name."""
        return int(self.atomic_numbers.shape[0])

    @property
    def symbols(self) -> list[str]:
        """Element symbols, one per atom."""
        return [elements.symbol(int(z)) for z in self.atomic_numbers]

    @property
    def nuclear_charges(self) -> np.ndarray:
        """Nuclear charges as float64, shape (natom,): Z, or 0 for a ghost atom."""
        return np.where(self.ghosts, 0.0, self.atomic_numbers.astype(np.float64))

    @property
    def n_electrons(self) -> int:
        """Number of electrons, sum(Z) over the real (non-ghost) atoms minus the charge."""
        return int(self.atomic_numbers[~self.ghosts].sum()) - self.charge

    def line_of(self, atom: int) -> int | None:
        """The line of the source file that defined atom ``atom`` (1-based), if known."""
        if atom < len(self._line_numbers):
            return self._line_numbers[atom]
        return None

    def nuclear_repulsion(self) -> float:
        """Nuclear repulsion energy sum_{A<B} Z_A Z_B / R_AB in hartree."""
        return nuclear_repulsion(self.nuclear_charges, self.coordinates)

    def coordinates_angstrom(self) -> np.ndarray:
        """Nuclear positions in ångström, shape (natom, 3)."""
        return self.coordinates * BOHR_IN_ANGSTROM

    def with_charge(self, charge: int) -> "Molecule":
        """A copy with another total charge (an explicit multiplicity is kept and checked again)."""
        return replace(self, charge=charge)

    def with_ghosts(self, atoms: Iterable[int], charge: int | None = None) -> "Molecule":
        """A copy in which the given atoms (0-based, file order) are ghosts.

        A ghost atom keeps the basis functions of its element at its
        position but has no nuclear charge and no electrons: nuclear
        repulsion and nuclear attraction skip it and the starting guess
        gives it no density. Atoms already ghosts stay ghosts.

        Parameters
        ----------
        atoms : iterable of int
            0-based atom indices.
        charge : int, optional
            Total charge of the copy (default: unchanged).

        Returns
        -------
        Molecule
            With the default multiplicity of its own electron count (a
            piece has its own spin: set it with :meth:`with_multiplicity`).
        """
        mask = self.ghosts.copy()
        mask[_checked_atoms(atoms, self.n_atoms, self.source)] = True
        return replace(self, ghosts=mask, charge=self.charge if charge is None else charge, multiplicity=None)

    def subset(self, atoms: Iterable[int], charge: int = 0) -> "Molecule":
        """The molecule made of the given atoms only (0-based, kept in file order).

        Parameters
        ----------
        atoms : iterable of int
            0-based atom indices.
        charge : int
            Total charge of the part.

        Returns
        -------
        Molecule
        """
        keep = sorted(set(_checked_atoms(atoms, self.n_atoms, self.source)))
        lines = tuple(self._line_numbers[k] for k in keep) if len(self._line_numbers) == self.n_atoms else ()
        return Molecule(
            self.atomic_numbers[keep], self.coordinates[keep], charge, self.source, self.comment, lines, self.ghosts[keep]
        )

    def require_closed_shell(self) -> None:
        """Raise ``InputError`` unless the electron count is even and positive.

        RHF describes closed shells only (:func:`is_closed_shell`); the
        message suggests the nearest charges that would give one.
        """
        n = self.n_electrons
        if is_closed_shell(n):
            return
        if n <= 0:
            raise InputError(f"{self.source}: charge {self.charge} leaves {n} electrons; nothing to compute")
        if n % 2:
            raise InputError(
                f"{self.source}: {n} electrons with charge {self.charge:+d}; RHF needs an even number "
                f"(a closed shell): try --charge {self.charge + 1} or --charge {self.charge - 1}"
            )


# ``natom``, the old name of n_atoms, warns when read (kept for one release).
rename_fields(Molecule, {"natom": "n_atoms"})


def default_multiplicity(n_electrons: int) -> int:
    """1 (singlet) for an even electron count, 2 (doublet) for an odd one."""
    return 1 if int(n_electrons) % 2 == 0 else 2


def check_multiplicity(n_electrons: int, multiplicity: int, source: str = "<memory>") -> int:
    """The one place a multiplicity is checked against the electron count.

    Parameters
    ----------
    n_electrons : int
        Electrons of the molecule (ghost atoms bring none).
    multiplicity : int
        2S + 1.
    source : str
        Name for the message.

    Returns
    -------
    int
        The multiplicity.

    Raises
    ------
    InputError
        One line, when 2S + 1 < 1, when 2S and N differ in parity, or when
        2S exceeds N (more unpaired electrons than electrons).
    """
    m = int(multiplicity)
    n = int(n_electrons)
    if m < 1:
        raise InputError(f"{source}: multiplicity {m} is impossible; it is 2S+1, at least 1")
    unpaired = m - 1
    if unpaired > n:
        raise InputError(
            f"{source}: multiplicity {m} needs {unpaired} unpaired electrons but the molecule has {n}"
        )
    if (n - unpaired) % 2:
        kind = "odd" if n % 2 else "even"
        allowed = "2, 4, 6, ..." if n % 2 else "1, 3, 5, ..."
        raise InputError(f"{source}: multiplicity {m} does not fit {n} electrons (an {kind} count takes {allowed})")
    return m


def is_closed_shell(n_electrons: object) -> bool:
    """The closed-shell rule of RHF, the one place it is stated.

    Parameters
    ----------
    n_electrons : object
        An electron count.

    Returns
    -------
    bool
        True for a whole, positive, even number (not a bool).
    """
    if isinstance(n_electrons, bool) or not isinstance(n_electrons, (int, float, np.integer, np.floating)):
        return False
    return bool(n_electrons > 0 and n_electrons == int(n_electrons) and int(n_electrons) % 2 == 0)


def _checked_arrays(atomic_numbers: object, coordinates: object, source: str) -> tuple[np.ndarray, np.ndarray]:
    """The arrays of a :class:`Molecule`, after every check that needs no file lines.

    Returns
    -------
    z : ndarray of int64, shape (natom,)
    xyz : ndarray of float64, shape (natom, 3)
        In bohr, as given.

    Raises
    ------
    InputError
        For no atoms, a count mismatch, an atomic number outside
        1..``elements.MAX_Z``, or a coordinate that is not finite or exceeds
        :data:`MAX_COORDINATE_ANGSTROM` in magnitude.
    """
    try:
        raw_z = np.asarray(atomic_numbers).reshape(-1)
        xyz = np.ascontiguousarray(coordinates, dtype=np.float64).reshape(-1, 3)
        z = np.ascontiguousarray(raw_z, dtype=np.int64)
        whole = raw_z.dtype != object and bool(np.all(z == raw_z))
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"{source}: atomic numbers must be whole numbers and positions an (natom, 3) array of numbers") from None
    if not whole:
        raise InputError(f"{source}: atomic numbers must be whole numbers, got {raw_z.tolist()!r}")
    if z.shape[0] != xyz.shape[0]:
        raise InputError(f"{source}: {z.shape[0]} atomic numbers but {xyz.shape[0]} positions")
    if z.shape[0] == 0:
        raise InputError(f"{source}: a molecule needs at least one atom")
    unknown = np.flatnonzero((z < 1) | (z > elements.MAX_Z))
    if unknown.size:
        k = int(unknown[0])
        raise InputError(f"{source}: atom {k + 1} has atomic number {z[k]}; hfcore knows elements 1 to {elements.MAX_Z}")
    limit = MAX_COORDINATE_ANGSTROM * ANGSTROM_IN_BOHR
    bad = np.flatnonzero(~np.all(np.isfinite(xyz) & (np.abs(xyz) <= limit), axis=1))
    if bad.size:
        k = int(bad[0])
        raise InputError(
            f"{source}: atom {k + 1} is at {xyz[k].tolist()} bohr; every coordinate must be a finite number "
            f"of at most {MAX_COORDINATE_ANGSTROM:g} Å ({limit:.6g} bohr) in magnitude"
        )
    return z, xyz


def _checked_atoms(atoms: Iterable[int], natom: int, source: str) -> list[int]:
    out = [int(a) for a in atoms]
    bad = [a for a in out if not 0 <= a < natom]
    if bad:
        raise InputError(f"{source}: atom {bad[0] + 1} does not exist (the molecule has {natom} atoms)")
    return out


def parse_atom_ranges(text: str, natom: int, what: str = "atoms") -> list[int]:
    """0-based atom indices from 1-based ranges in file order, e.g. ``"1-3,7"``.

    Parameters
    ----------
    text : str
        Comma-separated items, each ``N`` or ``N-M`` (1-based, inclusive).
    natom : int
        Number of atoms, the largest allowed number.
    what : str
        Name of the option, for messages.

    Returns
    -------
    list of int
        Sorted, each atom once.

    Raises
    ------
    InputError
        For an empty or malformed item, a reversed range, or an atom beyond
        ``natom``.
    """
    out: set[int] = set()
    for item in text.split(","):
        first, sep, last = item.strip().partition("-")
        try:
            lo = int(first)
            hi = int(last) if sep else lo
        except ValueError:
            raise InputError(f"{what} {text!r}: expected 1-based atom numbers or ranges such as 1-3,7") from None
        if lo < 1 or hi < lo:
            raise InputError(f"{what} {text!r}: {item.strip()!r} is not a range of atom numbers from 1 up")
        if hi > natom:
            raise InputError(f"{what} {text!r}: atom {hi} does not exist (the molecule has {natom} atoms)")
        out.update(range(lo - 1, hi))
    return sorted(out)


def nuclear_repulsion(atomic_numbers: np.ndarray, coordinates: np.ndarray) -> float:
    """Nuclear repulsion energy in hartree.

    Parameters
    ----------
    atomic_numbers : ndarray, shape (natom,)
        Nuclear charges.
    coordinates : ndarray, shape (natom, 3)
        Positions in bohr.

    Returns
    -------
    float
        sum over pairs A < B of Z_A Z_B / |R_A - R_B|.
    """
    z = np.asarray(atomic_numbers, dtype=np.float64)
    r = np.asarray(coordinates, dtype=np.float64)
    if z.size < 2:
        return 0.0
    i, j = np.triu_indices(z.size, k=1)
    d = np.linalg.norm(r[i] - r[j], axis=1)
    return float(np.sum(z[i] * z[j] / d))


def _parse_float(text: str) -> float:
    # Fortran-style exponents (1.0D+00) are read as E.
    value = float(text.replace("D", "E").replace("d", "e"))
    if not math.isfinite(value):
        raise ValueError(text)
    return value


def _symbol_problem(token: str) -> str:
    """Why ``token`` is not an element symbol, for the error message."""
    if token.upper() == "X":
        return f"{token!r} is a dummy atom, which hfcore does not accept; remove the line"
    bare = token.rstrip("+-0123456789")
    if bare and bare != token:
        try:
            elements.atomic_number(bare)
        except KeyError:
            pass
        else:
            return f"unknown element {token!r}: write the bare symbol {bare!r} (the charge comes from --charge)"
    return f"unknown element {token!r}"


def parse_xyz(
    text: str, source: str = "<string>", units: str = "angstrom", charge: int = 0, multiplicity: int | None = None
) -> Molecule:
    """Parse the text of an XYZ file.

    Format: line 1 holds the number of atoms, line 2 a free comment, then one
    line per atom ``symbol x y z`` (symbol in any case, or an atomic number).
    Extra columns after z are ignored; blank lines after the last atom are
    allowed. Also accepted: a leading byte-order mark, CRLF or CR line ends,
    tabs between fields, and Fortran exponents (``1.0D+00``). Every
    coordinate must be finite and at most :data:`MAX_COORDINATE_ANGSTROM` Å
    in magnitude; nuclei closer than 0.1 Å are refused.

    Parameters
    ----------
    text : str
        The file contents.
    source : str
        Name used in error messages (normally the file path).
    units : {"angstrom", "bohr"}
        Units of the coordinates in the text.
    charge : int
        Total molecular charge.
    multiplicity : int, optional
        Spin multiplicity 2S + 1 (default: 1 for an even, 2 for an odd
        electron count).

    Returns
    -------
    Molecule
        With coordinates converted to bohr.

    Raises
    ------
    InputError
        With a message ``source:line: problem`` for any malformed content.
    """
    unit = units.lower()
    if unit not in _UNITS:
        raise InputError(f"unknown length unit {units!r}: use 'angstrom' or 'bohr'")
    scale = _UNITS[unit]
    limit = MAX_COORDINATE_ANGSTROM * ANGSTROM_IN_BOHR
    # Only LF, CRLF and CR end a line, so line numbers match a text editor's
    # (str.splitlines would also split at form feeds and other separators).
    lines = text.removeprefix("\ufeff").replace("\r\n", "\n").replace("\r", "\n").split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    if not lines or not any(line.strip() for line in lines):
        raise InputError(f"{source}:1: the file is empty; expected an atom count on line 1")
    head = lines[0].strip()
    try:
        natom = int(head)
    except ValueError:
        raise InputError(f"{source}:1: expected the number of atoms, found {head[:40]!r}") from None
    if natom <= 0:
        raise InputError(f"{source}:1: the atom count must be positive, found {natom}")
    comment = lines[1].strip() if len(lines) > 1 else ""
    body = lines[2:]
    atom_lines = [(k + 3, line) for k, line in enumerate(body) if line.strip()]
    # Blank lines are only allowed after the atoms.
    if len(atom_lines) != natom:
        last = len(lines)
        raise InputError(
            f"{source}:1: the count line says {natom} atoms but {len(atom_lines)} atom lines follow (file ends at line {last})"
        )
    expected_last = atom_lines[-1][0]
    if expected_last != natom + 2:
        first_gap = next(n for n in range(3, expected_last + 1) if not lines[n - 1].strip())
        raise InputError(f"{source}:{first_gap}: blank line among the atom lines")
    zs: list[int] = []
    xyz: list[tuple[float, float, float]] = []
    line_numbers: list[int] = []
    for number, line in atom_lines:
        fields = line.split()
        if len(fields) < 4:
            raise InputError(f"{source}:{number}: expected 'symbol x y z', found {line.strip()[:60]!r}")
        try:
            z = elements.atomic_number(fields[0])
        except KeyError:
            raise InputError(f"{source}:{number}: {_symbol_problem(fields[0])}") from None
        coords = []
        for axis, token in zip("xyz", fields[1:4]):
            try:
                value = _parse_float(token) * scale
            except ValueError:
                raise InputError(f"{source}:{number}: the {axis} coordinate {token!r} is not a finite number") from None
            if not abs(value) <= limit:
                raise InputError(
                    f"{source}:{number}: the {axis} coordinate {token} is out of range; "
                    f"every coordinate must be at most {MAX_COORDINATE_ANGSTROM:g} Å in magnitude"
                )
            coords.append(value)
        zs.append(z)
        xyz.append((coords[0], coords[1], coords[2]))
        line_numbers.append(number)
    r = np.array(xyz, dtype=np.float64)
    close = _closest_close_pair(r, MIN_DISTANCE_ANGSTROM * ANGSTROM_IN_BOHR)
    if close is not None:
        a, b, d = close
        raise InputError(
            f"{source}:{line_numbers[b]}: atom {b + 1} is {d * BOHR_IN_ANGSTROM:.3g} Å from atom {a + 1} "
            f"(line {line_numbers[a]}); atoms closer than {MIN_DISTANCE_ANGSTROM} Å are not allowed"
        )
    return Molecule(np.array(zs), r, charge, source, comment, tuple(line_numbers), multiplicity=multiplicity)


def _closest_close_pair(r: np.ndarray, cutoff: float) -> tuple[int, int, float] | None:
    """The closest pair (a < b, distance) among pairs nearer than ``cutoff``, or None.

    A k-d tree finds the near pairs in O(n log n), so a file with very many
    atoms is checked without an n² distance table.
    """
    if len(r) < 64:  # a distance table is quicker than building a tree
        a, b = np.triu_indices(len(r), 1)
        near = np.linalg.norm(r[a] - r[b], axis=1) < cutoff
        pairs = np.stack([a[near], b[near]], axis=1)
    else:
        from scipy.spatial import cKDTree  # imported here: it costs a tenth of a second at start-up

        pairs = cKDTree(r).query_pairs(cutoff, output_type="ndarray")
    # query_pairs includes pairs at exactly the cutoff; keep the strict ones.
    if pairs.shape[0] == 0:
        return None
    d = np.linalg.norm(r[pairs[:, 0]] - r[pairs[:, 1]], axis=1)
    order = np.lexsort((pairs[:, 1], pairs[:, 0], d))
    k = int(order[0])
    if not d[k] < cutoff:
        return None
    return int(pairs[k, 0]), int(pairs[k, 1]), float(d[k])


def read_xyz(
    path: str | os.PathLike, units: str = "angstrom", charge: int = 0, multiplicity: int | None = None
) -> Molecule:
    """Read a molecule from an XYZ file.

    Parameters
    ----------
    path : str or path-like
        The file to read.
    units : {"angstrom", "bohr"}
        Units of the coordinates in the file (default ångström).
    charge : int
        Total molecular charge.
    multiplicity : int, optional
        Spin multiplicity 2S + 1 (default: 1 for an even, 2 for an odd
        electron count).

    Returns
    -------
    Molecule

    Raises
    ------
    InputError
        If the file is missing, unreadable or malformed, or the
        multiplicity does not fit the electron count.
    """
    source = os.fspath(path)
    try:
        with open(source, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise InputError(f"{source}: no such file") from None
    except IsADirectoryError:
        raise InputError(f"{source}: is a directory, not a geometry file") from None
    except OSError as exc:
        raise InputError(f"{source}: cannot read ({exc.strerror or exc})") from None
    if len(data) > MAX_FILE_BYTES:
        raise InputError(f"{source}: larger than {MAX_FILE_BYTES // 2**20} MiB; not a geometry file hfcore can read")
    if b"\0" in data:
        raise InputError(f"{source}: not a text file (it contains NUL bytes)")
    try:
        # utf-8-sig: some editors start UTF-8 files with a byte-order mark,
        # which would otherwise spoil the atom count on line 1.
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{source}: not a text file (cannot decode as UTF-8)") from None
    return parse_xyz(text, source=source, units=units, charge=charge, multiplicity=multiplicity)


__all__ = [
    "Molecule",
    "read_xyz",
    "parse_xyz",
    "nuclear_repulsion",
    "parse_atom_ranges",
    "is_closed_shell",
    "check_multiplicity",
    "default_multiplicity",
    "BOHR_IN_ANGSTROM",
    "ANGSTROM_IN_BOHR",
    "MAX_COORDINATE_ANGSTROM",
]
