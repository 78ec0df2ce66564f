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

__all__ = ["write_table"]


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


