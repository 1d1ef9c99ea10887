"""A per-iteration hook that sees, and may replace, the Fock matrix.

hfcore's SCF hands every iteration's Fock matrix (in the orthonormal basis)
to an accelerator; a hook is an accelerator of one's own that looks at the
matrix, may change it, and passes it on to DIIS. Here the hook records the
HOMO-LUMO gap of every Fock matrix and, for the first iterations, lifts the
virtual orbitals by a level shift b (1 - P), P the occupied projector. The
SCF's convergence test always uses the unmodified Fock matrix, so a hook
like this changes the path, not the answer. ``SCFOptions(auto_aids=False)``
keeps the hook in charge throughout: otherwise, when the iterations stall,
the SCF's automatic aids replace the whole accelerator chain, hook included.

(A model potential that should enter the energy belongs in the core
Hamiltonian instead: ``solve_rhf`` takes any ``core_hamiltonian``.)

Run:  python examples/fock_hook.py
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np

import hfcore
from hfcore import integrals
from hfcore.scf import Accelerator, FockStep, build_accelerator, sad_density, solve_rhf

HERE = Path(__file__).resolve().parent


class FockHook(Accelerator):
    """Call ``hook(step) -> fock`` on each iteration, then hand the result to ``then``."""

    def __init__(self, hook: Callable[[FockStep], np.ndarray], then: Accelerator) -> None:
        self.hook = hook
        self.then = then

    def next_fock(self, step: FockStep) -> np.ndarray:
        fock = self.hook(step)
        return self.then.next_fock(FockStep(step.iteration, fock, step.error, step.projector))

    def reset(self) -> None:
        self.then.reset()

    @property
    def subspace_size(self) -> int:
        return self.then.subspace_size


def run_with_hook(molecule: hfcore.Molecule, basis_name: str, hook: Callable[[FockStep], np.ndarray],
                  options: hfcore.SCFOptions | None = None) -> hfcore.RHFResult:
    """RHF through :func:`solve_rhf` with ``hook`` in front of the accelerator the options ask for.

    Without ``options``, the defaults with ``auto_aids=False``, so the hook sees every iteration.
    """
    options = options or hfcore.SCFOptions(auto_aids=False)
    basis = hfcore.build_basis(molecule, basis_name)
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, molecule.atomic_numbers, molecule.coordinates)
    store = integrals.compute_eri(basis)
    guess = sad_density(basis, molecule.atomic_numbers)
    accelerator = FockHook(hook, build_accelerator(options))
    return solve_rhf(s, h, store, molecule.n_electrons, molecule.nuclear_repulsion(), options, guess,
                     accelerator=accelerator)


def do_nothing(step: FockStep) -> np.ndarray:
    """A hook that changes nothing."""
    return step.fock


class GapRecorder:
    """Records the HOMO-LUMO gap of each Fock matrix and shifts the virtuals for the first ``until`` iterations."""

    def __init__(self, n_occupied: int, shift: float = 0.5, until: int = 3) -> None:
        self.n_occupied, self.shift, self.until = n_occupied, shift, until
        self.gaps: list[float] = []

    def __call__(self, step: FockStep) -> np.ndarray:
        eps = np.linalg.eigvalsh(step.fock)
        self.gaps.append(float(eps[self.n_occupied] - eps[self.n_occupied - 1]))
        if step.iteration > self.until:
            return step.fock
        return step.fock + self.shift * (np.eye(step.fock.shape[0]) - step.projector)


def main() -> None:
    water = hfcore.read_xyz(HERE.parent / "inputs" / "water.xyz")
    plain = run_with_hook(water, "6-31g", do_nothing)
    recorder = GapRecorder(water.n_electrons // 2)
    shifted = run_with_hook(water, "6-31g", recorder)
    print(f"do-nothing hook   E = {plain.energy_total:.10f} Eh in {plain.iterations} iterations")
    print(f"level-shift hook  E = {shifted.energy_total:.10f} Eh in {shifted.iterations} iterations")
    print("gap per iteration / Eh:", " ".join(f"{g:.4f}" for g in recorder.gaps))


if __name__ == "__main__":
    main()

__all__ = ["FockHook", "run_with_hook", "do_nothing", "GapRecorder"]
