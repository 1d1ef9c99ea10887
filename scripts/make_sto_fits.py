#!/usr/bin/env python
"""Write hfcore/basis/data/sto_fits.json: the STO-nG fits at ζ = 1 of every Slater shell and size.

A run reads these instead of fitting (so it does not import scipy.optimize);
``tests/test_startup.py`` fits again and checks the table. Run this after any
change to the fitter::

    python scripts/make_sto_fits.py
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from hfcore.basis import sto  # noqa: E402


def main() -> int:
    table: dict[str, dict[str, dict]] = {}
    for shell in sto.SLATER_SHELLS:
        for m in range(1, sto.MAX_GAUSSIANS + 1):
            exponents, coefficients, overlaps = sto._fit_unit_now(shell, m)
            table.setdefault(shell, {})[str(m)] = {
                "exponents": list(exponents),
                "coefficients": [list(c) for c in coefficients],
                "overlaps": list(overlaps),
            }
    path = ROOT / "hfcore" / "basis" / "data" / "sto_fits.json"
    path.write_text(json.dumps(table, indent=1) + "\n", encoding="utf-8")  # floats as repr: exact round trip
    print(f"wrote {path.relative_to(ROOT)}: {sum(len(v) for v in table.values())} fits")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
