#!/usr/bin/env python
"""Write water clusters for the timing ladder: oxygens on a grid, each molecule turned at random.

The clusters are a size ladder for timing (58 functions per water in
cc-pVTZ), not minimum-energy structures. Each molecule is the demo monomer
(O–H 0.958 Å, H–O–H 104.5°) with its oxygen on a grid point of 2.85 Å
spacing, turned by a random rotation from a seeded generator: the first of up to
2000 draws that keeps every atom 1.9 Å from the atoms of the molecules
already placed (as for the smaller clusters), or else the draw that comes
closest; the file's comment line gives the smallest separation reached.

Usage::

    python scripts/make_water_clusters.py 18 27        # writes inputs/water_cluster_18.xyz, ..._27.xyz
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SPACING = 2.85
#: Grid shapes (nx, ny, nz) of the sizes this script writes.
GRIDS = {16: (2, 2, 4), 18: (2, 3, 3), 20: (2, 2, 5), 24: (2, 3, 4), 27: (3, 3, 3)}
OH, ANGLE = 0.958, math.radians(104.5)
#: Wanted separation of atoms on different molecules (Å), and orientations tried per molecule.
SEPARATION, TRIES = 1.9, 2000


def monomer() -> np.ndarray:
    """O, H, H of the demo water with the oxygen at the origin, shape (3, 3), Å."""
    half = ANGLE / 2
    return np.array([[0.0, 0.0, 0.0], [0.0, OH * math.sin(half), -OH * math.cos(half)],
                     [0.0, -OH * math.sin(half), -OH * math.cos(half)]])


def random_rotation(rng: np.random.Generator) -> np.ndarray:
    """A uniformly random rotation matrix (QR of a Gaussian matrix, signs fixed)."""
    q, r = np.linalg.qr(rng.standard_normal((3, 3)))
    q = q @ np.diag(np.sign(np.diag(r)))
    return q if np.linalg.det(q) > 0 else -q


def cluster(n: int, seed: int = 2026) -> np.ndarray:
    """Coordinates of n waters (O, H, H each), shape (3n, 3), Å."""
    nx, ny, nz = GRIDS[n]
    rng = np.random.default_rng(seed + n)
    atoms: list[np.ndarray] = []
    others = np.empty((0, 3))
    for i, j, k in ((i, j, k) for k in range(nz) for j in range(ny) for i in range(nx)):
        centre = SPACING * np.array([i, j, k], dtype=float)
        best, best_gap = None, -1.0
        for _ in range(TRIES):  # the most open of TRIES random orientations
            trial = centre + monomer() @ random_rotation(rng).T
            gap = np.min(np.linalg.norm(others[:, None] - trial[None], axis=2)) if atoms else np.inf
            if gap > best_gap:
                best, best_gap = trial, gap
            if gap > SEPARATION:
                break
        placed = best
        others = np.vstack([others, placed])
        atoms.extend(placed)
    return np.array(atoms)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("sizes", nargs="+", type=int, choices=sorted(GRIDS))
    args = parser.parse_args(argv)
    for n in args.sizes:
        xyz = cluster(n)
        nx, ny, nz = GRIDS[n]
        gap = min(np.min(np.linalg.norm(xyz[3 * a:3 * a + 3, None] - np.delete(xyz, range(3 * a, 3 * a + 3), axis=0)[None],
                                        axis=2)) for a in range(n))
        lines = [str(len(xyz)), f"{n} water molecules, oxygens on a {nx} x {ny} x {nz} grid of {SPACING} A spacing, "
                 f"atoms of different molecules at least {gap:.2f} A apart, neutral"]
        lines += [f"{'OHH'[a % 3]:<2}{x:14.6f}{y:14.6f}{z:14.6f}" for a, (x, y, z) in enumerate(xyz)]
        path = ROOT / "inputs" / f"water_cluster_{n}.xyz"
        path.write_text("\n".join(lines) + "\n")
        print(f"wrote {path.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
