"""Many calculations at once: job lists, the results file, resume, a local pool and Dask.

No physics lives here: every job is exactly one single run
(:func:`hfcore.runs.run_single`) of its :class:`~hfcore.runs.RunRequest`,
the record ``hfcore energy --json -`` prints. In Python::

    from hfcore.batch import expand_geometries, make_jobs, run_batch
    jobs, _ = make_jobs(expand_geometries(["scan/"]), ["sto-3g", "6-31g"], 0, {"energy_tol": 1e-9})
    outcome = run_batch(jobs, "scan.jsonl", workers=2)

``outcome.records`` holds the results line of every job by job key; the
file format is described in :mod:`hfcore.batch.results`.
"""

from __future__ import annotations

from .execute import BatchOutcome, run_batch
from .pool import usable_cores
from .worker import run_job
from .jobs import (
    GeometryEntry,
    Job,
    expand_geometries,
    job_key,
    make_jobs,
    parse_basis_list,
    read_list_file,
    request_key,
)
from .results import RESULTS_FORMAT, ResultsWriter, iter_job_records, read_results
from .summary import EnergyTable, energy_table

__all__ = [
    "BatchOutcome",
    "run_batch",
    "run_job",
    "usable_cores",
    "GeometryEntry",
    "Job",
    "expand_geometries",
    "job_key",
    "request_key",
    "make_jobs",
    "parse_basis_list",
    "read_list_file",
    "RESULTS_FORMAT",
    "ResultsWriter",
    "iter_job_records",
    "read_results",
    "EnergyTable",
    "energy_table",
]
