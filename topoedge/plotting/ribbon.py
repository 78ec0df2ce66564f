"""The ribbon spectrum coloured by position across the ribbon, with the modes at E_F."""

from __future__ import annotations

import numpy as np
from matplotlib import colors
from matplotlib.lines import Line2D
from ..models.lattices import lattice
from ..solvers.spectrum import RibbonSpectrum
from .style import EDGE_COLOURS, SPIN_MARKERS, Display, default_energy_range, display_units, ribbon_geometry, title_of


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

    Returns
    -------
    dict
        ``{"up": PathCollection, "down": ..., "fermi": Line2D, "legend": Legend}``
        for what was drawn, and ``"norm"`` with the colour normalisation of
        ``<y>`` (for a colour bar).
    """
    if spec.y_mean is None:
        raise ValueError("the spectrum was computed without observables; nothing to colour by")
    d = display or Display()
    lo, hi = energy_range or default_energy_range(spec, fermi_energy)
    kk = np.broadcast_to(spec.k[:, None], spec.energy.shape)
    shown = np.isfinite(spec.energy) & (spec.energy >= lo) & (spec.energy <= hi)
    vmin, vmax = extent if extent is not None else (0.0, max(width - 1, 1))
    norm = colors.Normalize(vmin=float(d.length(vmin)), vmax=float(d.length(vmax)))
    artists = {"norm": norm}
    sz = spec.sz if spec.sz is not None else np.full(spec.energy.shape, np.nan)
    groups = {"up": sz > 0.25, "down": sz < -0.25, "none": ~(np.abs(sz) > 0.25)}
    for name, mask in groups.items():
        mask = mask & shown
        if not mask.any():
            continue
        artists[name] = ax.scatter(
            d.momentum(kk[mask]), d.energy(spec.energy[mask]), c=d.length(spec.y_mean[mask]), cmap="coolwarm",
            norm=norm, s=7, marker=SPIN_MARKERS[name], linewidths=0, rasterized=True,
        )
    if fermi_energy is not None:
        artists["fermi"] = ax.axhline(float(d.energy(fermi_energy)), color="k", ls="--", lw=0.8, label="$E_F$")
    ax.set_xlim(float(d.momentum(spec.k.min())),
                float(d.momentum(spec.k.max() + (spec.k[1] - spec.k[0] if spec.k.size > 1 else 0))))
    ax.set_ylim(float(d.energy(lo)), float(d.energy(hi)))
    handles = [
        Line2D([], [], ls="", marker=SPIN_MARKERS[name], color="0.3", label=label)
        for name, label in (("up", "spin up"), ("down", "spin down"))
        if name in artists
    ]
    if "fermi" in artists:
        handles.append(artists["fermi"])
    if handles:
        artists["legend"] = ax.legend(handles=handles, loc="upper left", fontsize=8)
    if d.physical:
        ax.set_xlabel(f"$k$ along the ribbon ({d.k_unit})")
    else:
        ax.set_xlabel("$k$ along the ribbon ($1/a$)" if length_unit == "a"
                      else f"$k$ along the ribbon (1/period; period {length_unit})")
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    return artists


def plot_edge_modes(edges, *, ax, display: Display | None = None):
    """Mark the crossings of E_F: colour by edge, triangle by direction, fill by spin.

    Parameters
    ----------
    edges : topoedge.solvers.edges.EdgeCount
    ax : matplotlib.axes.Axes

    Returns
    -------
    list of PathCollection
        One per drawn crossing group; legend handles are added to ``ax``'s
        legend by :func:`edge_mode_legend`.
    """
    d = display or Display()
    artists = []
    groups = [("bottom", edges.bottom.modes), ("top", edges.top.modes), ("bulk", edges.bulk)]
    for edge, modes in groups:
        for mode in modes:
            marker = ">" if mode.velocity > 0 else "<"
            filled = mode.spin != "down"
            colour = EDGE_COLOURS[edge]
            artists.append(ax.scatter(
                [float(d.momentum(mode.k))], [float(d.energy(mode.energy))], s=70, marker=marker, zorder=5, linewidths=1.4,
                facecolors=colour if filled else "white", edgecolors=colour,
            ))
    return artists


def edge_mode_legend(ax, *, spinful: bool):
    """Legend entries explaining :func:`plot_edge_modes` markers."""
    handles = [
        Line2D([], [], ls="", marker="s", ms=7, color=EDGE_COLOURS["bottom"], label="bottom edge"),
        Line2D([], [], ls="", marker="s", ms=7, color=EDGE_COLOURS["top"], label="top edge"),
        Line2D([], [], ls="", marker=">", ms=8, color="0.3", label="moving along +x"),
        Line2D([], [], ls="", marker="<", ms=8, color="0.3", label="moving along -x"),
    ]
    if spinful:
        handles += [
            Line2D([], [], ls="", marker="o", ms=7, color="0.3", label="filled: spin up"),
            Line2D([], [], ls="", marker="o", ms=7, mfc="white", mec="0.3", label="open: spin down"),
        ]
    return ax.legend(handles=handles, loc="lower right", fontsize=7, title="modes at $E_F$",
                     title_fontsize=7)


def ribbon_figure(result):
    """Figure of the ribbon spectrum with the modes at E_F marked."""
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7.5, 5.2), layout="constrained")
    extent, period, across = ribbon_geometry(result)
    d = display_units(result)
    if d.physical:
        across = "nm; 0 = bottom edge"
    artists = plot_ribbon_spectrum(result.spectrum, ax=ax, width=result.scenario.ribbon.width,
                                   fermi_energy=result.fermi_energy, extent=extent, length_unit=period, display=d)
    plot_edge_modes(result.edges, ax=ax, display=d)
    edge_mode_legend(ax, spinful=result.scenario.spin.enabled)
    if "legend" in artists:
        ax.add_artist(artists["legend"])
    sm = plt.cm.ScalarMappable(norm=artists["norm"], cmap="coolwarm")
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


