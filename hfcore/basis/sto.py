"""Fitted STO-nG basis sets: least-squares Gaussian expansions of Slater functions.

A normalised Slater function ``N r^(n-1) exp(-ζ r) Y_lm`` is approximated
by ``Σ_k d_k g_k(r) Y_lm`` with normalised Gaussians
``g_k = N_k r^l exp(-α_k r²)``. The fit minimises the squared distance
between the normalised Slater function and the normalised expansion, which
is the same as maximising their overlap. For the shared-exponent shells
``2sp`` and ``3sp`` the s Slater function is fitted with s-type Gaussians
and the p Slater function with p-type Gaussians on one set of exponents,
and the two distances are summed (the published convention).

How the fit works
-----------------
For fixed exponents the best coefficients solve a linear system,
``d ∝ S⁻¹ b`` (``S`` the Gaussian overlap matrix, ``b`` the overlaps with
the Slater function), and the best overlap is ``sqrt(bᵀ S⁻¹ b)``. So only
the exponents are optimised, as logarithms, with an analytic gradient:
first as an even-tempered series (two parameters), then freely by
quasi-Newton, then polished by Newton steps. Fits are made at ζ = 1 and
cached; a Slater function of exponent ζ is the ζ = 1 function with r → ζ r,
so its fit has exponents ``α ζ²`` and unchanged coefficients.

The Gaussian–Slater radial integrals ``∫ r^k exp(-ζ r - α r²) dr`` are
done by a fixed double-exponential quadrature (relative error below 1e-14
for 1e-4 <= α/ζ² <= 1e4), because their closed form in ``erfcx`` loses
digits by cancellation when the Gaussian is diffuse.
"""

from __future__ import annotations

import json
import math
import numbers
import re
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike

from .. import elements
from ..errors import BasisError, InputError
from .family import BasisFamily
from .shells import ElementShell
from .slater_exponents import STANDARD_EXPONENTS

#: Slater shells the fitter knows: label -> (principal quantum number, angular momenta fitted).
#: Lone 2s, 3s and 3p fits are left out: their Slater function has a power
#: of r the Gaussians lack, the optimum is poorly conditioned, and they are
#: not part of the STO-nG sets.
SLATER_SHELLS: Mapping[str, tuple[int, tuple[int, ...]]] = {
    "1s": (1, (0,)),
    "2p": (2, (1,)),
    "2sp": (2, (0, 1)),
    "3sp": (3, (0, 1)),
    "3d": (3, (2,)),
}

MAX_GAUSSIANS: int = 6

#: Largest Slater exponent accepted (bohr⁻¹). The standard values for H–Ar
#: stay below 20; far beyond, ζ² times the fitted exponents leaves the range
#: of Gaussian exponents a shell may have.
MAX_ZETA: float = 1000.0

CITATION: str = (
    "W. J. Hehre, R. F. Stewart and J. A. Pople, J. Chem. Phys. 51, 2657 (1969); "
    "W. J. Hehre, R. Ditchfield, R. F. Stewart and J. A. Pople, J. Chem. Phys. 52, 2769 (1970)"
)

# Double-exponential nodes r = exp(t - exp(-t)) for ∫_0^∞ f(r) dr with
# exponentially decaying f; the trapezoidal rule in t converges
# geometrically, and 115 nodes reach machine precision on the unit scale.
_DE_STEP = 1.0 / 12.0
_DE_T = np.arange(-5.0, 4.5 + _DE_STEP / 2, _DE_STEP)
_DE_NODES = np.exp(_DE_T - np.exp(-_DE_T))
_DE_WEIGHTS = _DE_STEP * _DE_NODES * (1.0 + np.exp(-_DE_T))

_GRADIENT_TOL = 1e-12  # on d(summed overlap)/d log α at the accepted optimum
_STEP_TOL = 1e-9  # on the last Newton step in log α


def _radial_moments(alpha: np.ndarray, powers: tuple[int, ...]) -> dict[int, np.ndarray]:
    """∫_0^∞ r^k exp(-r - α r²) dr for each α and each k (Slater exponent 1).

    Parameters
    ----------
    alpha : ndarray, shape (m,)
        Gaussian exponents in bohr⁻².
    powers : tuple of int
        Increasing powers k of r (including the r² of the volume element).

    Returns
    -------
    dict of int -> ndarray, shape (m,)
    """
    a = alpha[:, None]
    # Map each integrand to unit width so one node set serves every α.
    scale = 1.0 + np.sqrt(a)
    r = _DE_NODES / scale
    term = _DE_WEIGHTS / scale * np.exp(-r - a * r * r) * r ** powers[0]
    out = {}
    for k in range(powers[0], powers[-1] + 1):
        if k in powers:
            out[k] = term.sum(axis=1)
        term = term * r
    return out


def _slater_norm(n: int, zeta: float) -> float:
    """Radial normalisation of r^(n-1) exp(-ζ r)."""
    return (2.0 * zeta) ** (n + 0.5) / math.sqrt(math.factorial(2 * n))


def _gaussian_norms(l: int, alpha: np.ndarray) -> np.ndarray:
    """Radial normalisation of r^l exp(-α r²), shape like ``alpha``."""
    return np.sqrt(2.0 * (2.0 * alpha) ** (l + 1.5) / math.gamma(l + 1.5))


def _best_overlap_squared(
    log_alpha: np.ndarray, n: int, l: int, moments: dict[int, np.ndarray]
) -> tuple[float, np.ndarray, np.ndarray]:
    """Best squared overlap q = bᵀS⁻¹b of one Slater function, its gradient, and S⁻¹b.

    Parameters
    ----------
    log_alpha : ndarray, shape (m,)
        Logarithms of the Gaussian exponents (Slater exponent 1).
    n, l : int
        Principal quantum number and angular momentum of the Slater function.
    moments : dict
        :func:`_radial_moments` of exp(log_alpha) for powers n+l+1 and n+l+3.

    Returns
    -------
    q : float
    dq : ndarray, shape (m,)
        dq / d log α.
    c : ndarray, shape (m,)
        S⁻¹ b, the unnormalised best coefficients of normalised Gaussians.
    """
    a = np.exp(log_alpha)
    k = n + l + 1
    pref = _gaussian_norms(l, a) * _slater_norm(n, 1.0)
    b = pref * moments[k]
    db = b * (2 * l + 3) / 4.0 - a * pref * moments[k + 2]
    p = a[:, None] + a[None, :]
    s = (2.0 * np.sqrt(a[:, None] * a[None, :]) / p) ** (l + 1.5)
    ds = s * (l + 1.5) * (a[None, :] - a[:, None]) / (2.0 * p)  # row i: dS_ij / d log α_i
    c = np.linalg.solve(s, b)
    q = float(b @ c)
    dq = 2.0 * c * db - 2.0 * c * (ds @ c)
    return q, dq, c


def _moment_powers(n: int, ls: tuple[int, ...]) -> tuple[int, ...]:
    """Powers of r whose moments the overlaps and their gradients need."""
    return tuple(sorted({n + l + 1 + extra for l in ls for extra in (0, 2)}))


def _objective(log_alpha: np.ndarray, n: int, ls: tuple[int, ...]) -> tuple[float, np.ndarray]:
    """Minus the summed best overlaps (the summed distances up to a constant), and its gradient."""
    value = 0.0
    grad = np.zeros_like(log_alpha)
    moments = _radial_moments(np.exp(log_alpha), _moment_powers(n, ls))
    for l in ls:
        q, dq, _ = _best_overlap_squared(log_alpha, n, l, moments)
        root = math.sqrt(q)
        value -= root
        grad -= dq / (2.0 * root)
    return value, grad


def _even_tempered_start(m: int, n: int, ls: tuple[int, ...]) -> np.ndarray:
    """Best even-tempered log-exponents log α_k = a + k·b, as a start for the free fit."""
    steps = np.arange(m, dtype=np.float64)

    def reduced(params: np.ndarray) -> tuple[float, np.ndarray]:
        value, grad = _objective(params[0] + params[1] * steps, n, ls)
        return value, np.array([grad.sum(), grad @ steps])

    # The most diffuse Gaussian of these fits lies near α ~ 0.03..0.3 and
    # successive ratios near 3..5; a fixed start keeps the result deterministic.
    from scipy.optimize import minimize  # only the fitter needs it: a plain run does not pay its import

    best = minimize(reduced, np.array([-2.0, 1.2]), jac=True, method="BFGS")
    return best.x[0] + best.x[1] * steps


def _newton_polish(x: np.ndarray, n: int, ls: tuple[int, ...]) -> np.ndarray:
    """Newton steps with a finite-difference Hessian of the analytic gradient.

    The optima are flat (smallest Hessian eigenvalue ~1e-6), so quasi-Newton
    leaves log-exponents wrong by ~1e-4; Newton, limited only by the
    accuracy of the gradient, pins them to ~1e-11.
    """
    h = 1e-5
    eye = np.eye(x.size)
    for _ in range(6):
        grad = _objective(x, n, ls)[1]
        hess = np.array([(_objective(x + h * e, n, ls)[1] - _objective(x - h * e, n, ls)[1]) / (2 * h) for e in eye])
        hess = 0.5 * (hess + hess.T)
        try:
            chol = np.linalg.cholesky(hess)
        except np.linalg.LinAlgError:
            break  # not in the quadratic basin: keep the quasi-Newton point
        step = np.linalg.solve(chol.T, np.linalg.solve(chol, grad))
        x = x - step
        if np.max(np.abs(step)) < _STEP_TOL:
            break
    return x


#: The fits at ζ = 1 of every shell and size, as :func:`_fit_unit_now` makes them, written by
#: ``scripts/make_sto_fits.py`` (``tests/test_startup.py`` fits again and compares): a run
#: reads them instead of fitting, and so does not import scipy.optimize.
_FIT_TABLE = Path(__file__).resolve().parent / "data" / "sto_fits.json"


@lru_cache(maxsize=None)
def _fit_unit(shell: str, m: int) -> tuple[tuple[float, ...], tuple[tuple[float, ...], ...], tuple[float, ...]]:
    """Fit of ``m`` Gaussians to the Slater shell at ζ = 1 (cached, immutable).

    Read from the shipped table when it holds the fit, else made now.

    Returns
    -------
    exponents, coefficients per l, overlaps per l
        Exponents in decreasing order; coefficients of normalised
        primitives, normalised so the expansion has unit norm.
    """
    fit = _fit_table().get(shell, {}).get(str(m))
    if fit is None:
        return _fit_unit_now(shell, m)
    return tuple(fit["exponents"]), tuple(tuple(c) for c in fit["coefficients"]), tuple(fit["overlaps"])


@lru_cache(maxsize=None)
def _fit_table() -> dict:
    try:
        return json.loads(_FIT_TABLE.read_text(encoding="utf-8"))
    except OSError:
        return {}


def _fit_unit_now(shell: str, m: int) -> tuple[tuple[float, ...], tuple[tuple[float, ...], ...], tuple[float, ...]]:
    """:func:`_fit_unit` by the fitter itself (what the shipped table was made from)."""
    n, ls = SLATER_SHELLS[shell]
    start = _even_tempered_start(m, n, ls)
    from scipy.optimize import minimize  # only the fitter needs it (a lazy import, as above)

    result = minimize(_objective, start, args=(n, ls), jac=True, method="BFGS", options={"gtol": 1e-8, "maxiter": 2000})
    x = np.sort(_newton_polish(result.x, n, ls))[::-1]
    grad = _objective(x, n, ls)[1]
    if not np.max(np.abs(grad)) < _GRADIENT_TOL:
        raise BasisError(f"STO-{m}G fit of the {shell} Slater function did not converge (gradient {np.max(np.abs(grad)):.1e})")
    coefficients = []
    overlaps = []
    moments = _radial_moments(np.exp(x), _moment_powers(n, ls))
    for l in ls:
        q, _, c = _best_overlap_squared(x, n, l, moments)
        coefficients.append(tuple(c / math.sqrt(q)))
        overlaps.append(math.sqrt(q))
    return tuple(np.exp(x)), tuple(coefficients), tuple(overlaps)


def _is_count(n_gaussians: object) -> bool:
    """True for an integer number of Gaussians in 1..MAX_GAUSSIANS (bools excluded)."""
    return isinstance(n_gaussians, numbers.Integral) and not isinstance(n_gaussians, bool) and 1 <= n_gaussians <= MAX_GAUSSIANS


def _readonly(values: ArrayLike) -> np.ndarray:
    out = np.array(values, dtype=np.float64)
    out.setflags(write=False)
    return out


@dataclass(frozen=True)
class STOFit:
    """A least-squares Gaussian expansion of a Slater shell.

    Attributes
    ----------
    shell : str
        Slater shell label, one of :data:`SLATER_SHELLS` (e.g. ``"2sp"``).
    n_gaussians : int
        Number of Gaussians.
    zeta : float
        Slater exponent ζ in bohr⁻¹.
    principal : int
        Principal quantum number n of the Slater function r^(n-1) exp(-ζ r).
    exponents : ndarray, shape (n_gaussians,)
        Gaussian exponents in bohr⁻², decreasing.
    coefficients : dict of int -> ndarray, shape (n_gaussians,)
        Per angular momentum l, the coefficients of normalised primitives
        r^l exp(-α r²); the expansion has unit norm.
    overlaps : dict of int -> float
        Per l, the overlap of the normalised expansion with the normalised
        Slater function (1 is a perfect fit; the squared distance between
        them is 2 - 2·overlap).
    """

    shell: str
    n_gaussians: int
    zeta: float
    principal: int
    exponents: np.ndarray
    coefficients: dict[int, np.ndarray]
    overlaps: dict[int, float]

    def to_dict(self) -> dict:
        """The ``fit`` object of the JSON record.

        Shell, n_gaussians, zeta, exponents, and the coefficients and
        overlaps keyed by angular momentum letter.
        """
        from .components import L_LETTERS

        return {
            "shell": self.shell,
            "n_gaussians": self.n_gaussians,
            "zeta": self.zeta,
            "exponents": self.exponents,
            "coefficients": {L_LETTERS[l]: c for l, c in sorted(self.coefficients.items())},
            "overlaps": {L_LETTERS[l]: v for l, v in sorted(self.overlaps.items())},
        }

    @property
    def angular_momenta(self) -> tuple[int, ...]:
        """The l values fitted, increasing."""
        return tuple(sorted(self.coefficients))

    def slater_radial(self, r: ArrayLike) -> np.ndarray:
        """Normalised Slater radial function R(r) = N r^(n-1) exp(-ζ r).

        Parameters
        ----------
        r : array_like, shape (m,)
            Distances from the nucleus in bohr.

        Returns
        -------
        ndarray, shape (m,)
            In bohr^(-3/2), with ∫ R² r² dr = 1 (the same for every l).
        """
        r = np.asarray(r, dtype=np.float64)
        return _slater_norm(self.principal, self.zeta) * r ** (self.principal - 1) * np.exp(-self.zeta * r)

    def gaussian_radial(self, r: ArrayLike, l: int | None = None) -> np.ndarray:
        """Radial part of the fitted expansion, Σ_k d_k N_k r^l exp(-α_k r²).

        Parameters
        ----------
        r : array_like, shape (m,)
            Distances in bohr.
        l : int, optional
            Which fitted angular momentum; default the lowest.

        Returns
        -------
        ndarray, shape (m,)
            In bohr^(-3/2), normalised like :meth:`slater_radial`.
        """
        l = self.angular_momenta[0] if l is None else l
        if l not in self.coefficients:
            raise InputError(f"the {self.shell} fit has no l = {l} part")
        r = np.asarray(r, dtype=np.float64)
        weights = self.coefficients[l] * _gaussian_norms(l, self.exponents)
        return r**l * (np.exp(-np.multiply.outer(r * r, self.exponents)) @ weights)


def fit_sto(shell: str = "1s", n_gaussians: int = 3, zeta: float = 1.0) -> STOFit:
    """Least-squares fit of ``n_gaussians`` Gaussians to a Slater shell.

    Parameters
    ----------
    shell : str
        Slater shell label: ``"1s"``, ``"2sp"``, ``"3sp"`` (the s and p
        expansions share one set of exponents), ``"2p"`` or ``"3d"``.
    n_gaussians : int
        1 to 6.
    zeta : float
        Slater exponent in bohr⁻¹.

    Returns
    -------
    STOFit

    Raises
    ------
    InputError
        For an unknown shell, a number of Gaussians outside 1..6 or a
        non-positive ζ.
    """
    if shell not in SLATER_SHELLS:
        raise InputError(f"unknown Slater shell {shell!r}; known: {', '.join(SLATER_SHELLS)}")
    if not _is_count(n_gaussians):
        raise InputError(f"STO-nG needs 1 <= n <= {MAX_GAUSSIANS} Gaussians, got {n_gaussians!r}")
    if not (math.isfinite(zeta) and 0 < zeta <= MAX_ZETA):
        raise InputError(f"Slater exponent must be a positive number of at most {MAX_ZETA:g}, got {zeta!r}")
    n_gaussians = int(n_gaussians)
    exponents, coefficients, overlaps = _fit_unit(shell, n_gaussians)
    principal, ls = SLATER_SHELLS[shell]
    return STOFit(
        shell=shell,
        n_gaussians=n_gaussians,
        zeta=float(zeta),
        principal=principal,
        exponents=_readonly(np.array(exponents) * zeta**2),
        coefficients={l: _readonly(c) for l, c in zip(ls, coefficients)},
        overlaps=dict(zip(ls, overlaps)),
    )


def _element_shells_of(z: int) -> tuple[str, ...]:
    return tuple(STANDARD_EXPONENTS[z])


def _parse_override_key(key: str, item: str) -> str:
    """Canonical form (``"He"`` or ``"C:2sp"``) of an override key; ``item`` is quoted in errors."""
    symbol_text, _, shell = str(key).strip().partition(":")
    try:
        z = elements.atomic_number(symbol_text)
    except KeyError:
        raise InputError(f"zeta override {item!r}: unknown element {symbol_text.strip()!r}") from None
    symbol = elements.symbol(z)
    if z not in STANDARD_EXPONENTS:
        raise InputError(f"zeta override {item!r}: the STO-nG sets define H to Ar only, not {symbol}")
    if not shell:
        return symbol
    shell = shell.strip().lower()
    if shell not in _element_shells_of(z):
        known = ", ".join(_element_shells_of(z))
        raise InputError(f"zeta override {item!r}: {symbol} has no {shell!r} shell (its shells: {known})")
    return f"{symbol}:{shell}"


def _check_override_value(value: object, item: str) -> float:
    try:
        zeta = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise InputError(f"zeta override {item!r}: {value!r} is not a number") from None
    if not (math.isfinite(zeta) and 0 < zeta <= MAX_ZETA):
        raise InputError(f"zeta override {item!r}: the exponent must be positive and at most {MAX_ZETA:g}, got {value!r}")
    return zeta


def parse_zeta_overrides(items: list[str]) -> dict[str, float]:
    """Parse command-line Slater exponent overrides.

    Parameters
    ----------
    items : list of str
        Strings ``"He=2.0925"`` (every shell of He) or ``"C:2sp=1.80"``
        (one shell), ζ in bohr⁻¹.

    Returns
    -------
    dict of str -> float
        Canonical keys (``"He"``, ``"C:2sp"``) to ζ, ready for
        :class:`STOFamily` or :func:`hfcore.basis.build_basis`.

    Raises
    ------
    InputError
        Naming the bad item: missing ``=``, unknown element, element
        beyond Ar, unknown shell for that element, a value that is not a
        positive number, or the same key given twice.
    """
    out: dict[str, float] = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep:
            raise InputError(f"zeta override {item!r}: expected ELEMENT=ZETA or ELEMENT:SHELL=ZETA")
        canonical = _parse_override_key(key, item)
        if canonical in out:
            raise InputError(f"zeta override {item!r}: {canonical} is given more than once")
        out[canonical] = _check_override_value(value.strip(), item)
    return out


class STOFamily(BasisFamily):
    """The fitted STO-nG minimal basis sets for H to Ar.

    Each element gets its occupied Slater shells (1s; 1s, 2sp; 1s, 2sp,
    3sp) with the standard molecular exponents of
    :mod:`hfcore.basis.slater_exponents`, each expanded in ``n`` Gaussians
    by :func:`fit_sto`. An ``sp`` shell becomes an s shell and a p shell
    sharing exponents, both labelled with the Slater shell (``"2sp"``).

    Parameters
    ----------
    n_gaussians : int
        1 to 6.
    zeta : mapping of str -> float, optional
        Slater exponent overrides in bohr⁻¹: ``"He"`` sets every shell of
        He, ``"C:2sp"`` one shell; a shell-specific key wins over an
        element key.

    Raises
    ------
    BasisError
        If ``n_gaussians`` is outside 1..6.
    InputError
        If an override names an unknown element or shell or is not positive.
    """

    default_spherical = True
    citation = CITATION

    def __init__(self, n_gaussians: int = 3, zeta: Mapping[str, float] | None = None) -> None:
        if not _is_count(n_gaussians):
            raise BasisError(f"STO-nG is available for n = 1..{MAX_GAUSSIANS}, not {n_gaussians!r}")
        self.n_gaussians = int(n_gaussians)
        self.name = f"STO-{self.n_gaussians}G"
        self.overrides: dict[str, float] = {
            _parse_override_key(k, f"{k}={v}"): _check_override_value(v, f"{k}={v}") for k, v in (zeta or {}).items()
        }

    def elements(self) -> frozenset[int]:
        return frozenset(STANDARD_EXPONENTS)

    def shell_zeta(self, z: int, shell: str) -> float:
        """The Slater exponent (bohr⁻¹) this family uses for one shell of element ``z``."""
        symbol = elements.symbol(z)
        specific = f"{symbol}:{shell}"
        if specific in self.overrides:
            return self.overrides[specific]
        return self.overrides.get(symbol, STANDARD_EXPONENTS[z][shell])

    def element_shells(self, z: int) -> list[ElementShell]:
        if z not in STANDARD_EXPONENTS:
            raise BasisError(f"{self.name} does not cover element {elements.symbol(z) if 1 <= z <= elements.MAX_Z else z}")
        shells = []
        for name in _element_shells_of(z):
            fit = fit_sto(name, self.n_gaussians, self.shell_zeta(z, name))
            shells.extend(ElementShell(l, fit.exponents, fit.coefficients[l][None, :], name) for l in fit.angular_momenta)
        return shells


_STO_NAME = re.compile(r"sto-?(\d+)g", re.IGNORECASE)


def family_for_name(name: str, zeta: Mapping[str, float] | None = None) -> STOFamily | None:
    """The STO-nG family a basis name asks for, or None if the name is not STO-nG.

    Parameters
    ----------
    name : str
        ``"sto-3g"``, ``"STO-3G"``, ``"sto3g"`` and the like.
    zeta : mapping, optional
        Slater exponent overrides, see :class:`STOFamily`.

    Raises
    ------
    BasisError
        For an STO-nG name with n outside 1..6.
    """
    match = _STO_NAME.fullmatch(name.strip())
    if match is None:
        return None
    return STOFamily(int(match.group(1)), zeta)


__all__ = [
    "SLATER_SHELLS",
    "STOFit",
    "STOFamily",
    "fit_sto",
    "family_for_name",
    "parse_zeta_overrides",
]
