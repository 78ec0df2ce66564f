"""The bulk bands with their Chern numbers: a momentum path, or a Landau-level diagram for flat bands."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from ..models.lattices import lattice
from .style import Display, display_units, title_of


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


def continuum_levels(result, lo: float, hi: float) -> dict:
    """Continuum Landau levels ``hbar omega_c (n + 1/2) -+ Delta/2`` (t) of a square-lattice run in [lo, hi]."""
    sc = result.scenario
    entry = lattice(sc.lattice.kind)
    hw = entry.scales(sc.lattice).get("cyclotron_energy_t")
    if not hw:       # no effective-mass Landau levels (honeycomb, zero field)
        return {}
    if entry.continuum_flux_max is not None and abs(sc.lattice.flux) > entry.continuum_flux_max:
        return {}    # Hofstadter bands: the continuum levels would mislead
    bottom = -4.0 + sc.lattice.onsite
    n = np.arange(int(max(0, (hi - bottom) / hw)) + 2)
    base = bottom + hw * (n + 0.5)
    if not sc.spin.enabled:
        return {None: base}
    return {"up": base - sc.spin.zeeman / 2, "down": base + sc.spin.zeeman / 2}


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
                           continuum=continuum_levels(result, *window))
        fig.legend(handles=[Line2D([], [], color="k", ls=":", label="$E_F$"),
                            Line2D([], [], color="0.4", ls="--",
                                   label=r"continuum $\hbar\omega_c(n+1/2) \mp \Delta_Z/2$")],
                   loc="outside lower center", ncol=2, fontsize=8)
        ax.set_title(f"{title_of(result)}\nbulk Landau levels (bars: band ranges, at least a line wide), "
                     f"Chern numbers on {result.chern.grid[0]}x{result.chern.grid[1]}", fontsize=9)
        return fig
    plot_bulk_bands(result.bulk_path, result.chern, ax=ax, fermi_energy=ef, energy_range=window, display=d)
    handles = [Line2D([], [], color="k", ls=":", label="$E_F$")]
    if result.scenario.spin.enabled:
        handles = [Line2D([], [], color="C0", label="spin up"),
                   Line2D([], [], color="C3", ls="--", label="spin down")] + handles
    ax.legend(handles=handles, loc="upper left", fontsize=8)
    solver = ("; lowest bands only (Landau-level solver)" if result.chern.solver == "landau" else "")
    ax.set_title(f"{title_of(result)}\nbulk bands, Chern numbers on a "
                 f"{result.chern.grid[0]}x{result.chern.grid[1]} grid{solver}", fontsize=9)
    return fig


