"""The ribbon spectrum coloured by position across the ribbon, with the modes at E_F."""

from __future__ import annotations

import numpy as np
from matplotlib import colors
from matplotlib.lines import Line2D
from ..models.lattices import lattice
from ..solvers.spectrum import RibbonSpectrum
from .style import (DIRECTION_MARKERS, EDGE_FILLED, REFERENCE, SPIN_MARKERS, Display, default_energy_range,
                    display_units, legend_outside, position_cmap, ribbon_geometry, spin_colour, spin_name, title_of)


def plot_ribbon_spectrum(
    spec: RibbonSpectrum,
    *,
    ax,
    width: float,
    fermi_energy: float | None = None,
    energy_range: tuple[float, float] | None = None,
    extent: tuple[float, float] | None = None,
    length_unit: str = "a",
    display: Display | None = None,
    legend: bool = True,
):
    """Ribbon bands ``E_n(k)`` coloured by the mean position across the ribbon.

    Parameters
    ----------
    spec : RibbonSpectrum
        Needs observables (``y_mean``, ``sz``).
    ax : matplotlib.axes.Axes
    width : float
        Ribbon width ``W`` (sites); ``<y>`` is shown from 0 (bottom edge) to
        ``W - 1`` (top edge).
    fermi_energy : float, optional
        Drawn as a dashed line (units of ``t``).
    energy_range : (float, float), optional
        Vertical limits; by default :func:`default_energy_range`.
    extent : (float, float), optional
        Positions of the outermost sites (bottom, top) for the colour scale,
        instead of ``0 .. W - 1`` (e.g. a honeycomb ribbon).
    length_unit : str
        Unit of the lengths along and across the ribbon, for the axis label.
    display : Display, optional
        Units of the axes (``energy_range`` and ``extent`` are given in
        lattice units and converted); lattice units by default.
    legend : bool
        Add a legend of the band markers and E_F beside the axes (outside
        the data); False leaves it to the caller, which finds the entries in
        ``"handles"``.

    Returns
    -------
    dict
        ``{"up": PathCollection, "down": ..., "fermi": Line2D, "legend": Legend}``
        for what was drawn, ``"handles"`` (legend entries), ``"norm"`` and
        ``"cmap"`` with the colour normalisation and map of ``<y>`` (for a
        colour bar).
    """
    if spec.y_mean is None:
        raise ValueError("the spectrum was computed without observables; nothing to colour by")
    d = display or Display()
    lo, hi = energy_range or default_energy_range(spec, fermi_energy)
    kk = np.broadcast_to(spec.k[:, None], spec.energy.shape)
    shown = np.isfinite(spec.energy) & (spec.energy >= lo) & (spec.energy <= hi)
    vmin, vmax = extent if extent is not None else (0.0, max(width - 1, 1))
    norm = colors.Normalize(vmin=float(d.length(vmin)), vmax=float(d.length(vmax)))
    cmap = position_cmap()
    artists = {"norm": norm, "cmap": cmap}
    sz = spec.sz if spec.sz is not None else np.full(spec.energy.shape, np.nan)
    groups = {"up": sz > 0.25, "down": sz < -0.25, "none": ~(np.abs(sz) > 0.25)}
    for name, mask in groups.items():
        mask = mask & shown
        if not mask.any():
            continue
        artists[name] = ax.scatter(
            d.momentum(kk[mask]), d.energy(spec.energy[mask]), c=d.length(spec.y_mean[mask]), cmap=cmap,
            norm=norm, s=7, marker=SPIN_MARKERS[name], linewidths=0, rasterized=True,
        )
    if fermi_energy is not None:
        artists["fermi"] = ax.axhline(float(d.energy(fermi_energy)), label="$E_F$", zorder=3, **REFERENCE["fermi"])
    ax.set_xlim(float(d.momentum(spec.k.min())),
                float(d.momentum(spec.k.max() + (spec.k[1] - spec.k[0] if spec.k.size > 1 else 0))))
    ax.set_ylim(float(d.energy(lo)), float(d.energy(hi)))
    handles = [
        Line2D([], [], ls="", marker=SPIN_MARKERS[name], color="0.3", label=label)
        for name, label in (("up", "bands: spin up"), ("down", "bands: spin down"))
        if name in artists
    ]
    if "fermi" in artists:
        handles.append(artists["fermi"])
    artists["handles"] = handles
    if handles and legend:
        artists["legend"] = legend_outside(ax, handles)
    if d.physical:
        ax.set_xlabel(f"$k$ along the ribbon ({d.k_unit})")
    else:
        ax.set_xlabel("$k$ along the ribbon ($1/a$)" if length_unit == "a"
                      else f"$k$ along the ribbon (1/period; period {length_unit})")
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    return artists


#: Marker area (points^2) of a crossing of E_F.
MODE_MARKER_AREA = 70.0
#: Vertical distance (points) between the markers of crossings that coincide.
STACK_STEP = 9.0


def _coinciding_groups(x, y, tolerance: float) -> list[list[int]]:
    """Groups of markers (positions in points) closer than ``tolerance`` to another of the group."""
    groups: list[list[int]] = []
    for i in np.argsort(x, kind="stable"):
        i = int(i)
        near = [g for g in groups if any(abs(x[i] - x[j]) < tolerance and abs(y[i] - y[j]) < tolerance
                                         for j in g)]
        merged = [i] + [j for g in near for j in g]
        groups = [g for g in groups if g not in near] + [merged]
    return groups


def plot_edge_modes(edges, *, ax, display: Display | None = None, stack: bool = True):
    """Mark the crossings of E_F: colour by spin, triangle by direction, fill by edge.

    The colour is the spin (:data:`topoedge.plotting.style.SPIN_COLOURS`),
    the triangle points along the velocity (``>`` along +x, ``<`` along
    -x), bottom-edge modes are filled and top-edge modes open; a crossing
    by a bulk state is a diamond. Crossings that would hide each other (the
    two spins of a spin-degenerate edge mode at the same k) are stacked
    vertically around E_F, ``STACK_STEP`` points apart, spin up on top.

    Parameters
    ----------
    edges : topoedge.solvers.edges.EdgeCount
    ax : matplotlib.axes.Axes
    display : Display, optional
    stack : bool
        Stack coinciding markers (True) or draw them at their crossing.

    Returns
    -------
    list of PathCollection
        One per drawn crossing; each carries ``stacked`` (the vertical
        offset in points, 0 when not moved). Legend entries:
        :func:`edge_mode_handles`.
    """
    from matplotlib.transforms import ScaledTranslation

    d = display or Display()
    modes = [(edge, m) for edge, group in (("bottom", edges.bottom.modes), ("top", edges.top.modes),
                                           ("bulk", edges.bulk)) for m in group]
    if not modes:
        return []
    xs = np.array([float(d.momentum(m.k)) for _, m in modes])
    ys = np.array([float(d.energy(m.energy)) for _, m in modes])
    offsets = np.zeros(len(modes))
    if stack and len(modes) > 1:
        # Markers are about sqrt(area) points wide; two closer than that along k overlap.
        x0, x1 = ax.get_xlim()
        y0, y1 = ax.get_ylim()
        box = ax.get_position()
        width_pt = box.width * ax.figure.get_figwidth() * 72.0
        height_pt = box.height * ax.figure.get_figheight() * 72.0
        along = (xs - x0) / (x1 - x0) * width_pt
        up = (ys - y0) / (y1 - y0) * height_pt
        tolerance = 1.1 * np.sqrt(MODE_MARKER_AREA)
        for group in _coinciding_groups(along, up, tolerance):
            if len(group) < 2:
                continue
            rank = {"up": 0, "none": 1, "down": 2}
            group = sorted(group, key=lambda i: (rank[spin_name(modes[i][1].spin)], modes[i][1].k))
            for place, i in enumerate(group):
                offsets[i] = ((len(group) - 1) / 2 - place) * STACK_STEP
    artists = []
    for (edge, mode), x, y, dy in zip(modes, xs, ys, offsets):
        colour = spin_colour(mode.spin)
        marker = "D" if edge == "bulk" else DIRECTION_MARKERS["+x" if mode.velocity > 0 else "-x"]
        transform = ax.transData
        if dy:
            transform = transform + ScaledTranslation(0.0, dy / 72.0, ax.figure.dpi_scale_trans)
        art = ax.scatter([x], [y], s=MODE_MARKER_AREA * (0.6 if edge == "bulk" else 1.0), marker=marker,
                         zorder=5, linewidths=1.4, transform=transform,
                         facecolors=colour if EDGE_FILLED[edge] else "white", edgecolors=colour)
        art.stacked = float(dy)
        artists.append(art)
    return artists


def edge_mode_handles(*, spinful: bool, stacked: bool = False, bulk: bool = False, columns: bool = False) -> list:
    """Legend entries explaining :func:`plot_edge_modes` markers.

    With ``columns=True`` a list of two columns (shape and fill; colour and
    notes) instead of one flat list.
    """
    grey = "0.35"
    handles = [
        Line2D([], [], ls="", marker=">", ms=8, color=grey, label="moving along +x"),
        Line2D([], [], ls="", marker="<", ms=8, color=grey, label="moving along \N{MINUS SIGN}x"),
        Line2D([], [], ls="", marker="o", ms=7, color=grey, label="filled: bottom edge"),
        Line2D([], [], ls="", marker="o", ms=7, mfc="white", mec=grey, mew=1.4, label="open: top edge"),
    ]
    if bulk:
        handles.append(Line2D([], [], ls="", marker="D", ms=6, color=grey, label="bulk state"))
    colours = []
    if spinful:
        colours += [Line2D([], [], ls="", marker="s", ms=7, color=spin_colour("up"), label="spin up"),
                    Line2D([], [], ls="", marker="s", ms=7, color=spin_colour("down"), label="spin down")]
    if stacked:
        colours.append(Line2D([], [], ls="", marker="", label=f"coinciding crossings stacked\n"
                                                             f"{STACK_STEP:g} pt apart around $E_F$"))
    return [handles, colours] if columns else handles + colours


def _in_columns(columns: list[list]) -> list:
    """Legend entries filling ``len(columns)`` legend columns one group each (blank entries pad them)."""
    columns = [c for c in columns if c]
    rows = max((len(c) for c in columns), default=0)
    blank = Line2D([], [], ls="", marker="", label=" ")
    return [h for c in columns for h in c + [blank] * (rows - len(c))]


def edge_mode_legend(ax, *, spinful: bool, stacked: bool = False, bulk: bool = False):
    """Legend explaining :func:`plot_edge_modes` markers, beside the axes (outside the data)."""
    return legend_outside(ax, edge_mode_handles(spinful=spinful, stacked=stacked, bulk=bulk),
                          title="modes at $E_F$", title_fontsize=8, alignment="left")


def ribbon_figure(result):
    """Figure of the ribbon spectrum with the modes at E_F marked.

    The bands are coloured by ``<y>`` (colour bar on the right); the legend
    of the band markers, E_F and the crossings sits below the axes.
    """
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7.5, 6.4), layout="constrained")
    extent, period, across = ribbon_geometry(result)
    d = display_units(result)
    if d.physical:
        across = "nm; 0 = bottom edge"
    artists = plot_ribbon_spectrum(result.spectrum, ax=ax, width=result.scenario.ribbon.width,
                                   fermi_energy=result.fermi_energy, extent=extent, length_unit=period, display=d,
                                   legend=False)
    modes = plot_edge_modes(result.edges, ax=ax, display=d)
    stacked = any(getattr(m, "stacked", 0.0) for m in modes)
    columns = [artists["handles"], *edge_mode_handles(spinful=result.scenario.spin.enabled, stacked=stacked,
                                                      bulk=bool(result.edges.bulk), columns=True)]
    handles = _in_columns(columns)
    artists["legend"] = ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.11),
                                  ncols=len([c for c in columns if c]),
                                  fontsize=8, frameon=False, title="markers ($E_F$ crossings: large)",
                                  title_fontsize=8)
    sm = plt.cm.ScalarMappable(norm=artists["norm"], cmap=artists["cmap"])
    bar = fig.colorbar(sm, ax=ax, label=rf"$\langle y \rangle$ across the ribbon ({across})")
    lb = d.magnetic_length
    entry = lattice(result.scenario.lattice.kind)
    if lb is None and entry.length_unit == "a":
        lb = entry.scales(result.scenario.lattice)["magnetic_length_a"]     # effective-mass l_B in a
    if lb:
        twin = bar.ax.secondary_yaxis("left", functions=(lambda y: y / lb, lambda u: u * lb))
        twin.set_ylabel(rf"$\langle y \rangle / l_B$ ($l_B$ = {lb:.3g} {d.length_unit})")
    s = result.summary
    hall = ""
    if s.hall.r_xy_ohm is not None and d.physical:
        hall = f", $R_{{xy}}$ = {s.hall.r_xy_ohm / 1e3:.3f} k$\\Omega$"
    ax.set_title(f"{title_of(result)}\nC = {s.bulk.chern_below_fermi}, edge net "
                 f"{s.edges.bottom.net:+d} (bottom) / {s.edges.top.net:+d} (top){hall}",
                 fontsize=9)
    return fig
