"""Figures of computed results.

Every function draws on a given matplotlib ``Axes`` and returns the artists;
none of them shows a window or writes a file (see :mod:`topoedge.results`).
"""

from __future__ import annotations

import numpy as np
from matplotlib import colors
from matplotlib.lines import Line2D

from .spectrum import RibbonSpectrum

__all__ = ["plot_ribbon_spectrum", "default_energy_range"]

_SPIN_MARKERS = {"up": "^", "down": "v", "none": "o"}


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

    Returns
    -------
    dict
        ``{"up": PathCollection, "down": ..., "fermi": Line2D, "legend": Legend}``
        for what was drawn, and ``"norm"`` with the colour normalisation of
        ``<y>`` (for a colour bar).
    """
    if spec.y_mean is None:
        raise ValueError("the spectrum was computed without observables; nothing to colour by")
    lo, hi = energy_range or default_energy_range(spec, fermi_energy)
    kk = np.broadcast_to(spec.k[:, None], spec.energy.shape)
    shown = np.isfinite(spec.energy) & (spec.energy >= lo) & (spec.energy <= hi)
    norm = colors.Normalize(vmin=0.0, vmax=max(width - 1, 1))
    artists = {"norm": norm}
    sz = spec.sz if spec.sz is not None else np.full(spec.energy.shape, np.nan)
    groups = {"up": sz > 0.25, "down": sz < -0.25, "none": ~(np.abs(sz) > 0.25)}
    for name, mask in groups.items():
        mask = mask & shown
        if not mask.any():
            continue
        artists[name] = ax.scatter(
            kk[mask], spec.energy[mask], c=spec.y_mean[mask], cmap="coolwarm", norm=norm,
            s=7, marker=_SPIN_MARKERS[name], linewidths=0, rasterized=True,
        )
    if fermi_energy is not None:
        artists["fermi"] = ax.axhline(fermi_energy, color="k", ls="--", lw=0.8, label="$E_F$")
    ax.set_xlim(spec.k.min(), spec.k.max() + (spec.k[1] - spec.k[0] if spec.k.size > 1 else 0))
    ax.set_ylim(lo, hi)
    handles = [
        Line2D([], [], ls="", marker=_SPIN_MARKERS[name], color="0.3", label=label)
        for name, label in (("up", "spin up"), ("down", "spin down"))
        if name in artists
    ]
    if "fermi" in artists:
        handles.append(artists["fermi"])
    if handles:
        artists["legend"] = ax.legend(handles=handles, loc="upper left", fontsize=8)
    ax.set_xlabel("$k$ along the ribbon ($1/a$)")
    ax.set_ylabel("$E$ ($t$)")
    return artists
