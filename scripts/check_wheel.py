"""Check hfcore's built distributions against the source tree they came from.

Three checks, each a sub-command (exit code 0 when it holds, 1 with one line
per problem on stderr when it does not):

``contents WHEEL SDIST --source TREE``
    The wheel holds every file of the package directory ``TREE/hfcore``
    (modules, basis sets, demo geometries), the LICENSE under its
    ``.dist-info/licenses`` and an MIT ``License-Expression``, and nothing
    outside ``hfcore/`` and its ``.dist-info`` (no tests). The sdist holds
    the package too, and the tests, the demo inputs, the docs and the
    LICENSE.

``imports``
    Imports every module of the installed ``hfcore`` (all but
    ``__main__``) with the optional extras' packages made unimportable, so
    a module that needs an extra at import time fails here even on a
    machine where the extra happens to be installed. Run it with the
    interpreter of the environment to check, from outside the source tree.

Used by ``.ci/run`` and by ``tests/test_packaging.py``.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.abc
import os
import pkgutil
import sys
import tarfile
import zipfile
from pathlib import Path

# Import names of the packages the extras (and the test extra) bring in; the
# core may import them only inside the functions that need them.
EXTRA_MODULES = frozenset(
    {"matplotlib", "basis_set_exchange", "threadpoolctl", "dask", "distributed", "pyscf", "mpmath", "hypothesis",
     "pytest"}
)
# What the sdist must carry beside the package, for a packager to build and test it.
SDIST_REQUIRED = ("LICENSE", "README.md", "pyproject.toml", "MANIFEST.in", "tests/conftest.py", "inputs/water.xyz",
                  "docs/api.md")


def package_files(source: Path) -> set[str]:
    """Files of ``source/hfcore`` as wheel paths (``hfcore/...``), links followed, caches left out."""
    root = source / "hfcore"
    found = set()
    for directory, subdirs, files in os.walk(root, followlinks=True):
        subdirs[:] = [d for d in subdirs if d != "__pycache__"]
        for name in files:
            if name.endswith((".pyc", ".pyo")):
                continue
            found.add((Path(directory) / name).relative_to(source).as_posix())
    return found


def wheel_problems(wheel: Path, source: Path) -> list[str]:
    """What is wrong with the wheel's file list and license metadata."""
    with zipfile.ZipFile(wheel) as archive:
        names = set(archive.namelist())
        info = sorted({n.split("/")[0] for n in names if n.split("/")[0].endswith(".dist-info")})
        metadata = archive.read(f"{info[0]}/METADATA").decode("utf-8") if len(info) == 1 else ""
    problems = [f"{wheel.name}: lacks {name}" for name in sorted(package_files(source) - names)]
    strays = sorted({n.split("/")[0] for n in names} - {"hfcore", *info})
    problems += [f"{wheel.name}: holds {name}/, which is not the package (tests and sources stay in the sdist)"
                 for name in strays]
    if len(info) != 1:
        return problems + [f"{wheel.name}: expected one .dist-info directory, found {len(info)}"]
    if f"{info[0]}/licenses/LICENSE" not in names:
        problems.append(f"{wheel.name}: lacks the LICENSE file in {info[0]}/licenses")
    if "License-Expression: MIT" not in metadata.splitlines():
        problems.append(f"{wheel.name}: its metadata does not name the MIT license (License-Expression: MIT)")
    return problems


def sdist_problems(sdist: Path, source: Path) -> list[str]:
    """What is missing from the sdist: the package, and the tests, inputs, docs and LICENSE."""
    with tarfile.open(sdist) as archive:
        names = {m.name.split("/", 1)[1] for m in archive.getmembers() if "/" in m.name}
    wanted = package_files(source) | set(SDIST_REQUIRED)
    wanted |= {p.relative_to(source).as_posix() for p in (source / "tests").glob("test_*.py")}
    return [f"{sdist.name}: lacks {name}" for name in sorted(wanted - names)]


class _BlockExtras(importlib.abc.MetaPathFinder):
    """Makes the extras' packages unimportable, as in an environment without them."""

    def find_spec(self, fullname, path=None, target=None):
        if fullname.split(".")[0] in EXTRA_MODULES:
            raise ModuleNotFoundError(f"No module named {fullname!r} (blocked: an optional extra)", name=fullname)
        return None


def _import(name: str, problems: list[str]):
    """The module, or None with a line added to ``problems``."""
    try:
        return importlib.import_module(name)
    except ImportError as error:
        if (error.name or "").split(".")[0] in EXTRA_MODULES:
            problems.append(f"{name}: needs an optional extra at import time ({error})")
        else:
            problems.append(f"{name}: fails to import ({error})")
    except Exception as error:  # any other failure is a broken distribution too
        problems.append(f"{name}: fails to import ({type(error).__name__}: {error})")
    return None


def import_problems() -> list[str]:
    """Import every module of the installed hfcore with the extras blocked; one line per failure."""
    for name in list(sys.modules):
        if name.split(".")[0] in EXTRA_MODULES | {"hfcore"}:
            del sys.modules[name]
    sys.meta_path.insert(0, _BlockExtras())
    problems: list[str] = []
    hfcore = _import("hfcore", problems)
    if hfcore is None:
        return problems
    for module in pkgutil.walk_packages(hfcore.__path__, "hfcore."):
        if not module.name.endswith("__main__"):
            _import(module.name, problems)
    print(f"imported hfcore {hfcore.__version__} from {Path(hfcore.__file__).parent}", file=sys.stderr)
    return problems


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    commands = parser.add_subparsers(dest="command", required=True)
    contents = commands.add_parser("contents", help="the wheel's and the sdist's files against the tree")
    contents.add_argument("wheel", type=Path)
    contents.add_argument("sdist", type=Path, nargs="?")
    contents.add_argument("--source", type=Path, required=True, help="the source tree the artefacts came from")
    commands.add_parser("imports", help="every module of the installed hfcore imports without the extras")
    args = parser.parse_args(argv)
    if args.command == "contents":
        problems = wheel_problems(args.wheel, args.source)
        if args.sdist is not None:
            problems += sdist_problems(args.sdist, args.source)
    else:
        problems = import_problems()
    for line in problems:
        print(f"check_wheel: {line}", file=sys.stderr)
    if not problems:
        print(f"check_wheel: {args.command}: ok", file=sys.stderr)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
