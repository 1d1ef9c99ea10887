#!/usr/bin/env python
"""GFLOP/s of the fitted half-transform, before and after, beside a large matrix product, one core.

The half-transform Z[μ, k, P] = Σ_ν c_νk B_Pμν over packed pair-major
factors costs 2 nbf² nP rank flops. "before" is the former algorithm (a
Python loop over μ with a gather of rows per μ, kept here only to measure
against); "after" is :func:`hfcore.scf.fitted_jk._half_transform_rows`.
Random factors of the size of a real case (default: benzene cc-pVQZ with
its fitting set, 21 occupied orbitals; the packed factors take
8·nbf(nbf+1)/2·nP bytes, so mind the memory).

Usage::

    python scripts/half_transform_rate.py                  # nbf 510, nP 1000 (a block), rank 21
    python scripts/half_transform_rate.py --nbf 300 --naux 1000 --rank 21
"""

from __future__ import annotations

import argparse
import os
import sys
import time

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
from hfcore.scf.fitted_jk import _half_transform_rows  # noqa: E402


def before(b: np.ndarray, c: np.ndarray, n: int) -> np.ndarray:
    """The former loop: per μ, the packed run in place plus the gathered rows ν > μ; layout (nbf, nP, rank)."""
    first, second = np.tril_indices(n)
    pair = np.empty((n, n), dtype=np.intp)
    pair[first, second] = np.arange(first.size)
    pair[second, first] = np.arange(first.size)
    upper = [pair[mu, mu + 1 :] for mu in range(n)]
    z = np.empty((n, b.shape[1], c.shape[1]))
    for mu in range(n):
        start = mu * (mu + 1) // 2
        np.matmul(b[start : start + mu + 1].T, c[: mu + 1], out=z[mu])
        if mu + 1 < n:
            z[mu] += b[upper[mu]].T @ c[mu + 1 :]
    return z


def best_of(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nbf", type=int, default=510)
    parser.add_argument("--naux", type=int, default=1000)
    parser.add_argument("--rank", type=int, default=21)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    n, n_cols, rank = args.nbf, args.naux, args.rank
    rng = np.random.default_rng(0)
    b = rng.standard_normal((n * (n + 1) // 2, n_cols))
    c = rng.standard_normal((n, rank))
    flops = 2.0 * n * n * n_cols * rank
    square = rng.standard_normal((2000, 2000))
    t_gemm = best_of(lambda: square @ square, args.repeats)
    t_before = best_of(lambda: before(b, c, n), args.repeats)
    t_after = best_of(lambda: _half_transform_rows(b, c), args.repeats)
    same = np.allclose(before(b, c, n).transpose(0, 2, 1), _half_transform_rows(b, c), rtol=0, atol=1e-9)
    print(f"load average {os.getloadavg()[0]:.2f}; nbf {n}, nP {n_cols}, rank {rank}; {flops / 1e9:.2f} GFLOP")
    print(f"  2000² matrix product : {2 * 2000**3 / t_gemm / 1e9:6.1f} GFLOP/s")
    print(f"  half-transform before: {flops / t_before / 1e9:6.1f} GFLOP/s ({t_before:.3f} s)")
    print(f"  half-transform after : {flops / t_after / 1e9:6.1f} GFLOP/s ({t_after:.3f} s), same result: {same}")
    print(f"  speed-up {t_before / t_after:.2f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
