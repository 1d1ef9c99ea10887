"""The thread pool the integral passes spread their tiles over, and the BLAS thread count.

A pass cuts its tiles into *work units* whose boundaries depend only on the
tiles (never on the number of threads), hands the units to a pool of
threads (numpy and BLAS release the interpreter lock inside their kernels)
and consumes the results strictly in unit order. Each unit accumulates its
own partial result, and partial results are added in unit order, so a pass
gives the same bits with 1 thread or 16.

BLAS keeps its own threads. When the optional package ``threadpoolctl`` is
installed, :func:`blas_threads` sets them for the duration of a block (the
SCF driver gives BLAS the run's thread count, a threaded pass gives it one
thread per pool thread so the two do not compete); without it BLAS follows
its own environment variables (``OPENBLAS_NUM_THREADS`` and the like).
"""

from __future__ import annotations

import contextlib
import os
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import TypeVar

from ..errors import InputError

T = TypeVar("T")
R = TypeVar("R")


def available_cores() -> int:
    """The number of cores this process may run on (its CPU affinity), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def resolve_threads(threads: int | None) -> int:
    """A thread count: ``threads`` itself, or :func:`available_cores` for None.

    Raises
    ------
    InputError
        If ``threads`` is not a positive integer or None.
    """
    if threads is None:
        return available_cores()
    if isinstance(threads, bool) or not isinstance(threads, int) or threads < 1:
        raise InputError(f"the thread count must be a positive integer, got {threads!r}")
    return int(threads)


@contextlib.contextmanager
def blas_threads(n: int) -> Iterator[None]:
    """Limit BLAS to ``n`` threads inside the block, when ``threadpoolctl`` is installed.

    Without ``threadpoolctl`` this does nothing (BLAS keeps the thread count
    its environment variables gave it).
    """
    controller = _controller()
    if controller is None:
        yield
        return
    with controller.limit(limits=int(n), user_api="blas"):
        yield


_CONTROLLER: list = []


def _controller():
    """One ``threadpoolctl.ThreadpoolController`` per process (None without the package).

    Building one scans the loaded libraries (a few ms); a pass that opens a
    pool per block of integrals would pay that every block.
    """
    if not _CONTROLLER:
        try:
            from threadpoolctl import ThreadpoolController
        except ImportError:
            _CONTROLLER.append(None)
        else:
            # The controller sees only the BLAS libraries loaded when it is
            # built: load those of numpy and scipy first.
            import numpy.linalg  # noqa: F401
            import scipy.linalg  # noqa: F401

            _CONTROLLER.append(ThreadpoolController())
    return _CONTROLLER[0]


def work_units(weights: Sequence[int], target: int) -> list[slice]:
    """Cut a sequence of items into consecutive units of about ``target`` weight each.

    The cut depends only on the weights and the target, so the same items
    make the same units whatever the number of threads.

    Parameters
    ----------
    weights : sequence of int
        Work of every item (for tiles: primitive quartets).
    target : int
        Work per unit; a unit closes once it reaches it.

    Returns
    -------
    list of slice
        Covering ``range(len(weights))`` in order.
    """
    out = []
    start, acc = 0, 0
    for k, w in enumerate(weights):
        acc += w
        if acc >= target:
            out.append(slice(start, k + 1))
            start, acc = k + 1, 0
    if start < len(weights):
        out.append(slice(start, len(weights)))
    return out


def ordered_map(work: Callable[[T], R], items: Iterable[T], threads: int) -> Iterator[R]:
    """``work(item)`` for every item, run on ``threads`` threads, yielded in item order.

    At most ``2 * threads`` items are in flight, so results waiting to be
    consumed stay few. With one thread, or a single item, everything runs in
    the caller's thread. BLAS is held to one thread per pool thread meanwhile
    (and for a single item on several threads, so the item sees the BLAS the
    pool's workers would).
    """
    if threads <= 1:
        for item in items:
            yield work(item)
        return
    items = list(items)
    if len(items) <= 1:
        # Nothing to share: no pool, but the same one BLAS thread the pool's workers get.
        with blas_threads(1):
            for item in items:
                yield work(item)
        return
    with blas_threads(1), ThreadPoolExecutor(max_workers=threads, thread_name_prefix="hfcore-tiles") as pool:
        pending: deque = deque()
        try:
            for item in items:
                pending.append(pool.submit(work, item))
                if len(pending) >= 2 * threads:
                    yield pending.popleft().result()
            while pending:
                yield pending.popleft().result()
        finally:
            for future in pending:
                future.cancel()


__all__ = ["available_cores", "resolve_threads", "blas_threads", "work_units", "ordered_map"]
