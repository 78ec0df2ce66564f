"""Files and the text report of ``topoedge butterfly``: summary.json, butterfly.h5 and the figures, written atomically."""

from __future__ import annotations

import json
from pathlib import Path
import numpy as np
from .. import __version__
from typing import TYPE_CHECKING

from ..plotting.butterfly import butterfly_figure
from ..workflows.butterfly import K2_POINTS, ButterflyResult

if TYPE_CHECKING:
    from ..scenario import Scenario

__all__ = ["BUTTERFLY_FILES", "butterfly_summary", "format_butterfly", "write_butterfly"]


#: Files of a butterfly results folder.
BUTTERFLY_FILES = ("summary.json", "butterfly.h5", "butterfly.png", "butterfly.pdf")


def _gap_dict(gap) -> dict:
    return {"below": gap.below, "energy_min": gap.energy_min, "energy_max": gap.energy_max,
            "width": gap.energy_max - gap.energy_min, "chern": gap.chern, "spin_chern": gap.spin_chern}


def butterfly_summary(result: ButterflyResult, *, min_gap: float, scenario: Scenario | None = None) -> dict:
    """JSON-able summary: every flux with its gaps wider than ``min_gap``, settings and timing.

    Parameters
    ----------
    result : ButterflyResult
    min_gap : float
        Smallest width (``t``, exclusive) of a listed and drawn gap.
    scenario : topoedge.scenario.Scenario, optional
        Saved as ``config`` (and its file as ``source``).

    Returns
    -------
    dict
        Energies in ``t``; ``fluxes[]`` has ``flux`` ("p/q"), ``p``, ``q``,
        ``value``, ``mirrored``, ``bands`` (number, both spins),
        ``energy_min``/``energy_max`` of the spectrum and ``gaps[]`` (each
        ``below``, ``energy_min``, ``energy_max``, ``width``, ``chern``,
        ``spin_chern`` ({"up", "down"} or null)).
    """
    fluxes, labelled, total = [], [], 0
    for e in result.entries:
        gaps = e.labelled_gaps(min_gap)
        total += len(e.gaps)
        labelled += [g.chern for g in gaps]
        fluxes.append({
            "flux": f"{e.p}/{e.q}", "p": e.p, "q": e.q, "value": float(e.flux), "mirrored": e.mirrored,
            "bands": len(e.bands),
            "energy_min": min(b.energy_min for b in e.bands), "energy_max": max(b.energy_max for b in e.bands),
            "gaps": [_gap_dict(g) for g in gaps],
        })
    return {
        "topoedge_version": __version__,
        "kind": "butterfly",
        "title": scenario.title if scenario is not None else "",
        "source": scenario.source if scenario is not None else None,
        "config": scenario.to_dict() if scenario is not None else None,
        "model": {"lattice": "square", "spin": result.spin, "zeeman_t": result.zeeman,
                  "onsite_t": result.onsite},
        "units": {"energy": "t (nearest-neighbour hopping)", "flux": "flux quanta h/e per plaquette"},
        "q_max": result.q_max,
        "min_gap": min_gap,
        "jobs": result.jobs,
        "grid": ("chern.default_grid: 2q x 2q, at least 12" if result.full_grid
                 else f"2q x {K2_POINTS} (first axis: smallest multiple of 2q >= 12)"),
        "symmetry": "fluxes above 1/2 from 1 - flux: same energies, Chern numbers negated",
        "counts": {
            "fluxes": len(result.entries),
            "computed": sum(not e.mirrored for e in result.entries),
            "mirrored": sum(e.mirrored for e in result.entries),
            "bands": sum(len(e.bands) for e in result.entries),
            "open_gaps": total,
            "labelled_gaps": len(labelled),
        },
        "chern_range": [min(labelled), max(labelled)] if labelled else None,
        "seconds": result.seconds,
        "worker_seconds": sum(e.seconds for e in result.entries),
        "fluxes": fluxes,
    }


def format_butterfly(summary: dict, out: Path | None = None) -> str:
    """Short human-readable summary of a butterfly run."""
    c, m = summary["counts"], summary["model"]
    spin = f"spin 1/2, Zeeman {m['zeeman_t']:g} t" if m["spin"] else "spinless"
    lines = [
        f"topoedge {summary['topoedge_version']} butterfly: square lattice, flux p/q in [0, 1] "
        f"with q <= {summary['q_max']}" + (f" ({summary['source']})" if summary.get("source") else ""),
        f"  model        {spin}, on-site {m['onsite_t']:g} t (energies in units of t)",
        f"  fluxes       {c['fluxes']} ({c['computed']} computed, {c['mirrored']} from 1 - flux), "
        f"{c['bands']} bands; grid {summary['grid']}",
    ]
    span = summary["chern_range"]
    chern = f"; Chern sums {span[0]} .. {span[1]}" if span else ""
    lines.append(f"  gaps         {c['open_gaps']} open, {c['labelled_gaps']} wider than "
                 f"{summary['min_gap']:g} t labelled{chern}")
    lines.append(f"  time         {summary['seconds']:.1f} s on {summary['jobs']} process"
                 f"{'es' if summary['jobs'] > 1 else ''} ({summary['worker_seconds']:.1f} s of computation)")
    if out is not None:
        lines.append(f"  results      {out}/ ({', '.join(BUTTERFLY_FILES)})")
    return "\n".join(lines)


def _write_h5(path: Path, result: ButterflyResult, summary: dict) -> None:
    import h5py

    entries = result.entries
    min_gap = summary["min_gap"]
    bands = [(i, b) for i, e in enumerate(entries) for b in e.bands]
    gaps = [(i, g) for i, e in enumerate(entries) for g in e.gaps]
    with h5py.File(path, "w") as f:
        fl = f.create_group("flux")
        fl.create_dataset("p", data=np.array([e.p for e in entries], dtype=int))
        fl.create_dataset("q", data=np.array([e.q for e in entries], dtype=int))
        fl.create_dataset("value", data=np.array([float(e.flux) for e in entries]))
        fl.create_dataset("mirrored", data=np.array([e.mirrored for e in entries], dtype=bool))
        fl.create_dataset("grid", data=np.array([e.grid for e in entries], dtype=int).reshape(-1, 2))
        fl.create_dataset("seconds", data=np.array([e.seconds for e in entries]))
        bg = f.create_group("bands")
        bg.create_dataset("flux_index", data=np.array([i for i, _ in bands], dtype=int))
        bg.create_dataset("energy_range", data=np.array([[b.energy_min, b.energy_max] for _, b in bands]).reshape(-1, 2))
        bg.create_dataset("spin", data=np.array([{"up": 1, "down": -1}.get(b.spin, 0) for _, b in bands], dtype=int))
        bg.create_dataset("chern", data=np.array([np.nan if b.chern is None else b.chern for _, b in bands], dtype=float))
        gg = f.create_group("gaps")
        gg.create_dataset("flux_index", data=np.array([i for i, _ in gaps], dtype=int))
        gg.create_dataset("below", data=np.array([g.below for _, g in gaps], dtype=int))
        gg.create_dataset("energy_range", data=np.array([[g.energy_min, g.energy_max] for _, g in gaps]).reshape(-1, 2))
        gg.create_dataset("chern", data=np.array([g.chern for _, g in gaps], dtype=int))
        if result.spin:
            gg.create_dataset("spin_chern", data=np.array(
                [[g.spin_chern["up"], g.spin_chern["down"]] for _, g in gaps], dtype=int).reshape(-1, 2))
            gg["spin_chern"].attrs["columns"] = "up, down"
        gg.create_dataset("labelled", data=np.array([g.energy_max - g.energy_min > min_gap for _, g in gaps], dtype=bool))
        f.attrs["topoedge_version"] = __version__
        f.attrs["scenario_json"] = json.dumps(summary.get("config"), sort_keys=True)
        f.attrs["source"] = summary.get("source") or ""
        for key in ("q_max", "min_gap", "jobs", "seconds"):
            f.attrs[key] = summary[key]
        f.attrs["full_grid"] = result.full_grid
        f.attrs["spin"] = result.spin
        f.attrs["zeeman"] = result.zeeman
        f.attrs["onsite"] = result.onsite
        f.attrs["units"] = "energies in t; flux in flux quanta h/e per plaquette"


def write_butterfly(out: Path, result: ButterflyResult, summary: dict, *, force: bool = False) -> Path:
    """Write ``summary.json``, ``butterfly.h5``, ``butterfly.png`` and ``butterfly.pdf`` atomically.

    Through :func:`topoedge.outputs.results.write_folder`: the files go into a hidden
    temporary sibling of ``out``, renamed into place only when all are
    complete.

    Parameters
    ----------
    out : Path
        The results folder.
    result : ButterflyResult
    summary : dict
        From :func:`butterfly_summary` (gives ``min_gap`` and the scenario).
    force : bool
        Replace an existing folder (only once the new one is complete).

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    topoedge.outputs.results.ResultsExistError
        If ``out`` exists and ``force`` is false.
    """
    import matplotlib.pyplot as plt

    from ..util.atomic import write_folder, write_json

    fig = butterfly_figure(result, min_gap=summary["min_gap"])
    try:
        return write_folder(Path(out), {
            "summary.json": write_json(summary),
            "butterfly.h5": lambda path: _write_h5(path, result, summary),
            "butterfly.png": lambda path: fig.savefig(path, dpi=150),
            "butterfly.pdf": lambda path: fig.savefig(path),
        }, force=force)
    finally:
        plt.close(fig)


