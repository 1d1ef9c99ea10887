"""Figures, written as PNG files with matplotlib's non-interactive backend.

matplotlib is an optional dependency (``pip install 'hfcore[plot]'``); it is
imported only when a figure is drawn.
"""

from __future__ import annotations

import io
import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

from .errors import InputError
from .export import write_file_atomically

if TYPE_CHECKING:
    from .studies.compare import BasisComparison
    from .studies.interaction import InteractionStudy
    from .studies.reaction import ReactionStudy
    from .basis.sto import STOFit


def _pyplot():
    """matplotlib.pyplot on the Agg backend, or InputError with the install hint."""
    try:
        import matplotlib
    except ImportError:
        raise InputError("plotting needs matplotlib: pip install 'hfcore[plot]'") from None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _save_atomically(figure, path: str | os.PathLike) -> None:
    """Render the figure as PNG in memory, then write it whole (see :mod:`hfcore.export`)."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=120)
    write_file_atomically(path, buffer.getvalue())


def _series(rows) -> dict[str, list]:
    """Rows grouped by correlation-consistent family ("" for all other bases), joined by lines per family."""
    from .studies.extrapolation import correlation_consistent

    groups: dict[str, list] = {}
    for r in rows:
        found = correlation_consistent(r.basis)
        groups.setdefault(found[0] if found else "", []).append(r)
    return groups


def plot_comparison(comparison: BasisComparison, path: str | os.PathLike) -> None:
    """Draw RHF energy against the number of basis functions.

    Each basis is a labelled point; basis-limit estimates are horizontal
    lines labelled with their method and bases, and the basis-limit record
    a grey band, estimate ± uncertainty.

    Parameters
    ----------
    comparison : BasisComparison
        From :func:`hfcore.studies.compare_bases`.
    path : str or path-like
        The PNG file to write (replaced atomically).

    Raises
    ------
    InputError
        If matplotlib is missing or the directory of ``path`` does not exist.
    """
    if not os.path.isdir(os.path.dirname(os.path.abspath(os.fspath(path)))):
        raise InputError(f"{os.fspath(path)}: the directory does not exist")
    plt = _pyplot()
    rows = sorted(comparison.rows, key=lambda r: r.n_functions)
    figure, axes = plt.subplots(figsize=(7.0, 4.8))
    try:
        for family, members in _series(rows).items():
            axes.plot([r.n_functions for r in members], [r.energy_total for r in members], "o-" if family else "o",
                      label=family or "other bases")
        for r in rows:
            mark = "" if r.converged else " (not converged)"
            axes.annotate(f"{r.basis}{mark}", (r.n_functions, r.energy_total), textcoords="offset points",
                          xytext=(6, 6), fontsize=8)
        styles = ("--", ":", "-.")
        for k, estimate in enumerate(comparison.estimates):
            label = f"{estimate.method} limit ({', '.join(estimate.bases)}): {estimate.energy_total:.6f} Eh"
            axes.axhline(estimate.energy_total, linestyle=styles[k % len(styles)], color=f"C{k + 3}", label=label)
        _limit_band(axes, getattr(comparison, "limit", None), 1.0, "Eh", 6)
        axes.set_xlabel("number of basis functions")
        axes.set_ylabel("RHF total energy / hartree")
        axes.ticklabel_format(axis="y", useOffset=False)
        axes.margins(x=0.15, y=0.12)
        axes.legend(fontsize=8, loc="upper right")
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)


def _limit_band(axes, limit, scale: float, unit: str, digits: int, color: str = "0.5", labelled: bool = True) -> None:
    """The basis-limit record as a shaded band, estimate ± uncertainty (nothing when there is no estimate)."""
    if limit is None or limit.energy_total is None:
        return
    centre, half = limit.energy_total * scale, limit.uncertainty * scale
    label = f"basis limit {centre:.{digits}f} ± {half:.{digits}f} {unit}" if labelled else None
    axes.axhspan(centre - half, centre + half, color=color, alpha=0.25, linewidth=0, label=label)
    axes.axhline(centre, color=color, linewidth=0.8)


def _check_directory(path: str | os.PathLike) -> None:
    if not os.path.isdir(os.path.dirname(os.path.abspath(os.fspath(path)))):
        raise InputError(f"{os.fspath(path)}: the directory does not exist")


def plot_interaction(study: InteractionStudy, path: str | os.PathLike) -> None:
    """Draw raw and counterpoise-corrected interaction energies, and their difference, against basis size.

    Parameters
    ----------
    study : InteractionStudy
        From :func:`hfcore.studies.interaction_energies`.
    path : str or path-like
        The PNG file to write (replaced atomically).

    Raises
    ------
    InputError
        If matplotlib is missing or the directory of ``path`` does not exist.
    """
    from .studies.compare import KJ_MOL_PER_HARTREE

    _check_directory(path)
    plt = _pyplot()
    rows = sorted(study.rows, key=lambda r: r.n_functions)
    x = [r.n_functions for r in rows]
    figure, axes = plt.subplots(figsize=(7.0, 4.8))
    try:
        axes.plot(x, [r.raw * KJ_MOL_PER_HARTREE for r in rows], "o-", label="raw")
        axes.plot(x, [r.counterpoise * KJ_MOL_PER_HARTREE for r in rows], "s-", label="counterpoise-corrected")
        axes.plot(x, [r.superposition_error * KJ_MOL_PER_HARTREE for r in rows], "^--",
                  label="superposition error (corrected − raw)")
        for r in rows:
            axes.annotate(r.basis, (r.n_functions, r.raw * KJ_MOL_PER_HARTREE), textcoords="offset points",
                          xytext=(6, -12), fontsize=8)
        axes.axhline(0.0, color="black", linewidth=0.6)
        _limit_band(axes, study.limit(), KJ_MOL_PER_HARTREE, "kJ/mol", 2, color="C1")
        axes.set_xlabel("basis functions of the complex")
        axes.set_ylabel("energy / kJ mol$^{-1}$")
        axes.set_title(f"RHF interaction energy, {os.path.basename(study.source)}", fontsize=10)
        axes.margins(x=0.15, y=0.12)
        axes.legend(fontsize=8, loc="best")
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)


def plot_reactions(study: ReactionStudy, path: str | os.PathLike) -> None:
    """Draw each reaction energy against basis size, with the basis-limit estimates as horizontal lines.

    Parameters
    ----------
    study : ReactionStudy
        From :func:`hfcore.studies.reaction_energies`.
    path : str or path-like
        The PNG file to write (replaced atomically).

    Raises
    ------
    InputError
        If matplotlib is missing or the directory of ``path`` does not exist.
    """
    from .studies.compare import KJ_MOL_PER_HARTREE

    _check_directory(path)
    plt = _pyplot()
    rows = sorted(study.rows, key=lambda r: r.n_functions)
    figure, axes = plt.subplots(figsize=(7.0, 4.8))
    try:
        styles = ("--", ":", "-.")
        for k, reaction in enumerate(study.reactions):
            x = [r.reaction_functions(reaction) for r in rows]
            y = [r.reaction_energies[k] * KJ_MOL_PER_HARTREE for r in rows]
            axes.plot(x, y, "o-", color=f"C{k}", label=reaction.text)
            if k == 0:
                for r, n, value in zip(rows, x, y):
                    axes.annotate(r.basis, (n, value), textcoords="offset points", xytext=(6, 6),
                                  fontsize=8)
            for j, est in enumerate(study.estimates):
                axes.axhline(est.reaction_energies[k] * KJ_MOL_PER_HARTREE, color=f"C{k}", linewidth=1.0,
                             linestyle=styles[j % len(styles)],
                             label=f"{est.method} limit ({', '.join(est.bases)})" if k == 0 else None)
            _limit_band(axes, study.limits()[k], KJ_MOL_PER_HARTREE, "kJ/mol", 2, color=f"C{k}")
        axes.set_xlabel("basis functions, summed over the species of the reaction")
        axes.set_ylabel("reaction energy / kJ mol$^{-1}$")
        axes.set_title("RHF reaction energy against basis size", fontsize=10)
        axes.margins(x=0.15, y=0.12)
        axes.legend(fontsize=7, loc="best")
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)


def _radial_range(fits: Sequence[STOFit]) -> float:
    """Outer radius (bohr) where the most diffuse Slater function has fallen to a few per cent."""
    return max((2.5 * f.principal + 2.0) / f.zeta for f in fits)


def plot_sto_fit(fits: Sequence[STOFit], path: str | os.PathLike) -> None:
    """Draw Slater radial functions, their Gaussian fits and the differences.

    The upper panel shows each distinct Slater radial function R(r) and
    every fitted Gaussian sum; the lower panel shows fit minus Slater, so
    the poor description of the cusp near the nucleus, and its improvement
    with more Gaussians, stand out.

    Parameters
    ----------
    fits : list of STOFit
        From :func:`hfcore.basis.sto.fit_sto`; an ``sp`` fit contributes
        one curve per angular momentum.
    path : str or path-like
        The PNG file to write (replaced atomically).

    Raises
    ------
    InputError
        If ``fits`` is empty, matplotlib is missing or the directory of
        ``path`` does not exist.
    """
    import numpy as np

    if not fits:
        raise InputError("plot_sto_fit needs at least one fit")
    if not os.path.isdir(os.path.dirname(os.path.abspath(os.fspath(path)))):
        raise InputError(f"{os.fspath(path)}: the directory does not exist")
    plt = _pyplot()
    r = np.linspace(0.0, _radial_range(fits), 600)
    from .basis.components import L_LETTERS as letters
    figure, (top, bottom) = plt.subplots(2, 1, sharex=True, figsize=(7.0, 6.4), height_ratios=(3, 2))
    try:
        drawn = set()
        for fit in fits:
            key = (fit.principal, fit.zeta)
            if key not in drawn:
                drawn.add(key)
                top.plot(r, fit.slater_radial(r), color="black", linewidth=2.0, alpha=0.45,
                         label=f"Slater, n = {fit.principal}, ζ = {fit.zeta:g}")
        for k, fit in enumerate(fits):
            slater = fit.slater_radial(r)
            for j, l in enumerate(fit.angular_momenta):
                gauss = fit.gaussian_radial(r, l)
                label = f"STO-{fit.n_gaussians}G {fit.shell} ({letters[l]}), overlap {fit.overlaps[l]:.7f}"
                style = ("-", "--", ":")[j % 3]
                top.plot(r, gauss, style, color=f"C{k}", linewidth=1.2, label=label)
                bottom.plot(r, gauss - slater, style, color=f"C{k}", linewidth=1.2)
        bottom.axhline(0.0, color="black", linewidth=0.6)
        top.set_ylabel("radial function R(r) / bohr$^{-3/2}$")
        bottom.set_ylabel("fit − Slater / bohr$^{-3/2}$")
        bottom.set_xlabel("r / bohr")
        top.legend(fontsize=7, loc="upper right")
        top.set_title("Least-squares Gaussian fits to Slater functions", fontsize=10)
        bottom.set_xlim(0.0, r[-1])
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)



def plot_batch_energies(table, path: str | os.PathLike) -> None:
    """Draw the energies of a batch against geometry, one line per basis set.

    For a scan, the horizontal axis is the coordinate taken from the XYZ
    comment lines; otherwise the geometries in results-file order.

    Parameters
    ----------
    table : EnergyTable
        From :func:`hfcore.batch.energy_table`.
    path : str or path-like
        The PNG file to write (replaced atomically).

    Raises
    ------
    InputError
        If there is no energy to draw, matplotlib is missing or the
        directory of ``path`` does not exist.
    """
    if not table.energies:
        raise InputError(f"{table.path}: no successful job to plot")
    if not os.path.isdir(os.path.dirname(os.path.abspath(os.fspath(path)))):
        raise InputError(f"{os.fspath(path)}: the directory does not exist")
    plt = _pyplot()
    figure, axes = plt.subplots(figsize=(7.0, 4.8))
    try:
        for basis in table.bases:
            points = [(x, table.energies[(g, basis)]) for x, g in zip(table.coordinate, table.geometries)
                      if (g, basis) in table.energies]
            points.sort()
            axes.plot([p[0] for p in points], [p[1] for p in points], "o-", label=basis)
        if table.coordinate_label.startswith("geometry") and len(table.geometries) <= 12:
            axes.set_xticks(table.coordinate, [os.path.basename(g) for g in table.geometries], rotation=30,
                            ha="right", fontsize=7)
        axes.set_xlabel(table.coordinate_label)
        axes.set_ylabel("RHF total energy / hartree")
        axes.ticklabel_format(axis="y", useOffset=False)
        axes.legend(fontsize=8)
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)


__all__ = ["plot_comparison", "plot_sto_fit", "plot_interaction", "plot_reactions", "plot_batch_energies"]
