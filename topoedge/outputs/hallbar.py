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

__all__ = ["HALLBAR_FILES", "AXIS_UNITS", "hallbar_summary", "write_hallbar"]

#: Files of a Hall-bar results folder.
HALLBAR_FILES = ("summary.json", "hallbar.h5", "hallbar.png")

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
                        "in ohm; R_xy = -1/sigma_xy; r_xy_bulk = -1/C from the bulk Chern sum", **scan}
    return plain_json(summary)


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

    return write_folder(out, {"summary.json": write_json(summary),
                              "hallbar.h5": lambda path: _write_h5(path, scenario, scan, summary["units"]),
                              "hallbar.png": figure}, force=force)
