"""R_xy and R_xx of a Hall-bar scan with the bulk prediction."""

from __future__ import annotations

import numpy as np

from .style import REFERENCE, SPIN_MARKERS, TOTAL_COLOUR, spin_colour

#: Smallest upper limit of the R_xx axis (h/e^2): below it R_xx is numerically zero.
R_XX_FLOOR = 0.05
#: Horizontal shift (points) of the spin-resolved markers, so that equal values of both spins stay visible.
SPIN_SHIFT = 2.5
#: Axis labels of the scanned quantities (the scan's keys).
AXIS_LABELS = {"energy": r"$E_F$ ($t$)", "energy_mev": r"$E_F$ (meV)", "b_tesla": r"$B$ (T)"}
#: Look of points where some lead has no open channel.
NO_CHANNEL = dict(facecolor="0.88", edgecolor="0.6", hatch="///", lw=0.0, zorder=0)


def _values(scan: dict, key: str, n: int) -> np.ndarray:
    """A scan column as floats, NaN for None or a missing key."""
    column = scan.get(key)
    if column is None:
        return np.full(n, np.nan)
    return np.array([np.nan if v is None else v for v in column], dtype=float)


def _cells(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Left and right ends of the cell of every scan point (half-way to its neighbours)."""
    if x.size == 1:
        return x - 0.5, x + 0.5
    mid = (x[1:] + x[:-1]) / 2
    left = np.concatenate([[x[0] - (mid[0] - x[0])], mid])
    right = np.concatenate([mid, [x[-1] + (x[-1] - mid[-1])]])
    return left, right


def _runs(values: np.ndarray) -> list[tuple[int, int]]:
    """``(first, last)`` index of every run of equal finite values."""
    runs, start = [], None
    for i, v in enumerate(values):
        if start is not None and not (np.isfinite(v) and v == values[start]):
            runs.append((start, i - 1))
            start = None
        if start is None and np.isfinite(v):
            start = i
    if start is not None:
        runs.append((start, len(values) - 1))
    return runs


def r_xx_limits(r_xx, r_xy=None, *, floor: float = R_XX_FLOOR) -> tuple[float, float]:
    """Limits of the R_xx axis: at least ``-floor/20 .. floor`` (h/e^2), wider when the data need it.

    Numerical noise (``1e-15``) then stays a flat line at zero instead of
    filling the axis; a real longitudinal resistance (a bulk band, a
    disordered bar) still shows at its size. With ``r_xy`` the floor is at
    least 5 % of the largest ``|R_xy|``.
    """
    data = np.asarray(r_xx, dtype=float)
    data = data[np.isfinite(data)]
    top = floor
    if r_xy is not None:
        hall = np.asarray(r_xy, dtype=float)
        hall = hall[np.isfinite(hall)]
        if hall.size:
            top = max(top, 0.05 * float(np.abs(hall).max()))
    if data.size:
        top = max(top, 1.1 * float(data.max()))
        bottom = min(-top / 20, 1.1 * float(data.min()))
    else:
        bottom = -top / 20
    return bottom, top


def hallbar_figure(scan: dict, *, axis: str = "energy", title: str = ""):
    """R_xy and R_xx of a Hall-bar scan with the bulk prediction, per spin where defined.

    The bulk prediction ``-1/C`` is a wide grey staircase behind the data,
    each plateau labelled with ``nu = C``; the Hall bar's values are black
    points (error bars: the standard error over disorder seeds), each spin
    alone the spin colours with the spin markers, none of them joined by
    lines. Points where some lead has no open channel (NaN) are hatched
    across both panels. The R_xx axis spans at least ``0 .. R_XX_FLOOR``
    h/e^2 (see :func:`r_xx_limits`), so that numerical noise reads as zero.

    Parameters
    ----------
    scan : dict
        From :func:`topoedge.workflows.run.hallbar_scan` (``axis = "energy"``,
        E_F in t) or :func:`topoedge.workflows.run.hallbar_field_scan`
        (``axis = "b_tesla"``); resistances in h/e^2.
    axis : {"energy", "b_tesla"}
        The scanned quantity on the horizontal axis.
    title : str

    Returns
    -------
    matplotlib.figure.Figure
        Two panels (R_xy, R_xx) sharing the horizontal axis, legend below.
    """
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch
    from matplotlib.transforms import ScaledTranslation

    x = np.asarray(scan[axis], dtype=float)
    n = x.size

    def arr(key):
        return _values(scan, key, n)

    fig, (top, bottom) = plt.subplots(2, 1, figsize=(7.0, 7.0), sharex=True, layout="constrained",
                                      gridspec_kw={"height_ratios": [3, 2]})
    handles = []
    # Bulk prediction: steps (each value over its cell), labelled plateaus.
    bulk = arr("r_xy_bulk")
    chern = arr("chern")
    left, right = _cells(x)
    bulk_style = dict(color=REFERENCE["bulk"]["color"], lw=6.0, alpha=0.45, solid_capstyle="butt", zorder=1)
    for first, last in _runs(bulk):
        top.plot([left[first], right[last]], [bulk[first]] * 2, **bulk_style)
        c = chern[first] if np.isfinite(chern[first]) else -1.0 / bulk[first]
        label = f"$\\nu$ = {c:.0f}".replace("-", "\N{MINUS SIGN}")
        top.annotate(label, (0.5 * (left[first] + right[last]), bulk[first]),
                     xytext=(0, 7), textcoords="offset points", ha="center", va="bottom", fontsize=8,
                     color="0.3", zorder=6)
    for i in range(len(bulk) - 1):     # the risers of the staircase, thin
        if np.isfinite(bulk[i]) and np.isfinite(bulk[i + 1]) and bulk[i] != bulk[i + 1]:
            top.plot([right[i]] * 2, [bulk[i], bulk[i + 1]], color=bulk_style["color"], lw=0.8, alpha=0.6,
                     zorder=1)
    handles.append(Line2D([], [], **{**bulk_style, "zorder": None},
                          label=r"bulk prediction $-1/\nu$, $\nu = C$ (Chern sum below $E_F$)"))
    # No open channel: hatched cells across both panels.
    r_xy, r_xx = arr("r_xy"), arr("r_xx")
    missing = ~np.isfinite(r_xy)
    for first, last in _runs(np.where(missing, 1.0, np.nan)):
        for ax in (top, bottom):
            ax.axvspan(left[first], right[last], **NO_CHANNEL)
    if missing.any():
        handles.append(Patch(**{k: v for k, v in NO_CHANNEL.items() if k != "zorder"},
                             label=f"no open channel in some lead ({int(missing.sum())} point"
                                   f"{'s' if missing.sum() != 1 else ''}, not solved)"))
    # The Hall bar: both spins black, each spin alone in its colour; points, no lines.
    top.errorbar(x, r_xy, yerr=arr("r_xy_sem"), fmt="o", ms=3.5, lw=1, color=TOTAL_COLOUR, zorder=4)
    bottom.errorbar(x, r_xx, yerr=arr("r_xx_sem"), fmt="o", ms=3.5, lw=1, color=TOTAL_COLOUR, zorder=4)
    handles.append(Line2D([], [], ls="", marker="o", ms=4, color=TOTAL_COLOUR, label="Hall bar, both spins"))
    for name, shift in (("up", -SPIN_SHIFT), ("down", SPIN_SHIFT)):
        xy, xx = arr(f"r_xy_{name}"), arr(f"r_xx_{name}")
        if np.isfinite(xy).any() or np.isfinite(xx).any():
            style = dict(ls="", marker=SPIN_MARKERS[name], ms=4, color=spin_colour(name), alpha=0.85, zorder=3)
            for ax, values in ((top, xy), (bottom, xx)):
                moved = ax.transData + ScaledTranslation(shift / 72.0, 0.0, fig.dpi_scale_trans)
                ax.plot(x, values, transform=moved, **style)
            handles.append(Line2D([], [], **{**style, "zorder": None},
                                  label=f"spin {name} alone (drawn {abs(shift):g} pt "
                                        f"{'left' if shift < 0 else 'right'})"))
    top.set_ylabel(r"$R_{xy}$ ($h/e^2$)")
    top.axhline(0, color="0.85", lw=0.6, zorder=0)
    values = np.concatenate([v[np.isfinite(v)] for v in (r_xy, bulk, arr("r_xy_up"), arr("r_xy_down"))])
    if values.size:
        lo, hi = min(float(values.min()), 0.0), max(float(values.max()), 0.0)
        span = hi - lo or 1.0
        top.set_ylim(lo - 0.08 * span, hi + 0.12 * span)     # room for the plateau labels
    # the same resistance in kOhm (R_K = h/e^2 from scipy.constants, exact)
    from scipy.constants import e, h

    r_k = h / e**2 / 1e3
    right_axis = top.secondary_yaxis("right", functions=(lambda r: r * r_k, lambda k: k / r_k))
    right_axis.set_ylabel(r"$R_{xy}$ (k$\Omega$)")
    lo, hi = r_xx_limits(np.concatenate([r_xx, arr("r_xx_up"), arr("r_xx_down")]), r_xy)
    bottom.set_ylim(lo, hi)
    bottom.axhline(0, color="0.85", lw=0.6, zorder=0)
    bottom.set_ylabel(r"$R_{xx}$ ($h/e^2$)")
    handles.append(Line2D([], [], ls="", marker="", label=f"$R_{{xx}}$ axis spans at least 0 to {R_XX_FLOOR:g} "
                                                          "$h/e^2$;\nsmaller values are zero up to numerical noise"))
    bottom.set_xlabel(AXIS_LABELS.get(axis, axis))
    fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=8, frameon=False)
    top.set_title(title, fontsize=9)
    return fig
