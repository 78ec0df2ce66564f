"""Figures of computed results.

The ``plot_*`` functions draw on a given matplotlib ``Axes`` and return the
artists; the ``*_figure`` functions compose them into the figures of a
results folder. None of them shows a window or writes a file (see
:mod:`topoedge.outputs.results`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from matplotlib import colors
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle

from ..models.lattices import lattice
from ..solvers.spectrum import RibbonSpectrum

__all__ = [
    "Display", "display_units", "plot_ribbon_spectrum", "plot_level_diagram", "plot_edge_modes", "edge_mode_legend", "plot_bulk_bands",
    "default_energy_range", "ribbon_figure", "bulk_figure", "hallbar_figure", "hartree_fock_figure", "edge_scan_figure",
    "RUN_FIGURES",
]

_SPIN_MARKERS = {"up": "^", "down": "v", "none": "o"}


@dataclass(frozen=True)
class Display:
    """Units of the figure axes: lattice units by default, meV / nm / 1/nm for physical scenarios.

    ``energy(E) = (E - energy_zero) * energy_scale``, ``momentum(k) = k *
    k_scale``, ``length(y) = y * length_scale``.
    """

    energy_unit: str = "$t$"
    energy_scale: float = 1.0
    energy_zero: float = 0.0
    energy_label: str = "$E$"
    k_unit: str = "$1/a$"
    k_scale: float = 1.0
    length_unit: str = "a"
    length_scale: float = 1.0
    magnetic_length: float | None = None     # in length units, for a second scale

    @property
    def physical(self) -> bool:
        return self.energy_unit == "meV"

    def energy(self, e):
        return (np.asarray(e, dtype=float) - self.energy_zero) * self.energy_scale

    def momentum(self, k):
        return np.asarray(k, dtype=float) * self.k_scale

    def length(self, y):
        return np.asarray(y, dtype=float) * self.length_scale


def display_units(result) -> Display:
    """The :class:`Display` of a run: physical with ``[material]`` and ``[field]``, else lattice units."""
    units = getattr(result, "units", None)
    if units is None:
        return Display()
    a = units.lattice_constant_nm
    return Display(energy_unit="meV", energy_scale=units.hopping_mev,
                   energy_zero=-4.0 + result.scenario.lattice.onsite,
                   energy_label="$E$ above the band bottom", k_unit="1/nm", k_scale=1.0 / a,
                   length_unit="nm", length_scale=a, magnetic_length=units.magnetic_length_nm)


def default_energy_range(spec: RibbonSpectrum, fermi_energy: float | None) -> tuple[float, float]:
    """Energy range that shows the bands from the bottom to well above E_F."""
    if spec.window is not None:
        return spec.window
    e = spec.energy[np.isfinite(spec.energy)]
    lo, hi = float(e.min()), float(e.max())
    if fermi_energy is None or not lo < fermi_energy < hi:
        pad = 0.03 * (hi - lo)
        return lo - pad, hi + pad
    top = min(hi, fermi_energy + 1.5 * (fermi_energy - lo))
    pad = 0.05 * (top - lo)
    return lo - pad, top + pad


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
            norm=norm, s=7, marker=_SPIN_MARKERS[name], linewidths=0, rasterized=True,
        )
    if fermi_energy is not None:
        artists["fermi"] = ax.axhline(float(d.energy(fermi_energy)), color="k", ls="--", lw=0.8, label="$E_F$")
    ax.set_xlim(float(d.momentum(spec.k.min())),
                float(d.momentum(spec.k.max() + (spec.k[1] - spec.k[0] if spec.k.size > 1 else 0))))
    ax.set_ylim(float(d.energy(lo)), float(d.energy(hi)))
    handles = [
        Line2D([], [], ls="", marker=_SPIN_MARKERS[name], color="0.3", label=label)
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


_EDGE_COLOURS = {"bottom": "#08306b", "top": "#67000d", "bulk": "k"}


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
            colour = _EDGE_COLOURS[edge]
            artists.append(ax.scatter(
                [float(d.momentum(mode.k))], [float(d.energy(mode.energy))], s=70, marker=marker, zorder=5, linewidths=1.4,
                facecolors=colour if filled else "white", edgecolors=colour,
            ))
    return artists


def edge_mode_legend(ax, *, spinful: bool):
    """Legend entries explaining :func:`plot_edge_modes` markers."""
    handles = [
        Line2D([], [], ls="", marker="s", ms=7, color=_EDGE_COLOURS["bottom"], label="bottom edge"),
        Line2D([], [], ls="", marker="s", ms=7, color=_EDGE_COLOURS["top"], label="top edge"),
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


def plot_bulk_bands(path: dict, chern, *, ax, fermi_energy: float | None = None,
                    energy_range: tuple[float, float] | None = None, display: Display | None = None):
    """Bulk bands along Gamma-X-M-Gamma with each band's Chern number beside it.

    Parameters
    ----------
    path : dict
        From :func:`topoedge.solvers.chern.path_bands`.
    chern : topoedge.solvers.chern.ChernResult
        Chern numbers of the bands (a band that touches a neighbour shows the
        Chern number of its group, marked with a bracket).
    ax : matplotlib.axes.Axes
    fermi_energy : float, optional
    energy_range : (float, float), optional
        Vertical limits (units of t); all bands by default.
    display : Display, optional
        Units of the energy axis (lattice units by default).

    Returns
    -------
    dict
        ``{"lines": [...], "labels": [...]}``.
    """
    d = display or Display()
    E = d.energy
    s = path["distance"]
    styles = {"up": dict(color="C0", ls="-"), "down": dict(color="C3", ls="--"), None: dict(color="k", ls="-")}
    lines, labels = [], []
    for spin, energies in path["energies"].items():
        for n in range(energies.shape[1]):
            lines += ax.plot(s, E(energies[:, n]), lw=1.0, **styles[spin])
    lo, hi = energy_range or (min(b.energy_min for b in chern.bands), max(b.energy_max for b in chern.bands))
    pad = 0.04 * (hi - lo)
    ax.set_ylim(float(E(lo - pad)), float(E(hi + pad)))
    shown_groups = set()
    for band in chern.bands:
        centre = 0.5 * (band.energy_min + band.energy_max)
        if not lo - pad <= centre <= hi + pad:
            continue
        group = chern.groups[band.group]
        if band.chern is None:
            if band.group in shown_groups:
                continue
            shown_groups.add(band.group)
            centre = 0.5 * (group.energy_min + group.energy_max)
            text = f"C={group.chern} ({len(group.bands)} bands)"
        else:
            text = f"C={band.chern}"
        colour = styles[band.spin]["color"]
        labels.append(ax.annotate(text, (1.0, float(E(centre))), xycoords=("axes fraction", "data"),
                                  xytext=(4, 0),
                                  textcoords="offset points", va="center", fontsize=7, color=colour,
                                  annotation_clip=False))
    for gap in chern.gaps:  # Chern sum of everything below each gap in view
        if gap.energy_min >= lo - pad and gap.energy_max <= hi + pad:
            ax.axhspan(float(E(gap.energy_min)), float(E(gap.energy_max)), color="0.93", zorder=0)
            labels.append(ax.annotate(
                f"gap {gap.below}: sum C = {gap.chern}", (0.02, float(E(gap.middle))),
                xycoords=("axes fraction", "data"), ha="left", va="bottom", fontsize=7, color="0.35"))
    if fermi_energy is not None:
        ax.axhline(float(E(fermi_energy)), color="k", ls=":", lw=0.8)
    for pos, name in path["ticks"]:
        ax.axvline(pos, color="0.85", lw=0.6, zorder=0)
    ax.set_xticks([p for p, _ in path["ticks"]], [n for _, n in path["ticks"]])
    ax.set_xlim(s[0], s[-1])
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    ax.set_xlabel("reduced momentum $(k_1, k_2)$ of the magnetic unit cell")
    return {"lines": lines, "labels": labels}


def plot_level_diagram(chern, *, ax, fermi_energy: float | None = None,
                       energy_range: tuple[float, float] | None = None, display: Display | None = None,
                       continuum: dict | None = None):
    """Landau-level diagram of flat bulk bands: one column per spin, each group a bar with its Chern number.

    For the Landau-level regime, where bands are flat on the scale of the
    gaps and a momentum path shows only horizontal lines. Each group of
    bands (a Landau level of ``|p|`` subbands) is drawn over its energy range
    with its Chern number; ``continuum`` (``{spin: energies in t}``) adds the
    continuum levels as dashed lines for comparison; E_F's gap is shaded
    and labelled with the Chern sum below it.

    Returns
    -------
    dict
        ``{"bars": [...], "labels": [...]}``.
    """
    d = display or Display()
    E = d.energy
    spins = [s for s in chern.sectors]
    columns = {spin: i for i, spin in enumerate(spins)}
    styles = {"up": "C0", "down": "C3", None: "k"}
    lo, hi = energy_range or (min(b.energy_min for b in chern.bands), max(b.energy_max for b in chern.bands))
    pad = 0.04 * (hi - lo)
    bars, labels = [], []
    index = {spin: 0 for spin in spins}            # Landau level n = order of the group in its sector
    for group in chern.groups:
        centre = 0.5 * (group.energy_min + group.energy_max)
        n = index[group.spin]
        index[group.spin] += 1
        if not lo - pad <= centre <= hi + pad:
            continue
        x = columns[group.spin]
        top, bottom = float(E(group.energy_max)), float(E(group.energy_min))
        thick = max(top - bottom, 0.004 * float(E(hi) - E(lo)))
        bars.append(ax.add_patch(Rectangle(
            (x + 0.1, 0.5 * (top + bottom) - thick / 2), 0.55, thick, color=styles[group.spin])))
        labels.append(ax.annotate(f"n = {n}: C = {group.chern}"
                                  + (f" ({len(group.bands)} bands)" if len(group.bands) > 1 else ""),
                                  (x + 0.72, 0.5 * (top + bottom)), va="center", fontsize=7,
                                  color=styles[group.spin]))
    if continuum:
        for spin, levels in continuum.items():
            if spin not in columns:
                continue
            x = columns[spin]
            for e in levels:
                if lo - pad <= e <= hi + pad:
                    ax.plot([x + 0.04, x + 0.71], [float(E(e))] * 2, color="0.4", ls="--", lw=0.8, zorder=3)
    if fermi_energy is not None:
        ax.axhline(float(E(fermi_energy)), color="k", ls=":", lw=0.8)
        for gap in chern.gaps:
            if gap.energy_min < fermi_energy < gap.energy_max:
                ax.axhspan(float(E(gap.energy_min)), float(E(gap.energy_max)), color="0.93", zorder=0)
                per_level = max(len(g.bands) for g in chern.groups) if chern.groups else 1
                nu = (f" ($\\nu$ = {gap.below // per_level})" if per_level > 1 and gap.below % per_level == 0
                      else "")
                labels.append(ax.annotate(f"gap above {gap.below} bands{nu}: sum C = {gap.chern}",
                                          (0.02, float(E(0.5 * (fermi_energy + gap.energy_max)))),
                                          xycoords=("axes fraction", "data"), va="center", fontsize=7,
                                          color="0.3"))
    ax.set_xlim(0, len(spins) + 0.25)     # room for the labels of the last column
    ax.set_ylim(float(E(lo - pad)), float(E(hi + 2 * pad)))
    ax.set_xticks([i + 0.4 for i in range(len(spins))],
                  [f"spin {s}" if s else "spinless" for s in spins])
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    return {"bars": bars, "labels": labels}


def _continuum_levels(result, lo: float, hi: float) -> dict:
    """Continuum Landau levels ``hbar omega_c (n + 1/2) -+ Delta/2`` (t) of a square-lattice run in [lo, hi]."""
    sc = result.scenario
    hw = lattice(sc.lattice.kind).scales(sc.lattice).get("cyclotron_energy_t")
    if not hw:       # no effective-mass Landau levels (honeycomb, zero field)
        return {}
    bottom = -4.0 + sc.lattice.onsite
    n = np.arange(int(max(0, (hi - bottom) / hw)) + 2)
    base = bottom + hw * (n + 0.5)
    if not sc.spin.enabled:
        return {None: base}
    return {"up": base - sc.spin.zeeman / 2, "down": base + sc.spin.zeeman / 2}


def _title(result) -> str:
    sc = result.scenario
    units = getattr(result, "units", None)
    if units is not None:
        field = sc.field
        carriers = ""
        if units.filling is not None:
            mantissa, exponent = f"{field.density_cm2:.3e}".split("e")
            carriers = (f", $n$ = ${float(mantissa):g}\\times 10^{{{int(exponent)}}}$ cm$^{{-2}}$, "
                        f"$\\nu$ = {units.filling:.3f}")
        elif field.fermi_mev is not None:
            carriers = f", $E_F$ = {field.fermi_mev:g} meV"
        exact = abs(units.b_relative_error) < 1e-12
        lattice_b = "exactly" if exact else f"{units.b_lattice_tesla:.4f} T"
        return (f"{sc.title or 'scenario'}\n$B$ = {units.b_tesla:g} T along {'+z' if units.b_tesla > 0 else '-z'}"
                f"{carriers}\nlattice $a$ = {units.lattice_constant_nm:.3g} nm, flux {sc.lattice.flux} "
                f"$h/e$ per plaquette ({lattice_b})")
    entry = lattice(sc.lattice.kind)
    if not entry.in_field:
        return f"{sc.title or 'scenario'}: {entry.title}"
    return f"{sc.title or 'scenario'}: flux {sc.lattice.flux} per {entry.cell}"


def _ribbon_geometry(result) -> tuple[tuple[float, float] | None, str, str]:
    """Colour extent, period and length unit of a run's ribbon for the figures."""
    sc = result.scenario
    entry = lattice(sc.lattice.kind)
    if entry.length_unit == "a":
        return None, "a", "sites; 0 = bottom edge"
    pos = result.hamiltonian.position
    period = entry.periods[sc.ribbon.orientation or entry.orientations[0]]
    return (float(pos.min()), float(pos.max())), period, entry.length_unit


def ribbon_figure(result):
    """Figure of the ribbon spectrum with the modes at E_F marked."""
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7.5, 5.2), layout="constrained")
    extent, period, across = _ribbon_geometry(result)
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
    if s["hall"]["r_xy_ohm"] is not None and d.physical:
        hall = f", $R_{{xy}}$ = {s['hall']['r_xy_ohm'] / 1e3:.3f} k$\\Omega$"
    ax.set_title(f"{_title(result)}\nC = {s['bulk']['chern_below_fermi']}, edge net "
                 f"{s['edges']['bottom']['net']:+d} (bottom) / {s['edges']['top']['net']:+d} (top){hall}",
                 fontsize=9)
    return fig


def bulk_energy_range(chern, fermi_energy: float, *, gaps: int = 3) -> tuple[float, float]:
    """Energies shown by the bulk figure: the ``gaps`` open gaps below and above E_F's gap, and E_F.

    With many bands (a small flux, the honeycomb lattice) the whole spectrum
    has too many gaps to label; the window keeps those next to E_F and ends
    at the band edges beyond them (or at the ends of the spectrum).
    """
    e_min = min(b.energy_min for b in chern.bands)
    e_max = max(b.energy_max for b in chern.bands)
    ordered = sorted(chern.gaps, key=lambda g: g.middle)
    if not ordered:
        return e_min, e_max
    i = min(range(len(ordered)), key=lambda j: abs(ordered[j].middle - fermi_energy))
    lo = ordered[i - gaps - 1].energy_max if i - gaps - 1 >= 0 else e_min
    hi = ordered[i + gaps + 1].energy_min if i + gaps + 1 < len(ordered) else e_max
    return min(lo, fermi_energy), max(hi, fermi_energy)


def bulk_figure(result):
    """Figure of the bulk bands with their Chern numbers."""
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6.5, 5.2), layout="constrained")
    ef = result.fermi_energy
    d = display_units(result)
    window = bulk_energy_range(result.chern, ef)
    if result.chern.solver == "landau":
        plot_level_diagram(result.chern, ax=ax, fermi_energy=ef, energy_range=window, display=d,
                           continuum=_continuum_levels(result, *window))
        fig.legend(handles=[Line2D([], [], color="k", ls=":", label="$E_F$"),
                            Line2D([], [], color="0.4", ls="--",
                                   label=r"continuum $\hbar\omega_c(n+1/2) \mp \Delta_Z/2$")],
                   loc="outside lower center", ncol=2, fontsize=8)
        ax.set_title(f"{_title(result)}\nbulk Landau levels (bars: band ranges, at least a line wide), "
                     f"Chern numbers on {result.chern.grid[0]}x{result.chern.grid[1]}", fontsize=9)
        return fig
    plot_bulk_bands(result.bulk_path, result.chern, ax=ax, fermi_energy=ef, energy_range=window, display=d)
    handles = [Line2D([], [], color="k", ls=":", label="$E_F$")]
    if result.scenario.spin.enabled:
        handles = [Line2D([], [], color="C0", label="spin up"),
                   Line2D([], [], color="C3", ls="--", label="spin down")] + handles
    ax.legend(handles=handles, loc="upper left", fontsize=8)
    solver = ("; lowest bands only (Landau-level solver)" if result.chern.solver == "landau" else "")
    ax.set_title(f"{_title(result)}\nbulk bands, Chern numbers on a "
                 f"{result.chern.grid[0]}x{result.chern.grid[1]} grid{solver}", fontsize=9)
    return fig


def hallbar_figure(scan: dict, *, axis: str = "energy", title: str = ""):
    """R_xy and R_xx of a Hall-bar scan with the bulk prediction, per spin where defined.

    Parameters
    ----------
    scan : dict
        From :func:`topoedge.workflows.run.hallbar_scan` (``axis = "energy"``,
        E_F in t) or :func:`topoedge.workflows.run.hallbar_field_scan`
        (``axis = "b_tesla"``); resistances in h/e^2.
    axis : {"energy", "b_tesla"}
        The scanned quantity on the horizontal axis.
    title : str
    """
    import matplotlib.pyplot as plt

    x = np.asarray(scan[axis], dtype=float)

    def arr(key):
        return np.array([np.nan if v is None else v for v in scan.get(key, [None] * len(x))], dtype=float)

    fig, (top, bottom) = plt.subplots(2, 1, figsize=(7.0, 6.0), sharex=True, layout="constrained")
    top.plot(x, arr("r_xy_bulk"), "--", color="0.5", lw=1.2, label=r"bulk: $-1/C$ (Chern sum below $E_F$)")
    top.errorbar(x, arr("r_xy"), yerr=arr("r_xy_sem"), fmt="o-", ms=3, lw=1, color="C0",
                 label=r"Hall bar $R_{xy}$ (both spins)")
    bottom.errorbar(x, arr("r_xx"), yerr=arr("r_xx_sem"), fmt="o-", ms=3, lw=1, color="C3", label="both spins")
    for name, color, marker in (("up", "C1", "^"), ("down", "C2", "v")):
        xy, xx = arr(f"r_xy_{name}"), arr(f"r_xx_{name}")
        if np.isfinite(xy).any():
            top.plot(x, xy, marker + ":", ms=3, lw=0.8, color=color, label=f"spin {name} alone")
            bottom.plot(x, xx, marker + ":", ms=3, lw=0.8, color=color, label=f"spin {name} alone")
    top.set_ylabel(r"$R_{xy}$ ($h/e^2$)")
    top.axhline(0, color="0.85", lw=0.6, zorder=0)
    top.legend(fontsize=8)
    # the same resistance in kOhm (R_K = h/e^2 from scipy.constants, exact)
    from scipy.constants import e, h

    r_k = h / e**2 / 1e3
    right = top.secondary_yaxis("right", functions=(lambda r: r * r_k, lambda k: k / r_k))
    right.set_ylabel(r"$R_{xy}$ (k$\Omega$)")
    bottom.set_ylabel(r"$R_{xx}$ ($h/e^2$)")
    if len(bottom.get_legend_handles_labels()[0]) > 1:
        bottom.legend(fontsize=8)
    bottom.set_xlabel(r"$E_F$ ($t$)" if axis == "energy" else r"$B$ (T)")
    top.set_title(title, fontsize=9)
    return fig


def hartree_fock_figure(result, *, flux: float, spectrum: RibbonSpectrum | None = None, edges=None,
                        fermi_energy: float | None = None, title: str = "", runs=()):
    """Self-consistent ribbon: filling profiles, Hartree potential, bands and convergence.

    Parameters
    ----------
    result : topoedge.solvers.hartree_fock.HFResult
    flux : float
        Flux per plaquette ``phi``: densities are shown as the local filling
        ``n / phi`` (1 = one full Landau level of one spin).
    spectrum : RibbonSpectrum, optional
        Spectrum of :meth:`topoedge.solvers.hartree_fock.HartreeFockRibbon.effective`
        with observables (bands coloured by position); without it the bands of
        the self-consistent grid are drawn by spin.
    edges : topoedge.solvers.edges.EdgeCount, optional
        Crossings to mark on the bands.
    fermi_energy : float, optional
        E_F in t (default: ``result.mu``).
    title : str
    runs : sequence of HFResult, optional
        Other starts, whose convergence histories are drawn beside the
        result's (labelled with their Hartree-Fock energies).
    """
    import matplotlib.pyplot as plt

    ef = result.mu if fermi_energy is None else fermi_energy
    width = result.density.shape[1]
    y = np.arange(width)
    fig, axes = plt.subplots(2, 2, figsize=(10.0, 7.0), layout="constrained")
    (dens, bands), (pot, hist) = axes
    dens.plot(y, result.background / flux, "k--", lw=1.2, label=r"background $n_b/\phi$")
    dens.plot(y, result.density[0] / flux, "-", color="C3", lw=1.2, label="spin up")
    dens.plot(y, result.density[1] / flux, "-", color="C0", lw=1.2, label="spin down")
    dens.plot(y, result.density.sum(axis=0) / flux, ":", color="0.3", lw=1.0, label="total")
    dens.set_xlabel("$y$ (sites)")
    dens.set_ylabel(r"local filling $n/\phi$")
    dens.legend(fontsize=8)
    pot.plot(y, result.hartree, color="C2")
    pot.set_xlabel("$y$ (sites)")
    pot.set_ylabel("Hartree potential $V_H$ ($t$)")
    pot.axhline(0, color="0.85", lw=0.6, zorder=0)
    if spectrum is not None:
        plot_ribbon_spectrum(spectrum, ax=bands, width=width, fermi_energy=ef,
                             energy_range=(ef - 0.4, ef + 0.4))
        if edges is not None:
            plot_edge_modes(edges, ax=bands)
    else:
        k = (result.k + np.pi) % (2 * np.pi) - np.pi
        order = np.argsort(k)
        for s, color in ((0, "C3"), (1, "C0")):
            bands.plot(k[order], result.energies[s][order], ".", ms=2, color=color)
        bands.axhline(ef, ls="--", color="k", lw=0.8)
        bands.set_ylim(ef - 0.4, ef + 0.4)
        bands.set_xlabel("$k$ (1/a)")
        bands.set_ylabel("$E$ ($t$)")
    residual = result.history.get("residual", [])
    hist.semilogy(np.arange(1, len(residual) + 1), residual, "o-", ms=3, color="k",
                  label=f"{result.start}: E = {result.energy:.8f} t (kept)")
    for n, other in enumerate(r for r in runs if r is not result):
        res = other.history.get("residual", [])
        state = "" if other.converged else ", not converged"
        hist.semilogy(np.arange(1, len(res) + 1), res, ".-", ms=2, lw=0.8, color=f"C{n}",
                      label=f"{other.start}: E = {other.energy:.8f} t{state}")
    hist.legend(fontsize=7)
    hist.set_xlabel("iteration")
    hist.set_ylabel(r"max $|G_{out} - G_{in}|$")
    hist.set_title(result.message, fontsize=8)
    fig.suptitle(title, fontsize=10)
    return fig


def edge_scan_figure(scan: list[dict], *, magnetic_length: float, title: str = ""):
    """Edge modes of the self-consistent bottom edge against the background width.

    Parameters
    ----------
    scan : list of dict
        The ``interaction.scan`` rows of a run summary (widths in a, every
        mode's distance from the boundary, spin and direction).
    magnetic_length : float
        ``l_B`` in lattice constants (the second horizontal axis).
    title : str

    Upper panel: each mode at its distance from the boundary (l_B), triangle
    up for spin up and down for spin down, filled when it moves along +x
    (the chirality of the bottom edge), open when it moves against it. Lower
    panel: counter-propagating pairs per spin. The top edge is the mirror
    image (its numbers are in the summary).
    """
    import matplotlib.pyplot as plt

    fig, (modes, pairs) = plt.subplots(2, 1, figsize=(7.0, 6.5), sharex=True, layout="constrained",
                                       gridspec_kw={"height_ratios": [3, 1.3]})
    colours = {"up": "C3", "down": "C0", None: "0.4"}
    markers = {"up": "^", "down": "v", None: "o"}
    rows = sorted((r for r in scan if r["converged"]), key=lambda r: r["width_a"])
    for row in rows:
        x = row["width_lB"]
        for m in row["bottom"]["order"]:
            c = colours[m["spin"]]
            modes.scatter([x], [m["distance_lB"]], marker=markers[m["spin"]], s=55, zorder=3, edgecolors=c,
                          facecolors=c if m["direction"] == "+x" else "white", linewidths=1.3)
    half = [(r["width_lB"], r["background_half_a"] / magnetic_length) for r in rows
            if r.get("background_half_a") is not None]
    if half:
        modes.plot(*zip(*half), "--", color="0.6", lw=1, zorder=1)
    for spin, dx in (("up", -0.04), ("down", 0.04)):
        xs = [r["width_lB"] + dx for r in rows]
        ys = [r["bottom"]["by_spin"].get(spin, {}).get("counter_pairs", 0) for r in rows]
        pairs.bar(xs, ys, width=0.08, color=colours[spin], label=f"spin {spin}")
    failed = [r["width_lB"] for r in scan if not r["converged"]]
    for x in failed:
        modes.axvline(x, color="0.7", ls=":", lw=1)
    handles = [Line2D([], [], ls="", marker="^", ms=8, color="C3", label="spin up"),
               Line2D([], [], ls="", marker="v", ms=8, color="C0", label="spin down"),
               Line2D([], [], ls="", marker="o", ms=7, color="0.4", label="filled: along +x"),
               Line2D([], [], ls="", marker="o", ms=7, mfc="white", mec="0.4", label="open: along -x")]
    if half:
        handles.append(Line2D([], [], color="0.6", ls="--", label="background at half its bulk value"))
    if failed:
        handles.append(Line2D([], [], color="0.7", ls=":", label="no start converged"))
    modes.legend(handles=handles, fontsize=8, loc="upper left")
    modes.set_ylabel(r"mode distance from the boundary ($l_B$)")
    modes.set_ylim(bottom=0)
    pairs.set_ylabel("counter-propagating\npairs")
    pairs.set_xlabel(r"background width $w$ ($l_B$)")
    pairs.legend(fontsize=8)
    most = max((r["bottom"]["counter_pairs"] for r in rows), default=0)
    pairs.set_ylim(0, most + 0.6)
    pairs.set_yticks(range(most + 1))
    top = modes.secondary_xaxis("top", functions=(lambda x: x * magnetic_length,
                                                  lambda x: x / magnetic_length))
    top.set_xlabel("$w$ (lattice constants)")
    modes.set_title(title, fontsize=9)
    return fig


#: Figure files of a ``run`` results folder and the functions drawing them.
RUN_FIGURES = {"ribbon_spectrum.png": ribbon_figure, "bulk_bands.png": bulk_figure}
