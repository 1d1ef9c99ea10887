"""The Dask back end: the same jobs on an existing Dask cluster (optional extra ``dask``)."""

from __future__ import annotations

import contextlib
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from typing import Any

from ..errors import SchedulerError
from .pool import POLL_S
from .worker import _one_line, lost_record, run_job

#: How often a Dask task that raised is retried by the scheduler.
DASK_RETRIES: int = 2


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
        As for :meth:`LocalPool.results <hfcore.batch.pool.LocalPool.results>`; stopping cancels the outstanding tasks.
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
                time.sleep(POLL_S)
                continue
            for future in batch:
                try:
                    yield future.result()
                except Exception as exc:  # e.g. KilledWorker: the job took its workers down again and again
                    yield lost_record(by_key[future.key], f"the Dask task failed: {type(exc).__name__}: {exc}")
    finally:
        with contextlib.suppress(Exception):
            client.cancel(futures)
        with contextlib.suppress(Exception):
            client.close()

__all__ = ["DASK_RETRIES", "connect_dask", "dask_results"]
