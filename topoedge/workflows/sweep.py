"""Parameter sweeps: many scenarios from one base, run point by point, resumable.

A sweep file (TOML) names a base scenario and axes over configuration key
paths::

    title = "edge width against Zeeman splitting"
    scenario = "../default.toml"       # a path relative to this file, or a [scenario] table
    mode = "grid"                      # every combination (default), or "zip" (axes side by side)

    [[axis]]
    key = "ribbon.edge.width"
    values = [0.0, 4.0, 8.0]           # or linspace = [start, stop, count], or range = [start, stop, step]

    [[axis]]
    key = "spin.zeeman"
    linspace = [0.0, 0.4, 5]

    [plot]
    quantities = ["bottom_pairs", "outermost_spin_bottom"]

Every point is the base scenario with the axis values set (as by ``--set``)
and runs the same pipeline as ``topoedge run`` (self-consistent with
``[interaction]``). A point is identified by a hash of its resolved
scenario (:func:`point_key`); once finished (or failed with a one-line
error) it is written at once, atomically, to ``<out>/points/<key>.json``, so
a sweep that is stopped or killed loses only the points in progress, and
running it again computes only the points without a file. The table
(``table.h5``, ``table.csv``) and the figures are rebuilt from the point
files at the end of every run.

Executors: worker processes on this machine (``local``), a dask.distributed
``LocalCluster`` (``dask``), or an existing dask.distributed scheduler
(``scheduler``: the same file on a cluster). The workers only compute; this
process writes every file.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import os
import time
import tomllib
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .. import __version__
from ..scenario import ConfigError, apply_overrides, convert_key, parse_scenario
from ..scenario.schema import plain
from ..util.atomic import remove_stale, write_atomic
from ..util.progress import as_progress
from ..util.jsonio import plain_json

__all__ = [
    "QUANTITIES", "Axis", "Sweep", "SweepError", "load_sweep", "parse_sweep", "point_key", "run_point",
    "quantities_of", "run_sweep", "gather", "write_table", "sweep_figures",
]


class SweepError(ConfigError):
    """A malformed sweep file; ``str(err)`` is one line."""


#: The summary quantities of every point (column, type, meaning).
QUANTITIES: dict[str, tuple[str, str]] = {
    "chern": ("int", "Chern sum of the bulk bands below E_F"),
    "chern_up": ("int", "spin-up Chern sum below E_F (S_z conserved)"),
    "chern_down": ("int", "spin-down Chern sum below E_F"),
    "fermi_energy": ("float", "E_F, t"),
    "in_gap": ("bool", "E_F lies in a gap of the ribbon (edge counts meaningful)"),
    "bottom_net": ("int", "net chirality of the bottom edge"),
    "top_net": ("int", "net chirality of the top edge"),
    "bottom_pairs": ("int", "counter-propagating pairs on the bottom edge"),
    "top_pairs": ("int", "counter-propagating pairs on the top edge"),
    "bottom_pairs_up": ("int", "spin-up counter-propagating pairs, bottom edge"),
    "bottom_pairs_down": ("int", "spin-down counter-propagating pairs, bottom edge"),
    "top_pairs_up": ("int", "spin-up counter-propagating pairs, top edge"),
    "top_pairs_down": ("int", "spin-down counter-propagating pairs, top edge"),
    "bottom_modes": ("int", "modes on the bottom edge"),
    "outermost_spin_bottom": ("str", "spin of the mode nearest the bottom boundary"),
    "outermost_spin_top": ("str", "spin of the mode nearest the top boundary"),
    "bulk_edge_agree": ("bool", "bottom edge +C and top edge -C"),
    "routes_agree": ("bool", "every computed Hall route equals C"),
    "hall_streda": ("float", "Streda slope, e^2/h (NaN where not computed)"),
    "hall_hallbar": ("float", "-1/R_xy of the Hall bar, e^2/h (NaN where not computed)"),
    "hf_converged": ("bool", "self-consistent solution found (interacting points)"),
    "hf_energy": ("float", "Hartree-Fock energy per cell, t (interacting points)"),
    "hf_best_start": ("str", "start of the kept self-consistent solution"),
    "disorder_marker": ("float", "local Chern marker at E_F, central mean over the seeds (command disorder)"),
    "disorder_marker_spread": ("float", "its spread over the seeds"),
    "disorder_sigma_xy": ("float", "Kubo-Bastin sigma_xy at E_F, e^2/h, mean over the seeds (command disorder)"),
    "disorder_sigma_xy_spread": ("float", "its spread over the seeds"),
    "disorder_hallbar_sigma_xy": ("float", "sigma_xy of the Hall bar at E_F from its seed-mean resistivities, "
                                  "e^2/h (command disorder)"),
    "levels_ground": ("str", "filled levels of the continuum ground state (command levels)"),
    "levels_polarisation": ("float", "its spin polarisation (N_up - N_down) / N"),
    "levels_gap": ("float", "its activation gap, hbar omega_c"),
    "levels_coulomb_ratio": ("float", "E_C / hbar omega_c of the point"),
    "levels_zeeman_ratio": ("float", "Delta_Z / hbar omega_c of the point"),
    "levels_lattice_ground": ("str", "filled levels of the lattice's ground state (bulk Hartree-Fock)"),
    "levels_lattice_gap": ("float", "its activation gap, hbar omega_c"),
    "levels_agree": ("bool", "lattice and continuum fill the same levels"),
    "levels_lattice_converged": ("bool", "every lattice candidate converged"),
    "disorder_r_xx": ("float", "R_xx of the Hall bar at E_F, h/e^2, mean over the seeds (command disorder)"),
}


@dataclass(frozen=True)
class Axis:
    """One swept key: its path and its values (converted TOML values)."""

    key: str
    values: tuple


@dataclass(frozen=True)
class Sweep:
    """A validated sweep.

    Attributes
    ----------
    title : str
    base : dict
        Scenario tables of the base scenario (TOML values).
    axes : tuple of Axis
    mode : {"grid", "zip"}
    quantities : tuple of str
        Quantities drawn in the figures.
    source : str or None
        The sweep file.
    """

    title: str
    base: dict
    axes: tuple[Axis, ...]
    mode: str
    quantities: tuple[str, ...]
    source: str | None = None
    command: str = "run"

    def points(self) -> list[dict]:
        """Every point: ``{"axes": {key: value}, "config": scenario tables}`` in sweep order."""
        if self.mode == "zip":
            combos = list(zip(*(a.values for a in self.axes)))
        else:
            combos = list(itertools.product(*(a.values for a in self.axes)))
        out = []
        for combo in combos:
            axes = {a.key: v for a, v in zip(self.axes, combo)}
            overrides = [f"{k}={_toml_value(v)}" for k, v in axes.items()]
            out.append({"axes": axes, "config": apply_overrides(self.base, overrides)})
        return out

    def to_dict(self) -> dict:
        return {"title": self.title, **({"command": self.command} if self.command != "run" else {}),
                "scenario": self.base, "mode": self.mode,
                "axis": [{"key": a.key, "values": list(a.values)} for a in self.axes],
                "plot": {"quantities": list(self.quantities)}}


def _toml_value(value: Any) -> str:
    """A TOML literal of a converted axis value (for :func:`apply_overrides`)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, float):
        return repr(value)
    return str(value)


DEFAULT_QUANTITIES = ("bottom_pairs", "bottom_net", "chern", "outermost_spin_bottom")
_TOP_KEYS = ("title", "command", "scenario", "mode", "axis", "plot")

#: What every point of a sweep runs: ``topoedge run`` (default), ``topoedge disorder`` at one strength or
#: ``topoedge levels`` at the point (the names of topoedge.workflows.sweep_points.POINT_RUNNERS).
COMMANDS = ("run", "disorder", "levels")


def _axis_values(spec: Any, i: int) -> list:
    where = f"axis[{i}]"
    if not isinstance(spec, dict):
        raise SweepError(f"{where}: got {spec!r}; expected a table with key and one of values, linspace, range")
    unknown = set(spec) - {"key", "values", "linspace", "range"}
    if unknown:
        raise SweepError(f"{where}.{sorted(unknown)[0]}: unknown key; expected key and one of values, "
                         "linspace, range")
    given = [name for name in ("values", "linspace", "range") if name in spec]
    if len(given) != 1:
        raise SweepError(f"{where}: got {', '.join(given) or 'no values'}; expected exactly one of values, "
                         "linspace = [start, stop, count], range = [start, stop, step]")
    name = given[0]
    data = spec[name]
    if name == "values":
        if not isinstance(data, list):
            raise SweepError(f"{where}.values: got {data!r}; expected an array of values")
        return data
    ok = (isinstance(data, list) and len(data) == 3
          and all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in data))
    if name == "linspace":
        if not ok or not isinstance(data[2], int) or data[2] < 1:
            raise SweepError(f"{where}.linspace: got {data!r}; expected [start, stop, count] with a whole "
                             "count >= 1")
        return [float(x) for x in np.linspace(data[0], data[1], data[2])]
    if not ok or data[2] == 0:
        raise SweepError(f"{where}.range: got {data!r}; expected [start, stop, step] with step != 0 "
                         "(stop excluded)")
    start, stop, step = data
    if all(isinstance(x, int) for x in data):
        return list(range(start, stop, step))
    count = max(0, math.ceil((stop - start) / step - 1e-9))
    return [float(start + n * step) for n in range(count)]


def parse_sweep(data: dict, *, base_dir: Path | None = None, source: str | None = None,
                overrides: Sequence[str] = ()) -> Sweep:
    """Validate a sweep table (see the module notes) before any point runs.

    ``overrides`` (``section.key=value``) are applied to the base scenario.

    Raises
    ------
    SweepError
        For an unknown key, a missing or unreadable base scenario, an axis
        over an unknown key path, an empty axis, a value of the wrong type for
        its key, zipped axes of different lengths, an unknown quantity.
    """
    unknown = set(data) - set(_TOP_KEYS)
    if unknown:
        raise SweepError(f"{sorted(unknown)[0]}: unknown key; expected the sweep keys {', '.join(_TOP_KEYS)}")
    title = data.get("title", "")
    if not isinstance(title, str):
        raise SweepError(f"title: got {title!r}; expected a string")
    command = data.get("command", "run")
    if command not in COMMANDS:
        raise SweepError(f"command: got {command!r}; expected one of {', '.join(map(repr, COMMANDS))}")
    base = data.get("scenario")
    if isinstance(base, str):
        path = Path(base) if base_dir is None else (base_dir / base)
        try:
            base = tomllib.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise SweepError(f"scenario: {str(path)!r} not found; expected a scenario file (relative to "
                             "the sweep file)") from None
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as err:
            raise SweepError(f"scenario: cannot read {str(path)!r}: {err}".replace("\n", " ")) from None
    elif base is None:
        raise SweepError("scenario: missing; expected a scenario file path or a [scenario] table")
    elif not isinstance(base, dict):
        raise SweepError(f"scenario: got {base!r}; expected a scenario file path or a [scenario] table")
    try:
        if overrides:
            base = apply_overrides(base, overrides)
        parse_scenario(base)
    except ConfigError as err:
        raise SweepError(f"scenario: {err}") from None
    mode = data.get("mode", "grid")
    if mode not in ("grid", "zip"):
        raise SweepError(f"mode: got {mode!r}; expected 'grid' (every combination) or 'zip' (axes side by side)")
    specs = data.get("axis")
    if not isinstance(specs, list) or not specs:
        raise SweepError("axis: missing; expected at least one [[axis]] table with key and values")
    axes = []
    for i, spec in enumerate(specs):
        values = _axis_values(spec, i)
        key = spec.get("key")
        if not isinstance(key, str):
            raise SweepError(f"axis[{i}].key: got {key!r}; expected a key path such as 'ribbon.edge.width'")
        if not values:
            raise SweepError(f"axis[{i}] ({key}): empty; expected at least one value")
        converted = []
        for j, value in enumerate(values):
            try:
                converted.append(convert_key(key, value, ranges=False))
            except ConfigError as err:
                raise SweepError(f"axis[{i}] value {j}: {err}") from None
        if any(a.key == key for a in axes):
            raise SweepError(f"axis[{i}].key: {key!r} is swept twice; expected each key once")
        # Keep the TOML form (a flux stays "p/q") for the overrides and the table.
        axes.append(Axis(key, tuple(plain(v) for v in converted)))
    for item in overrides:
        key = ".".join(name.strip() for name in item.partition("=")[0].split("."))
        if any(a.key == key for a in axes):
            raise SweepError(f"--set {item!r}: {key} is an axis of this sweep; expected a key that is not swept")
    if mode == "zip" and len({len(a.values) for a in axes}) > 1:
        lengths = ", ".join(f"{a.key}: {len(a.values)}" for a in axes)
        raise SweepError(f"axis: zipped axes have different lengths ({lengths}); expected the same length")
    plot = data.get("plot", {})
    if not isinstance(plot, dict) or set(plot) - {"quantities"}:
        raise SweepError("plot: expected a table with the key quantities")
    quantities = plot.get("quantities", list(DEFAULT_QUANTITIES))
    if not isinstance(quantities, list) or not quantities:
        raise SweepError(f"plot.quantities: got {quantities!r}; expected a non-empty array of quantity names")
    for q in quantities:
        if q not in QUANTITIES:
            raise SweepError(f"plot.quantities: got {q!r}; expected names from {', '.join(QUANTITIES)}")
    return Sweep(title, base, tuple(axes), mode, tuple(quantities), source, command)


def load_sweep(path: str | os.PathLike, overrides: Sequence[str] = ()) -> Sweep:
    """Read and validate a sweep file (:func:`parse_sweep`), or a shipped sweep by name.

    ``overrides`` (``section.key=value`` items, as ``--set``) change the base
    scenario of every point; a key that is an axis of the sweep is refused.
    """
    from ..scenario import find_shipped, shipped

    path = find_shipped(path, "sweeps")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise SweepError(f"sweep file {str(path)!r} not found; expected an existing TOML file or the name of a "
                         f"shipped sweep ({', '.join(shipped('sweeps'))})") from None
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as err:
        raise SweepError(f"sweep file {str(path)!r}: {err}".replace("\n", " ")) from None
    return parse_sweep(data, base_dir=path.parent, source=str(path), overrides=overrides)


def point_key(config: dict) -> str:
    """Identity of a point: a hash of its resolved scenario (its TOML tables, sorted).

    A scenario that does not validate (its point will fail) is hashed as
    written.
    """
    try:
        tables = parse_scenario(config).to_dict()
    except ConfigError:
        tables = config
    text = json.dumps(tables, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:20]


def quantities_of(summary) -> dict:
    """The table row of a run summary (a :class:`~topoedge.workflows.records.RunSummary` or, for a
    self-consistent run in which no start converged, an ``UnconvergedSummary``; see :data:`QUANTITIES`;
    None where undefined)."""
    out = {name: None for name in QUANTITIES}
    inter = summary.interaction
    if inter is not None:
        out["hf_converged"] = bool(inter.converged)
        out["hf_energy"] = inter.main.energy_t
        out["hf_best_start"] = inter.main.best_start or ""
    if not summary.converged:
        out["chern"] = summary.chern_below_fermi
        spin = summary.spin_chern_below_fermi or {}
        out["chern_up"], out["chern_down"] = spin.get("up"), spin.get("down")
        return out
    out["chern"] = summary.bulk.chern_below_fermi
    spin = summary.bulk.spin_chern_below_fermi or {}
    out["chern_up"], out["chern_down"] = spin.get("up"), spin.get("down")
    e, h, c = summary.edges, summary.hall, summary.check
    out["fermi_energy"] = summary.fermi.energy
    out["in_gap"] = e.in_gap
    for side in ("bottom", "top"):
        edge = getattr(e, side)
        out[f"{side}_net"] = edge.net
        out[f"{side}_pairs"] = edge.counter_pairs
        for s in ("up", "down"):
            out[f"{side}_pairs_{s}"] = edge.by_spin.get(s, {}).get("counter_pairs")
        out[f"outermost_spin_{side}"] = (edge.modes[0].spin or "") if edge.modes else ""
    out["bottom_modes"] = len(e.bottom.modes)
    out["bulk_edge_agree"] = c.bulk_edge_agree
    out["routes_agree"] = c.routes_agree
    out["hall_streda"] = h.routes.streda
    out["hall_hallbar"] = h.routes.hallbar
    return out


def run_sweep(sweep: Sweep, out: Path, *, executor: str = "local", jobs: int | None = None,
              scheduler: str | None = None, retry_failed: bool = False, progress: bool = False,
              on_point=None) -> dict:
    """Run every point of ``sweep`` that has no file under ``out/points`` yet.

    Parameters
    ----------
    sweep : Sweep
    out : Path
        The sweep folder (created; reused by later runs of the same sweep).
    executor : {"local", "dask"}
        Worker processes here, or dask.distributed (a ``LocalCluster`` of
        ``jobs`` workers, or the scheduler at ``scheduler``).
    jobs : int, optional
        Workers (default: all cores); ignored with ``scheduler``.
    scheduler : str, optional
        Address of a running dask.distributed scheduler, e.g.
        ``tcp://10.0.0.5:8786``.
    retry_failed : bool
        Run again the points recorded as failed.
    progress : bool or Progress
        Progress bar with points done, failed and remaining and the time left.
    on_point : callable, optional
        ``on_point(record)`` after every point written.

    Returns
    -------
    dict
        ``total``, ``skipped`` (finished before), ``computed``, ``failed``
        (of this run) and ``seconds``.
    """
    from ..util.workers import default_jobs

    start = time.perf_counter()
    out = Path(out)
    points_dir = out / "points"
    todo, skipped = [], 0
    for point in sweep.points():
        key = point_key(point["config"])
        path = points_dir / f"{key}.json"
        if path.exists():
            record = json.loads(path.read_text())
            if not (retry_failed and record.get("status") == "failed"):
                skipped += 1
                continue
        todo.append((key, point))
    computed = failed = 0
    # Connect to the workers first: a scheduler that cannot be reached leaves nothing behind.
    workers = max(1, min(jobs or default_jobs(), len(todo)))
    submit, completed, close = submitter(executor, workers, scheduler, sweep.command) if todo else (None, None, None)
    try:
        points_dir.mkdir(parents=True, exist_ok=True)
        remove_stale(points_dir)   # left by a process killed while writing
        remove_stale(out)
        write_atomic(out / "sweep.json", json.dumps(sweep.to_dict(), indent=2, default=str) + "\n")
    except BaseException:
        if close is not None:
            close()
        raise
    if todo:
        bar = as_progress(progress).stage(f"sweep: {len(todo)} points", len(todo))
        done = False
        try:
            futures = {submit(point["config"]): (key, point) for key, point in todo}
            for future in completed(list(futures)):
                key, point = futures[future]
                result = future.result()
                record = {"key": key, "axes": point["axes"], "config": point["config"],
                          "topoedge_version": __version__, **result}
                write_atomic(points_dir / f"{key}.json", json.dumps(record, default=str) + "\n")
                computed += 1
                failed += result["status"] == "failed"
                bar.update(1)
                if on_point is not None:
                    on_point(record)
            done = True
        finally:
            bar.close(failed=not done)
            close(graceful=done)
    return {"total": skipped + len(todo), "skipped": skipped, "computed": computed, "failed": failed,
            "seconds": time.perf_counter() - start}


def gather(sweep: Sweep, out: Path) -> list[dict]:
    """The table rows of the sweep's points in sweep order: axes, status, error, quantities.

    A point without a file (not run yet) has status "missing".
    """
    rows = []
    for point in sweep.points():
        key = point_key(point["config"])
        path = Path(out) / "points" / f"{key}.json"
        row = {"key": key, **{a.key: point["axes"][a.key] for a in sweep.axes}}
        if path.exists():
            record = json.loads(path.read_text())
            row["status"] = record["status"]
            row["error"] = record.get("error") or ""
            row.update(record.get("quantities") or {name: None for name in QUANTITIES})
        else:
            row.update({"status": "missing", "error": "", **{name: None for name in QUANTITIES}})
        rows.append(row)
    return rows


from .sweep_points import run_point, submitter  # noqa: E402  (they read QUANTITIES of this module)
