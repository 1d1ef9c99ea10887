"""The local back end: a pool of worker processes on this machine.

Where the platform can fork (Linux) and ``threadpoolctl`` is installed, the
workers are forked from this process when it runs a single thread (the
command line), or else from a fork server that has imported numpy, scipy
and hfcore once, so the interpreter and import start-up is paid once per
batch process instead of once per worker; each job then gets its BLAS thread
limit from ``threadpoolctl``. Elsewhere the workers are spawned fresh with
the BLAS thread variables in their environment before numpy loads.
"""

from __future__ import annotations

import contextlib
import importlib
import importlib.util
import multiprocessing
import os
import signal
import sys
import threading
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from .._parallel import usable_cores
from ..errors import HfcoreError
from .worker import run_job

#: The BLAS/OpenMP thread variables a local worker gets before numpy loads.
THREAD_VARIABLES: tuple[str, ...] = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")

#: Seconds between looks at the stop flag while jobs run.
POLL_S: float = 0.2

#: Modules the fork server imports once, before it forks any worker.
PRELOAD: tuple[str, ...] = (
    "numpy", "numpy.linalg", "scipy", "scipy.linalg", "threadpoolctl",
    "hfcore.runs", "hfcore.export", "hfcore.scf", "hfcore.basis.sto", "hfcore._parallel",
    "hfcore.batch.worker",
)


def preimported_context() -> multiprocessing.context.BaseContext | None:
    """The fork-server context that preloads :data:`PRELOAD`, or None where it cannot be used.

    It needs the "fork" and "forkserver" start methods (Linux) and
    ``threadpoolctl`` (BLAS is already loaded when a worker starts, so its
    thread count cannot come from environment variables any more).
    """
    methods = multiprocessing.get_all_start_methods()
    if "fork" not in methods or "forkserver" not in methods or importlib.util.find_spec("threadpoolctl") is None:
        return None
    context = multiprocessing.get_context("forkserver")
    # Takes effect when this process starts its fork server (once).
    context.set_forkserver_preload(list(PRELOAD))
    return context


def start_worker_server() -> None:
    """Start the fork server of :func:`preimported_context` now, where it is used.

    Its preloading (about 0.4 s of imports) then runs on another core while
    the batch reads its geometries and results file, instead of after.
    Does nothing where workers are spawned, or forked straight from this
    process (a single thread: see :class:`LocalPool`).
    """
    if preimported_context() is not None and threading.active_count() > 1:
        import multiprocessing.forkserver

        with contextlib.suppress(Exception):  # the pool starts it later if this fails
            multiprocessing.forkserver.ensure_running()


def _init_local_worker(threads: int | None = None, batch_pid: int | None = None) -> None:
    """Set up a worker; ``threads`` and ``batch_pid`` are given for a worker forked by the fork server."""
    # Ctrl-C reaches the whole process group; only the parent decides what
    # to do about it (it ends the workers itself). A forked worker starts
    # with the fork server's handlers, not the batch parent's.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    _die_with_parent()
    if batch_pid is not None:
        _watch_batch_process(batch_pid)
    if threads is not None:
        # For anything the job starts or loads later; the loaded BLAS gets
        # its limit per job (see run_job).
        os.environ.update({name: str(threads) for name in THREAD_VARIABLES})
        from .._parallel import _controller

        _controller()  # scan the loaded libraries now, not in the first job


def _die_with_parent() -> None:
    """Ask Linux to kill this worker when its parent dies (e.g. by SIGKILL).

    A forked worker's parent is the fork server, which outlives the batch
    process while workers remain: :func:`_watch_batch_process` covers that.
    """
    with contextlib.suppress(Exception):
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        pr_set_pdeathsig = 1
        libc.prctl(pr_set_pdeathsig, signal.SIGKILL)
        if os.getppid() == 1:  # the parent is already gone
            os._exit(1)


def _watch_batch_process(pid: int) -> None:
    """End this worker at once when the batch process ``pid`` ends (e.g. by SIGKILL).

    A forked worker's parent is the fork server, which itself lives as long
    as any worker does, so the parent-death signal alone would never fire.
    """
    import select
    import threading

    try:
        handle = os.pidfd_open(pid)
    except (AttributeError, OSError):
        handle = None

    def watch() -> None:
        if handle is not None:
            select.select([handle], [], [])
        else:  # no pidfd (old kernel): look twice a second
            import time

            while True:
                try:
                    os.kill(pid, 0)
                except ProcessLookupError:
                    break
                except OSError:
                    pass
                time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="hfcore-batch-watch", daemon=True).start()


@contextlib.contextmanager
def _thread_environment(threads: int) -> Iterator[None]:
    """Set the BLAS thread variables for processes started inside the block.

    Spawned workers read these before numpy loads; the parent's own,
    already loaded BLAS is not affected. (Forked workers set them themselves.)
    """
    saved = {name: os.environ.get(name) for name in THREAD_VARIABLES}
    os.environ.update({name: str(threads) for name in THREAD_VARIABLES})
    try:
        yield
    finally:
        for name, value in saved.items():
            if value is None:
                os.environ.pop(name, None)
            else:
                os.environ[name] = value


def _warm_up() -> None:
    """Import what every job needs, while the parent still prepares the job list."""
    from .. import runs, scf  # noqa: F401
    from ..basis import sto  # noqa: F401


class LocalPool:
    """A pool of local worker processes, started (and warming up) at once.

    Parameters
    ----------
    workers : int
        Number of processes (the caller keeps them within the usable
        cores: :func:`hfcore._parallel.split_cores`).
    threads : int
        BLAS threads per worker: set per job with ``threadpoolctl`` in a
        forked worker, in the environment before numpy loads in a spawned one.

    Attributes
    ----------
    start_method : str
        ``"fork"`` (workers forked from this process, when it runs a single
        thread), ``"forkserver"`` (forked by a server with hfcore already
        imported) or ``"spawn"``; see the module notes.
    """

    def __init__(self, workers: int, threads: int) -> None:
        self.threads = threads
        self.workers = workers
        context = preimported_context()
        if context is not None and threading.active_count() == 1:
            # One thread (as in the command line): fork straight from this
            # process, which has everything loaded; no thread can hold a lock
            # across the fork. Workers reset their signal handlers first
            # thing and die with this process (parent-death signal).
            for name in PRELOAD:
                importlib.import_module(name)
            for stream in (sys.stdout, sys.stderr):
                with contextlib.suppress(Exception):
                    stream.flush()  # nothing buffered here is written twice by a worker
            self.start_method = "fork"
            self.executor = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("fork"),
                                                initializer=_init_local_worker, initargs=(threads, None))
            for _ in range(workers):
                self.executor.submit(_warm_up)
            return
        if context is not None:
            self.start_method = "forkserver"
            # Outside _thread_environment: the fork server (started here the
            # first time) loads BLAS with its own defaults, and every job
            # sets its limit, whatever the threads of this pool or a later one.
            self.executor = ProcessPoolExecutor(max_workers=workers, mp_context=context,
                                                initializer=_init_local_worker, initargs=(threads, os.getpid()))
            for _ in range(workers):
                self.executor.submit(_warm_up)
            return
        self.start_method = "spawn"
        with _thread_environment(threads):
            self.executor = ProcessPoolExecutor(
                max_workers=workers, mp_context=multiprocessing.get_context("spawn"), initializer=_init_local_worker
            )
            for _ in range(workers):
                self.executor.submit(_warm_up)

    def results(self, payloads: Sequence[Mapping[str, Any]], should_stop: Callable[[], bool],
                budget_bytes: int | None = None) -> Iterator[dict[str, Any]]:
        """Run the jobs; yield each results line as it finishes.

        Parameters
        ----------
        payloads : sequence of mapping
            See :func:`run_job`; started in this order, except that a job
            whose ``reserve_bytes`` do not fit the budget left waits while
            later, smaller ones that fit start.
        should_stop : callable
            Polled a few times a second; when it returns true the iteration
            ends (and :meth:`close` abandons the running jobs).
        budget_bytes : int, optional
            The memory budget the running jobs share: a job starts only when
            its ``reserve_bytes`` and those of the running jobs fit in it
            together (a job larger than the whole budget runs alone). None:
            no budget, every job goes to the workers at once.

        Raises
        ------
        HfcoreError
            If a worker process died (the results so far are already yielded).
        """
        waiting = list(payloads)
        running: dict[Any, int] = {}
        while (waiting or running) and not should_stop():
            self._start_fitting(waiting, running, budget_bytes)
            done, _ = wait(set(running), timeout=POLL_S, return_when=FIRST_COMPLETED)
            for future in done:
                running.pop(future)
                try:
                    record = future.result()
                except BrokenProcessPool:
                    raise HfcoreError(
                        "a batch worker process died (out of memory?); finished jobs are in the results "
                        "file, run the batch again to go on"
                    ) from None
                yield record

    def _start_fitting(self, waiting: list[Mapping[str, Any]], running: dict[Any, int],
                       budget_bytes: int | None) -> None:
        """Hand the workers the waiting jobs that fit: all of them without a budget, else within it."""
        if budget_bytes is None:
            starting, waiting[:] = list(waiting), []
        else:
            starting, kept = [], []
            reserved = sum(running.values())
            for payload in waiting:
                need = int(payload.get("reserve_bytes") or 0)
                busy = len(running) + len(starting)
                if busy < self.workers and (busy == 0 or reserved + need <= budget_bytes):
                    starting.append(payload)
                    reserved += need
                else:
                    kept.append(payload)
            waiting[:] = kept
        for payload in starting:
            running[self._submit(payload)] = int(payload.get("reserve_bytes") or 0)

    def _submit(self, payload: Mapping[str, Any]) -> Any:
        if self.start_method in ("fork", "forkserver"):
            return self.executor.submit(run_job, {**payload, "blas_threads": self.threads})
        with _thread_environment(self.threads):
            return self.executor.submit(run_job, payload)

    def close(self, abandon: bool) -> None:
        """Shut the pool down; with ``abandon``, end the running jobs at once."""
        if abandon:
            # No public way to end running jobs: terminate the processes the
            # executor keeps, then let it clean up without waiting.
            for process in list(getattr(self.executor, "_processes", {}).values()):
                with contextlib.suppress(Exception):
                    process.terminate()
        self.executor.shutdown(wait=not abandon, cancel_futures=True)

__all__ = ["THREAD_VARIABLES", "POLL_S", "PRELOAD", "usable_cores", "preimported_context", "LocalPool"]

