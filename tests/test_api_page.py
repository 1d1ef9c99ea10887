"""docs/api.md: every Python block on the page runs as written, in order, in one session."""

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


def test_api_page_examples_run_as_written(monkeypatch, capsys):
    # source: exact property — the page's own assertions (packed index, density, energy from saved arrays)
    monkeypatch.chdir(ROOT)
    namespace: dict = {"__name__": "api_page"}
    for number, block in enumerate(_blocks(PAGE.read_text(encoding="utf-8")), start=1):
        exec(compile(block, f"{PAGE.name} block {number}", "exec"), namespace)
    assert capsys.readouterr().out.count("\n") >= 8
