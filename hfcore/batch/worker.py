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
    from ..integrals.pool import _controller

    controller = _controller()  # built once per process
    if controller is None:
        return contextlib.nullcontext()
    return controller.limit(limits=threads)


def run_job(payload: Mapping[str, Any]) -> dict[str, Any]:
    """Run one job's request and return its results line.

    Parameters
    ----------
    payload : mapping
        ``job``: the job record (:meth:`Job.record`); ``extra``: further
        request fields that are not part of the job's identity (e.g.
        ``threads``); ``blas_threads``: a BLAS thread limit to apply here,
        or ``None``.

    Returns
    -------
    dict
        ``job``, ``status`` (``"ok"`` or ``"failed"``), then the
        ``energy --json`` record (success) or ``error`` with ``message``,
        ``exit_code`` and ``kind`` (failure), and ``batch`` with the job's
        ``wall_seconds``, ``cpu_seconds`` (this process's CPU time; less
        than the wall time on a busy machine), ``host`` and ``pid``. Never raises for a job
        that fails: the failure is the record.
    """
    from ..runs import RunRequest, run_single

    job = dict(payload["job"])
    started, cpu_started = time.perf_counter(), time.process_time()
    outcome: dict[str, Any]
    try:
        fields = {**job["options"], **payload.get("extra", {}), "basis": job["basis"], "charge": job["charge"]}
        request = RunRequest.from_dict(job["geometry"], fields)
        with _blas_limit(payload.get("blas_threads")):
            outcome = {"status": "ok", **run_single(request).record}
    except HfcoreError as exc:
        outcome = {"status": "failed", "error": {"message": _one_line(str(exc)), "exit_code": exc.exit_code,
                                                 "kind": type(exc).__name__}}
    except MemoryError:
        outcome = {"status": "failed", "error": {"message": "not enough memory for this run",
                                                 "exit_code": ResourceError.exit_code, "kind": "MemoryError"}}
    except Exception as exc:  # a bug must not stop the other jobs; the line says what happened
        outcome = {"status": "failed", "error": {"message": _one_line(f"internal error: {type(exc).__name__}: {exc}"),
                                                 "exit_code": 1, "kind": type(exc).__name__}}
    wall, cpu = time.perf_counter() - started, time.process_time() - cpu_started
    return {"job": job, **outcome,
            "batch": {"wall_seconds": wall, "cpu_seconds": cpu, "host": socket.gethostname(), "pid": os.getpid()}}


def lost_record(payload: Mapping[str, Any], message: str) -> dict[str, Any]:
    """A failed line for a job whose worker never answered."""
    return {"job": dict(payload["job"]), "status": "failed",
            "error": {"message": _one_line(message), "exit_code": 1, "kind": "WorkerLost"},
            "batch": {"wall_seconds": None, "cpu_seconds": None, "host": None, "pid": None}}

__all__ = ["run_job", "lost_record"]
