"""Human-readable tables of a batch: the run's summary and the energies of a results file.

Beside :mod:`hfcore.cli.report`, as there every function returns text and
computes no physics.
"""

from __future__ import annotations

from typing import Any

from .report import pairs, heading


def format_batch_run(outcome: Any, results_path: str) -> str:
    """The summary at the end of ``hfcore batch``.

    Parameters
    ----------
    outcome : BatchOutcome
        From :func:`hfcore.batch.run_batch`.
    results_path : str
        The results file, named in the summary.
    """
    ran = outcome.ran
    ok = sum(r["status"] == "ok" for r in ran)
    rows = [
        ("jobs", f"{len(outcome.jobs)}"),
        ("run now", f"{len(ran)}: {ok} ok, {len(ran) - ok} failed"),
        ("skipped", f"{outcome.skipped_ok} already ok, {outcome.skipped_failed} already failed"),
    ]
    if outcome.missing:
        rows.append(("not finished", f"{len(outcome.missing)} (stopped; run the same command again)"))
    rows.append(("wall time", f"{outcome.wall_seconds:.2f} s"))
    times = [(r["batch"]["wall_seconds"], r["job"]) for r in ran if r["batch"].get("wall_seconds") is not None]
    if times:
        mean = sum(t for t, _ in times) / len(times)
        longest, job = max(times, key=lambda item: item[0])
        rows.append(("per job", f"mean {mean:.2f} s, longest {longest:.2f} s ({job['geometry']} {job['basis']})"))
    rows.append(("results", results_path))
    lines = [heading("Batch"), pairs(rows)]
    failed = outcome.failed
    if failed:
        groups: dict[tuple[int, str], list[str]] = {}
        for record in failed:
            error = record["error"]
            groups.setdefault((error["exit_code"], error["message"]), []).append(record["job"]["basis"])
        lines.append(heading(f"Failed jobs: {len(failed)}, by reason"))
        for (code, message), bases in sorted(groups.items(), key=lambda item: -len(item[1])):
            lines.append(f"  {len(bases):>4} × exit {code:<3} {message}  [{', '.join(bases)}]")
    return "\n".join(lines)


def format_batch_energies(table: Any) -> str:
    """Energies from a results file as a table: one row per geometry, one column per basis.

    Parameters
    ----------
    table : EnergyTable
        From :func:`hfcore.batch.energy_table`.
    """
    if not table.geometries:
        return heading(f"Energies / Eh in {table.path}") + "\n  no finished jobs yet"
    width = max(len("geometry"), *(len(g) for g in table.geometries))
    column = max(16, *(len(b) + 2 for b in table.bases))
    lines = [heading(f"Energies / Eh in {table.path}"),
             f"  {'geometry':<{width}}" + "".join(f"{b:>{column}}" for b in table.bases)]
    for geometry in table.geometries:
        cells = []
        for basis in table.bases:
            energy = table.energies.get((geometry, basis))
            if energy is not None:
                cells.append(f"{energy:>{column}.10f}")
            else:
                cells.append(f"{'failed' if (geometry, basis) in table.failures else '—':>{column}}")
        lines.append(f"  {geometry:<{width}}" + "".join(cells))
    if table.failures:
        lines.append(f"\n  {len(table.failures)} failed job(s); their lines in the results file say why")
    return "\n".join(lines)


__all__ = ["format_batch_run", "format_batch_energies"]
