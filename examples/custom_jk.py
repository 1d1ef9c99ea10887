"""A J/K builder of one's own, plugged into hfcore's SCF without touching hfcore.

Anything with a method ``jk(D) -> (J, K)`` is a J/K builder (the
:class:`hfcore.scf.JKBuilder` protocol). This one contracts a dense tensor
with ``numpy.einsum`` and scales the exchange by a factor: 1 gives
Hartree-Fock, 0 the Hartree (no-exchange) model, values between a crude
mixture. The tensor here comes from hfcore, but it could come from
anywhere: a model interaction, a file, another program's export.

Run:  python examples/custom_jk.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

import hfcore
from hfcore import integrals
from hfcore.scf import sad_density, solve_rhf

HERE = Path(__file__).resolve().parent


class ScaledExchangeJK:
    """J and a scaled K from a dense (μν|λσ) tensor, shape (nbf, nbf, nbf, nbf)."""

    def __init__(self, eri: np.ndarray, exchange_scale: float = 1.0) -> None:
        self.eri = np.asarray(eri, dtype=np.float64)
        self.exchange_scale = float(exchange_scale)

    def jk(self, density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        j = np.einsum("pqrs,rs->pq", self.eri, density, optimize=True)
        k = np.einsum("prqs,rs->pq", self.eri, density, optimize=True)
        return j, self.exchange_scale * k


def rhf_with_builder(molecule: hfcore.Molecule, basis_name: str, builder_factory,
                     options: hfcore.SCFOptions | None = None) -> hfcore.RHFResult:
    """Run the SCF on hfcore's one-electron matrices with ``builder_factory(eri)`` for J and K."""
    basis = hfcore.build_basis(molecule, basis_name)
    s = integrals.overlap(basis)
    h = integrals.kinetic(basis) + integrals.nuclear_attraction(basis, molecule.atomic_numbers, molecule.coordinates)
    builder = builder_factory(integrals.eri_tensor(basis))
    guess = sad_density(basis, molecule.atomic_numbers)
    return solve_rhf(s, h, builder, molecule.n_electrons, molecule.nuclear_repulsion(), options, guess)


def main() -> None:
    water = hfcore.read_xyz(HERE.parent / "inputs" / "water.xyz")
    for scale in (1.0, 0.75, 0.5):
        result = rhf_with_builder(water, "6-31g", lambda eri: ScaledExchangeJK(eri, scale))
        print(f"exchange x {scale:4.2f}   E = {result.energy_total:.10f} Eh   ({result.iterations} iterations)")
    print(f"hfcore's own builder  E = {hfcore.run_rhf(water, '6-31g').energy_total:.10f} Eh")


if __name__ == "__main__":
    main()
