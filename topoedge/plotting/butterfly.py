"""The flux-energy spectrum with every gap coloured by its Chern number."""

from __future__ import annotations

import numpy as np
from typing import TYPE_CHECKING

from .style import CHERN_CLIP, chern_colours

if TYPE_CHECKING:
    from ..workflows.butterfly import ButterflyResult

__all__ = ["CHERN_CLIP", "chern_colours", "plot_butterfly", "butterfly_figure"]


def plot_butterfly(result: ButterflyResult, *, ax, min_gap: float, clip: int = CHERN_CLIP) -> dict:
    """Bands as black vertical segments and labelled gaps coloured by Chern sum.

    Parameters
    ----------
    result : ButterflyResult
    ax : matplotlib.axes.Axes
    min_gap : float
        Gaps wider than this (``t``) are drawn.
    clip : int
        Colour scale limit: ``|C| >= clip`` share the end colours.

    Returns
    -------
    dict
        ``{"bands": LineCollection, "gaps": LineCollection, "cmap", "norm"}``.
    """
    from matplotlib.collections import LineCollection

    band_segments, gap_segments, gap_chern = [], [], []
    for e in result.entries:
        x = float(e.flux)
        band_segments += [((x, b.energy_min), (x, b.energy_max)) for b in e.bands]
        for g in e.labelled_gaps(min_gap):
            gap_segments.append(((x, g.energy_min), (x, g.energy_max)))
            gap_chern.append(g.chern)
    cmap, norm = chern_colours(clip)
    gaps = LineCollection(gap_segments, cmap=cmap, norm=norm, linewidths=2.0, capstyle="butt", zorder=1)
    gaps.set_array(np.clip(np.asarray(gap_chern, dtype=float), -clip, clip))
    ax.add_collection(gaps)
    # Projecting caps: a band narrower than a pixel still shows as a dot.
    bands = LineCollection(band_segments, colors="k", linewidths=0.5, capstyle="projecting", zorder=2)
    ax.add_collection(bands)
    lo = min(b.energy_min for e in result.entries for b in e.bands)
    hi = max(b.energy_max for e in result.entries for b in e.bands)
    pad = 0.02 * (hi - lo)
    ax.set_xlim(-0.01, 1.01)
    ax.set_ylim(lo - pad, hi + pad)
    ax.set_xlabel(r"flux $\phi = p/q$ (flux quanta $h/e$ per plaquette)")
    ax.set_ylabel("$E$ ($t$)")
    return {"bands": bands, "gaps": gaps, "cmap": cmap, "norm": norm}


def butterfly_figure(result: ButterflyResult, *, min_gap: float, clip: int = CHERN_CLIP, title: str = ""):
    """Figure of the flux-energy spectrum with a Chern-sum colour bar and a legend."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D

    fig, ax = plt.subplots(figsize=(11, 7.5), layout="constrained")
    art = plot_butterfly(result, ax=ax, min_gap=min_gap, clip=clip)
    bar = fig.colorbar(art["gaps"], ax=ax, extend="both", ticks=range(-clip, clip + 1), fraction=0.04,
                       pad=0.01, aspect=35)
    labels = [str(c) for c in range(-clip, clip + 1)]
    labels = [label.replace("-", "\u2212") for label in labels]  # typographic minus, as matplotlib's ticks
    labels[0], labels[-1] = f"\u2264\u2212{clip}", f"\u2265{clip}"
    bar.ax.set_yticklabels(labels)
    bar.ax.tick_params(labelsize=9)
    bar.set_label(f"Chern sum $C$ of the bands below the gap (colours clipped at $|C| = {clip}$)", fontsize=10)
    handles = [Line2D([], [], color="k", lw=1.2, label="bulk band (energy range)"),
               Line2D([], [], color=art["cmap"](art["norm"](3)), lw=3,
                      label=f"gap wider than {min_gap:g} $t$, coloured by $C$")]
    fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=9, frameon=False)
    spin = (f"spin 1/2, Zeeman {result.zeeman:g} $t$" if result.spin else "spinless")
    onsite = f", on-site {result.onsite:g} $t$" if result.onsite else ""
    head = f"{title}: " if title else ""
    ax.set_title(f"{head}square lattice, flux $p/q$ with $q \\leq {result.q_max}$, {spin}{onsite}\n"
                 "Chern sums by the link-variable method", fontsize=10)
    return fig


