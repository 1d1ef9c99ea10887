"""The distribution checks of ``.ci/run`` (``scripts/check_wheel.py``) catch what they are for.

Each test builds a wheel (a few seconds: ``python -m build --wheel`` in its own
isolated environment) from a copy of the source tree, some with one fault
put in on purpose, and runs the check script on it the way ``.ci/run`` does.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CHECK = ROOT / "scripts" / "check_wheel.py"


def _copy_tree(destination: Path) -> Path:
    """What a wheel is built from: the package (demo link kept), its metadata files and the inputs."""
    tree = destination / "tree"
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info", "build")
    shutil.copytree(ROOT / "hfcore", tree / "hfcore", symlinks=True, ignore=ignore)
    shutil.copytree(ROOT / "inputs", tree / "inputs", ignore=ignore)
    for name in ("pyproject.toml", "README.md", "LICENSE", "MANIFEST.in"):
        shutil.copy2(ROOT / name, tree / name)
    return tree


def _build_wheel(tree: Path) -> Path:
    out = tree.parent / "dist"
    subprocess.run([sys.executable, "-m", "build", "--wheel", "--outdir", str(out), str(tree)],
                   check=True, capture_output=True, text=True, timeout=600)
    (wheel,) = out.glob("hfcore-*.whl")
    return wheel


def _check(*args: str, cwd: Path, pythonpath: Path | None = None) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    if pythonpath is not None:
        env["PYTHONPATH"] = str(pythonpath)
    return subprocess.run([sys.executable, str(CHECK), *args], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=300)


@pytest.fixture(scope="module")
def good_wheel(tmp_path_factory) -> tuple[Path, Path]:
    tree = _copy_tree(tmp_path_factory.mktemp("good"))
    (tree / "hfcore" / "_version.py").write_text('__version__ = "9.8.7"\n', encoding="utf-8")
    return tree, _build_wheel(tree)


def test_the_wheel_of_the_tree_passes_the_contents_check(good_wheel):
    tree, wheel = good_wheel
    result = _check("contents", str(wheel), "--source", str(tree), cwd=tree.parent)
    assert result.returncode == 0, result.stderr
    names = zipfile.ZipFile(wheel).namelist()
    # source: exact property — the package data the wheel must carry
    assert "hfcore/basis/data/cc-pvdz.json" in names and "hfcore/demo/water.xyz" in names
    assert not any(name.startswith("tests/") for name in names)


def test_a_basis_file_left_out_of_the_package_data_fails_the_check(tmp_path):
    tree = _copy_tree(tmp_path)
    config = (tree / "pyproject.toml").read_text(encoding="utf-8")
    config += '\n[tool.setuptools.exclude-package-data]\n"hfcore.basis" = ["data/cc-pvdz.json"]\n'
    (tree / "pyproject.toml").write_text(config, encoding="utf-8")
    wheel = _build_wheel(tree)
    assert "hfcore/basis/data/cc-pvdz.json" not in zipfile.ZipFile(wheel).namelist()
    result = _check("contents", str(wheel), "--source", str(tree), cwd=tmp_path)
    assert result.returncode == 1
    assert "lacks hfcore/basis/data/cc-pvdz.json" in result.stderr


def test_the_core_imports_every_module_without_any_extra(tmp_path):
    tree = _copy_tree(tmp_path)
    result = _check("imports", cwd=tmp_path, pythonpath=tree)
    assert result.returncode == 0, result.stderr
    assert f"from {tree / 'hfcore'}" in result.stderr


def test_a_module_importing_an_extra_at_import_time_fails_the_check(tmp_path):
    tree = _copy_tree(tmp_path)
    geometry = tree / "hfcore" / "geometry.py"
    source = geometry.read_text(encoding="utf-8")
    header = "from __future__ import annotations\n"
    assert header in source
    geometry.write_text(source.replace(header, header + "import matplotlib  # a fault put in on purpose\n", 1),
                        encoding="utf-8")
    result = _check("imports", cwd=tmp_path, pythonpath=tree)
    assert result.returncode == 1
    assert "needs an optional extra at import time" in result.stderr and "matplotlib" in result.stderr


def test_the_version_has_one_source(good_wheel):
    # The good tree's hfcore/_version.py was set to 9.8.7 (an exact property of
    # the copy): the wheel's metadata, --version, the JSON record and the
    # batch header must all say so.
    tree, wheel = good_wheel
    archive = zipfile.ZipFile(wheel)
    assert wheel.name.startswith("hfcore-9.8.7-")
    info = next(n for n in archive.namelist() if n.endswith(".dist-info/METADATA"))
    assert "Version: 9.8.7" in archive.read(info).decode("utf-8").splitlines()
    env = {**os.environ, "PYTHONPATH": str(tree)}
    script = (
        "import json, subprocess, sys\n"
        "from hfcore.batch.results import header_record\n"
        "out = subprocess.run([sys.executable, '-m', 'hfcore', 'energy', 'inputs/hydrogen.xyz', '--basis', 'sto-3g',"
        " '--json', '-'], capture_output=True, text=True, check=True).stdout\n"
        "print(json.loads(out)['hfcore']['version'], header_record()['hfcore_version'])\n"
    )
    versions = subprocess.run([sys.executable, "-c", script], cwd=tree, env=env, capture_output=True, text=True,
                              check=True, timeout=300).stdout.split()
    shown = subprocess.run([sys.executable, "-m", "hfcore", "--version"], cwd=tree, env=env, capture_output=True,
                           text=True, check=True, timeout=300).stdout.strip()
    assert versions == ["9.8.7", "9.8.7"] and shown == "hfcore 9.8.7"


def test_the_wheel_metadata_names_the_mit_license_and_carries_the_file(good_wheel):
    _, wheel = good_wheel
    archive = zipfile.ZipFile(wheel)
    info = next(n.split("/")[0] for n in archive.namelist() if n.endswith(".dist-info/METADATA"))
    metadata = archive.read(f"{info}/METADATA").decode("utf-8").splitlines()
    assert "License-Expression: MIT" in metadata and "License-File: LICENSE" in metadata
    license_text = archive.read(f"{info}/licenses/LICENSE").decode("utf-8")
    assert "Copyright (c) 2026 the hfcore developers" in license_text and "MIT License" in license_text
