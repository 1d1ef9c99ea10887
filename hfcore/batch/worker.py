"""One batch job in a worker process: exactly the single run :func:`hfcore.runs.run_single` of its request.

The worker sends back the whole results line (the run's JSON record, as
``hfcore energy --json`` writes it, for a success; the one-line message and
exit code of the single run for a failure); only the parent process writes the results file, so a worker
that dies or is killed never leaves half a line or a duplicate behind.
"""

from __future__ import annotations

import contextlib
import os
import socket
import time
from collections.abc import Mapping
from typing import Any

from ..errors import HfcoreError, ResourceError


def _one_line(text: str) -> str:
    return " ".join(text.split())


def _blas_limit(threads: int | None) -> contextlib.AbstractContextManager:
    """Limit BLAS/OpenMP threads in an already running process (a Dask or forked worker), if threadpoolctl is there."""
    if threads is None:
        return contextlib.nullcontext()
    from .._parallel import _controller

    controller = _controller()  # built once per process
    if controller is None:
        return contextlib.nullcontext()
    return controller.limit(limits=threads)


def _error(exc: BaseException) -> dict[str, Any]:
    """The ``error`` block of a failed line."""
    if isinstance(exc, HfcoreError):
        return {"message": _one_line(str(exc)), "exit_code": exc.exit_code, "kind": type(exc).__name__}
    if isinstance(exc, MemoryError):
        return {"message": "not enough memory for this run", "exit_code": ResourceError.exit_code,
                "kind": "MemoryError"}
    # A bug must not stop the other jobs; the line says what happened.
    return {"message": _one_line(f"internal error: {type(exc).__name__}: {exc}"), "exit_code": 1,
            "kind": type(exc).__name__}


def failed_record(job: Mapping[str, Any], exc: BaseException) -> dict[str, Any]:
    """The failed line of a job that never started (e.g. it cannot fit the memory budget even alone)."""
    return {"job": dict(job), "status": "failed", "error": _error(exc),
            "batch": {"wall_seconds": 0.0, "cpu_seconds": 0.0, "host": socket.gethostname(), "pid": os.getpid()}}


def _dask_worker_memory() -> float | None:
    """The job's budget on a Dask worker, in MiB: half of the worker's own memory limit (None without one)."""
    from .._memory import MEMORY_FRACTION, budget_for

    try:
        from distributed import get_worker

        limit = get_worker().memory_limit
    except Exception:  # not on a worker after all
        return None
    if not limit:
        return None
    return min(MEMORY_FRACTION * float(limit), budget_for(None).bytes) / 2**20


def run_job(payload: Mapping[str, Any]) -> dict[str, Any]:
    """Run one job's request and return its results line.

    Parameters
    ----------
    payload : mapping
        ``job``: the job record (:meth:`Job.record`); ``extra``: further
        request fields that are not part of the job's identity (e.g.
        ``threads``); ``blas_threads``: a BLAS thread limit to apply here,
        or ``None``; ``on_dask``: true on a Dask worker, whose own memory
        limit then sets the job's budget (half of it, as half of the
        machine's headroom for a single run) unless the job gives
        ``memory_mib``; ``reserve_bytes``: the share of a local batch's
        budget reserved for it (recorded in the line).

    Returns
    -------
    dict
        ``job``, ``status`` (``"ok"`` or ``"failed"``), then the
        ``energy --json`` record (success) or ``error`` with ``message``,
        ``exit_code`` and ``kind`` (failure), and ``batch`` with the job's
        ``wall_seconds``, ``cpu_seconds`` (this process's CPU time; less
        than the wall time on a busy machine), ``host``, ``pid``,
        ``start_epoch_seconds`` and ``end_epoch_seconds`` (Unix time) and
        ``reserved_bytes`` (None outside a local batch's budget). Never raises for a job
        that fails: the failure is the record.
    """
    from ..runs import RunRequest, run_single

    job = dict(payload["job"])
    started, cpu_started, epoch = time.perf_counter(), time.process_time(), time.time()
    extra = dict(payload.get("extra", {}))
    outcome: dict[str, Any]
    try:
        if payload.get("on_dask") and job["options"].get("memory_mib") is None and "memory_mib" not in extra:
            extra["memory_mib"] = _dask_worker_memory()
        fields = {**job["options"], **extra, "basis": job["basis"], "charge": job["charge"]}
        request = RunRequest.from_dict(job["geometry"], fields)
        with _blas_limit(payload.get("blas_threads")):
            outcome = {"status": "ok", **run_single(request).record}
    except Exception as exc:  # HfcoreError, MemoryError or a bug: the line says which
        outcome = {"status": "failed", "error": _error(exc)}
    wall, cpu = time.perf_counter() - started, time.process_time() - cpu_started
    return {"job": job, **outcome,
            "batch": {"wall_seconds": wall, "cpu_seconds": cpu, "host": socket.gethostname(), "pid": os.getpid(),
                      "start_epoch_seconds": epoch, "end_epoch_seconds": time.time(),
                      "reserved_bytes": payload.get("reserve_bytes")}}


def lost_record(payload: Mapping[str, Any], message: str) -> dict[str, Any]:
    """A failed line for a job whose worker never answered."""
    return {"job": dict(payload["job"]), "status": "failed",
            "error": {"message": _one_line(message), "exit_code": 1, "kind": "WorkerLost"},
            "batch": {"wall_seconds": None, "cpu_seconds": None, "host": None, "pid": None}}

__all__ = ["run_job", "lost_record", "failed_record"]
