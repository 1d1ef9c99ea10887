"""Human-readable report sections for the command line.

Every function here turns a record into text and returns it; none prints
and none computes physics. The command line writes the sections in order
(and the SCF iteration lines live, as the SCF reports them).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from ..basis.components import L_LETTERS
from ..units import BOHR_IN_ANGSTROM, EV_PER_HARTREE

#: Virtual orbitals listed after the LUMO before the list is cut short.
MAX_VIRTUALS_SHOWN: int = 10

_RULE_WIDTH = 64


def heading(title: str) -> str:
    """A section title followed by a rule of the report's width."""
    return f"\n{title}\n{'─' * _RULE_WIDTH}"


def pairs(rows: Iterable[tuple[str, str]], indent: int = 2) -> str:
    """Rows of (label, value) with the values aligned."""
    items = list(rows)
    width = max(len(k) for k, _ in items)
    return "\n".join(f"{' ' * indent}{k:<{width}}   {v}" for k, v in items)


def format_molecule(molecule: Any) -> str:
    """The molecule section: source, charge, electrons and positions in ångström.

    Parameters
    ----------
    molecule : Molecule
    """
    lines = [heading("Molecule")]
    info = [("geometry", molecule.source)]
    if molecule.comment:
        info.append(("comment", molecule.comment))
    info += [
        ("atoms", str(molecule.n_atoms)),
        ("charge", f"{molecule.charge:+d}" if molecule.charge else "0"),
        ("electrons", str(molecule.n_electrons)),
        ("multiplicity", spin_words(molecule.spin_multiplicity)),
        ("nuclear repulsion", f"{molecule.nuclear_repulsion():.10f} Eh"),
    ]
    ghosts = np.flatnonzero(molecule.ghosts)
    if ghosts.size:
        info.append(("ghost atoms", f"{atom_ranges(ghosts)} (basis functions only: no nucleus, no electrons)"))
    lines.append(pairs(info))
    lines.append("")
    lines.append(f"  {'#':>4}  {'element':<7}  {'x / Å':>13}  {'y / Å':>13}  {'z / Å':>13}")
    xyz = np.asarray(molecule.coordinates) * BOHR_IN_ANGSTROM
    for k, (sym, (x, y, z)) in enumerate(zip(molecule.symbols, xyz), start=1):
        mark = "  ghost" if molecule.ghosts[k - 1] else ""
        lines.append(f"  {k:>4}  {sym:<7}  {x:13.6f}  {y:13.6f}  {z:13.6f}{mark}")
    return "\n".join(lines)


def atom_ranges(atoms: Iterable[int]) -> str:
    """0-based atom indices as 1-based ranges in file order, e.g. [3, 4, 5, 7] -> "4-6,8"."""
    runs: list[list[int]] = []
    for a in sorted(int(k) + 1 for k in atoms):
        if runs and a == runs[-1][-1] + 1:
            runs[-1].append(a)
        else:
            runs.append([a])
    return ",".join(str(r[0]) if len(r) == 1 else f"{r[0]}-{r[-1]}" for r in runs)


def format_basis(basis: Any, plan: Any = None) -> str:
    """The basis section: name, function form, counts of functions and shells.

    Parameters
    ----------
    basis : BasisSet
    plan : JKPlan, optional
        When given, the section also says how J and K will be built and
        what storing the integrals costs, before the integral pass starts.
    """
    primitives = sum(s.n_primitives for s in basis.shells)
    info = [
        ("basis set", basis.name),
        ("functions", f"{basis.n_functions} ({'real spherical' if basis.spherical else 'Cartesian'})"),
        ("shells", f"{basis.n_shells} ({primitives} primitive Gaussians)"),
        ("highest l", L_LETTERS[basis.max_l]),
    ]
    if plan is not None:
        info.extend(_jk_rows(plan))
    return heading("Basis") + "\n" + pairs(info)


def _mib(n_bytes: int) -> str:
    from .._memory import format_bytes

    return format_bytes(n_bytes)


def _resource_rows(plan: Any) -> list[tuple[str, str]]:
    """The memory budget with the bound that set it, and what was capped (the plan's own words)."""
    budget = getattr(plan, "budget", None)
    rows = [] if budget is None else [("memory", f"budget {budget.describe()}")]
    return rows + [("capped", note) for note in getattr(plan, "notes", ())]


def _jk_rows(plan: Any) -> list[tuple[str, str]]:
    if plan.mode == "fitted":
        fit = plan.fit_basis
        if plan.fitting.storage == "stored":
            how = "density-fitted: fitted factors stored once"
        else:
            how = f"density-fitted: factors recomputed every iteration in blocks of {plan.fitting.block_functions}"
        rows = [
            ("two-electron", how),
            ("fitting set", f"{fit.name}, {fit.n_functions} functions ({fit.n_shells} shells, highest l "
                            f"{'spdfghi'[fit.max_l]})"),
            ("fitted size", f"{_mib(plan.eri_memory_bytes)} predicted (limit {_mib(plan.limit_bytes)}; "
                            f"all factors {_mib(plan.fitting.stored_bytes)})"),
        ]
        return rows + [("fitting note", note) for note in plan.fit_notes] + _resource_rows(plan)
    if plan.mode == "stored":
        how = "stored once, reused every iteration"
    elif plan.mode == "stored-lean":
        how = "stored once, no exchange kernel (lean: half the memory, slower K builds)"
    else:
        how = "direct: recomputed every iteration from density changes"
    return [
        ("two-electron", how),
        ("stored size", f"{_mib(plan.eri_memory_bytes)} predicted (limit {_mib(plan.limit_bytes)})"),
    ] + _resource_rows(plan)


def format_linear_dependence(n_dropped: int, threshold: float) -> str:
    """One line on overlap eigenvectors dropped as linearly dependent."""
    if n_dropped == 0:
        return f"  linear dependence: none (overlap eigenvalues all above {threshold:.1e})"
    return (
        f"  linear dependence: {n_dropped} combination{'s' if n_dropped > 1 else ''} dropped "
        f"(overlap eigenvalue below {threshold:.1e})"
    )


def history_header() -> str:
    """Heading and column titles of the SCF iteration table."""
    columns = f"  {'iter':>4}  {'energy / Eh':>20}  {'change / Eh':>12}  {'gradient':>10}  {'DIIS':>4}"
    return heading("SCF iterations") + "\n" + columns


def _no_negative_zero(values: np.ndarray, decimals: int) -> np.ndarray:
    # A value that rounds to zero should print as 0.000000, not -0.000000.
    return np.round(np.asarray(values, dtype=np.float64), decimals) + 0.0


def _signed_or_dash(value: float | None, spec: str, width: int) -> str:
    if value is None or not np.isfinite(value):
        return f"{'—':>{width}}"
    return f"{value:{width}{spec}}"


def format_iteration(record: Any) -> str:
    """One row of the SCF table for a per-iteration record.

    Parameters
    ----------
    record : SCFIteration
        With ``iteration``, ``energy``, ``delta_e``, ``gradient_norm``, ``diis_size``.
    """
    return (
        f"  {record.iteration:>4}  {record.energy:20.12f}  {_signed_or_dash(record.delta_e, '.3e', 12)}"
        f"  {_signed_or_dash(record.gradient_norm, '.3e', 10)}  {record.diis_size:>4}"
    )


def format_convergence(result: Any) -> str:
    """The line closing the SCF table."""
    opts = result.options
    state = "converged" if result.converged else "NOT converged"
    return (
        f"  {state} after {result.iterations} iterations "
        f"(|ΔE| < {opts.energy_tol:.0e} Eh, gradient < {opts.gradient_tol:.0e})"
    )


def format_new_solution(record: Any) -> str:
    """The line the live SCF table shows when a solution after a rotation starts."""
    return f"  -- solution {record.solution + 1}: started along the lowest unstable mode of the previous one --"


def format_aid_switch(record: Any) -> str:
    """The line the live SCF table shows when an automatic convergence aid takes over."""
    return f"  -- no progress: switching to {record.aid} --"


#: How the report names each stability setting.
STABILITY_SETTINGS: dict[str, str] = {
    "report": "report (analysed and reported; --stability descend would move to a lower solution)",
    "descend": "descend (analysed; an unstable solution is left for a lower one)",
}


def format_stability(result: Any) -> str:
    """The stability section: what was checked after convergence, the aufbau check and the aids used.

    Parameters
    ----------
    result : RHFResult
        With ``stability`` (None when the analysis was off), ``aufbau``,
        ``aufbau_gap``, ``aids`` and ``history``.
    """
    st = result.stability
    rows: list[tuple[str, str]] = []
    if st is None:
        rows.append(("internal stability", "not checked (--stability skip)"))
    else:
        # The message states the verdict itself ("stable after ...", "unstable: ..."),
        # so it is shown once, with the setting on a row of its own.
        message = st.message if st.stable else st.message.replace("unstable", "UNSTABLE", 1)
        rows.append(("internal stability", message))
        rows.append(("setting", STABILITY_SETTINGS.get(st.mode, st.mode)))
        threshold = f"threshold -{st.threshold:.0e}"
        if np.isfinite(st.lowest_eigenvalue):
            rows.append(("lowest eigenvalue", f"{st.lowest_eigenvalue:.4e} Eh (orbital Hessian, {threshold})"))
        else:
            rows.append(("lowest eigenvalue", "none (no occupied-virtual rotation in this basis)"))
        rows.append(("solutions / Eh", " → ".join(f"{e:.10f}" for e in st.solutions)))
        products = str(st.hessian_products)
        if getattr(st, "fitted_products", 0):
            fit = getattr(st, "screen_fit_basis", None) or "a fitting set"
            products += f" exact, {st.fitted_products} density-fitted ({fit})"
        rows.append(("Hessian products", products))
        if getattr(st, "eigenvalues_from", "exact") == "fitted":
            rows.append(("eigenvalues from", "density-fitted products (far from the threshold; exact ones are "
                         "used near it)"))
    if result.method == "ROHF":
        rows[0] = ("internal stability", "not analysed for ROHF (use --uhf for the UHF stability analysis)")
        if getattr(result, "restriction", None):
            rows.insert(1, ("orbital shapes", f"{result.restriction}: one radial function per shell, "
                            "shared by its m components (equivalence restrictions)"))
    if hasattr(result, "aufbau"):
        gap = "none" if not np.isfinite(result.aufbau_gap) else f"{result.aufbau_gap:.6f} Eh"
        verdict = "yes" if result.aufbau else "NO"
        rows.append(("aufbau occupation", f"{verdict} (lowest virtual − highest occupied: {gap})"))
    for warning in getattr(result, "warnings", ()):
        rows.append(("WARNING", warning))
    if result.aids:
        starts = []
        for aid in result.aids:
            first = next((h for h in result.history if h.aid == aid), None)
            where = f" from iteration {first.iteration}" if first is not None else ""
            if first is not None and first.solution:
                where += f" of solution {first.solution + 1}"
            starts.append(aid + where)
        rows.append(("convergence aids", "; ".join(starts)))
    else:
        rows.append(("convergence aids", "none needed"))
    return heading("Stability and occupation") + "\n" + pairs(rows)


def format_energies(result: Any) -> str:
    """The energy section: total and its parts, in hartree."""
    rows = [
        ("nuclear repulsion", result.energy_nuclear),
        ("one-electron", result.energy_one_electron),
        ("two-electron", result.energy_two_electron),
        ("electronic", result.energy_electronic),
    ]
    body = [f"  {name:<20}{value:22.12f}" for name, value in rows]
    body.append(f"  {'':<20}{'─' * 22}")
    body.append(f"  {'total energy':<20}{result.energy_total:22.12f}")
    return heading("Energy / Eh") + "\n" + "\n".join(body)


def format_orbitals(result: Any, max_virtuals: int = MAX_VIRTUALS_SHOWN) -> str:
    """The orbital section: energies and occupations, HOMO and LUMO marked.

    All occupied orbitals are listed and at most ``max_virtuals`` virtual
    ones after the LUMO; the rest are counted.
    """
    if result.method == "UHF":
        return "\n".join([
            _orbital_table(f"Orbitals, α spin ({result.n_alpha} electrons)", result.orbital_energies_alpha,
                           result.occupations_alpha, result.homo_alpha, result.lumo_alpha, max_virtuals),
            _orbital_table(f"Orbitals, β spin ({result.n_beta} electrons)", result.orbital_energies_beta,
                           result.occupations_beta, result.homo_beta, result.lumo_beta, max_virtuals),
        ])
    occupied = np.flatnonzero(np.asarray(result.occupations) > 0)
    homo = int(occupied[-1]) if occupied.size else None  # ROHF: the highest singly or doubly occupied orbital
    lumo = None if homo is None or homo + 1 >= len(result.occupations) else homo + 1
    table = _orbital_table("Orbitals", result.orbital_energies, result.occupations, homo, lumo, max_virtuals)
    if result.method == "ROHF":
        table += f"\n  energies: {result.orbital_energy_convention}"
    return table


def _orbital_table(title: str, energies: Any, occupations: Any, homo: int | None, lumo: int | None,
                   max_virtuals: int) -> str:
    eps = np.asarray(energies)
    occ = np.asarray(occupations)
    last = len(eps) if lumo is None else min(len(eps), lumo + max_virtuals)
    lines = [heading(title), f"  {'#':>4}  {'energy / Eh':>16}  {'energy / eV':>12}  {'occupation':>10}"]
    for k in range(last):
        mark = "  HOMO" if k == homo else "  LUMO" if k == lumo else ""
        lines.append(f"  {k + 1:>4}  {eps[k]:16.8f}  {eps[k] * EV_PER_HARTREE:12.4f}  {occ[k]:10.1f}{mark}")
    if last < len(eps):
        lines.append(f"  ... {len(eps) - last} higher virtual orbitals not shown (all are in --json)")
    return "\n".join(lines)


#: The trade's words for the low multiplicities.
SPIN_WORDS: dict[int, str] = {1: "singlet", 2: "doublet", 3: "triplet", 4: "quartet", 5: "quintet", 6: "sextet"}


def spin_words(multiplicity: int) -> str:
    """``"3 (triplet)"``: a multiplicity 2S+1 with its name where it has one."""
    word = SPIN_WORDS.get(int(multiplicity))
    return f"{multiplicity} ({word})" if word else str(multiplicity)


def format_spin(result: Any) -> str:
    """The spin section of an open-shell record: ⟨S²⟩ against S(S+1), and the Mulliken spin populations."""
    molecule = result.molecule
    rows = [
        ("multiplicity", spin_words(result.multiplicity)),
        ("alpha / beta electrons", f"{result.n_alpha} / {result.n_beta}"),
        ("⟨S²⟩", f"{result.s_squared:.6f}"),
        ("exact S(S+1)", f"{result.s_squared_exact:.6f}"),
        ("spin contamination", f"{result.spin_contamination:.6f}"),
    ]
    lines = [heading("Spin"), pairs(rows), "", f"  {'#':>4}  {'element':<7}  {'Mulliken spin population':>24}"]
    populations = result.spin_record()["mulliken_spin_populations"]
    for k, (sym, value) in enumerate(zip(molecule.symbols, populations), start=1):
        mark = "  ghost" if molecule.ghosts[k - 1] else ""
        lines.append(f"  {k:>4}  {sym:<7}  {value:24.6f}{mark}")
    return "\n".join(lines)


def format_charges(
    symbols: Sequence[str], charges: np.ndarray, ghosts: Sequence[bool] | None = None, lowdin: np.ndarray | None = None
) -> str:
    """Mulliken (and, when given, Löwdin) atomic charges, one line per atom, in elementary charges; ghosts marked."""
    marks = ["  ghost" if g else "" for g in ghosts] if ghosts is not None else [""] * len(symbols)
    if lowdin is None:
        lines = [heading("Mulliken charges / e")]
        for k, (sym, q, mark) in enumerate(zip(symbols, _no_negative_zero(charges, 6), marks), start=1):
            lines.append(f"  {k:>4}  {sym:<7}  {q:+10.6f}{mark}")
        lines.append(f"  {'sum':>13}  {float(_no_negative_zero(np.sum(charges), 6)):+10.6f}")
        return "\n".join(lines)
    lines = [heading("Mulliken charges and Löwdin charges / e"), f"  {'':>4}  {'':<7}  {'Mulliken':>10}  {'Löwdin':>10}"]
    rows = zip(symbols, _no_negative_zero(charges, 6), _no_negative_zero(np.asarray(lowdin), 6), marks)
    for k, (sym, q, ql, mark) in enumerate(rows, start=1):
        lines.append(f"  {k:>4}  {sym:<7}  {q:+10.6f}  {ql:+10.6f}{mark}")
    sums = [float(_no_negative_zero(np.sum(x), 6)) for x in (charges, lowdin)]
    lines.append(f"  {'sum':>13}  {sums[0]:+10.6f}  {sums[1]:+10.6f}")
    return "\n".join(lines)


def format_dipole(dipole_au: np.ndarray, debye_per_au: float, charged: bool, centre_of_mass: bool = False) -> str:
    """Dipole moment components and length in debye (and atomic units)."""
    d = np.asarray(dipole_au, dtype=np.float64)
    lines = [heading("Dipole moment"), f"  {'':<8}{'x':>12}{'y':>12}{'z':>12}{'|μ|':>12}"]
    for unit, scale in (("debye", debye_per_au), ("e·bohr", 1.0)):
        x, y, z = _no_negative_zero(d * scale, 6)
        lines.append(f"  {unit:<8}{x:12.6f}{y:12.6f}{z:12.6f}{np.linalg.norm(d) * scale:12.6f}")
    if charged:
        where = "the centre of mass" if centre_of_mass else "the origin given with --origin"
        lines.append(f"  (charged molecule: the dipole depends on the origin; it is taken about {where})")
    return "\n".join(lines)


def format_quadrupole(quadrupole_au: np.ndarray, debye_angstrom_per_au: float) -> str:
    """The traceless (Buckingham) quadrupole moment, six components, in debye·Å and e·bohr²."""
    q = np.asarray(quadrupole_au, dtype=np.float64)
    names = ("xx", "yy", "zz", "xy", "xz", "yz")
    index = ((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))
    lines = [heading("Quadrupole moment (traceless, Θ = ½ Σ q (3 r r − r² 1))"),
             f"  {'':<8}" + "".join(f"{n:>11}" for n in names)]
    for unit, scale in (("D·Å", debye_angstrom_per_au), ("e·bohr²", 1.0)):
        values = _no_negative_zero(np.array([q[i, j] for i, j in index]) * scale, 5)
        lines.append(f"  {unit:<8}" + "".join(f"{v:11.5f}" for v in values))
    lines.append("  (about the same origin as the dipole)")
    return "\n".join(lines)


def format_properties(analysis: dict[str, Any]) -> str:
    """HOMO-LUMO gap, Koopmans ionisation energy and the virial ratio."""
    rows = []
    gap = analysis.get("homo_lumo_gap")
    if gap is not None:
        rows.append(("HOMO-LUMO gap", f"{gap:14.8f} Eh  {gap * EV_PER_HARTREE:10.4f} eV"))
    ie = analysis["koopmans_ionisation"]
    rows.append(("Koopmans ionisation energy", f"{ie:14.8f} Eh  {ie * EV_PER_HARTREE:10.4f} eV"))
    rows.append(("virial ratio -V/T", f"{analysis['virial_ratio']:14.8f}"))
    return heading("Properties") + "\n" + pairs(rows)


def format_mp2(mp2: Any) -> str:
    """MP2 and SCS-MP2 energies as a table (rows: same-spin, opposite-spin, correlation, total), in hartree."""
    from ..analysis.mp2 import SCS_OPPOSITE_SPIN, SCS_SAME_SPIN

    plural = "s" if mp2.frozen_core > 1 else ""
    core = f"{mp2.frozen_core} frozen core orbital{plural}" if mp2.frozen_core else "all electrons correlated"
    rows = [
        ("same-spin", mp2.same_spin, SCS_SAME_SPIN * mp2.same_spin),
        ("opposite-spin", mp2.opposite_spin, SCS_OPPOSITE_SPIN * mp2.opposite_spin),
        ("correlation", mp2.correlation, mp2.scs_correlation),
        ("total", mp2.energy_total, mp2.scs_energy_total),
    ]
    body = [f"  {'':<16}{'MP2':>22}{'SCS-MP2':>22}"]
    body += [f"  {name:<16}{plain:22.12f}{scaled:22.12f}" for name, plain, scaled in rows]
    body.append(f"  ({core}; {mp2.n_active_occupied} occupied and {mp2.n_virtual} virtual orbitals;")
    body.append("   SCS-MP2: 6/5 opposite-spin + 1/3 same-spin, S. Grimme, J. Chem. Phys. 118, 9095 (2003))")
    if getattr(mp2, "fit_basis_name", None):
        body.append(f"  (density-fitted with {mp2.fit_basis_name}, {mp2.fit_basis_n_functions} fitting functions)")
    return heading("MP2 / Eh") + "\n" + "\n".join(body)


#: Report labels of the stages the timings hold, in the order they run.
_STAGE_LABELS: dict[str, str] = {
    "integrals": "integrals", "guess": "guess", "scf": "iterations", "stability": "stability",
    "total": "SCF total", "mp2": "MP2 (not in the SCF total)",
}


def format_timings(timings: dict[str, float], wall: float, counted: str = "since the process started") -> str:
    """Timings of the stages, then of MP2, then of the whole command, in seconds.

    Parameters
    ----------
    timings : dict
        Seconds by stage, as in the JSON record (``total`` is the SCF's total
        and does not include ``mp2``).
    wall : float
        Seconds of the whole command.
    counted : str
        What ``wall`` counts from, e.g. ``"since the process started"``.
    """
    order = [k for k in _STAGE_LABELS if k in timings] + [k for k in timings if k not in _STAGE_LABELS]
    rows = [(_STAGE_LABELS.get(name, name), f"{timings[name]:9.3f} s") for name in order]
    rows.append((f"whole command ({counted})", f"{wall:9.3f} s"))
    return heading("Timings") + "\n" + pairs(rows)


def format_sto_fit(fit: Any) -> str:
    """Exponents, contraction coefficients and overlaps of a Slater fit.

    Parameters
    ----------
    fit : STOFit
    """
    letters = L_LETTERS
    ls = sorted(fit.coefficients)
    info = [
        ("shell", fit.shell),
        ("Gaussians", str(fit.n_gaussians)),
        ("Slater exponent ζ", f"{fit.zeta:g} bohr⁻¹"),
    ]
    lines = [heading("Least-squares Gaussian fit to a Slater function"), pairs(info), ""]
    header = f"  {'#':>3}  {'exponent α / bohr⁻²':>22}" + "".join(f"  {'d(' + letters[l] + ')':>14}" for l in ls)
    lines.append(header)
    for k, alpha in enumerate(fit.exponents):
        lines.append(f"  {k + 1:>3}  {alpha:22.10f}" + "".join(f"  {fit.coefficients[l][k]:14.10f}" for l in ls))
    lines.append("")
    for l in ls:
        lines.append(f"  overlap with the Slater {letters[l]} function: {fit.overlaps[l]:.10f}")
    return "\n".join(lines)


def format_comparison(comparison: Any) -> str:
    """The basis comparison table and any basis-limit estimates."""
    lines = [
        heading("Basis comparison"),
        f"  {'basis':<16} {'functions':>9}  {'form':<9} {'energy / Eh':>18} {'Δ / mEh':>11} "
        f"{'Δ / kcal/mol':>13} {'iter':>4} {'time / s':>9}",
    ]
    for row in comparison.rows:
        form = "spherical" if row.spherical else "Cartesian"
        flag = "" if row.converged else "  (not converged)"
        lines.append(
            f"  {row.basis:<16} {row.n_functions:>9}  {form:<9} {row.energy_total:18.10f} "
            f"{row.delta_mEh:11.3f} {row.delta_kcal_mol:13.3f} {row.iterations:>4} {row.wall_seconds:9.2f}{flag}"
        )
    lines.append(f"  Δ: energy above {comparison.reference_basis}, the basis with the most functions")
    if comparison.estimates:
        lines.append(heading("Basis-limit estimates"))
        for est in comparison.estimates:
            lines.append(
                f"  {est.method:<12} {', '.join(est.bases):<36} {est.energy_total:18.10f} Eh {est.delta_mEh:11.3f} mEh"
            )
            lines.append(f"  {'':<12} {est.citation}")
    if getattr(comparison, "limit", None) is not None:
        lines.append(f"  basis limit: {comparison.limit.describe()}")
    lines += [f"  note: {note}" for note in comparison.notes]
    return "\n".join(lines)


def _element_span(atomic_numbers: Iterable[int]) -> str:
    # Runs of consecutive elements read better as ranges: "H–Ar" rather than 18 symbols.
    from .. import elements

    zs = sorted(atomic_numbers)
    runs: list[list[int]] = []
    for z in zs:
        if runs and z == runs[-1][-1] + 1:
            runs[-1].append(z)
        else:
            runs.append([z])
    parts = [elements.symbol(r[0]) if len(r) == 1 else f"{elements.symbol(r[0])}–{elements.symbol(r[-1])}" for r in runs]
    return ", ".join(parts)


#: What each kind of shipped set is for, by the library's family label (orbital sets have their own labels).
SET_USES: dict[str, str] = {
    "jk-fitting": "J/K fitting (--fit-basis)",
    "mp2-fitting": "MP2 fitting (--mp2-fit-basis)",
}


def format_basis_list(families: Sequence[Any], fitted: Sequence[str]) -> str:
    """The basis sets the command line accepts.

    Parameters
    ----------
    families : sequence of BasisFamily
        The published sets shipped with hfcore.
    fitted : sequence of str
        Names of the fitted Slater sets.
    """
    width = max(len(f.name) for f in families)
    lines = [heading("Basis sets shipped with hfcore"),
             f"  {'name':<{width}}   {'use':<29} {'default form':<16} elements"]
    for family in families:
        form = "real spherical" if family.default_spherical else "Cartesian"
        use = SET_USES.get(getattr(family, "family", ""), "orbital set (--basis)")
        lines.append(f"  {family.name:<{width}}   {use:<29} {form:<16} {_element_span(family.elements())}")
    lines.append(heading("Fitted Slater sets (H–Ar; --zeta changes their exponents)"))
    lines.append("  " + "  ".join(fitted))
    lines.append("\n  Other published sets are found by name with the optional extra: pip install 'hfcore[bse]'")
    return "\n".join(lines)



__all__ = [
    "MAX_VIRTUALS_SHOWN",
    "EV_PER_HARTREE",
    "heading",
    "format_molecule",
    "atom_ranges",
    "format_basis",
    "format_linear_dependence",
    "history_header",
    "format_iteration",
    "format_convergence",
    "format_new_solution",
    "format_aid_switch",
    "format_stability",
    "format_energies",
    "format_orbitals",
    "format_charges",
    "format_dipole",
    "format_timings",
    "format_sto_fit",
    "format_comparison",
    "format_basis_list",
]
