"""Maps (two grid axes) and lines (one axis, or zipped axes) of a sweep's quantities."""

from __future__ import annotations

from collections.abc import Sequence
import numpy as np
from ..workflows.sweep import QUANTITIES, Sweep

__all__ = ["sweep_figures"]


def _numeric(values) -> np.ndarray | None:
    """Floats of a column (NaN where undefined), or None when it is text."""
    if any(isinstance(v, str) for v in values if v is not None):
        return None
    return np.array([np.nan if v is None else float(v) for v in values])


def sweep_figures(sweep: Sweep, rows: list[dict]) -> dict:
    """Figures of a sweep: name -> matplotlib figure.

    Two grid axes: one map per quantity (``map-<quantity>``), discrete
    quantities (integers, booleans, spins) in discrete colours with a
    legend, failed points hatched. One axis (or zipped axes, against the
    first): line plots of the numeric quantities (``lines``). More axes:
    none (the table has everything).
    """
    import matplotlib.pyplot as plt
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.patches import Patch

    title = sweep.title or "sweep"
    figures = {}
    ok = [r["status"] == "ok" for r in rows]
    if len(sweep.axes) == 2 and sweep.mode == "grid":
        ax_x, ax_y = sweep.axes
        xs, ys = list(ax_x.values), list(ax_y.values)
        index = {(r[ax_x.key], r[ax_y.key]): r for r in rows}
        for q in sweep.quantities:
            grid = [[index[(x, y)].get(q) if index[(x, y)]["status"] == "ok" else None for x in xs] for y in ys]
            fig, ax = plt.subplots(figsize=(7.0, 5.2), layout="constrained")
            flat = [v for line in grid for v in line if v is not None]
            discrete = QUANTITIES[q][0] in ("int", "bool", "str")
            xpos, ypos = _cell_edges(xs), _cell_edges(ys)
            if discrete:
                levels = sorted({str(v) for v in flat}, key=_level_order)
                colours = plt.get_cmap("tab10").colors
                code = np.array([[np.nan if v is None else levels.index(str(v)) for v in line] for line in grid])
                cmap = ListedColormap([colours[i % 10] for i in range(max(1, len(levels)))])
                norm = BoundaryNorm(np.arange(len(levels) + 1) - 0.5, cmap.N)
                ax.pcolormesh(xpos, ypos, np.ma.masked_invalid(code), cmap=cmap, norm=norm)
                handles = [Patch(color=colours[i % 10], label=level) for i, level in enumerate(levels)]
            else:
                values = np.array([[np.nan if v is None else float(v) for v in line] for line in grid])
                mesh = ax.pcolormesh(xpos, ypos, np.ma.masked_invalid(values), cmap="viridis")
                fig.colorbar(mesh, ax=ax, label=q)
                handles = []
            bad = [(x, y) for x in xs for y in ys if index[(x, y)]["status"] != "ok"]
            for x, y in bad:
                i, j = xs.index(x), ys.index(y)
                ax.add_patch(plt.Rectangle((xpos[i], ypos[j]), xpos[i + 1] - xpos[i], ypos[j + 1] - ypos[j],
                                           facecolor="0.85", edgecolor="0.4", hatch="xx", lw=0.5))
            if bad:
                handles.append(Patch(facecolor="0.85", edgecolor="0.4", hatch="xx", label="failed / missing"))
            if handles:
                ax.legend(handles=handles, title=q, fontsize=8, title_fontsize=8, loc="upper left",
                          bbox_to_anchor=(1.01, 1.0))
            # Axes of words (or numbers out of order) get one labelled cell per value.
            if _by_index(xs):
                ax.set_xticks(range(len(xs)), [str(v) for v in xs])
            if _by_index(ys):
                ax.set_yticks(range(len(ys)), [str(v) for v in ys])
            ax.set_xlabel(ax_x.key)
            ax.set_ylabel(ax_y.key)
            ax.set_title(f"{title}\n{q}: {QUANTITIES[q][1]}", fontsize=9)
            figures[f"map-{q}"] = fig
    elif len(sweep.axes) == 1 or sweep.mode == "zip":
        axis = sweep.axes[0]
        x = _numeric([r[axis.key] for r in rows])
        if x is None:
            x = np.arange(len(rows), dtype=float)
        numeric = [q for q in sweep.quantities if QUANTITIES[q][0] != "str"]
        text = [q for q in sweep.quantities if QUANTITIES[q][0] == "str"]
        panels = numeric + text
        fig, axes = plt.subplots(len(panels), 1, figsize=(7.0, 1.9 * len(panels) + 1.0), sharex=True,
                                 layout="constrained", squeeze=False)
        for ax, q in zip(axes[:, 0], panels):
            values = [r.get(q) if good else None for r, good in zip(rows, ok)]
            if q in numeric:
                y = np.array([np.nan if v is None else float(v) for v in values])
                ax.plot(x, y, "o-", ms=4)
                if QUANTITIES[q][0] in ("int", "bool"):
                    ax.yaxis.get_major_locator().set_params(integer=True)
            else:
                levels = sorted({str(v) for v in values if v is not None}, key=_level_order)
                y = np.array([np.nan if v is None else levels.index(str(v)) for v in values])
                ax.plot(x, y, "o", ms=6)
                ax.set_yticks(range(len(levels)), levels or [""])
            fails = [xi for xi, good in zip(x, ok) if not good]
            for xi in fails:
                ax.axvline(xi, color="0.6", ls=":", lw=1)
            ax.set_ylabel(q, fontsize=8)
        axes[-1, 0].set_xlabel(axis.key)
        axes[0, 0].set_title(f"{title}" + ("  (dotted: failed or missing points)" if not all(ok) else ""),
                             fontsize=9)
        figures["lines"] = fig
    return figures


def _level_order(text: str):
    """Sort numbers numerically and text after them."""
    try:
        return (0, float(text), "")
    except ValueError:
        return (1, 0.0, text)


def _by_index(values: Sequence) -> bool:
    """True when an axis is drawn by position (not numbers, a single value, or not increasing)."""
    x = _numeric(list(values))
    return x is None or len(x) < 2 or bool(np.any(np.diff(x) <= 0))


def _cell_edges(values: Sequence) -> np.ndarray:
    """Edges of cells centred on the axis values (equal cells when they are not numbers)."""
    x = _numeric(list(values))
    if _by_index(values):
        return np.arange(len(values) + 1, dtype=float) - 0.5
    mid = (x[1:] + x[:-1]) / 2
    return np.concatenate([[x[0] - (mid[0] - x[0])], mid, [x[-1] + (x[-1] - mid[-1])]])


