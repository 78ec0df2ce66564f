"""Figures of ``topoedge levels``: the level-ordering diagram and the activation gaps against B."""

from __future__ import annotations

import numpy as np

from .style import REFERENCE, legend_outside, polarisation_cmap

__all__ = ["level_order_figure", "gaps_figure"]


def _set_name(result, i: int) -> str:
    return result.sets[i].name


def level_order_figure(result):
    """Ground-state set of filled levels over (E_C / hbar omega_c, Delta_Z / hbar omega_c), and the
    candidates' energies along E_C / hbar omega_c at the scenario's Zeeman ratio."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D

    p = result.point
    fig, (left, right) = plt.subplots(1, 2, figsize=(13.0, 5.6), layout="constrained",
                                      gridspec_kw={"width_ratios": [1.15, 1.0]})
    cmap = polarisation_cmap()
    polarisation = np.array([s.polarisation for s in result.sets])
    image = left.pcolormesh(result.coulomb_axis, result.zeeman_axis, polarisation[result.diagram], cmap=cmap,
                            vmin=-1, vmax=1, shading="nearest", rasterized=True)
    # transition lines: the exact corners of every row, joined per pair of sets
    pairs: dict[tuple[int, int], list[tuple[float, float]]] = {}
    for z, row in zip(result.zeeman_axis, result.lines):
        for where, i, j in row:
            pairs.setdefault((i, j), []).append((where, z))
    for points in pairs.values():
        xy = np.array(points)
        left.plot(xy[:, 0], xy[:, 1], color="k", lw=1.2)
    # the name of each region at the middle of its cells
    for i in np.unique(result.diagram):
        zz, cc = np.nonzero(result.diagram == i)
        left.text(result.coulomb_axis[int(np.median(cc))], result.zeeman_axis[int(np.median(zz))],
                  _set_name(result, int(i)), ha="center", va="center", fontsize=9,
                  bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.8))
    lattice_handles = []
    if result.lattice is not None:
        lines = _lattice_lines(result)
        for points in lines.values():
            xy = np.array(sorted(points, key=lambda v: v[1]))
            left.plot(xy[:, 0], xy[:, 1], color="k", lw=1.3, ls="--")
        lattice_handles = [Line2D([], [], color="k", lw=1.2, label="transition: continuum"),
                           Line2D([], [], color="k", lw=1.3, ls="--", label="transition: lattice")]
    inside = p.coulomb <= result.coulomb_axis[-1]
    left.plot(min(p.coulomb, result.coulomb_axis[-1]), p.zeeman, marker="*" if inside else ">", ms=15, color="k",
              mec="white", mew=1.0, ls="none", clip_on=False)
    left.set_xlabel("$E_C / \\hbar\\omega_c$")
    left.set_ylabel("$\\Delta_Z / \\hbar\\omega_c$")
    left.set_title(f"filled levels at $\\nu$ = {p.filling} (ground state; lines: first-order transitions)",
                   fontsize=9)
    bar = fig.colorbar(image, ax=left, shrink=0.9)
    bar.set_label("spin polarisation $(N_\\uparrow - N_\\downarrow)/N$")

    # right: every candidate's energy above the ground state along lambda at the scenario's z
    lam = np.linspace(0.0, max(result.coulomb_axis[-1], p.coulomb), 400)
    energies = np.array([s.energy(lam, p.zeeman) for s in result.sets])
    ground = energies.min(axis=0)
    here = np.array([s.energy(p.coulomb, p.zeeman) for s in result.sets])
    top = max(0.3, 1.3 * float((here - here.min()).max()))
    candidates = []
    for i, s in enumerate(result.sets):
        line, = right.plot(lam, energies[i] - ground, color=cmap(0.5 + 0.5 * s.polarisation),
                           lw=2.4 if i == result.ground else 1.3, label=s.name + (" (ground state here)"
                                                                                 if i == result.ground else ""))
        candidates.append(line)
    for _, end, _ in result.along[:-1]:
        right.plot(end, 0.0, "o", color="k", ms=5, zorder=4)
    if result.lattice is not None:
        lat = result.lattice
        along = lat.energies + np.array([s.zeeman for s in result.sets])[:, None] * p.zeeman
        for i, s in enumerate(result.sets):
            right.plot(lat.lambdas, along[i] - along.min(axis=0), "o", ms=4.5, mfc="white",
                       mec=cmap(0.5 + 0.5 * s.polarisation), mew=1.3, zorder=5)
        for w, _, _ in lat.transitions:
            right.plot(w, 0.0, "D", color="k", mfc="white", ms=6, zorder=6)
        lattice_handles += [Line2D([], [], marker="o", mfc="white", mec="0.3", ls="none",
                                   label=f"lattice (flux {lat.flux})"),
                            Line2D([], [], marker="D", mfc="white", color="k", ls="none", label="lattice transition")]
    right.axvline(p.coulomb, **REFERENCE["bulk"])
    right.set_ylim(-0.02 * top, top)
    right.set_xlim(0.0, lam[-1])
    right.set_xlabel("$E_C / \\hbar\\omega_c$")
    right.set_ylabel("energy above the ground state ($\\hbar\\omega_c$ per flux quantum)")
    right.set_title(f"candidates at $\\Delta_Z / \\hbar\\omega_c$ = {p.zeeman:.3g}", fontsize=9)
    legend_outside(right, candidates + [Line2D([], [], marker="*", ms=12, color="k", ls="none", label="this scenario"),
                           Line2D([], [], **REFERENCE["bulk"], label="its $E_C / \\hbar\\omega_c$"),
                           Line2D([], [], marker="o", color="k", ls="none", label="first-order transition")]
                   + lattice_handles)
    gap = f"gap {result.gap:.3g} $\\hbar\\omega_c$" + (f" = {result.gap * p.cyclotron_mev:.3g} meV"
                                                        if p.cyclotron_mev else "")
    fig.suptitle(f"{result.scenario.title or 'scenario'}\n$E_C / \\hbar\\omega_c$ = {p.coulomb:.3g}, "
                 f"$\\Delta_Z / \\hbar\\omega_c$ = {p.zeeman:.3g}; filled {result.sets[result.ground].name}, {gap} "
                 f"({result.gap_kind})\ncontinuum Hartree-Fock of filled Landau levels, exchange only",
                 fontsize=10)
    return fig


def _lattice_lines(result) -> dict:
    """Lattice transitions over the diagram: per pair of sets, (lambda, z) points by linear interpolation."""
    lat = result.lattice
    slope = np.array([s.zeeman for s in result.sets])
    pairs: dict = {}
    for z in result.zeeman_axis:
        along = lat.energies + slope[:, None] * z
        best = np.argmin(along, axis=0)
        for j in np.nonzero(best[1:] != best[:-1])[0]:
            a, b = best[j], best[j + 1]
            d0 = along[b, j] - along[a, j]
            d1 = along[b, j + 1] - along[a, j + 1]
            where = lat.lambdas[j] + (lat.lambdas[j + 1] - lat.lambdas[j]) * d0 / (d0 - d1)
            pairs.setdefault((int(a), int(b)), []).append((float(where), float(z)))
    return pairs


def gaps_figure(result):
    """Exchange-enhanced activation gaps (meV) at fillings 1 .. max against B, beside the bare energies."""
    import matplotlib.pyplot as plt
    from matplotlib import colormaps
    from matplotlib.lines import Line2D

    fig, ax = plt.subplots(figsize=(8.5, 5.2), layout="constrained")
    b = result.fields
    count = result.field_gaps.shape[0]
    colours = colormaps["viridis"](np.linspace(0.0, 0.85, count))
    handles = []
    for nu in range(count):
        gaps = result.field_gaps[nu]
        spin = np.array([k == "spin" for k in result.field_kinds[nu]])
        for mask, ls in ((~spin, "-"), (spin, "--")):
            shown = np.where(mask, gaps, np.nan)
            ax.plot(b, shown, ls=ls, color=colours[nu], lw=1.6)
        handles.append(Line2D([], [], color=colours[nu], lw=1.6, label=f"$\\nu$ = {nu + 1}"))
    ax.plot(b, result.cyclotron_mev, color="0.45", ls=":", lw=1.4)
    ax.plot(b, np.abs(result.zeeman_mev), color="0.45", ls="-.", lw=1.2)
    for nu, at, _, _ in result.field_transitions:
        j = np.searchsorted(b, at)
        ax.plot(at, result.field_gaps[nu - 1][min(j, b.size - 1)], "o", color="k", ms=5, zorder=4)
    density = result.scenario.field.density_cm2
    if density is not None:                       # where this density fills nu levels: B_nu = n h / (e nu)
        from ..scenario.units import filling_factor

        per_tesla = filling_factor(density, 1.0)
        for nu in range(count):
            at = per_tesla / (nu + 1)
            if b[0] <= at <= b[-1]:
                ax.plot(at, np.interp(at, b, result.field_gaps[nu]), "o", ms=8, mfc="white", mec=colours[nu],
                        mew=1.8, zorder=5)
        handles.append(Line2D([], [], marker="o", ms=8, mfc="white", mec="k", ls="none",
                              label="where this density fills $\\nu$ levels"))
    ax.axvline(abs(result.units.b_tesla), **REFERENCE["fermi"])
    ax.set_xscale("log")
    from matplotlib.ticker import FuncFormatter

    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _: f"{v:g}" if str(f"{v:g}")[0] in "25" else ""))
    ax.set_xlabel("$B$ (T)")
    ax.set_ylabel("activation gap (meV)")
    handles += [Line2D([], [], color="k", ls="-", lw=1.6, label="cyclotron gap (orbital change)"),
                Line2D([], [], color="k", ls="--", lw=1.6, label="spin gap (spin flip, same orbital)"),
                Line2D([], [], color="0.45", ls=":", lw=1.4, label="bare $\\hbar\\omega_c$"),
                Line2D([], [], color="0.45", ls="-.", lw=1.2, label="bare $|\\Delta_Z|$"),
                Line2D([], [], marker="o", color="k", ls="none", label="ground state changes"),
                Line2D([], [], **REFERENCE["fermi"], label=f"this scenario's B = {abs(result.units.b_tesla):g} T")]
    legend_outside(ax, handles)
    ax.set_title(f"{result.scenario.title or 'scenario'}: exchange-enhanced activation gaps, each filling at "
                 "every B\ncontinuum Hartree-Fock of filled Landau levels (lowest empty minus highest filled level)",
                 fontsize=9)
    return fig
