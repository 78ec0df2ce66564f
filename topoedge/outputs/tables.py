"""The table of a sweep: table.csv and table.h5, one row per point."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
import numpy as np
from .. import __version__
from ..util.atomic import write_atomic
from ..workflows.sweep import QUANTITIES, Sweep

__all__ = ["write_table", "run_tables", "RUN_TABLES"]


def _columns(sweep: Sweep) -> list[str]:
    return ["key", *(a.key for a in sweep.axes), "status", "error", *QUANTITIES]


def write_table(sweep: Sweep, rows: list[dict], out: Path) -> None:
    """``table.csv`` and ``table.h5`` (one column per axis and quantity), each written atomically.

    CSV: a header row, empty cells where a quantity is undefined. HDF5: one
    dataset per column (numbers as float64 with NaN where undefined,
    booleans as 1/0/NaN, text as UTF-8 strings), the axes listed in the
    root attribute ``axes`` and the sweep as JSON in ``sweep_json``.
    """
    import h5py

    columns = _columns(sweep)
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(columns)
    for row in rows:
        writer.writerow(["" if row.get(c) is None else row.get(c) for c in columns])
    write_atomic(Path(out) / "table.csv", buffer.getvalue())
    from ..util.atomic import atomic_file

    with atomic_file(Path(out) / "table.h5") as tmp, h5py.File(tmp, "w") as f:
        f.attrs["topoedge_version"] = __version__
        f.attrs["axes"] = json.dumps([a.key for a in sweep.axes])
        f.attrs["sweep_json"] = json.dumps(sweep.to_dict(), default=str)
        f.attrs["units"] = "energies in t; see QUANTITIES in topoedge.workflows.sweep for each column"
        for c in columns:
            values = [row.get(c) for row in rows]
            kind = QUANTITIES.get(c, ("axis",))[0]
            numeric = all(v is None or (isinstance(v, (int, float)) and not isinstance(v, str))
                          for v in values)
            if kind == "str" or c in ("key", "status", "error") or not numeric:
                f.create_dataset(c, data=np.array(["" if v is None else str(v) for v in values],
                                                  dtype=h5py.string_dtype()))
            else:
                f.create_dataset(c, data=np.array([np.nan if v is None else float(v) for v in values]))




#: The CSV tables a run writes beside summary.json (file -> what a row is).
RUN_TABLES = {
    "edge_modes.csv": "one state at E_F: edge, spin, direction, k (1/a), velocity (t a), <y> and spread (a)",
    "bulk_bands.csv": "one bulk band: index, spin, Chern number, energy range (t)",
    "bulk_gaps.csv": "one open bulk gap: bands below, energy range (t), Chern sum (and per spin)",
    "hall_routes.csv": "one route to the Hall conductance: sigma_xy (e^2/h), its deviation, R_xy (ohm)",
}


def _csv(columns: list[str], rows: list[dict], units: dict[str, str] | None = None) -> str:
    """CSV text: a header (each column with its unit in brackets), then one line per row."""
    units = units or {}
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow([f"{c} ({units[c]})" if c in units else c for c in columns])
    for row in rows:
        writer.writerow(["" if row.get(c) is None else (f"{row[c]:.12g}" if isinstance(row[c], float) else row[c])
                         for c in columns])
    return buffer.getvalue()


def run_tables(summary: dict) -> dict[str, str]:
    """The CSV tables of a run (:data:`RUN_TABLES`) from its summary dict (``RunSummary.to_dict()``).

    Tables whose data the run does not have (a self-consistent run in which
    no start converged) are left out.
    """
    from ..scenario.units import VON_KLITZING

    tables = {}
    edges = summary.get("edges")
    if edges:
        rows = []
        for where in ("bottom", "top"):
            for i, mode in enumerate(edges[where]["modes"]):
                rows.append({"edge": where, "order_from_boundary": i + 1, **mode,
                             "direction": "+x" if mode["velocity"] > 0 else "-x"})
        for mode in edges.get("bulk") or []:
            rows.append({"edge": "bulk", **mode, "direction": "+x" if mode["velocity"] > 0 else "-x"})
        base = ["edge", "order_from_boundary", "spin", "direction", "k", "energy", "velocity", "y", "spread", "sz"]
        extra = sorted({k for r in rows for k in r if k not in base and not isinstance(r[k], (dict, list))})
        units = {"k": "1/a", "energy": "t", "velocity": "t a", "y": "a", "spread": "a"}
        tables["edge_modes.csv"] = _csv(base + extra, rows, units)
    bulk = summary.get("bulk")
    if bulk and bulk.get("bands") is not None:
        columns = ["index", "spin", "chern", "energy_min", "energy_max", "group"]
        tables["bulk_bands.csv"] = _csv(columns, bulk["bands"], {"energy_min": "t", "energy_max": "t"})
        rows = [{**g, "chern_up": (g.get("spin_chern") or {}).get("up"),
                 "chern_down": (g.get("spin_chern") or {}).get("down")} for g in bulk["gaps"]]
        columns = ["below", "energy_min", "energy_max", "chern", "chern_up", "chern_down", "direct_gap"]
        tables["bulk_gaps.csv"] = _csv(columns, rows, {"energy_min": "t", "energy_max": "t", "direct_gap": "t"})
    hall = summary.get("hall")
    if hall and hall.get("routes"):
        routes = hall["routes"]
        rows = []
        for name in ("chern", "edge", "streda", "hallbar"):
            value = routes.get(name)
            rows.append({"route": name, "sigma_xy (e^2/h)": value,
                         "deviation from an integer": routes.get(f"{name}_deviation"),
                         "r_xy (ohm)": -VON_KLITZING / value if value else None,
                         "why not computed": (hall.get(f"{name}_error") if value is None else None)})
        tables["hall_routes.csv"] = _csv(["route", "sigma_xy (e^2/h)", "deviation from an integer", "r_xy (ohm)",
                                          "why not computed"], rows)
    return tables
