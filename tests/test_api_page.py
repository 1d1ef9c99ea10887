"""docs/api.md covers every section of the API (its blocks run in tests/test_docs_pages.py)."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PAGE = ROOT / "docs" / "api.md"


def _blocks(text: str) -> list[str]:
    return re.findall(r"^```python\n(.*?)^```", text, flags=re.S | re.M)


def test_api_page_has_examples_of_every_section():
    text = PAGE.read_text(encoding="utf-8")
    assert len(_blocks(text)) >= 10
    for name in ("read_xyz", "build_basis", "compute_eri", "to_dense", "run_rhf", "raise_on_failure",
                 "mp2_energy", "load_arrays", "project_density", "multipole"):
        assert name in text

