"""The thread pool the integral passes spread their tiles over, and the BLAS thread count.

A pass cuts its tiles into *work units* whose boundaries depend only on the
tiles (never on the number of threads), hands the units to a pool of
threads (numpy and BLAS release the interpreter lock inside their kernels)
and consumes the results strictly in unit order. Each unit accumulates its
own partial result, and partial results are added in unit order, so a pass
gives the same bits with 1 thread or 16.

Passes made of many small numpy kernels hold the interpreter lock most of
the time, so threads barely overlap there. Where ``os.fork`` exists
(Linux), :func:`forked_units` runs such a pass on worker processes instead:
they share the parent's memory copy-on-write, take units from a shared
counter and write their results into :func:`shared_zeros` arrays, each
unit to its own place, so the bits again do not depend on the count.

BLAS keeps its own threads. When the optional package ``threadpoolctl`` is
installed, :func:`blas_threads` sets them for the duration of a block (the
SCF driver gives BLAS the run's thread count, a threaded pass gives it one
thread per pool thread so the two do not compete); without it BLAS follows
its own environment variables (``OPENBLAS_NUM_THREADS`` and the like).
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import TypeVar

import numpy as np

from ._memory import allocate
from .errors import InputError

T = TypeVar("T")
R = TypeVar("R")


def usable_cores() -> int:
    """The number of cores this process may run on (its CPU affinity), at least 1.

    The one count of cores in hfcore: thread counts, forked worker teams and
    batch workers are all capped by it.
    """
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def resolve_threads(threads: int | None) -> int:
    """A thread count: ``threads`` capped at :func:`usable_cores`, or the usable cores for None.

    More threads (or forked workers) than cores only queue behind each
    other, so a larger count is capped (:func:`thread_note` says so).

    Raises
    ------
    InputError
        If ``threads`` is not a positive integer or None.
    """
    cores = usable_cores()
    if threads is None:
        return cores
    if isinstance(threads, bool) or not isinstance(threads, int) or threads < 1:
        raise InputError(f"the thread count must be a positive integer, got {threads!r}")
    return min(int(threads), cores)


def thread_note(threads: int | None) -> str:
    """A note for the report when ``threads`` was capped at the usable cores ("" when not)."""
    if threads is None or isinstance(threads, bool) or not isinstance(threads, int):
        return ""
    cores = usable_cores()
    if threads <= cores:
        return ""
    return f"{threads} threads asked for, capped at the {cores} usable core{'s' if cores > 1 else ''}"


def split_cores(workers: int, threads: int) -> tuple[int, int]:
    """Worker processes and threads per worker that fit the usable cores together.

    Workers are capped at the cores first, then each worker's threads at
    ``cores // workers`` (at least 1), so ``workers * threads`` never
    exceeds the cores.

    Returns
    -------
    (int, int)
        ``(workers, threads)``, each at least 1.
    """
    cores = usable_cores()
    workers = max(1, min(int(workers), cores))
    return workers, max(1, min(int(threads), cores // workers))


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


#: Exit status after SIGTERM (128 + 15, the shell convention).
EXIT_TERMINATED: int = 143


@contextlib.contextmanager
def terminate_cleanly() -> Iterator[None]:
    """Inside the block, SIGTERM raises ``SystemExit(143)`` in the main thread instead of killing the process.

    The default action ends the process on the spot, so ``finally``
    clauses never run: a half-written temporary file would stay, and
    worker processes would be left to notice the closed pipe on their own.
    As an exception, the clean-up of every block it passes through runs
    (temporary files removed, worker teams closed and waited for).
    Outside the main thread this does nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def stop(signum: int, frame: object) -> None:
        raise SystemExit(EXIT_TERMINATED)

    previous = signal.signal(signal.SIGTERM, stop)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def can_fork() -> bool:
    """Whether passes may run on forked worker processes (Linux, with ``os.fork``).

    Forked workers share the parent's memory copy-on-write and run free of
    the interpreter lock, which a pass of many small numpy kernels needs to
    use more than one core. Setting the environment variable
    ``HFCORE_NO_FORK`` to a non-empty value keeps every pass on threads.
    """
    return hasattr(os, "fork") and sys.platform.startswith("linux") and not os.environ.get("HFCORE_NO_FORK")


def shared_zeros(shape: int | tuple[int, ...], dtype=np.float64, what: str = "shared memory for the worker processes"
                 ) -> np.ndarray:
    """A zero-filled array in anonymous shared memory, writable by forked workers.

    Pages are only committed when written, as for ``numpy.zeros``. The
    mapping has no name, so nothing is left in ``/dev/shm`` however the
    process ends. A refused mapping (``ENOMEM``, e.g. under ``ulimit -v``)
    raises :class:`~hfcore.errors.ResourceError` naming ``what``
    (:func:`hfcore._memory.allocate`).
    """
    return allocate(what, shape, dtype, shared=True)


#: Room for a worker's pickled exception.
_ERROR_BYTES = 8192


def _pickled_error(exc: BaseException) -> bytes:
    """``exc`` pickled behind a length prefix, or a RuntimeError with its text if that does not fit."""
    import pickle

    for error in (exc, RuntimeError(f"an integral worker process failed: {type(exc).__name__}: {exc}"[:1000])):
        try:
            data = pickle.dumps(error)
        except Exception:
            continue
        if len(data) + 8 < _ERROR_BYTES:
            return len(data).to_bytes(8, "little") + data
    return (0).to_bytes(8, "little")


def _unpickled_error(raw: bytes, status: int) -> BaseException:
    import pickle

    size = int.from_bytes(raw[:8], "little")
    if 0 < size <= len(raw) - 8:
        with contextlib.suppress(Exception):
            return pickle.loads(raw[8 : 8 + size])
    return RuntimeError(f"an integral worker process ended with status {status}")


def forked_units(
    work: Callable[[int], None],
    n_units: int,
    processes: int,
    progress: Callable[[np.ndarray], None] | None = None,
) -> None:
    """``work(u)`` for every unit u in ``range(n_units)``, on this process and ``processes - 1`` forked ones.

    ``work`` returns nothing: it writes its result into arrays made with
    :func:`shared_zeros` before the call (each unit to its own place, so the
    result does not depend on which process ran which unit). Units are
    handed out in order from a shared counter, so the processes stay busy
    to the end. BLAS runs one thread per process meanwhile.

    Parameters
    ----------
    work : callable
        Called with a unit index.
    n_units : int
    processes : int
        Processes in all, this one included; 1 runs everything here.
    progress : callable, optional
        Called in this process after each unit it finished, with the array
        of finished flags (shape (n_units,), 1 where a unit is done, in any
        process).

    Raises
    ------
    Exception
        The exception of a worker process that failed (a RuntimeError
        naming it when it cannot be passed back whole), once every worker
        has ended. An exception in this process stops the workers after
        their current unit and propagates.
    """
    processes = min(processes, usable_cores())
    finished = shared_zeros(max(n_units, 1), np.int8)
    if processes <= 1 or n_units <= 1:
        for unit in range(n_units):
            work(unit)
            finished[unit] = 1
            if progress is not None:
                progress(finished[:n_units])
        return

    def run(unit: int) -> None:
        work(unit)
        finished[unit] = 1

    report = None if progress is None else (lambda: progress(finished[:n_units]))
    team = WorkerTeam(run, processes)
    try:
        team.run(n_units, after_unit=report)
    finally:
        team.close()
    if progress is not None:
        progress(finished[:n_units])


#: Parent-side pipe ends of every live :class:`WorkerTeam`; a new worker closes them all.
_TEAM_FDS: set[int] = set()


class WorkerTeam:
    """``processes - 1`` forked workers kept between calls, each call running ``work(unit)`` for all units.

    For a step repeated many times over the same large read-only data (the
    K builds of one SCF from one store), forking once saves the fork and the
    copy-on-write faults of every call. ``work`` is fixed when the team is
    made; it reads its inputs from, and writes its results into,
    :func:`shared_zeros` arrays made before, each unit to its own place.
    :meth:`close` ends the workers (so does the end of this process: a
    worker leaves when its command pipe closes).

    Parameters
    ----------
    work : callable
        Called with a unit index, in any process of the team.
    processes : int
        Processes in all, this one included (at least 2); never more
        than :func:`usable_cores` are started.
    """

    def __init__(self, work: Callable[[int], None], processes: int):
        import multiprocessing

        processes = min(processes, usable_cores())
        self._work = work
        self._counter = shared_zeros(1, np.int64)
        self._errors = shared_zeros((processes, _ERROR_BYTES), np.uint8)
        self._lock = multiprocessing.get_context("fork").Lock()
        self._pids: list[int] = []
        self._commands: list[int] = []
        self._replies: list[int] = []
        try:
            for slot in range(1, processes):
                command_r, command_w = os.pipe()
                reply_r, reply_w = os.pipe()
                pid = os.fork()
                if pid == 0:
                    os.close(command_w)
                    os.close(reply_r)
                    self._serve(slot, command_r, reply_w)  # never returns
                os.close(command_r)
                os.close(reply_w)
                self._pids.append(pid)
                self._commands.append(command_w)
                self._replies.append(reply_r)
                _TEAM_FDS.update((command_w, reply_r))
        except BaseException:
            self.close()
            raise

    def _take(self) -> int:
        with self._lock:
            unit = int(self._counter[0])
            self._counter[0] = unit + 1
        return unit

    def _serve(self, slot: int, commands: int, replies: int) -> None:
        code = 0
        try:
            for fd in _TEAM_FDS:
                with contextlib.suppress(OSError):
                    os.close(fd)
            signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles it and closes the team
            signal.signal(signal.SIGTERM, signal.SIG_DFL)
            with blas_threads(1):
                self._loop(slot, commands, replies)
        except BaseException:
            code = 1
        finally:
            os._exit(code)

    def _loop(self, slot: int, commands: int, replies: int) -> None:
        """Serve commands until told to stop: run units, then reply ``k`` (done) or ``e`` (failed)."""
        while True:
            message = os.read(commands, 8)
            if len(message) < 8:
                break  # closed, or the parent is gone
            n_units = int.from_bytes(message, "little", signed=True)
            if n_units < 0:
                break
            reply = b"k"
            try:
                while (unit := self._take()) < n_units:
                    self._work(unit)
            except BaseException as exc:  # handed to the parent, which raises it
                data = _pickled_error(exc)
                self._errors[slot, : len(data)] = np.frombuffer(data, np.uint8)
                reply = b"e"
                with self._lock:
                    self._counter[0] = n_units
            os.write(replies, reply)

    def run(self, n_units: int, after_unit: Callable[[], None] | None = None) -> None:
        """``work(u)`` for every u in ``range(n_units)``, spread over the team; returns when all are done.

        ``after_unit``, if given, is called here after each unit this process ran.

        Raises
        ------
        Exception
            The exception of a unit that failed in a worker (the team is
            closed then), or one raised here (the workers finish the call
            first).
        """
        if not self._pids:
            raise RuntimeError("the worker team is closed")
        self._counter[0] = 0
        command = int(n_units).to_bytes(8, "little", signed=True)
        for fd in self._commands:
            os.write(fd, command)
        error: BaseException | None = None
        with blas_threads(1):
            try:
                while (unit := self._take()) < n_units:
                    self._work(unit)
                    if after_unit is not None:
                        after_unit()
            except BaseException as exc:
                with self._lock:
                    self._counter[0] = n_units
                error = exc
            for slot, fd in enumerate(self._replies, start=1):
                reply = os.read(fd, 1)
                if reply != b"k" and error is None:
                    error = (
                        _unpickled_error(bytes(self._errors[slot]), 0)
                        if reply == b"e"
                        else RuntimeError("an integral worker process ended unexpectedly")
                    )
        if error is not None:
            self.close()
            raise error

    def close(self) -> None:
        """End the workers and wait for them (idempotent)."""
        for fd in self._commands:
            with contextlib.suppress(OSError):
                os.write(fd, (-1).to_bytes(8, "little", signed=True))
        for fd in self._commands + self._replies:
            _TEAM_FDS.discard(fd)
            with contextlib.suppress(OSError):
                os.close(fd)
        for pid in self._pids:
            with contextlib.suppress(OSError):
                os.waitpid(pid, 0)
        self._pids, self._commands, self._replies = [], [], []


__all__ = [
    "WorkerTeam",
    "usable_cores",
    "resolve_threads",
    "thread_note",
    "split_cores",
    "blas_threads",
    "work_units",
    "ordered_map",
    "can_fork",
    "terminate_cleanly",
    "EXIT_TERMINATED",
    "shared_zeros",
    "forked_units",
]
