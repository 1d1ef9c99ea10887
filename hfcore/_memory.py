"""How much memory a run may use, and one allocator for its large arrays.

The budget is measured once per run (the SCF driver does it) from every
bound the kernel would enforce or report:

* ``MemAvailable`` in ``/proc/meminfo`` (what the system can give without
  swapping);
* the cgroup the process lives in (containers, cluster jobs): for cgroup v2
  ``memory.max`` less ``memory.current``, for v1 ``memory.limit_in_bytes``
  less ``memory.usage_in_bytes``, for the process's own group and each
  group above it (the least applies);
* the address-space and data limits (``RLIMIT_AS``, ``RLIMIT_DATA``, as set
  by ``ulimit -v`` and batch systems) less what the process already maps
  (``VmSize``, ``VmData`` in ``/proc/self/status``).

The least of them is the *headroom*; the default budget is
:data:`MEMORY_FRACTION` of it, which leaves room for the arrays of the
SCF itself and for the interpreter. A budget asked for explicitly
(``--memory``, ``SCFOptions.memory_limit``) may exceed that share but not
the headroom under a hard bound (cgroup or rlimit): that is refused with
one line (:class:`~hfcore.errors.ResourceError`, exit 5).

:func:`allocate` makes the large arrays (stored integrals, shared memory
of forked workers, fitted factors, MP2 blocks): a ``MemoryError`` or an
``ENOMEM`` from the kernel becomes a one-line ``ResourceError`` naming the
array, its size and the budget in force.
"""

from __future__ import annotations

import contextlib
import errno
import mmap
import os
from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np

from .errors import ResourceError

#: Share of the headroom the stored integrals (or fitted factors) may take by default.
MEMORY_FRACTION: float = 0.5
#: Headroom assumed when no bound can be read at all (bytes).
FALLBACK_HEADROOM_BYTES: int = 8 * 2**30
#: cgroup v1 reports "no limit" as a number near 2**63; anything from here on is no limit.
_V1_UNLIMITED: int = 2**60


@dataclass(frozen=True)
class MemoryPaths:
    """Where the bounds are read (injectable so tests can use fake files).

    Attributes
    ----------
    meminfo, self_cgroup, self_status : str
        ``/proc/meminfo``, ``/proc/self/cgroup``, ``/proc/self/status``.
    cgroup_root : str
        The cgroup file system's mount point (v2 at its root, v1 with one
        directory per controller, ``memory/`` here).
    use_rlimits : bool
        Read ``RLIMIT_AS`` and ``RLIMIT_DATA`` of this process.
    """

    meminfo: str = "/proc/meminfo"
    self_cgroup: str = "/proc/self/cgroup"
    self_status: str = "/proc/self/status"
    cgroup_root: str = "/sys/fs/cgroup"
    use_rlimits: bool = True


@dataclass(frozen=True)
class MemoryBound:
    """One bound on the memory the process may still take.

    Attributes
    ----------
    name : {"available", "cgroup", "address-space", "data", "fallback", "worker"}
    headroom_bytes : int
        Bytes left under it.
    words : str
        What it is, for people (e.g. "available memory").
    hard : bool
        The kernel enforces it (the process is refused or killed beyond).
    """

    name: str
    headroom_bytes: int
    words: str
    hard: bool


@dataclass(frozen=True)
class MemoryBudget:
    """The memory budget of a run, resolved once.

    Attributes
    ----------
    bytes : int
        What the large arrays of the run may take (bytes).
    bound : str
        Which rule set it: a :class:`MemoryBound` name, or ``"requested"``
        for an explicit budget.
    words : str
        The rule in words, e.g. "half of available memory".
    hard_limit_bytes : int or None
        Headroom under the least hard bound (cgroup, rlimit), if any.
    bounds : tuple of MemoryBound
        Every bound that was read.
    """

    bytes: int
    bound: str
    words: str
    hard_limit_bytes: int | None = None
    bounds: tuple[MemoryBound, ...] = field(default=(), repr=False)

    def describe(self) -> str:
        """E.g. ``"11.8 GiB (half of available memory)"``."""
        return f"{format_bytes(self.bytes)} ({self.words})"

    def to_dict(self) -> dict[str, object]:
        """Plain values for a JSON record."""
        return {"budget_bytes": int(self.bytes), "bound": self.bound, "rule": self.words,
                "hard_limit_bytes": None if self.hard_limit_bytes is None else int(self.hard_limit_bytes)}


def format_bytes(n_bytes: float) -> str:
    """A size for people: ``"512 KiB"``, ``"172 MiB"``, ``"11.8 GiB"`` (binary units, 3 digits, never an exponent).

    A value that would round to 1000 or more in one unit is given in the next
    (1000 MiB is ``"0.977 GiB"``), so ``.3g`` never falls back to ``1e+03``.
    """
    value = float(n_bytes)
    for unit in ("B", "KiB", "MiB", "GiB"):
        if unit == "B" and abs(value) < 1024.0:
            return f"{value:.0f} B"
        if unit != "B" and float(f"{abs(value):.3g}") < 1000.0:
            return f"{value:.3g} {unit}"
        value /= 1024.0
    return f"{value:.3g} TiB" if abs(value) < 1000.0 else f"{value:.0f} TiB"


def _read(path: str) -> str | None:
    try:
        with open(path, encoding="ascii") as handle:
            return handle.read()
    except (OSError, UnicodeDecodeError):
        return None


def _kib_field(text: str | None, key: str) -> int | None:
    """``key:   1234 kB`` from a /proc file, in bytes."""
    if text is None:
        return None
    for line in text.splitlines():
        if line.startswith(key + ":"):
            with contextlib.suppress(ValueError, IndexError):
                return int(line.split()[1]) * 1024
    return None


def _number(text: str | None) -> int | None:
    if text is None:
        return None
    text = text.strip()
    if text == "max":
        return None
    with contextlib.suppress(ValueError):
        return int(text)
    return None


def _group_dirs(base: str, group: str) -> list[str]:
    """The directories of a cgroup and of every group above it that exist under ``base``.

    Inside a container the recorded path may not exist under the mount (the
    mount shows the container's own group at its root): then only the root
    is read.
    """
    parts = [p for p in group.strip().split("/") if p]
    dirs = [os.path.join(base, *parts[:k]) for k in range(len(parts), -1, -1)]
    return [d for d in dirs if os.path.isdir(d)]


def cgroup_headroom(paths: MemoryPaths = MemoryPaths()) -> int | None:
    """Bytes left under the memory limit of this process's cgroup (v2 or v1), or None if unlimited.

    The least over the group and the groups above it, each its limit less
    its usage (never below 0).
    """
    text = _read(paths.self_cgroup)
    if text is None:
        return None
    best: int | None = None
    for line in text.splitlines():
        fields = line.split(":", 2)
        if len(fields) != 3:
            continue
        _, controllers, group = fields
        if controllers == "":  # v2 unified hierarchy
            base, limit_file, usage_file = paths.cgroup_root, "memory.max", "memory.current"
            if not os.path.exists(os.path.join(base, "cgroup.controllers")):
                base = os.path.join(paths.cgroup_root, "unified")
        elif "memory" in controllers.split(","):
            base, limit_file, usage_file = os.path.join(paths.cgroup_root, "memory"), "memory.limit_in_bytes", \
                "memory.usage_in_bytes"
        else:
            continue
        for directory in _group_dirs(base, group):
            limit = _number(_read(os.path.join(directory, limit_file)))
            if limit is None or limit >= _V1_UNLIMITED:
                continue
            usage = _number(_read(os.path.join(directory, usage_file))) or 0
            left = max(limit - usage, 0)
            best = left if best is None else min(best, left)
    return best


def _rlimit_bounds(paths: MemoryPaths) -> list[MemoryBound]:
    if not paths.use_rlimits:
        return []
    try:
        import resource
    except ImportError:  # not on this platform
        return []
    status = _read(paths.self_status)
    out = []
    for name, limit_id, key, words in (
        ("address-space", "RLIMIT_AS", "VmSize", "the address-space limit (ulimit -v)"),
        ("data", "RLIMIT_DATA", "VmData", "the data-segment limit (ulimit -d)"),
    ):
        if not hasattr(resource, limit_id):
            continue
        soft, _ = resource.getrlimit(getattr(resource, limit_id))
        if soft == resource.RLIM_INFINITY or soft < 0:
            continue
        used = _kib_field(status, key) or 0
        out.append(MemoryBound(name, max(int(soft) - used, 0), words, True))
    return out


def memory_bounds(paths: MemoryPaths = MemoryPaths()) -> list[MemoryBound]:
    """Every bound that can be read now (see the module notes)."""
    bounds = []
    available = _kib_field(_read(paths.meminfo), "MemAvailable")
    if available is not None:
        bounds.append(MemoryBound("available", available, "available memory", False))
    cgroup = cgroup_headroom(paths)
    if cgroup is not None:
        bounds.append(MemoryBound("cgroup", cgroup, "the cgroup memory limit", True))
    bounds.extend(_rlimit_bounds(paths))
    return bounds


_FRACTION_WORDS = {0.5: "half of"}


def resolve_budget(
    requested_bytes: float | None = None,
    *,
    paths: MemoryPaths = MemoryPaths(),
    fraction: float = MEMORY_FRACTION,
    extra_bounds: tuple[MemoryBound, ...] = (),
) -> MemoryBudget:
    """The budget of a run: ``requested_bytes``, or ``fraction`` of the least bound.

    Parameters
    ----------
    requested_bytes : float, optional
        An explicit budget (``--memory``); None for the default.
    paths : MemoryPaths
        Where the bounds are read.
    fraction : float
        Share of the headroom the default takes.
    extra_bounds : tuple of MemoryBound
        Further bounds, e.g. a Dask worker's own memory limit.

    Returns
    -------
    MemoryBudget

    Raises
    ------
    ResourceError
        If ``requested_bytes`` exceeds the headroom under a hard bound.
    """
    bounds = memory_bounds(paths) + list(extra_bounds)
    if not bounds:
        bounds = [MemoryBound("fallback", FALLBACK_HEADROOM_BYTES, "an assumed 8 GiB (no bound readable)", False)]
    least = min(bounds, key=lambda b: b.headroom_bytes)
    hard = [b for b in bounds if b.hard]
    hard_least = min(hard, key=lambda b: b.headroom_bytes) if hard else None
    hard_bytes = None if hard_least is None else hard_least.headroom_bytes
    if requested_bytes is not None:
        requested = int(requested_bytes)
        if hard_least is not None and requested > hard_least.headroom_bytes:
            raise ResourceError(
                f"a memory budget of {format_bytes(requested)} was asked for, but {hard_least.words} leaves "
                f"{format_bytes(hard_least.headroom_bytes)}; ask for less (--memory MIB, memory_limit)"
            )
        return MemoryBudget(requested, "requested", "as requested", hard_bytes, tuple(bounds))
    share = _FRACTION_WORDS.get(fraction, f"{fraction:g} of")
    return MemoryBudget(int(fraction * least.headroom_bytes), least.name, f"{share} {least.words}", hard_bytes,
                        tuple(bounds))


def budget_for(memory_limit_mib: float | None, **kwargs) -> MemoryBudget:
    """:func:`resolve_budget` for a budget given in MiB (``SCFOptions.memory_limit``), or the default for None."""
    return resolve_budget(None if memory_limit_mib is None else memory_limit_mib * 2**20, **kwargs)


def run_budget(result: object) -> MemoryBudget:
    """The budget a finished run resolved (its ``memory_budget``), or one resolved now from its options.

    A record made by hand, without a budget, gets one from its
    ``options.memory_limit`` (MiB; None for the default).
    """
    budget = getattr(result, "memory_budget", None)
    if budget is not None:
        return budget
    options = getattr(result, "options", None)
    return budget_for(getattr(options, "memory_limit", None))


# ---------------------------------------------------------------------------
# the allocator
# ---------------------------------------------------------------------------

#: Budgets in force (innermost last), named in the message of a failed allocation.
_IN_FORCE: list[MemoryBudget] = []


@contextlib.contextmanager
def budget_in_force(budget: MemoryBudget) -> Iterator[MemoryBudget]:
    """Inside the block, a failed :func:`allocate` names ``budget`` in its message."""
    _IN_FORCE.append(budget)
    try:
        yield budget
    finally:
        _IN_FORCE.remove(budget)


def _is_enomem(exc: BaseException) -> bool:
    return isinstance(exc, MemoryError) or (isinstance(exc, OSError) and exc.errno == errno.ENOMEM)


def allocation_error(what: str, n_bytes: int) -> ResourceError:
    """The one-line error for an allocation of ``n_bytes`` for ``what`` that the system refused."""
    budget = f"; the budget is {_IN_FORCE[-1].describe()}" if _IN_FORCE else ""
    return ResourceError(
        f"not enough memory for {what} ({format_bytes(n_bytes)}){budget}; use a smaller budget "
        f"(--memory MIB), the direct mode (--direct) or fewer threads"
    )


def allocate(what: str, shape: int | tuple[int, ...], dtype=np.float64, *, shared: bool = False,
             zero: bool = True) -> np.ndarray:
    """A large array, or a one-line :class:`ResourceError` if the system refuses it.

    Parameters
    ----------
    what : str
        What it is for, named in the error (e.g. "the stored integrals").
    shape : int or tuple of int
    dtype : numpy dtype
    shared : bool
        In anonymous shared memory, writable by forked workers (zero-filled;
        pages are committed when written). Anonymous mappings have no name,
        so nothing is left in ``/dev/shm`` whatever ends the process.
    zero : bool
        Zero-filled (``numpy.zeros``) or not (``numpy.empty``); shared
        arrays are always zero-filled.

    Raises
    ------
    ResourceError
        On ``MemoryError`` or ``ENOMEM``, naming ``what``, the size and the
        budget in force (see :func:`budget_in_force`).
    """
    shape = (shape,) if isinstance(shape, (int, np.integer)) else tuple(int(s) for s in shape)
    dtype = np.dtype(dtype)
    count = int(np.prod(shape, dtype=np.int64))
    n_bytes = count * dtype.itemsize
    try:
        if shared:
            buffer = mmap.mmap(-1, max(n_bytes, 1))
            return np.frombuffer(buffer, dtype=dtype, count=count).reshape(shape)
        return np.zeros(shape, dtype) if zero else np.empty(shape, dtype)
    except (MemoryError, OSError) as exc:
        if not _is_enomem(exc):
            raise
        raise allocation_error(what, n_bytes) from None


__all__ = [
    "MEMORY_FRACTION",
    "FALLBACK_HEADROOM_BYTES",
    "MemoryPaths",
    "MemoryBound",
    "MemoryBudget",
    "format_bytes",
    "cgroup_headroom",
    "memory_bounds",
    "resolve_budget",
    "budget_for",
    "run_budget",
    "budget_in_force",
    "allocation_error",
    "allocate",
]
