"""Running the jobs of a batch: one job in a worker, a local process pool, a Dask cluster.

A job runs exactly what ``hfcore energy GEOMETRY --json -`` runs, with the
same options, in a worker process; the worker sends back the whole results
line (the ``energy --json`` record for a success, the one-line message and
exit code of the single run for a failure). Only the parent process writes
the results file, so a worker that dies or is killed can never leave half
a line or a duplicate behind.
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import multiprocessing
import os
import signal
import socket
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from typing import Any

from ..errors import HfcoreError, ResourceError, SchedulerError
from .jobs import Job, largest_first
from .results import ResultsWriter

#: The BLAS/OpenMP thread variables a local worker gets before numpy loads.
THREAD_VARIABLES: tuple[str, ...] = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")

#: How often a Dask task that raised is retried by the scheduler.
DASK_RETRIES: int = 2

_POLL_S = 0.2


def usable_cores() -> int:
    """Cores this process may run on (its CPU affinity), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _one_line(text: str) -> str:
    return " ".join(text.split())


def _blas_limit(threads: int | None) -> contextlib.AbstractContextManager:
    """Limit BLAS threads in an already running process (a Dask worker), if threadpoolctl is there."""
    if threads is None:
        return contextlib.nullcontext()
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return contextlib.nullcontext()
    return threadpool_limits(limits=threads)


def run_job(payload: Mapping[str, Any]) -> dict[str, Any]:
    """Run one job as ``hfcore energy --json -`` would and return its results line.

    Parameters
    ----------
    payload : mapping
        ``job``: the job record (:meth:`Job.record`); ``extra``: further
        ``energy`` arguments that are not part of the job's identity (e.g.
        threads); ``blas_threads``: a BLAS thread limit to apply here, or
        ``None``.

    Returns
    -------
    dict
        ``job``, ``status`` (``"ok"`` or ``"failed"``), then the
        ``energy --json`` record (success) or ``error`` with ``message``,
        ``exit_code`` and ``kind`` (failure), and ``batch`` with the job's
        ``wall_seconds``, ``host`` and ``pid``. Never raises for a job
        that fails: the failure is the record.
    """
    from .. import cli
    from .command import energy_defaults

    job = dict(payload["job"])
    started = time.perf_counter()
    args = argparse.Namespace(**{
        **energy_defaults(), **job["options"], **payload.get("extra", {}),
        "geometry": job["geometry"], "basis": job["basis"], "charge": job["charge"],
    })
    outcome: dict[str, Any]
    try:
        with _blas_limit(payload.get("blas_threads")):
            outcome = {"status": "ok", **cli.energy_record(args)}
    except HfcoreError as exc:
        outcome = {"status": "failed", "error": {"message": _one_line(str(exc)), "exit_code": exc.exit_code,
                                                 "kind": type(exc).__name__}}
    except MemoryError:
        outcome = {"status": "failed", "error": {"message": "not enough memory for this run",
                                                 "exit_code": ResourceError.exit_code, "kind": "MemoryError"}}
    except Exception as exc:  # a bug must not stop the other jobs; the line says what happened
        outcome = {"status": "failed", "error": {"message": _one_line(f"internal error: {type(exc).__name__}: {exc}"),
                                                 "exit_code": 1, "kind": type(exc).__name__}}
    wall = time.perf_counter() - started
    return {"job": job, **outcome,
            "batch": {"wall_seconds": wall, "host": socket.gethostname(), "pid": os.getpid()}}


def _lost_record(payload: Mapping[str, Any], message: str) -> dict[str, Any]:
    """A failed line for a job whose worker never answered."""
    return {"job": dict(payload["job"]), "status": "failed",
            "error": {"message": _one_line(message), "exit_code": 1, "kind": "WorkerLost"},
            "batch": {"wall_seconds": None, "host": None, "pid": None}}


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
            done, pending = wait(pending, timeout=_POLL_S, return_when=FIRST_COMPLETED)
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


def connect_dask(address: str, timeout: float) -> Any:
    """A client of an existing Dask scheduler.

    Parameters
    ----------
    address : str
        The scheduler address, e.g. ``tcp://head:8786``.
    timeout : float
        Seconds to wait for the scheduler to answer.

    Raises
    ------
    SchedulerError
        If the Dask extra is missing or the scheduler does not answer in time.
    """
    try:
        from distributed import Client
    except ImportError:
        raise SchedulerError("--scheduler needs the Dask extra: pip install 'hfcore[dask]'") from None
    try:
        return Client(address, timeout=timeout, set_as_default=False)
    except Exception as exc:  # distributed raises OSError, TimeoutError or ValueError by case
        raise SchedulerError(
            f"{address}: no Dask scheduler answered within {timeout:g} s ({_one_line(str(exc)) or type(exc).__name__})"
        ) from None


def dask_results(
    payloads: Sequence[Mapping[str, Any]], client: Any, should_stop: Callable[[], bool]
) -> Iterator[dict[str, Any]]:
    """Send jobs to a Dask cluster; yield each results line as it comes back.

    Each job is one task whose key is derived from the job key, with
    ``retries`` so that the scheduler reruns it if it fails; a task whose
    workers keep dying comes back as a failed line. The client is closed
    at the end.

    Parameters
    ----------
    payloads : sequence of mapping
        See :func:`run_job`.
    client : distributed.Client
        From :func:`connect_dask`.
    should_stop : callable
        As for :func:`local_results`; stopping cancels the outstanding tasks.
    """
    from distributed import as_completed

    futures = []
    try:
        by_key = {}
        for number, payload in enumerate(payloads):
            key = f"hfcore-batch-{payload['job']['key']}"
            by_key[key] = payload
            # Higher priority runs first: keep the largest-first order.
            futures.append(client.submit(run_job, payload, key=key, retries=DASK_RETRIES, pure=False,
                                         priority=len(payloads) - number))
        completed = as_completed(futures, loop=client.loop)
        while not completed.is_empty() and not should_stop():
            batch = completed.next_batch(block=False)
            if not batch:
                time.sleep(_POLL_S)
                continue
            for future in batch:
                try:
                    yield future.result()
                except Exception as exc:  # e.g. KilledWorker: the job took its workers down again and again
                    yield _lost_record(by_key[future.key], f"the Dask task failed: {type(exc).__name__}: {exc}")
    finally:
        with contextlib.suppress(Exception):
            client.cancel(futures)
        with contextlib.suppress(Exception):
            client.close()


@dataclass
class BatchOutcome:
    """What a batch did.

    Attributes
    ----------
    jobs : list of Job
        Every job the batch was asked for.
    records : dict
        The latest results line of each job known so far, by job key
        (including lines from earlier runs).
    ran : list of dict
        The lines written by this run, in finishing order.
    skipped_ok, skipped_failed : int
        Jobs not run because the results file already had them (failed
        ones are skipped unless ``retry_failed``).
    truncated_bytes : int
        Size of a partial last line from an earlier crash that was cut off.
    duplicates_written : int
        Results delivered twice (by a retried task) and not written again.
    stopped : bool
        True if ``should_stop`` ended the run early.
    wall_seconds : float
    """

    jobs: list[Job]
    records: dict[str, dict[str, Any]] = field(default_factory=dict)
    ran: list[dict[str, Any]] = field(default_factory=list)
    skipped_ok: int = 0
    skipped_failed: int = 0
    truncated_bytes: int = 0
    duplicates_written: int = 0
    stopped: bool = False
    wall_seconds: float = 0.0

    @property
    def failed(self) -> list[dict[str, Any]]:
        """The latest line of every job of this batch that failed."""
        return [r for j in self.jobs if (r := self.records.get(j.key)) and r["status"] != "ok"]

    @property
    def missing(self) -> list[Job]:
        """Jobs with no line yet (a run that was stopped)."""
        return [j for j in self.jobs if j.key not in self.records]


def run_batch(
    jobs: Sequence[Job],
    results_path: str,
    *,
    retry_failed: bool = False,
    workers: int | None = None,
    threads: int = 1,
    scheduler: str | None = None,
    scheduler_timeout: float = 10.0,
    extra: Mapping[str, Any] | None = None,
    should_stop: Callable[[], bool] = lambda: False,
    on_start: Callable[[BatchOutcome, int], None] | None = None,
    on_record: Callable[[dict[str, Any]], None] | None = None,
    size_of: Callable[[Job], int] | None = None,
) -> BatchOutcome:
    """Run the jobs not yet in a results file, appending one line per finished job.

    Parameters
    ----------
    jobs : sequence of Job
        From :func:`hfcore.batch.make_jobs`.
    results_path : str
        The results file (created with a header if missing; locked while
        the batch runs).
    retry_failed : bool
        Also rerun jobs whose latest line says ``failed``.
    workers : int, optional
        Local worker processes (default: the usable cores). Ignored with
        ``scheduler``.
    threads : int
        BLAS threads per job.
    scheduler : str, optional
        Address of a Dask scheduler to send the jobs to instead.
    scheduler_timeout : float
        Seconds to wait for the scheduler.
    extra : mapping, optional
        Further ``energy`` arguments passed to every job but not part of
        its identity.
    should_stop : callable
        Polled while jobs run; returning true abandons the running jobs.
    on_start : callable, optional
        Called as ``on_start(outcome, n_to_run)`` once the file is read.
    on_record : callable, optional
        Called with each line after it is on disk.
    size_of : callable, optional
        An estimate of a job's cost (e.g. its number of basis functions);
        the largest jobs start first. Called only for the jobs to run.

    Returns
    -------
    BatchOutcome

    Raises
    ------
    ResultsFileError
        If the results file cannot be used (see :mod:`hfcore.batch.results`).
    SchedulerError
        If the Dask scheduler does not answer.
    """
    started = time.perf_counter()
    outcome = BatchOutcome(list(jobs))
    with ResultsWriter(results_path) as writer:
        outcome.truncated_bytes = writer.truncated_bytes
        known = writer.contents.latest()
        wanted = {j.key for j in jobs}
        outcome.records = {k: r for k, r in known.items() if k in wanted}
        todo = []
        for job in jobs:
            previous = known.get(job.key)
            if previous is None:
                todo.append(job)
            elif previous["status"] == "ok":
                outcome.skipped_ok += 1
            elif retry_failed:
                todo.append(job)
            else:
                outcome.skipped_failed += 1
        client = connect_dask(scheduler, scheduler_timeout) if scheduler and todo else None
        pool = LocalPool(min(workers or usable_cores(), len(todo)), threads) if todo and not scheduler else None
        completed = False
        try:
            # The pool warms up while the sizes are estimated (only for the jobs to run).
            if size_of is not None:
                todo = [dataclasses.replace(j, size=size_of(j)) for j in todo]
            if on_start is not None:
                on_start(outcome, len(todo))
            payloads = [{"job": j.record(), "extra": dict(extra or {}), "blas_threads": threads if scheduler else None}
                        for j in largest_first(todo)]
            if client is not None:
                stream: Iterator[dict[str, Any]] = dask_results(payloads, client, should_stop)
            elif pool is not None:
                stream = pool.results(payloads, should_stop)
            else:
                stream = iter(())
            try:
                for record in stream:
                    if not writer.append(record):
                        outcome.duplicates_written += 1
                        continue
                    outcome.records[record["job"]["key"]] = record
                    outcome.ran.append(record)
                    if on_record is not None:
                        on_record(record)
                    if should_stop():
                        break
                else:
                    completed = not should_stop()
            finally:
                close = getattr(stream, "close", None)
                if close is not None:
                    close()
        finally:
            if pool is not None:
                pool.close(abandon=not completed)
            elif client is not None and not completed:
                with contextlib.suppress(Exception):
                    client.close()
    outcome.stopped = bool(should_stop())
    outcome.wall_seconds = time.perf_counter() - started
    return outcome


__all__ = [
    "THREAD_VARIABLES",
    "DASK_RETRIES",
    "usable_cores",
    "run_job",
    "LocalPool",
    "connect_dask",
    "dask_results",
    "BatchOutcome",
    "run_batch",
]
