"""Shipped basis data read from the package directory are the packaged resources themselves."""

from __future__ import annotations

import json
from importlib import resources

import pytest

from hfcore.basis import library


def _shipped_files() -> list[str]:
    index = json.loads(resources.files("hfcore.basis").joinpath("data", "index.json").read_text(encoding="utf-8"))
    return ["index.json"] + [entry["file"] for entry in index["sets"]]


@pytest.mark.parametrize("filename", _shipped_files())
def test_fast_read_gives_the_packaged_resource_text(filename):
    # Exact property: both paths read the same file; the fast one skips importlib.resources.
    packaged = resources.files("hfcore.basis").joinpath("data", filename).read_text(encoding="utf-8")
    assert library._data_text(filename) == packaged


def test_a_data_file_missing_on_disk_is_read_through_importlib_resources(monkeypatch, tmp_path):
    monkeypatch.setattr(library, "_DATA_DIR", tmp_path)  # nothing on disk there
    assert json.loads(library._data_text("index.json"))["sets"]


def test_reading_a_shipped_set_does_not_import_importlib_resources():
    import subprocess
    import sys

    code = (
        "import sys, hfcore; from hfcore.geometry import parse_xyz;"
        "hfcore.build_basis(parse_xyz('2\\nH2\\nH 0 0 0\\nH 0 0 0.74\\n'), 'cc-pvdz');"
        "print('importlib.resources' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"
