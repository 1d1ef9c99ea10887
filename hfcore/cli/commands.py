"""The table of ``hfcore`` commands: name, the module that runs it, and its one-line help.

Kept apart from the command modules so that the top-level parser can list
every command (``hfcore --help``, the choices of a mistyped command) while
building, and importing, only the module of the command being run.
"""

from __future__ import annotations

#: Command name -> (module in :mod:`hfcore.cli`, one-line help), in the order ``hfcore --help`` lists them.
COMMANDS: dict[str, tuple[str, str]] = {
    "energy": ("energy", "SCF energy, orbitals and populations of one molecule"),
    "fit-sto": ("fit_sto", "least-squares Gaussian expansion of a Slater function"),
    "compare": ("compare", "one molecule in several basis sets, with basis-limit estimates"),
    "interaction": (
        "interaction", "interaction energy of a complex, raw and counterpoise-corrected, in several basis sets"
    ),
    "reaction": ("reaction", "reaction energies from Hartree–Fock totals in several basis sets"),
    "bases": ("bases", "list the basis sets on offer (orbital and fitting sets)"),
    "batch": ("batch", "many molecules and basis sets at once, resumable, on local cores or a Dask cluster"),
}


def command_help(name: str) -> str:
    """The one-line help of command ``name``."""
    return COMMANDS[name][1]


__all__ = ["COMMANDS", "command_help"]
