"""The ``hfcore batch`` subcommand: options, progress on stderr, the summary, signals.

The per-job options are not listed here: :func:`add_batch_parser` copies
every option of the ``energy`` parser, and the jobs get the
:class:`~hfcore.runs.RunRequest` those options make (as ``energy`` does),
so a new ``energy`` option applies to batch jobs without any change in
this module, and a job's key is made of request fields, not of flags.
"""

from __future__ import annotations

import argparse
import signal
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, TextIO

from ..errors import InputError
from .commands import command_help
from .arguments import positive_float, positive_int, run_request
from .exits import EXIT_INTERRUPTED, EXIT_JOBS_FAILED, EXIT_TERMINATED

# Options of 'energy' that a batch sets itself or that make no sense per job.
_NOT_COPIED = {"geometry", "basis", "json", "npz", "quiet", "help"}
# Batch options that a job receives but that do not change its result, so
# are not part of its identity in the results file.
_NOT_IN_KEY = {"threads"}


def _copy_options(source: argparse.ArgumentParser, target: argparse.ArgumentParser, title: str) -> list[str]:
    """Give ``target`` every option of ``source`` it does not define itself.

    The action objects are shared, as argparse's own ``parents`` mechanism
    does; mutually exclusive pairs stay exclusive. Returns the copied dests.
    """
    own = set(target._option_string_actions)
    group = target.add_argument_group(title)
    exclusive = {}
    for mx in source._mutually_exclusive_groups:
        for action in mx._group_actions:
            exclusive[action] = mx
    made: dict[Any, Any] = {}
    copied = []
    for action in source._actions:
        if not action.option_strings or action.dest in _NOT_COPIED or own.intersection(action.option_strings):
            continue
        mx = exclusive.get(action)
        if mx is None:
            group._add_action(action)
        else:
            if mx not in made:
                made[mx] = group.add_mutually_exclusive_group(required=mx.required)
            made[mx]._add_action(action)
        copied.append(action.dest)
    return copied


def add_batch_parser(sub: Any, energy: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """Register ``hfcore batch`` on the subcommand set ``sub``.

    Parameters
    ----------
    sub : argparse subparsers action
    energy : ArgumentParser
        The ``energy`` parser whose options every job takes.
    """
    from ..batch.cluster import DASK_RETRIES

    batch = sub.add_parser(
        "batch",
        help=command_help("batch"),
        description="Run every (geometry, basis) pair and append one JSON line per finished job to a "
        "results file. Running the same command again skips the finished jobs.",
        epilog="GEOMETRY is an XYZ file, a directory (its *.xyz files) or @LIST (a file with one path "
        "per line, optionally followed by charge=N and multiplicity=M). Exit codes: 0 every job ok, 10 some jobs failed, "
        "11 the results file cannot be used, 12 no Dask scheduler answered, 2 bad input, "
        "130 interrupted, 143 terminated.",
        conflict_handler="error",
    )
    batch.add_argument("geometry", nargs="*", metavar="GEOMETRY", help="XYZ file, directory or @LIST file")
    batch.add_argument("--basis", default="sto-3g", metavar="NAMES",
                       help="comma-separated basis names, each run on every geometry (default sto-3g)")
    batch.add_argument("--results", required=True, metavar="FILE.jsonl", help="the results file (JSON Lines)")
    run = batch.add_argument_group("running")
    run.add_argument("--workers", type=positive_int, metavar="N",
                     help="local worker processes (default: the usable cores)")
    run.add_argument("--threads", type=positive_int, default=1, metavar="N",
                     help="threads per job: BLAS, and the integral passes of 'energy --threads' (default 1)")
    run.add_argument("--scheduler", metavar="ADDRESS",
                     help=f"send the jobs to this Dask scheduler instead (e.g. tcp://host:8786); "
                     f"tasks that fail are retried {DASK_RETRIES} times")
    run.add_argument("--scheduler-timeout", type=positive_float, default=10.0, metavar="S",
                     help="seconds to wait for the scheduler to answer (default 10)")
    run.add_argument("--retry-failed", action="store_true", help="rerun jobs whose last line says failed")
    run.add_argument("--quiet", action="store_true", help="no progress lines on stderr")
    look = batch.add_argument_group("looking at a results file")
    look.add_argument("--summary", action="store_true",
                      help="print the energies in FILE.jsonl by geometry and basis instead of running jobs")
    look.add_argument("--plot", metavar="PNG", help="with --summary: draw energy against geometry for each basis")
    copied = _copy_options(energy, batch, "options of every job (those of 'hfcore energy')")
    job_dests = [d for d in copied if d != "charge"]
    # An 'energy' option that a batch option of the same name shadows (e.g.
    # --threads) gets the batch value where the meaning is shared; any other
    # shadowed one keeps its 'energy' default.
    shadowed = {a.dest for a in energy._actions if a.option_strings and a.dest not in copied}
    batch.set_defaults(handler=run_batch_command, batch_job_dests=job_dests,
                       batch_extra_dests=sorted(_NOT_IN_KEY & shadowed))
    return batch


# ----------------------------------------------------------------------------
# progress
# ----------------------------------------------------------------------------


class Progress:
    """Progress of a batch on stderr: a line per finished job, or one rewritten line on a terminal."""

    def __init__(self, stream: TextIO, quiet: bool) -> None:
        self.stream = stream
        self.quiet = quiet
        self.tty = bool(getattr(stream, "isatty", lambda: False)())
        self.total = 0
        self.workers = 1
        self.done = 0
        self.failed = 0
        self.started = time.perf_counter()
        self._open_line = False

    def say(self, text: str) -> None:
        """A message that is shown even with --quiet."""
        self._end_line()
        print(f"hfcore: {text}", file=self.stream, flush=True)

    def start(self, total: int, workers: int) -> None:
        self.total, self.workers, self.started = total, workers, time.perf_counter()

    def _end_line(self) -> None:
        if self._open_line:
            print(file=self.stream, flush=True)
            self._open_line = False

    def record(self, record: dict[str, Any]) -> None:
        """Count a finished job and show the state of the batch."""
        self.done += 1
        ok = record["status"] == "ok"
        self.failed += not ok
        if self.quiet:
            return
        elapsed = time.perf_counter() - self.started
        remaining = self.total - self.done
        running = min(self.workers, remaining)
        left = f"about {_duration(elapsed / self.done * remaining)} left" if remaining else "finished"
        state = f"{self.done}/{self.total} done, {self.failed} failed, {running} running, {left}"
        job = record["job"]
        what = f"{job['geometry']} {job['basis']}: " + (
            f"{record['energy']['total']:.10f} Eh" if ok else f"failed (exit {record['error']['exit_code']})"
        )
        if self.tty:
            print(f"\r\033[Khfcore: batch {state} · {what}", end="", file=self.stream, flush=True)
            self._open_line = True
            if not remaining:
                self._end_line()
        else:
            print(f"hfcore: batch {state} · {what}", file=self.stream, flush=True)

    def close(self) -> None:
        self._end_line()


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


# ----------------------------------------------------------------------------
# signals
# ----------------------------------------------------------------------------


@contextmanager
def _stop_on_signals() -> Iterator[Callable[[], int | None]]:
    """While inside, SIGINT and SIGTERM only record that a stop was asked for.

    Yields a function returning the signal number received, or ``None``.
    The running jobs are abandoned by the pool that polls it; the lines on
    disk are whole because the writer is never interrupted mid-line.
    """
    received: list[int] = []
    if threading.current_thread() is not threading.main_thread():
        # Only the main thread may handle signals; a caller running a batch
        # in another thread keeps its own handling.
        yield lambda: None
        return

    def handler(signum: int, frame: Any) -> None:
        received.append(signum)

    previous = {s: signal.signal(s, handler) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield lambda: received[0] if received else None
    finally:
        for s, h in previous.items():
            signal.signal(s, h)


# ----------------------------------------------------------------------------
# the command
# ----------------------------------------------------------------------------


def _job_request(args: argparse.Namespace) -> Any:
    """The request every job starts from: the copied ``energy`` options (geometry, basis and charge per job)."""
    # The batch's own --basis (a list), --charge (the default of the list
    # entries) and --threads (per job, no part of its identity) are set per job.
    return run_request(args, geometry="", basis="sto-3g", charge=0, threads=None)


def _size_estimator() -> Callable[[Any], int]:
    """A job's number of basis functions (0 where the geometry or basis fails: the job will say why)."""
    from ..errors import HfcoreError
    from ..runs import basis_function_count

    def size_of(job: Any) -> int:
        try:
            return basis_function_count(job.request())
        except (HfcoreError, MemoryError):
            return 0

    return size_of


def _memory_estimator() -> Callable[[Any, Any], int]:
    """A job's predicted peak memory under the batch's budget (0 where the geometry or basis fails: the job will
    say why); a job that cannot fit even alone raises its ResourceError, which becomes its failed line."""
    from ..errors import HfcoreError, ResourceError
    from ..runs import planned_memory

    def memory_of(job: Any, budget: Any) -> int:
        try:
            return planned_memory(job.request(), budget)
        except ResourceError:
            raise
        except (HfcoreError, MemoryError):
            return 0

    return memory_of


def run_batch_command(args: argparse.Namespace, console: Any) -> int:
    """``hfcore batch``: run the jobs (or, with ``--summary``, look at a results file)."""
    if args.summary:
        if args.geometry:
            raise InputError("batch --summary reads only the results file; give no GEOMETRY")
        return _summary(args, console)
    if args.plot:
        raise InputError("batch: --plot goes with --summary")
    from .._parallel import split_cores, usable_cores
    from ..batch import expand_geometries, make_jobs, parse_basis_list, run_batch
    from ..batch.pool import start_worker_server

    if not args.scheduler:
        start_worker_server()

    bases = parse_basis_list(args.basis)
    entries = expand_geometries(args.geometry)
    jobs, duplicates = make_jobs(entries, bases, args.charge, _job_request(args))
    progress = Progress(console.stderr, args.quiet)
    if duplicates:
        progress.say(f"batch: {duplicates} job(s) named twice, run once")
    extra = {d: getattr(args, d) for d in args.batch_extra_dests}
    workers = 0 if args.scheduler else min(args.workers or usable_cores(), len(jobs))
    # What run_batch will start: within the usable cores (it says so in outcome.notes).
    shown = split_cores(workers, args.threads)[0] if workers else 0

    def on_start(outcome: Any, n_todo: int) -> None:
        if outcome.truncated_bytes:
            progress.say(f"batch: cut off a partial last line ({outcome.truncated_bytes} bytes) left in "
                         f"{args.results} by an interrupted run; that job runs again")
        if outcome.skipped_ok or outcome.skipped_failed:
            hint = " (--retry-failed reruns them)" if outcome.skipped_failed else ""
            progress.say(f"batch: skipping {outcome.skipped_ok + outcome.skipped_failed} job(s) already in "
                         f"{args.results}: {outcome.skipped_ok} ok, {outcome.skipped_failed} failed{hint}")
        for note in outcome.notes:
            progress.say(f"batch: {note}")
        if outcome.memory_budget is not None and n_todo and not args.quiet:
            progress.say(f"batch: the local workers share a memory budget of {outcome.memory_budget.describe()}")
        where = f"on the Dask scheduler {args.scheduler}" if args.scheduler else \
            f"on {min(shown, n_todo) or 1} local worker(s)"
        if n_todo and not args.quiet:
            progress.say(f"batch: running {n_todo} job(s) {where}")
        progress.start(n_todo, shown or max(1, n_todo))

    with _stop_on_signals() as received:
        outcome = run_batch(
            jobs, args.results, retry_failed=args.retry_failed, workers=workers or None, threads=args.threads,
            scheduler=args.scheduler, scheduler_timeout=args.scheduler_timeout, extra=extra,
            should_stop=lambda: received() is not None, on_start=on_start, on_record=progress.record,
            size_of=_size_estimator(), memory_of=_memory_estimator(),
        )
        signum = received()
    progress.close()
    from . import report_batch as report

    console.report(report.format_batch_run(outcome, args.results))
    if signum is not None:
        progress.say(f"batch: stopped by {signal.Signals(signum).name}; {len(outcome.missing)} job(s) not finished, "
                     "run the same command again to finish them")
        return EXIT_INTERRUPTED if signum == signal.SIGINT else EXIT_TERMINATED
    return EXIT_JOBS_FAILED if outcome.failed else 0


def _summary(args: argparse.Namespace, console: Any) -> int:
    from ..batch.summary import energy_table
    from ..export import check_output_path
    from . import report_batch as report

    if args.plot:
        check_output_path(args.plot)
    table = energy_table(args.results)
    if args.plot:
        from ..plots import plot_batch_energies

        plot_batch_energies(table, args.plot)
    console.report(report.format_batch_energies(table))
    if args.plot:
        console.report(f"\n  wrote {args.plot}")
    return 0


__all__ = ["EXIT_JOBS_FAILED", "EXIT_TERMINATED", "EXIT_INTERRUPTED", "add_batch_parser", "run_batch_command",
           "Progress"]
