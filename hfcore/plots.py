"""Figures, written as PNG files with matplotlib's non-interactive backend.

matplotlib is an optional dependency (``pip install 'hfcore[plot]'``); it is
imported only when a figure is drawn.
"""

from __future__ import annotations

import os
import tempfile

from .errors import InputError


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
    """Write the figure to a temporary file beside ``path``, then rename it into place."""
    target = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(target))
    handle, temporary = tempfile.mkstemp(prefix=".tmp-", suffix=".png", dir=directory)
    os.close(handle)
    try:
        figure.savefig(temporary, format="png", dpi=120)
        os.replace(temporary, target)
    except BaseException:
        os.unlink(temporary)
        raise


def _series(rows) -> dict[str, list]:
    """Rows grouped by correlation-consistent family ("" for all other bases), joined by lines per family."""
    from .analysis.extrapolation import correlation_consistent

    groups: dict[str, list] = {}
    for r in rows:
        found = correlation_consistent(r.basis)
        groups.setdefault(found[0] if found else "", []).append(r)
    return groups


def plot_comparison(comparison, path: str | os.PathLike) -> None:
    """Draw RHF energy against the number of basis functions.

    Each basis is a labelled point; basis-limit estimates are horizontal
    lines labelled with their method and bases.

    Parameters
    ----------
    comparison : BasisComparison
        From :func:`hfcore.analysis.compare_bases`.
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
        axes.set_xlabel("number of basis functions")
        axes.set_ylabel("RHF total energy / hartree")
        axes.ticklabel_format(axis="y", useOffset=False)
        axes.margins(x=0.15, y=0.12)
        axes.legend(fontsize=8, loc="upper right")
        figure.tight_layout()
        _save_atomically(figure, path)
    finally:
        plt.close(figure)


__all__ = ["plot_comparison"]
