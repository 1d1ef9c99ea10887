#!/usr/bin/env python
"""Quintuple-zeta side by side with the reference library: water cc-pV5Z exact, benzene cc-pV5Z fitted.

Whole process per program and case (each in a fresh child process, one after
the other, same geometry, same shells, same convergence threshold), by the
machinery of ``scripts/benchmark.py``. Prints the table and the machine's
load average before and after. Not a test: nothing here asserts a time.

Usage::

    python scripts/benchmark_5z.py                 # both cases
    python scripts/benchmark_5z.py --only water    # water cc-pV5Z only
    python scripts/benchmark_5z.py --json out.json
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import benchmark  # noqa: E402  (the shared side-by-side machinery)

EXACT = [("water/cc-pV5Z", "water.xyz", "cc-pv5z", None)]
FITTED = [("benzene/cc-pV5Z/DF", "benzene.xyz", "cc-pv5z", "cc-pv5z-jkfit")]


def _load() -> str:
    return "load average %.2f, %.2f, %.2f" % os.getloadavg()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--threads", type=int, default=1, help="threads for both programs (default 1)")
    parser.add_argument("--only", choices=("water", "benzene"), help="run one case")
    parser.add_argument("--json", help="write the rows as JSON to this path")
    args = parser.parse_args(argv)
    before = _load()
    rows = []
    if args.only in (None, "water"):
        for case in EXACT:
            print(f"running {case[0]} ... ({_load()})", file=sys.stderr, flush=True)
            rows.append(benchmark.run_case(*case, args.threads))
    if args.only in (None, "benzene"):
        for case in FITTED:
            print(f"running {case[0]} ... ({_load()})", file=sys.stderr, flush=True)
            rows.append(benchmark.run_fitted_case(*case, args.threads))
    after = _load()
    if args.json:
        Path(args.json).write_text(json.dumps({"threads": args.threads, "load_before": before, "load_after": after,
                                               "rows": rows}, indent=2) + "\n")
    print(f"threads: {args.threads}; {before} (before), {after} (after)")
    print(benchmark._format(rows))
    return 0


if __name__ == "__main__":
    sys.exit(main())
