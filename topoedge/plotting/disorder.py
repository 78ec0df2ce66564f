"""Figures of ``topoedge disorder``: the marker map, sigma_xy curves and the robustness map."""

from __future__ import annotations

import numpy as np

from .style import REFERENCE, chern_continuous, legend_outside

__all__ = ["marker_map_figure", "sigma_curves_figure", "robustness_figure"]


def _limit(result) -> float:
    return max(abs(result.chern), 1) + 0.5


def marker_map_figure(result):
    """The local Chern marker of every computed site, the flake outline and the central region."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    fig, ax = plt.subplots(figsize=(7.0, 6.0), layout="constrained")
    pos = result.positions
    cmap, norm = chern_continuous(_limit(result))
    shown = result.positions[result.map_sites]
    lo, hi = pos.min(axis=0), pos.max(axis=0)
    # marker side: the spacing of the shown sites in points (the axes are about 330 pt wide)
    spacing = np.sqrt((hi - lo).prod() / max(len(shown), 1))
    side = 0.9 * 330.0 * spacing / max(float((hi - lo).max()), 1e-9)
    dots = ax.scatter(shown[:, 0], shown[:, 1], c=np.clip(result.map_marker, norm.vmin, norm.vmax), cmap=cmap,
                      norm=norm, s=side ** 2, marker="s", linewidths=0)
    ax.add_patch(Rectangle(lo, *(hi - lo), fill=False, color="k", lw=1.2))
    f = result.scenario.disorder.region
    middle, half = (lo + hi) / 2, (hi - lo) * f / 2
    ax.add_patch(Rectangle(middle - half, *(2 * half), fill=False, color="k", lw=1.0, ls="--"))
    ax.set_aspect("equal")
    from ..models.lattices import lattice

    unit = lattice(result.scenario.lattice.kind).length_unit.replace("a_cc", "a_{cc}")
    ax.set_xlabel(f"$x$ (${unit}$)")
    ax.set_ylabel(f"$y$ (${unit}$)")
    if result.units is not None:                      # physical scenarios: the flake in nm as well
        a = result.units.lattice_constant_nm
        for side in (ax.secondary_xaxis("top", functions=(lambda x: x * a, lambda x: x / a)),
                     ax.secondary_yaxis("right", functions=(lambda y: y * a, lambda y: y / a))):
            side.tick_params(labelsize=8)
        ax.text(1.0, 1.01, "nm", transform=ax.transAxes, fontsize=8, ha="left", va="bottom")
    bar = fig.colorbar(dots, ax=ax, shrink=0.85)
    bar.set_label("local Chern marker $c(\\mathbf{r})$ (values beyond the scale clipped)")
    mean = result.to_dict()["map"]["region_mean"]
    ax.set_title(f"{result.scenario.title or result.scenario.lattice.kind}\n"
                 f"$W_{{dis}}$ = {_strength(result, result.map_strength)}, $E_F$ = {result.fermi_energy:.4g} t"
                 f"{_fermi_mev(result)}\nclean C = {result.chern}; central mean {mean:.3f}"
                 + ("" if result.map_method == "dense"
                                                             else " (every few sites, kernel polynomials)"),
                 fontsize=9)
    legend_outside(ax, [Line2D([], [], color="k", lw=1.2, label="flake outline"),
                        Line2D([], [], color="k", lw=1.0, ls="--", label="central region (averages)")],
                   where="below")
    return fig


def _fermi_mev(result) -> str:
    """`` (x meV above the band bottom)`` for physical scenarios, else nothing."""
    if result.units is None:
        return ""
    return f" ({(result.fermi_energy - result.energy_zero) * result.units.hopping_mev:.3g} meV above the band bottom)"


def _seeds(result) -> str:
    return f"{result.seeds} seed{'s' if result.seeds != 1 else ''}"


def _strength(result, w: float) -> str:
    """A strength in t written in the unit it was given in."""
    return f"{w * result.strength_scale:.3g} {result.strength_unit}"


def _physical_axis(ax, result, what: str) -> None:
    """A top axis for physical scenarios: E_F in meV above the band bottom, or W_dis in the other unit."""
    if result.units is None:
        return
    mev, zero = result.units.hopping_mev, result.energy_zero
    if what == "energy":
        top = ax.secondary_xaxis("top", functions=(lambda e: (e - zero) * mev, lambda m: m / mev + zero))
        top.set_xlabel("$E_F$ above the band bottom (meV)", fontsize=8)
    else:
        # the bottom axis is in the unit the strengths were given in; the top one in the other
        factor = 1 / mev if result.strength_unit == "meV" else mev
        top = ax.secondary_xaxis("top", functions=(lambda w: w * factor, lambda m: m / factor))
        top.set_xlabel("$W_{dis}$ (" + ("t" if result.strength_unit == "meV" else "meV") + ")", fontsize=8)
    top.tick_params(labelsize=8)


def _steps(ax, result):
    """The clean bulk prediction: sigma_xy = C across each clean gap, as wide grey bands with C written."""
    for lo, hi, c in result.clean_steps:
        lo, hi = max(lo, result.energies[0]), min(hi, result.energies[-1])
        if hi <= lo:
            continue
        ax.plot([lo, hi], [c, c], color="0.75", lw=7, solid_capstyle="butt", zorder=1)
        ax.text(lo + 0.04 * (hi - lo), c + 0.06, f"C = {c}", ha="left", va="bottom", fontsize=8, color="0.35")


def sigma_curves_figure(result):
    """sigma_xy(E_F) for every disorder strength (seed mean), over the clean Chern steps."""
    import matplotlib.pyplot as plt
    from matplotlib import colormaps
    from matplotlib.lines import Line2D

    fig, ax = plt.subplots(figsize=(7.5, 5.0), layout="constrained")
    _steps(ax, result)
    colours = colormaps["viridis"](np.linspace(0.0, 0.85, len(result.strengths)))
    handles = [Line2D([], [], color="0.75", lw=7, label="clean bulk: $\\sigma_{xy} = C$ in each gap")]
    mean = result.sigma.mean(axis=1)
    for w, values, colour in zip(result.strengths, mean, colours):
        line, = ax.plot(result.energies, values, "-o", ms=3, lw=1.2, color=colour, zorder=3,
                        label=f"$W_{{dis}}$ = {_strength(result, w)}")
        handles.append(line)
    ax.axvline(result.fermi_energy, **REFERENCE["fermi"])
    handles.append(Line2D([], [], **REFERENCE["fermi"], label="$E_F$ of the scenario"))
    ax.set_xlabel("$E_F$ (t)")
    ax.set_ylabel("$\\sigma_{xy}$ ($e^2/h$)")
    _physical_axis(ax, result, "energy")
    ax.set_title(f"{result.scenario.title or result.scenario.lattice.kind}: Kubo-Bastin by kernel polynomials\n"
                 f"{result.moments} moments (resolution {result.resolution:.2g} t), {result.vectors} random vectors "
                 f"x {_seeds(result)} over {result.region_sites} central sites", fontsize=9)
    legend_outside(ax, handles)
    return fig


def robustness_figure(result):
    """sigma_xy against E_F and W (map), and the marker and sigma_xy at E_F against W."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D

    fig, (left, right) = plt.subplots(1, 2, figsize=(11.0, 4.8), layout="constrained",
                                      gridspec_kw={"width_ratios": [1.3, 1.0]})
    cmap, norm = chern_continuous(_limit(result))
    mean = result.sigma.mean(axis=1)
    w = result.strengths * result.strength_scale          # in the unit they were given in
    unit = result.strength_unit
    order = np.argsort(w)
    image = left.pcolormesh(result.energies, np.arange(len(w)), mean[order], cmap=cmap, norm=norm,
                            shading="nearest")
    left.set_yticks(np.arange(len(w)), [f"{x:.3g}" for x in w[order]])
    left.axvline(result.fermi_energy, **REFERENCE["fermi"])
    left.set_xlabel("$E_F$ (t)")
    left.set_ylabel(f"$W_{{dis}}$ ({unit})")
    _physical_axis(left, result, "energy")
    bar = fig.colorbar(image, ax=left, shrink=0.9)
    bar.set_label("$\\sigma_{xy}$ ($e^2/h$, seed mean)")
    left.set_title("$\\sigma_{xy}$ against $E_F$ and disorder", fontsize=9)

    for values, marker, label, colour in ((result.marker, "s", "local Chern marker (central mean)", "k"),
                                          (result.sigma_fermi, "o", "Kubo-Bastin $\\sigma_{xy}$ ($e^2/h$)", "0.45")):
        right.errorbar(w[order], values.mean(axis=1)[order], yerr=values.std(axis=1)[order], fmt=marker + "-",
                       ms=5, lw=1.0, color=colour, capsize=3, label=label)
    limit = abs(result.chern) + 2.0
    if result.hallbar_r_xy is not None:
        shown = np.clip(result.hallbar_sigma, -limit, limit)
        length, width = result.hallbar_size
        right.plot(w[order], shown[order], "^--", ms=6, lw=1.0, color="0.2", mfc="white",
                   label=f"Hall bar {length} x {width}: $\\sigma_{{xy}}$ from its resistivities")
    right.set_ylim(max(right.get_ylim()[0], -limit), min(right.get_ylim()[1], limit))
    right.axhline(result.chern, color="0.75", lw=6, zorder=0)
    handles = [Line2D([], [], color="0.75", lw=6, label=f"clean C = {result.chern}")]
    broken = result.to_dict()["plateau_broken_at"]
    names = {"marker": "marker", "sigma_xy": "Kubo-Bastin", "hallbar": "Hall bar"}
    for name, ls in (("marker", ":"), ("sigma_xy", "-."), ("hallbar", "--")):
        if broken[name] is not None:
            right.axvline(broken[name] * result.strength_scale, color="0.3", ls=ls, lw=1)
            handles.append(Line2D([], [], color="0.3", ls=ls, lw=1, label=f"{names[name]} off the plateau"))
    right.set_xlabel(f"$W_{{dis}}$ ({unit})")
    right.set_ylabel("value at $E_F$")
    _physical_axis(right, result, "strength")
    right.set_title(f"at $E_F$ = {result.fermi_energy:.4g} t (error bars: spread over {_seeds(result)})\n"
                    "off the plateau: |mean - C| > 1/2" + (" (Hall bar: or $\\langle R_{xx}\\rangle$ > 1/2 $h/e^2$)"
                                                          if result.hallbar_r_xy is not None else ""), fontsize=9)
    right.legend(handles=right.get_legend_handles_labels()[0] + handles, fontsize=8, frameon=False,
                 loc="upper center", bbox_to_anchor=(0.5, -0.18), ncols=2)
    fig.suptitle(result.scenario.title or result.scenario.lattice.kind, fontsize=10)
    return fig
