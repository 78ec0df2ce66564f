"""Maps (two grid axes) and lines (one axis, or zipped axes) of a sweep's quantities."""

from __future__ import annotations

import textwrap

from collections.abc import Sequence
import numpy as np
from ..scenario.schema import KEYS
from ..workflows.sweep import QUANTITIES, Sweep
from .style import SPIN_COLOURS, chern_colours

__all__ = ["sweep_figures", "axis_label", "discrete_colours"]

#: Quantities coloured by the Chern-number map (signed integers centred on 0).
SIGNED = ("chern", "chern_up", "chern_down", "bottom_net", "top_net", "hall_streda", "hall_hallbar")


def axis_label(key: str) -> str:
    """A swept key with its unit, e.g. ``"ribbon.edge.width (a)"`` (the unit of ``KEYS[key]``)."""
    entry = KEYS.get(key)
    unit = entry.unit if entry is not None else "-"
    if unit in ("-", ""):
        return key
    return f"{key} ({unit.replace(' (', ', ').replace(')', '')})"


def discrete_colours(quantity: str, levels: list[str]) -> list:
    """Colours of the discrete values of a sweep quantity, in the figures' colour language.

    Chern numbers and net chiralities: the Chern map (:func:`topoedge.plotting.style.chern_colours`);
    spins: the spin colours; counts (pairs, modes): shades of grey from light (0) to dark;
    booleans and words: neutral greys and tab colours without orange and purple.
    """
    import matplotlib

    def number(text):
        try:
            return float(text)
        except ValueError:
            return None

    values = [number(v) for v in levels]
    if quantity in SIGNED and all(v is not None for v in values):
        cmap, norm = chern_colours()
        return [cmap(norm(int(round(v)))) for v in values]
    if all(v in SPIN_COLOURS for v in levels):
        return [SPIN_COLOURS[v] for v in levels]
    if QUANTITIES[quantity][0] == "int" and all(v is not None for v in values):
        top = max(max(values), 1.0)
        greys = matplotlib.colormaps["Greys"]
        return [greys(0.15 + 0.75 * v / top) for v in values]
    if QUANTITIES[quantity][0] == "bool":
        return [{"True": "0.3", "False": "0.85"}.get(v, "0.6") for v in levels]
    neutral = ["#1f78b4", "#33a02c", "#b2df8a", "#a6cee3", "#fb9a99", "#cab2d6", "#b15928", "#ffff99"]
    return [neutral[i % len(neutral)] for i in range(len(levels))]


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
    from matplotlib.ticker import MaxNLocator

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
                colours = discrete_colours(q, levels) or ["0.5"]
                code = np.array([[np.nan if v is None else levels.index(str(v)) for v in line] for line in grid])
                cmap = ListedColormap(colours)
                norm = BoundaryNorm(np.arange(len(colours) + 1) - 0.5, cmap.N)
                ax.pcolormesh(xpos, ypos, np.ma.masked_invalid(code), cmap=cmap, norm=norm, edgecolors="w",
                              linewidth=0.8)
                handles = [Patch(color=colours[i], label=level) for i, level in enumerate(levels)]
            else:
                values = np.array([[np.nan if v is None else float(v) for v in line] for line in grid])
                mesh = ax.pcolormesh(xpos, ypos, np.ma.masked_invalid(values), cmap="viridis", edgecolors="w",
                                     linewidth=0.8)
                fig.colorbar(mesh, ax=ax, label=q)
                handles = []
            bad = [(x, y) for x in xs for y in ys if index[(x, y)]["status"] != "ok"]
            for x, y in bad:
                i, j = xs.index(x), ys.index(y)
                ax.add_patch(plt.Rectangle((xpos[i], ypos[j]), xpos[i + 1] - xpos[i], ypos[j + 1] - ypos[j],
                                           facecolor="0.85", edgecolor="0.4", hatch="xx", lw=0.5))
            # the sample points: one dot per computed point, at its cell's centre
            centres_x, centres_y = _centres(xs, xpos), _centres(ys, ypos)
            done = [(centres_x[i], centres_y[j]) for i, x in enumerate(xs) for j, y in enumerate(ys)
                    if index[(x, y)]["status"] == "ok"]
            if done:
                ax.plot(*zip(*done), ls="", marker="o", ms=3, mfc="k", mec="w", mew=0.6, zorder=3,
                        label="computed point")
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
            ax.set_xlabel(axis_label(ax_x.key))
            ax.set_ylabel(axis_label(ax_y.key))
            caption = textwrap.fill(f"{q}: {QUANTITIES[q][1]} (dots: computed points)", 80)
            ax.set_title(f"{textwrap.fill(title, 80)}\n{caption}", fontsize=9)
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
                if QUANTITIES[q][0] in ("int", "bool"):
                    # integers: the value holds over each point's cell (steps), never a slope
                    ax.plot(x, y, ls="", marker="o", ms=5, color="k", zorder=3)
                    ax.plot(x, y, drawstyle="steps-mid", lw=0.8, color="0.6", zorder=2)
                    finite = y[np.isfinite(y)]
                    if finite.size:
                        lo, hi = int(np.floor(finite.min())), int(np.ceil(finite.max()))
                        ax.set_ylim(lo - 0.5, hi + 0.5)
                        if hi - lo <= 10:
                            ax.set_yticks(range(lo, hi + 1))
                    if isinstance(ax.yaxis.get_major_locator(), MaxNLocator):
                        ax.yaxis.get_major_locator().set_params(integer=True)
                else:
                    ax.plot(x, y, "o-", ms=4, color="k", lw=1.0)
            else:
                levels = sorted({str(v) for v in values if v is not None}, key=_level_order)
                y = np.array([np.nan if v is None else levels.index(str(v)) for v in values])
                colours = discrete_colours(q, levels)
                for i, level in enumerate(levels):
                    ax.plot(x[y == i], y[y == i], "o", ms=6, color=colours[i])
                ax.set_yticks(range(len(levels)), levels or [""])
            fails = [xi for xi, good in zip(x, ok) if not good]
            for xi in fails:
                ax.axvline(xi, color="0.6", ls=":", lw=1)
            ax.set_ylabel(q, fontsize=8)
        axes[-1, 0].set_xlabel(axis_label(axis.key))
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


def _centres(values: Sequence, edges: np.ndarray) -> np.ndarray:
    """Centre of every cell (the value itself on a numeric axis)."""
    if _by_index(values):
        return (edges[1:] + edges[:-1]) / 2
    return _numeric(list(values))


def _cell_edges(values: Sequence) -> np.ndarray:
    """Edges of cells centred on the axis values (equal cells when they are not numbers)."""
    x = _numeric(list(values))
    if _by_index(values):
        return np.arange(len(values) + 1, dtype=float) - 0.5
    mid = (x[1:] + x[:-1]) / 2
    return np.concatenate([[x[0] - (mid[0] - x[0])], mid, [x[-1] + (x[-1] - mid[-1])]])


