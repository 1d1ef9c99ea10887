"""Shell records and the conventions every basis family shares.

Conventions (documented once, used everywhere)
----------------------------------------------
Ordering of basis functions
    atom (in geometry order), then shell (in the order the basis lists them
    for that element), then contraction (for generally contracted shells),
    then component.

Components
    The Cartesian and real-spherical component orders, their norms, the
    spherical transform and the angular-momentum letters live in
    :mod:`hfcore.basis.components`.

Radial normalisation
    ``Shell.coefficients`` multiply *normalised* primitives, as basis-set
    tables publish them. :attr:`Shell.norm_coefficients` folds in the
    primitive normalisation of the x^l component and renormalises each
    contraction, so that the contracted x^l Cartesian function (and every
    spherical component) has unit norm. The remaining per-component factor
    for other Cartesian monomials is
    :func:`hfcore.basis.components.cartesian_component_norms`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import BasisError
from .components import (
    L_LETTERS,
    _double_factorial,
    component_labels,
    n_cartesian,
    n_spherical,
)

#: Highest angular momentum of an orbital basis (h functions).
MAX_L: int = 5
#: Highest angular momentum of a fitting set (i functions); the three- and
#: two-centre integrals reach l_P + 2 MAX_L.
MAX_FIT_L: int = 6

#: Gaussian exponents accepted, in bohr⁻² (inclusive bounds). Published sets
#: for H–Kr stay well inside (about 1e-3 to 1e8); outside it the products of
#: exponents and squared distances in the integrals leave floating point.
EXPONENT_RANGE: tuple[float, float] = (1e-8, 1e10)
#: Largest magnitude of a contraction coefficient (of normalised primitives,
#: so published values are of order one).
MAX_COEFFICIENT: float = 1e6


def primitive_norms(l: int, exponents: np.ndarray) -> np.ndarray:
    """Normalisation constants of primitive x^l exp(-a r²) Gaussians.

    Parameters
    ----------
    l : int
        Angular momentum.
    exponents : ndarray, shape (nprim,)
        Gaussian exponents a in bohr⁻².

    Returns
    -------
    ndarray, shape (nprim,)
        N with N² ∫ x^{2l} exp(-2 a r²) d³r = 1.
    """
    a = np.asarray(exponents, dtype=np.float64)
    return (2.0 * a / np.pi) ** 0.75 * (4.0 * a) ** (l / 2.0) / math.sqrt(_double_factorial(2 * l - 1))


def contraction_norm_coefficients(l: int, exponents: np.ndarray, coefficients: np.ndarray) -> np.ndarray:
    """Coefficients of unnormalised primitives giving unit contracted functions.

    Parameters
    ----------
    l : int
        Angular momentum.
    exponents : ndarray, shape (nprim,)
    coefficients : ndarray, shape (ncontr, nprim)
        Contraction coefficients of normalised primitives.

    Returns
    -------
    ndarray, shape (ncontr, nprim)
        c'_k such that sum_k c'_k x^l exp(-a_k r²) has unit norm.
    """
    a = np.asarray(exponents, dtype=np.float64)
    c = np.atleast_2d(np.asarray(coefficients, dtype=np.float64)) * primitive_norms(l, a)
    # Overlap of unnormalised x^l primitives: (2l-1)!! / (2(a+b))^l * (pi/(a+b))^{3/2}
    p = a[:, None] + a[None, :]
    s = _double_factorial(2 * l - 1) / (2.0 * p) ** l * (np.pi / p) ** 1.5
    norms = np.einsum("ck,kj,cj->c", c, s, c)
    return c / np.sqrt(norms)[:, None]


@dataclass(frozen=True)
class ElementShell:
    """A shell as a basis set defines it for an element, before placement.

    Attributes
    ----------
    l : int
        Angular momentum (0 = s, 1 = p, ...).
    exponents : ndarray, shape (nprim,)
        Primitive exponents in bohr⁻², all positive.
    coefficients : ndarray, shape (ncontr, nprim)
        Contraction coefficients of normalised primitives; ncontr > 1 for a
        generally contracted shell (several functions sharing exponents).
    label : str
        Optional human label (e.g. ``"2sp"`` for a fitted Slater shell).
    """

    l: int
    exponents: np.ndarray
    coefficients: np.ndarray
    label: str = ""

    def __post_init__(self) -> None:
        # Every rule a shell must meet is checked here, whatever family made it.
        if isinstance(self.l, bool) or not isinstance(self.l, (int, np.integer)) or not 0 <= self.l <= MAX_FIT_L:
            # Orbital sets stop at MAX_L (checked where they are read); fitting sets reach i.
            raise BasisError(f"angular momentum l = {self.l!r} is not supported (s..i, l <= {MAX_FIT_L})")
        try:
            e = np.ascontiguousarray(self.exponents, dtype=np.float64).reshape(-1)
            c = np.ascontiguousarray(np.atleast_2d(np.asarray(self.coefficients, dtype=np.float64)))
        except (TypeError, ValueError, OverflowError):
            raise BasisError("shell exponents and coefficients must be arrays of numbers") from None
        name = f"shell {self.label or L_LETTERS[self.l]}"
        if c.ndim != 2 or c.shape[1] != e.shape[0] or e.shape[0] == 0 or c.shape[0] == 0:
            raise BasisError(f"{name}: {e.shape[0]} exponents but coefficients of shape {c.shape}")
        low, high = EXPONENT_RANGE
        bad = np.flatnonzero(~((e >= low) & (e <= high)))
        if bad.size:
            raise BasisError(
                f"{name}: exponent {e[bad[0]]:g} is outside the accepted range {low:g} to {high:g} bohr⁻² "
                "(exponents must be positive and finite)"
            )
        bad = np.flatnonzero(~(np.abs(c) <= MAX_COEFFICIENT))
        if bad.size:
            raise BasisError(
                f"{name}: coefficient {c.flat[bad[0]]:g} is not a finite number of at most {MAX_COEFFICIENT:g} in magnitude"
            )
        # Norm² of each contraction over normalised primitives, whose overlap
        # is (2 sqrt(a b) / (a + b))^(l + 3/2); zero means the coefficients cancel.
        ratio = 2.0 * np.sqrt(e[:, None] * e[None, :]) / (e[:, None] + e[None, :])
        norms = np.einsum("ck,kj,cj->c", c, ratio ** (self.l + 1.5), c)
        flat = np.flatnonzero(~(norms > 1e-10 * np.sum(c * c, axis=1)))
        if flat.size:
            raise BasisError(f"{name}: contraction {flat[0] + 1} has zero norm (its primitives cancel)")
        e.setflags(write=False)
        c.setflags(write=False)
        object.__setattr__(self, "exponents", e)
        object.__setattr__(self, "coefficients", c)

    @property
    def n_contractions(self) -> int:
        return int(self.coefficients.shape[0])

    @property
    def n_primitives(self) -> int:
        return int(self.exponents.shape[0])


@dataclass(frozen=True)
class Shell:
    """A contracted Gaussian shell placed on an atom.

    Attributes
    ----------
    l : int
        Angular momentum.
    exponents : ndarray, shape (nprim,)
        Exponents in bohr⁻².
    coefficients : ndarray, shape (ncontr, nprim)
        Contraction coefficients of normalised primitives (as published).
    center : ndarray, shape (3,)
        Position in bohr.
    atom : int
        Index of the atom the shell sits on.
    label : str
        Optional human label.
    """

    l: int
    exponents: np.ndarray
    coefficients: np.ndarray
    center: np.ndarray
    atom: int
    label: str = ""

    def __post_init__(self) -> None:
        template = ElementShell(self.l, self.exponents, self.coefficients, self.label)
        r = np.ascontiguousarray(self.center, dtype=np.float64).reshape(3)
        r.setflags(write=False)
        object.__setattr__(self, "exponents", template.exponents)
        object.__setattr__(self, "coefficients", template.coefficients)
        object.__setattr__(self, "center", r)
        norm = contraction_norm_coefficients(self.l, template.exponents, template.coefficients)
        norm.setflags(write=False)
        object.__setattr__(self, "_norm", norm)

    @property
    def norm_coefficients(self) -> np.ndarray:
        """Coefficients of unnormalised primitives, shape (ncontr, nprim).

        With these, each contracted x^l Cartesian function (and each real
        spherical component) has unit norm.
        """
        return self._norm  # type: ignore[attr-defined]

    @property
    def n_contractions(self) -> int:
        return int(self.coefficients.shape[0])

    @property
    def n_primitives(self) -> int:
        return int(self.exponents.shape[0])

    def n_functions(self, spherical: bool) -> int:
        """Number of basis functions: contractions × components."""
        return self.n_contractions * (n_spherical(self.l) if spherical else n_cartesian(self.l))


@dataclass(frozen=True)
class BasisSet:
    """Basis functions placed on a molecule.

    Attributes
    ----------
    name : str
        The basis name as the user gave it (or a composite description).
    shells : tuple of Shell
        In hfcore's function order (atom, shell, contraction, component).
    spherical : bool
        True for real spherical components, False for Cartesian.
    """

    name: str
    shells: tuple[Shell, ...]
    spherical: bool

    def __post_init__(self) -> None:
        object.__setattr__(self, "shells", tuple(self.shells))
        sizes = [s.n_functions(self.spherical) for s in self.shells]
        offsets = np.concatenate([[0], np.cumsum(sizes, dtype=np.int64)]).astype(np.int64)
        offsets.setflags(write=False)
        object.__setattr__(self, "_offsets", offsets)

    @property
    def n_functions(self) -> int:
        """Number of basis functions (nbf)."""
        return int(self._offsets[-1])  # type: ignore[attr-defined]

    @property
    def n_shells(self) -> int:
        return len(self.shells)

    @property
    def shell_offsets(self) -> np.ndarray:
        """Index of the first function of each shell, shape (nshell + 1,); the last entry is nbf."""
        return self._offsets  # type: ignore[attr-defined]

    @property
    def max_l(self) -> int:
        return max((s.l for s in self.shells), default=0)

    def function_atoms(self) -> np.ndarray:
        """Atom index of every basis function, shape (nbf,)."""
        out = np.empty(self.n_functions, dtype=np.int64)
        for s, start, stop in zip(self.shells, self._offsets[:-1], self._offsets[1:]):  # type: ignore[attr-defined]
            out[start:stop] = s.atom
        return out

    def function_l(self) -> np.ndarray:
        """Angular momentum of every basis function, shape (nbf,)."""
        out = np.empty(self.n_functions, dtype=np.int64)
        for s, start, stop in zip(self.shells, self._offsets[:-1], self._offsets[1:]):  # type: ignore[attr-defined]
            out[start:stop] = s.l
        return out

    def function_labels(self, symbols: list[str] | None = None) -> list[str]:
        """Labels such as ``"0 O 2px"`` for every function, in order.

        Parameters
        ----------
        symbols : list of str, optional
            Element symbol per atom; atom indices alone if omitted.
        """
        labels: list[str] = []
        count: dict[tuple[int, int], int] = {}
        for s in self.shells:
            comps = component_labels(s.l, self.spherical)
            for _ in range(s.n_contractions):
                key = (s.atom, s.l)
                count[key] = count.get(key, 0) + 1
                n = count[key] + s.l
                who = f"{s.atom} {symbols[s.atom]}" if symbols else f"{s.atom}"
                labels.extend(f"{who} {n}{L_LETTERS[s.l]}{c}" for c in comps)
        return labels


__all__ = [
    "MAX_L",
    "MAX_FIT_L",
    "EXPONENT_RANGE",
    "MAX_COEFFICIENT",
    "ElementShell",
    "Shell",
    "BasisSet",
    "primitive_norms",
    "contraction_norm_coefficients",
]
