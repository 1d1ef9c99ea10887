"""The one contract of every study: pieces → runner → assemble.

A study first lists the SCF runs it needs as plain data, its *pieces*
(:class:`hfcore.studies.compare.ComparisonPiece`,
:class:`hfcore.studies.reaction.ReactionPiece`,
:class:`hfcore.studies.fragments.InteractionPiece`), each with a hashable
``key``. A *runner* turns pieces into a mapping from key to
:class:`PieceOutcome`: the study's own in-process runner (which may share
integrals or start one run from another's density), or one the caller
passes in, such as the batch machinery of a face (this package never
imports the faces). Finally the study *assembles* its record from the
outcomes alone, so the record is the same whichever runner ran the pieces.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from ..errors import InputError

#: The studies' progress callback (``message_progress``): called with a one-line message after
#: each SCF run. The SCF's (``progress``) takes iteration records; ``integral_progress`` and
#: MP2's ``fraction_progress`` take the fraction done.
MessageProgress = Callable[[str], None]


@dataclass(frozen=True)
class PieceOutcome:
    """What a runner reports for one piece.

    Attributes
    ----------
    energy_total : float
        Hartree–Fock total energy (RHF, UHF or ROHF) in hartree.
    wall_seconds : float
        Wall-clock time of the run (integrals included when it computed them).
    n_functions : int or None
        Basis functions of the run (None if the runner did not say).
    iterations : int
        SCF iterations (0 if the runner did not say).
    converged : bool
        Whether the SCF converged (a runner of converged runs only leaves it True).
    stable : bool or None
        Verdict of the stability analysis (None when off or not reported).
    reused_integrals : bool
        True if the run took integrals computed for another piece.
    guess : str
        How the run started (e.g. ``"sad"``, ``"projected from 6-31g"``; empty if not reported).
    method : str
        ``"RHF"``, ``"UHF"`` or ``"ROHF"`` (empty if not reported).
    s_squared : float or None
        ⟨S²⟩ of an open-shell run (None for RHF or if not reported).
    """

    energy_total: float
    wall_seconds: float
    n_functions: int | None = None
    iterations: int = 0
    converged: bool = True
    stable: bool | None = None
    reused_integrals: bool = False
    guess: str = ""
    method: str = ""
    s_squared: float | None = None


#: A runner passed in by the caller: pieces in, outcome by piece key out. A pair
#: (energy / Eh, seconds) stands for ``PieceOutcome(energy, seconds)``.
PieceRunner = Callable[..., Mapping[Hashable, "PieceOutcome | tuple[float, float]"]]


def outcome_of(value: PieceOutcome | Sequence[float]) -> PieceOutcome:
    """A runner's report of one piece as a :class:`PieceOutcome` (a pair means energy, seconds)."""
    if isinstance(value, PieceOutcome):
        return value
    energy, seconds = value
    return PieceOutcome(float(energy), float(seconds))


def collect(pieces: Sequence[Any], reported: Mapping[Hashable, Any]) -> dict[Hashable, PieceOutcome]:
    """Every piece's outcome from a runner's report, by piece key.

    Raises
    ------
    InputError
        If the runner left a piece out.
    """
    out = {}
    for piece in pieces:
        if piece.key not in reported:
            raise InputError(f"the runner returned no outcome for the piece {piece.key!r}")
        out[piece.key] = outcome_of(reported[piece.key])
    return out


def piece_method(multiplicity: int, method: str | None) -> str | None:
    """The SCF method a study asks for one species: the study's open-shell choice, applied to open shells.

    ``--uhf`` / ``--rohf`` name the method of every open-shell species; a
    closed-shell singlet stays RHF unless the choice is UHF (which may then
    break its spin symmetry).

    Parameters
    ----------
    multiplicity : int
        2S + 1 of the species.
    method : {None, "rhf", "uhf", "rohf"}
        The study's choice (None: RHF for singlets, UHF for open shells).

    Returns
    -------
    str or None
        The value for :attr:`hfcore.scf.SCFOptions.method`.
    """
    from ..scf.spin import open_shell_choice

    return open_shell_choice(multiplicity, method)


def outcome_of_result(result: Any, seconds: float, n_functions: int, *, converged: bool = True,
                      guess: str = "") -> PieceOutcome:
    """The :class:`PieceOutcome` of an RHF, UHF or ROHF result."""
    stability = getattr(result, "stability", None)
    s_squared = getattr(result, "s_squared", None)
    return PieceOutcome(
        float(result.energy_total), float(seconds), int(n_functions), int(result.iterations), converged,
        None if stability is None else bool(stability.stable), False, guess, str(result.method).upper(),
        None if s_squared is None else float(s_squared),
    )


def check_basis_names(names: Sequence[str]) -> list[str]:
    """The basis names of a study as strings, after checking there is at least one and none repeats.

    Raises
    ------
    InputError
        For one string instead of a list, no name, or a repeated name (ignoring case).
    """
    if isinstance(names, str):
        raise InputError("compare_bases needs a list of basis names, not one string")
    out = [str(n) for n in names]
    if not out:
        raise InputError("compare_bases needs at least one basis name")
    lowered = [n.strip().lower() for n in out]
    repeated = sorted({n for n in out if lowered.count(n.strip().lower()) > 1})
    if repeated:
        raise InputError(f"basis {repeated[0]!r} is listed more than once")
    return out


__all__ = ["MessageProgress", "PieceOutcome", "piece_method", "outcome_of_result", "PieceRunner", "outcome_of", "collect", "check_basis_names"]
