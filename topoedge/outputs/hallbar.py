"""Files of ``topoedge hallbar``: summary.json, hallbar.h5 and hallbar.png, written atomically (results stage)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..scenario.units import VON_KLITZING
from ..util.atomic import write_folder, write_json
from ..util.jsonio import plain_json

if TYPE_CHECKING:
    from ..scenario import Scenario

__all__ = ["HALLBAR_FILES", "AXIS_UNITS", "hallbar_summary", "hallbar_rows", "format_hallbar_table",
           "write_hallbar"]

#: Files of a Hall-bar results folder.
HALLBAR_FILES = ("summary.json", "hallbar.h5", "hallbar.csv", "hallbar.png")

#: Columns of hallbar.csv after the scan axis (present ones only), with their units.
CSV_COLUMNS = {
    "b_lattice_tesla": "T", "flux": "phi0 per plaquette", "filling": "n h/(e B)",
    "filling_bulk": "bulk gap r/|p|", "chern": "", "chern_up": "", "chern_down": "",
    "r_xy": "h/e^2", "r_xy_sem": "h/e^2", "r_xx": "h/e^2", "r_xx_sem": "h/e^2",
    "r_xy_ohm": "ohm", "r_xx_ohm": "ohm", "r_xy_bulk": "h/e^2",
    "r_xy_up": "h/e^2", "r_xx_up": "h/e^2", "r_xy_down": "h/e^2", "r_xx_down": "h/e^2",
}

#: What the scan axis and the fixed quantities mean, by axis.
AXIS_UNITS = {
    "energy": "E_F in t",
    "b_tesla": ("B in tesla along +z for B > 0 (b_lattice_tesla: the field of the lattice flux, "
                "within field.tolerance); E_F fixed (fermi_t in t, fermi_mev above the band bottom)"),
}


def hallbar_summary(scenario: Scenario, scan: dict, axis: str) -> dict:
    """The JSON-able summary of a scan (adds ``r_xy_ohm`` and ``r_xx_ohm`` to ``scan``; NaN as null).

    Parameters
    ----------
    scenario : Scenario
        As written (stored under ``config``).
    scan : dict
        :func:`topoedge.workflows.hallbar_scan` or
        :func:`topoedge.workflows.hallbar_field_scan`; resistances in h/e^2.
    axis : {"energy", "b_tesla"}
        The scan axis.
    """
    for key in ("r_xy", "r_xx"):  # the same resistances in ohm (R_K = h/e^2, CODATA)
        scan[f"{key}_ohm"] = [None if v is None or v != v else v * VON_KLITZING for v in scan[key]]
    summary = {"title": scenario.title, "source": scenario.source, "config": scenario.to_dict(),
               "units": f"{AXIS_UNITS[axis]}; r_xy, r_xx in h/e^2 (per spin: r_xy_up, ...), r_xy_ohm, r_xx_ohm "
                        "in ohm; R_xy = -1/sigma_xy; r_xy_bulk = -1/C from the bulk Chern sum; filling_bulk = r/|p| "
                        "for E_F in the bulk gap above r bands at flux p/q", **scan}
    return plain_json(summary)


def hallbar_rows(scan: dict, axis: str) -> list[dict]:
    """One dict per scan point: the axis value, the columns of :data:`CSV_COLUMNS` and ``status``.

    ``status`` is ``ok`` or the reason the bar could not be solved (e.g. no
    open channel in some lead: E_F below the lowest Landau level there).
    """
    errors = {float(x): message for x, message in scan.get("errors", [])}
    rows = []
    for i, x in enumerate(scan[axis]):
        row = {axis: x}
        for key in CSV_COLUMNS:
            value = scan.get(key)
            if isinstance(value, list):
                v = value[i]
                row[key] = None if v is None or (isinstance(v, float) and v != v) else v
        row["status"] = "ok" if float(x) not in errors else errors[float(x)]
        rows.append(row)
    return rows


def _csv_text(rows: list[dict], axis: str) -> str:
    import csv
    import io

    unit = {"energy": "t", "b_tesla": "T"}[axis]
    columns = [axis] + [c for c in CSV_COLUMNS if rows and c in rows[0]] + ["status"]
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow([f"{c} ({unit})" if c == axis else (f"{c} ({CSV_COLUMNS[c]})" if CSV_COLUMNS.get(c) else c)
                     for c in columns])
    for row in rows:
        writer.writerow([_cell(row.get(c)) for c in columns])
    return buffer.getvalue()


def _small(value) -> str:
    """R_xx for the table: numerical zeros (below 1e-12 h/e^2) as 0."""
    if value is None:
        return format("-", ">12")
    return format(0.0, ">12.1f") if abs(value) < 1e-12 else format(value, ">12.2e")


def _cell(value) -> str:
    return "" if value is None else (f"{value:.12g}" if isinstance(value, float) else str(value))


def format_hallbar_table(rows: list[dict], axis: str) -> str:
    """The scan as a text table: axis, flux (field scans), filling, C, R_xy, R_xx, R_xy in kOhm, status."""
    head = "E_F (t)" if axis == "energy" else "B (T)"
    field = axis == "b_tesla"
    lines = [f"  {head:>9}" + ("  flux      " if field else "") + "  nu     C   R_xy (h/e^2)  R_xx (h/e^2)"
             "  R_xy (kOhm)  bulk -1/C"]

    def num(v, fmt):
        width = int(fmt[1:].split(".")[0].rstrip("d"))
        return format("-", f">{width}") if v is None else format(v, fmt)

    for row in rows:
        nu = row.get("filling_bulk")
        if field and row.get("filling") is not None:
            nu = row["filling"]
        note = "" if row["status"] == "ok" else ("  no open channel in every lead" if "channel" in row["status"]
                                                  else f"  {row['status'][:60]}")
        lines.append(
            f"  {row[axis]:>9.4f}" + (f"  {row.get('flux', ''):<8}" if field else "")
            + f"  {num(nu, '>4.2f')}  {num(row.get('chern'), '>4d')}"
            + f"  {num(row.get('r_xy'), '>12.5f')}  {_small(row.get('r_xx'))}"
            + f"  {num(None if row.get('r_xy_ohm') is None else row['r_xy_ohm'] / 1e3, '>11.4f')}"
            + f"  {num(row.get('r_xy_bulk'), '>9.5f')}{note}")
    return "\n".join(lines)


def _write_h5(path: Path, scenario: Scenario, scan: dict, units: str) -> None:
    import h5py

    with h5py.File(path, "w") as f:
        for key, value in scan.items():
            if key == "errors" or not isinstance(value, list):
                continue
            if key == "flux":
                f.create_dataset(key, data=np.array(value, dtype="S"))
            else:
                f.create_dataset(key, data=np.array([np.nan if v is None else v for v in value], dtype=float))
        for key in ("fermi_t", "fermi_mev"):
            if key in scan:
                f.attrs[key] = scan[key]
        f.attrs["scenario_json"] = json.dumps(scenario.to_dict(), sort_keys=True)
        f.attrs["units"] = units


def write_hallbar(out: Path, scenario: Scenario, scan: dict, summary: dict, *, axis: str, title: str,
                  force: bool = False) -> Path:
    """Write the results folder of a Hall-bar scan atomically (see :data:`HALLBAR_FILES`).

    ``scan`` keeps NaN where a bar could not be solved (the HDF5 file and the
    figure show gaps there); ``summary`` is :func:`hallbar_summary` of it.
    """
    import matplotlib.pyplot as plt

    from ..plotting import hallbar_figure

    def figure(path: Path) -> None:
        fig = hallbar_figure(scan, axis=axis, title=title)
        try:
            fig.savefig(path, dpi=150)
        finally:
            plt.close(fig)

    csv_text = _csv_text(hallbar_rows(scan, axis), axis)
    return write_folder(out, {"summary.json": write_json(summary),
                              "hallbar.h5": lambda path: _write_h5(path, scenario, scan, summary["units"]),
                              "hallbar.csv": lambda path: path.write_text(csv_text),
                              "hallbar.png": figure}, force=force)
