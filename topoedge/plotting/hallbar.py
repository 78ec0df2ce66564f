"""R_xy and R_xx of a Hall-bar scan with the bulk prediction."""

from __future__ import annotations

import numpy as np


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


