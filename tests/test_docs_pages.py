"""The README and every page under docs/: their code blocks run as written.

The convention, by the fence's info string:

- ``python`` — run, in order, in one session per page;
- ``sh`` — run as a bash script (``set -euo pipefail``) in which ``hfcore``
  and ``python`` are this interpreter running the source tree's hfcore;
- ``sh illustrative`` / ``python illustrative`` — shown, not run (long runs,
  files of the reader's own, an extra, the network); they must still parse;
- ``text`` / ``json`` — output, file contents or a usage synopsis.

Each page runs in its own scratch directory holding a copy of ``inputs/``,
so the relative paths of the pages work and nothing is written into the tree.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PAGES = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]
RUN = {"python", "sh"}
SHOWN = {"python illustrative", "sh illustrative", "text", "json"}
_FENCE = re.compile(r"^```([^\n`]*)\n(.*?)^```[ \t]*$", flags=re.S | re.M)
# The commands of an sh block: hfcore and python are the interpreter running this tree.
_PRELUDE = 'hfcore() { "$DOCS_PYTHON" -m hfcore "$@"; }\npython() { "$DOCS_PYTHON" "$@"; }\n'


def blocks(page: Path) -> list[tuple[str, str, int]]:
    """(info string, body, line of the opening fence) of every fenced block, in order."""
    text = page.read_text(encoding="utf-8")
    return [(m.group(1).strip(), m.group(2), text.count("\n", 0, m.start()) + 1) for m in _FENCE.finditer(text)]


def _scratch(tmp_path: Path) -> Path:
    shutil.copytree(ROOT / "inputs", tmp_path / "inputs")
    return tmp_path


def _env() -> dict[str, str]:
    path = os.pathsep.join(p for p in (str(ROOT), os.environ.get("PYTHONPATH", "")) if p)
    return {**os.environ, "PYTHONPATH": path, "DOCS_PYTHON": sys.executable, "OMP_NUM_THREADS": "1",
            "OPENBLAS_NUM_THREADS": "1"}


def _run_sh(body: str, where: str, cwd: Path) -> None:
    done = subprocess.run(["bash", "-euo", "pipefail", "-c", _PRELUDE + body], cwd=cwd, env=_env(),
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, f"{where} exited {done.returncode}:\n{body}\n{done.stderr[-2000:]}"


def _page_id(page: Path) -> str:
    return page.relative_to(ROOT).as_posix()


@pytest.mark.parametrize("page", PAGES, ids=_page_id)
def test_every_block_is_labelled_run_or_shown(page):
    for info, body, line in blocks(page):
        if info == "":
            # An unlabelled block may only hold output: commands must say whether they run.
            looks_like_code = re.search(r"^(\$ )?(hfcore |python |pip |import |from \S+ import )", body, re.M)
            assert not looks_like_code, f"{_page_id(page)}:{line}: label this block sh, python or '... illustrative'"
        else:
            assert info in RUN | SHOWN, f"{_page_id(page)}:{line}: unknown fence label {info!r}"


@pytest.mark.parametrize("page", PAGES, ids=_page_id)
def test_illustrative_blocks_parse(page):
    for info, body, line in blocks(page):
        where = f"{_page_id(page)}:{line}"
        if info == "python illustrative":
            compile(body, where, "exec")
        elif info == "sh illustrative":
            done = subprocess.run(["bash", "-n", "-c", body], capture_output=True, text=True, timeout=60)
            assert done.returncode == 0, f"{where}: {done.stderr}"


@pytest.mark.parametrize("page", [p for p in PAGES if any(i in RUN for i, _, _ in blocks(p))], ids=_page_id)
def test_page_blocks_run_as_written(page, tmp_path, monkeypatch, capsys):
    cwd = _scratch(tmp_path)
    monkeypatch.chdir(cwd)
    monkeypatch.syspath_prepend(str(ROOT))
    namespace: dict = {"__name__": "docs_page"}
    ran = 0
    for info, body, line in blocks(page):
        where = f"{_page_id(page)}:{line}"
        if info == "python":
            exec(compile(body, where, "exec"), namespace)
            ran += 1
        elif info == "sh":
            _run_sh(body, where, cwd)
            ran += 1
    assert ran > 0
    # The tree is untouched: every file the blocks wrote is in the scratch directory.
    assert not (ROOT / "water.npz").exists() and not (ROOT / "runs.jsonl").exists()


def test_the_readme_keeps_ci_lines_first_and_fits_one_sitting():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    lines = text.splitlines()
    installs = [x for x in lines if x.startswith("pip install -e ")]
    tests = [x for x in lines if x.startswith("python -m pytest")]
    # .ci/run takes the first of each: the developer install with the test extra, and the suite.
    assert installs and installs[0] == 'pip install -e ".[test]"'
    assert tests and tests[0].startswith("python -m pytest -q")
    assert len(lines) <= 250


def test_the_readme_links_pages_that_exist():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    targets = {t.split("#")[0] for t in re.findall(r"\]\(([^)]+)\)", text) if not t.startswith("http")}
    # docs/resources.md is written in a parallel change; every other link must resolve now.
    missing = sorted(t for t in targets if not (ROOT / t).exists() and t != "docs/resources.md")
    assert not missing
    assert {"docs/commands.md", "docs/output.md", "docs/performance.md", "docs/stability.md",
            "docs/input-rules.md", "docs/basis-format.md", "docs/api.md"} <= targets
