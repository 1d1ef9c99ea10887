"""Reading a results file back as a table of energies by geometry and basis.

For a scan, the plot needs a coordinate per geometry. It is taken from the
XYZ comment lines when every geometry's comment holds a number (the first
one standing alone) and the
numbers differ (e.g. ``r = 0.74``, ``angle 104.5``); otherwise the
geometries are numbered in the order the batch was given them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from .results import iter_job_records

# A number standing on its own, so the 2 of "H2" is not taken for a coordinate.
_NUMBER = re.compile(r"(?<![\w.])[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?(?![\w.])")


@dataclass
class EnergyTable:
    """Energies from a results file.

    Attributes
    ----------
    path : str
        The results file.
    geometries : list of str
        Geometry paths in the order the batch was given them.
    bases : list of str
        Basis names in the order the batch was given them.
    energies : dict
        ``(geometry, basis) -> total energy`` in hartree for successful jobs.
    failures : dict
        ``(geometry, basis) -> error message`` for failed jobs.
    comments : dict
        ``geometry -> XYZ comment line`` (from successful jobs).
    coordinate : list of float
        One value per geometry: the scan coordinate (see the module notes).
    coordinate_label : str
        What ``coordinate`` is.
    """

    path: str
    geometries: list[str] = field(default_factory=list)
    bases: list[str] = field(default_factory=list)
    energies: dict[tuple[str, str], float] = field(default_factory=dict)
    failures: dict[tuple[str, str], str] = field(default_factory=dict)
    comments: dict[str, str] = field(default_factory=dict)
    coordinate: list[float] = field(default_factory=list)
    coordinate_label: str = "geometry (order given to the batch)"


def _scan_coordinate(table: EnergyTable) -> None:
    values, labels = [], set()
    for geometry in table.geometries:
        match = _NUMBER.search(table.comments.get(geometry, ""))
        if match is None:
            break
        values.append(float(match.group()))
        labels.add(table.comments[geometry][: match.start()].strip(" =:"))
    if len(values) == len(table.geometries) and len(set(values)) == len(values) > 1:
        table.coordinate = values
        label = labels.pop() if len(labels) == 1 else ""
        table.coordinate_label = f"{label} (from the XYZ comment lines)" if label else \
            "scan coordinate (from the XYZ comment lines)"
    else:
        table.coordinate = [float(k) for k in range(1, len(table.geometries) + 1)]


def energy_table(path: str) -> EnergyTable:
    """The energies in a results file, by geometry and basis.

    Parameters
    ----------
    path : str
        A batch results file; the latest line of each job counts.

    Returns
    -------
    EnergyTable

    Raises
    ------
    ResultsFileError
        If the file is missing, unreadable or from another version.
    """
    table = EnergyTable(path)
    records = list(iter_job_records(path))
    # The order of the batch as given (jobs finish in any order); older
    # lines without it keep their file order.
    records.sort(key=lambda r: tuple(r["job"].get("order", (0, 0))))
    for record in records:
        job = record["job"]
        geometry, basis = job["geometry"], job["basis"]
        if geometry not in table.geometries:
            table.geometries.append(geometry)
        if basis not in table.bases:
            table.bases.append(basis)
        if record["status"] == "ok":
            table.energies[(geometry, basis)] = float(record["energy"]["total"])
            table.comments.setdefault(geometry, record["molecule"]["comment"])
        else:
            table.failures[(geometry, basis)] = record["error"]["message"]
    _scan_coordinate(table)
    return table


__all__ = ["EnergyTable", "energy_table"]
