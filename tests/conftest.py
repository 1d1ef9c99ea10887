"""Helpers and fixtures shared by the test modules.

- the demo molecules, read from ``inputs/`` (``water_molecule`` ...) and copied
  into a test's temporary directory (``water_file``);
- the command-line runners: :func:`run_main` calls :func:`hfcore.cli.main`
  in this process, :func:`hfcore_process` runs ``python -m hfcore`` as a real
  process (the exit code the shell sees, no traceback), :func:`cli_result`
  does either and gives the same record;
- assertions on one-line errors, leftover files and PNG figures.

Test modules import the plain functions with ``from conftest import ...``
(``tests/`` is on the path, see pyproject.toml); pytest provides the fixtures.
"""

from __future__ import annotations

import io
import os
import shutil
import struct
import subprocess
import sys
from pathlib import Path

import pytest

import hfcore
from hfcore.cli import main
from hfcore.geometry import Molecule

#: The repository root and its demo geometries.
REPO = Path(__file__).resolve().parent.parent
INPUTS = REPO / "inputs"

#: The eight-byte PNG file signature (common practice: the PNG specification, ISO/IEC 15948).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


# --- molecules from inputs/ ----------------------------------------------------------


def read_input(name: str, charge: int = 0) -> Molecule:
    """The demo molecule ``inputs/NAME.xyz`` (ångström), with the given charge."""
    return hfcore.read_xyz(INPUTS / f"{name}.xyz", charge=charge)


@pytest.fixture(scope="session")
def water_molecule() -> Molecule:
    """Water from ``inputs/water.xyz`` (O–H 0.958 Å, H–O–H 104.5°)."""
    return read_input("water")


@pytest.fixture(scope="session")
def hydroxide_molecule() -> Molecule:
    """OH⁻ from ``inputs/hydroxide.xyz``, charge −1."""
    return read_input("hydroxide", charge=-1)


@pytest.fixture(scope="session")
def hydrogen_fluoride_molecule() -> Molecule:
    """HF from ``inputs/hydrogen_fluoride.xyz``."""
    return read_input("hydrogen_fluoride")


def copy_input(name: str, directory: Path) -> Path:
    """Copy ``inputs/NAME.xyz`` into ``directory``; return the copy's path."""
    target = Path(directory) / f"{name}.xyz"
    shutil.copyfile(INPUTS / f"{name}.xyz", target)
    return target


@pytest.fixture()
def water_file(tmp_path) -> Path:
    """``inputs/water.xyz`` copied into the test's own temporary directory."""
    return copy_input("water", tmp_path)


# --- the command line ----------------------------------------------------------------


def run_main(*args: str | os.PathLike) -> tuple[int, str, str]:
    """Run :func:`hfcore.cli.main` in this process: (exit code, stdout, stderr).

    Paths (such as the ``water_file`` fixture) may be given as they are.
    """
    out, err = io.StringIO(), io.StringIO()
    code = main([os.fspath(a) for a in args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def hfcore_process(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    """Run ``python -m hfcore ARGS`` in ``cwd`` and capture its streams."""
    env = dict(os.environ)
    # The child must import this checkout's hfcore, whatever the caller's path.
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(REPO), env.get("PYTHONPATH", "")) if p)
    return subprocess.run(
        [sys.executable, "-m", "hfcore", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
    )


def cli_result(*args: str, cwd: Path, via: str = "main") -> subprocess.CompletedProcess:
    """The command's outcome, from a real process (``via="process"``) or from :func:`main` in this one.

    Variants of one kind of error share a code path, so one of each kind can
    run as a process and the rest in-process, where ``main``'s return value
    is the exit code.
    """
    if via == "process":
        return hfcore_process(*args, cwd=cwd)
    here = os.getcwd()
    os.chdir(cwd)
    try:
        code, out, err = run_main(*args)
    finally:
        os.chdir(here)
    return subprocess.CompletedProcess(list(args), code, out, err)


def assert_one_line_error(proc: subprocess.CompletedProcess, code: int, *fragments: str) -> None:
    """Exit ``code``, empty stdout, and stderr one line ``hfcore: error: ...`` holding every fragment."""
    assert proc.returncode == code, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.splitlines()
    assert len(lines) == 1, proc.stderr
    assert lines[0].startswith("hfcore: error: ")
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    assert proc.stdout == ""


def only_inputs_left(directory: Path, *inputs: str) -> bool:
    """True if ``directory`` holds exactly the named files (nothing written, nothing half-written)."""
    return sorted(p.name for p in Path(directory).iterdir()) == sorted(inputs)


# --- figures -------------------------------------------------------------------------


def assert_valid_png(path: str | Path, *, min_side: int = 200, max_side: int = 6000) -> tuple[int, int]:
    """Check that ``path`` holds a whole PNG image of a sane size; return (width, height) in pixels.

    Source: common practice — the PNG specification (ISO/IEC 15948): the
    signature, then an IHDR chunk whose data start with width and height as
    big-endian 32-bit integers, and an IEND chunk closing the file.
    """
    data = Path(path).read_bytes()
    assert data[:8] == PNG_SIGNATURE, f"{path} does not start with the PNG signature"
    assert data[12:16] == b"IHDR", f"{path} has no IHDR chunk first"
    width, height = struct.unpack(">II", data[16:24])
    assert min_side <= width <= max_side and min_side <= height <= max_side, (width, height)
    assert data[-8:-4] == b"IEND", f"{path} does not end with an IEND chunk"
    # A figure with axes, text and curves compresses to several kilobytes, not a blank canvas.
    assert len(data) > 5_000, f"{path} is only {len(data)} bytes"
    return width, height
