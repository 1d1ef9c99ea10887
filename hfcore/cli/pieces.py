"""The batch pieces of ``interaction`` and ``reaction``: each single run a resumable batch job."""

from __future__ import annotations

import argparse
from typing import Any

from .arguments import positive_int, run_request
from .console import Console
from .paths import output_paths


def add_batch_arguments(parser: argparse.ArgumentParser, what: str) -> None:
    """``--results`` and ``--workers`` of a study command."""
    pieces = parser.add_argument_group("running the pieces as a batch (resumable; see 'hfcore batch')")
    pieces.add_argument("--results", metavar="FILE.jsonl",
                        help=f"run {what}, recorded in FILE.jsonl; running again reuses the jobs already there")
    pieces.add_argument("--workers", type=positive_int, metavar="N",
                        help="local worker processes for --results (default: the usable cores)")


def job_request(args: argparse.Namespace, **fields: Any) -> Any:
    """The request template of a study's batch jobs: the command's SCF options, no analysis extras."""
    return run_request(args, basis="sto-3g", mp2=False, frozen_core=False, mp2_fit_basis=None, threads=None,
                       **fields)


def run_jobs(args: argparse.Namespace, console: Console, jobs: list) -> dict[str, tuple[float, float]]:
    """Run batch jobs into ``--results``: (energy / Eh, wall seconds) by job key; the first failure is raised."""
    from ..batch import run_batch, usable_cores
    from ..errors import HfcoreError

    path = output_paths(args, "results")["results"]
    say = console.study_progress()

    def on_record(record: dict) -> None:
        if say is not None:
            job = record["job"]
            state = f"E = {record['energy']['total']:.10f} Eh" if record["status"] == "ok" else "failed"
            label = " ".join(f"--{k} {job['options'][k]}" for k in ("atoms", "ghost", "multiplicity", "method") if job["options"].get(k))
            say(f"batch job {job['geometry']} {label + ' ' if label else ''}in {job['basis']}: {state}")

    workers = min(args.workers or usable_cores(), len(jobs))
    outcome = run_batch(jobs, path, workers=workers, threads=args.threads or 1, on_record=on_record)
    out = {}
    for job in jobs:
        record = outcome.records.get(job.key)
        if record is None or record["status"] != "ok":
            error = (record or {}).get("error", {"message": "the job did not finish", "exit_code": 1})
            failure = HfcoreError(f"{job.geometry} in {job.basis}: {error['message']} (batch results in {path})")
            failure.exit_code = int(error["exit_code"])
            raise failure
        out[job.key] = (record["energy"]["total"], record["batch"]["wall_seconds"] or 0.0)
    return out


__all__ = ["add_batch_arguments", "job_request", "run_jobs"]
