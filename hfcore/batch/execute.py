"""Running a batch: skip what the results file has, run the rest, append each line as it comes.

The jobs run in local worker processes (:mod:`hfcore.batch.pool`) or on a
Dask cluster (:mod:`hfcore.batch.cluster`); each is exactly the
single run of its request (:mod:`hfcore.batch.worker`).
"""

from __future__ import annotations

import contextlib
import dataclasses
import itertools
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from .._memory import MemoryBudget, budget_for
from .._parallel import split_cores, usable_cores
from ..errors import HfcoreError
from .cluster import connect_dask, dask_results
from .jobs import Job, largest_first
from .pool import LocalPool
from .results import ResultsWriter
from .worker import failed_record


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
    notes : list of str
        What the batch capped to fit the machine (workers and threads
        beyond the usable cores), for the faces to print.
    memory_budget : MemoryBudget or None
        The budget the local workers share (None on Dask).
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
    notes: list[str] = field(default_factory=list)
    memory_budget: MemoryBudget | None = None

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
    memory_of: Callable[[Job, MemoryBudget], int] | None = None,
    memory_budget: MemoryBudget | None = None,
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
        Local worker processes (default: the usable cores; never more).
        Ignored with ``scheduler``.
    threads : int
        Threads per job: BLAS, and the ``threads`` option of ``energy``.
        Locally, ``workers * threads`` is kept within the usable cores by
        giving each worker fewer threads (at least 1); ``notes`` says so.
    scheduler : str, optional
        Address of a Dask scheduler to send the jobs to instead.
    scheduler_timeout : float
        Seconds to wait for the scheduler.
    extra : mapping, optional
        Further request fields passed to every job but not part of its
        identity (e.g. ``threads``).
    should_stop : callable
        Polled while jobs run; returning true abandons the running jobs.
    on_start : callable, optional
        Called as ``on_start(outcome, n_to_run)`` once the file is read.
    on_record : callable, optional
        Called with each line after it is on disk.
    size_of : callable, optional
        An estimate of a job's cost (e.g. its number of basis functions);
        the largest jobs start first. Called only for the jobs to run.
    memory_of : callable, optional
        ``memory_of(job, budget)``: the predicted peak bytes of a job under
        the batch's budget (e.g. :func:`hfcore.runs.planned_memory`). Local
        workers then reserve it from one shared budget, so the running
        jobs' predictions never exceed it together; a job that does not
        fit waits (smaller ones may start meanwhile), and one whose plan
        fails (a ``ResourceError``: it cannot fit even alone) is a failed
        line at once. Each job without its own ``memory`` option gets the
        batch's budget as its own, so it plans as predicted.
    memory_budget : MemoryBudget, optional
        The shared budget (default: measured once now, as for one run).

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
        known = writer.contents.latest_for(jobs)  # by current key, whatever rule the file's lines used
        outcome.records = dict(known)
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
        pool = None
        if todo and not scheduler:
            n_workers, threads = _fit_cores(workers, threads, len(todo), outcome.notes)
            pool = LocalPool(n_workers, threads)
        completed = False
        try:
            # The pool warms up while the sizes are estimated (only for the jobs to run).
            if size_of is not None:
                todo = [dataclasses.replace(j, size=size_of(j)) for j in todo]
            budget = None
            if pool is not None and memory_of is not None:
                budget = outcome.memory_budget = memory_budget or budget_for(None)
            if on_start is not None:
                on_start(outcome, len(todo))
            # Each job gets the batch's thread count for everything that takes
            # one (BLAS and, where 'energy' has --threads, the integral passes),
            # so N workers never oversubscribe the cores.
            # (after the cap above: a "threads" in ``extra`` is the batch's own, uncapped).
            job_extra = {**(extra or {}), "threads": threads}
            payloads, refused = [], []
            for j in largest_first(todo):
                payload = {"job": j.record(), "extra": job_extra, "blas_threads": threads if scheduler else None,
                           "on_dask": bool(scheduler)}
                if budget is not None:
                    try:
                        payload["reserve_bytes"] = int(memory_of(j, budget))
                    except HfcoreError as exc:  # cannot fit even alone: its line says why, the batch goes on
                        refused.append(failed_record(j.record(), exc))
                        continue
                    if j.options.get("memory_mib") is None:
                        payload["extra"] = {**job_extra, "memory_mib": budget.bytes / 2**20}
                payloads.append(payload)
            if client is not None:
                stream: Iterator[dict[str, Any]] = dask_results(payloads, client, should_stop)
            elif pool is not None:
                stream = itertools.chain(refused, pool.results(
                    payloads, should_stop, budget_bytes=None if budget is None else budget.bytes))
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


def _fit_cores(workers: int | None, threads: int, n_jobs: int, notes: list[str]) -> tuple[int, int]:
    """Local workers and threads per worker within the usable cores (and no more workers than jobs)."""
    asked = workers or usable_cores()
    n_workers, n_threads = split_cores(min(asked, n_jobs), threads)
    if (n_workers, n_threads) != (min(asked, n_jobs), threads):
        notes.append(
            f"{asked} worker(s) x {threads} thread(s) exceed the {usable_cores()} usable core(s): running "
            f"{n_workers} worker(s) x {n_threads} thread(s)"
        )
    return n_workers, n_threads


__all__ = ["BatchOutcome", "run_batch"]
