"""docs/api.md covers every section of the API (its blocks run in tests/test_docs_pages.py)."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
PAGE = ROOT / "docs" / "api.md"


def _blocks(text: str) -> list[str]:
    return re.findall(r"^```python\n(.*?)^```", text, flags=re.S | re.M)


def test_api_page_examples_call_every_public_entry_they_document(monkeypatch, capsys, tmp_path):
    """Running the page calls each documented entry, with the arguments the prose names."""
    import hfcore
    from hfcore import integrals
    from hfcore.integrals.store import ERIStore

    calls: dict[str, list[dict]] = {}

    def counted(owner, name):
        original = getattr(owner, name)

        def wrapper(*args, **kwargs):
            calls.setdefault(name, []).append(kwargs)
            return original(*args, **kwargs)

        monkeypatch.setattr(owner, name, wrapper)

    for name in ("read_xyz", "build_basis", "run_rhf", "mp2_energy", "load_arrays", "project_density"):
        counted(hfcore, name)
    for name in ("compute_eri", "multipole"):
        counted(integrals, name)
    counted(ERIStore, "to_dense")
    _run_page(monkeypatch, tmp_path)
    capsys.readouterr()
    for name in ("read_xyz", "build_basis", "compute_eri", "to_dense", "run_rhf", "mp2_energy", "load_arrays",
                 "project_density", "multipole"):
        assert calls.get(name), f"docs/api.md never calls {name}"
    assert len(_blocks(PAGE.read_text(encoding="utf-8"))) >= 10
    # the prose promises an unconverged record with raise_on_failure=False, and a fitted MP2
    assert any(kw.get("raise_on_failure") is False for kw in calls["run_rhf"])
    assert any(kw.get("fit_basis") == "auto" for kw in calls["mp2_energy"])
    assert any(isinstance(kw.get("guess"), np.ndarray) for kw in calls["run_rhf"])



def _run_page(monkeypatch, tmp_path) -> None:
    # in a scratch directory holding a copy of inputs/, as tests/test_docs_pages.py does, so the
    # files the page writes never land in the tree
    shutil.copytree(ROOT / "inputs", tmp_path / "inputs")
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": "api_page"}
    for number, block in enumerate(_blocks(PAGE.read_text(encoding="utf-8")), start=1):
        exec(compile(block, f"{PAGE.name} block {number}", "exec"), namespace)
