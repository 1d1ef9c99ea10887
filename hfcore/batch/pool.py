"""The local back end: a pool of worker processes on this machine."""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import signal
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from ..errors import HfcoreError
from .worker import run_job

#: The BLAS/OpenMP thread variables a local worker gets before numpy loads.
THREAD_VARIABLES: tuple[str, ...] = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")

#: Seconds between looks at the stop flag while jobs run.
POLL_S: float = 0.2


def usable_cores() -> int:
    """Cores this process may run on (its CPU affinity), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _init_local_worker() -> None:
    # Ctrl-C reaches the whole process group; only the parent decides what
    # to do about it (it ends the workers itself).
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    _die_with_parent()


def _die_with_parent() -> None:
    """Ask Linux to kill this worker when its parent dies (e.g. by SIGKILL)."""
    with contextlib.suppress(Exception):
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        pr_set_pdeathsig = 1
        libc.prctl(pr_set_pdeathsig, signal.SIGKILL)
        if os.getppid() == 1:  # the parent is already gone
            os._exit(1)


@contextlib.contextmanager
def _thread_environment(threads: int) -> Iterator[None]:
    """Set the BLAS thread variables for processes started inside the block.

    The workers are spawned fresh, so they read these before numpy loads;
    the parent's own, already loaded BLAS is not affected.
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
    from .. import cli, scf  # noqa: F401
    from ..basis import sto  # noqa: F401


class LocalPool:
    """A pool of local worker processes, started (and warming up) at once.

    Parameters
    ----------
    workers : int
        Number of processes.
    threads : int
        BLAS threads per worker (set in their environment before numpy loads).
    """

    def __init__(self, workers: int, threads: int) -> None:
        self.threads = threads
        with _thread_environment(threads):
            self.executor = ProcessPoolExecutor(
                max_workers=workers, mp_context=multiprocessing.get_context("spawn"), initializer=_init_local_worker
            )
            for _ in range(workers):
                self.executor.submit(_warm_up)

    def results(self, payloads: Sequence[Mapping[str, Any]], should_stop: Callable[[], bool]
                ) -> Iterator[dict[str, Any]]:
        """Run the jobs; yield each results line as it finishes.

        Parameters
        ----------
        payloads : sequence of mapping
            See :func:`run_job`; started in this order.
        should_stop : callable
            Polled a few times a second; when it returns true the iteration
            ends (and :meth:`close` abandons the running jobs).

        Raises
        ------
        HfcoreError
            If a worker process died (the results so far are already yielded).
        """
        with _thread_environment(self.threads):
            pending = {self.executor.submit(run_job, p) for p in payloads}
        while pending and not should_stop():
            done, pending = wait(pending, timeout=POLL_S, return_when=FIRST_COMPLETED)
            for future in done:
                try:
                    record = future.result()
                except BrokenProcessPool:
                    raise HfcoreError(
                        "a batch worker process died (out of memory?); finished jobs are in the results "
                        "file, run the batch again to go on"
                    ) from None
                yield record

    def close(self, abandon: bool) -> None:
        """Shut the pool down; with ``abandon``, end the running jobs at once."""
        if abandon:
            # No public way to end running jobs: terminate the processes the
            # executor keeps, then let it clean up without waiting.
            for process in list(getattr(self.executor, "_processes", {}).values()):
                with contextlib.suppress(Exception):
                    process.terminate()
        self.executor.shutdown(wait=not abandon, cancel_futures=True)

__all__ = ["THREAD_VARIABLES", "POLL_S", "usable_cores", "LocalPool"]
