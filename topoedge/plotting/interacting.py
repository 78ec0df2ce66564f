"""Figures of a self-consistent run: profiles, bands and convergence; the edge against the background width."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from ..solvers.spectrum import RibbonSpectrum
from .ribbon import edge_mode_handles, plot_edge_modes, plot_ribbon_spectrum
from .style import (DIRECTION_MARKERS, REFERENCE, SPIN_LINESTYLES, TOTAL_COLOUR, legend_outside, spin_colour)

#: Grey shades and dashes of the convergence histories of the other starts.
OTHER_STARTS = [("0.5", "--"), ("0.3", ":"), ("0.65", "-."), ("0.4", (0, (5, 1, 1, 1)))]


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

    Returns
    -------
    matplotlib.figure.Figure
        Panels (in ``fig.axes`` order) densities, bands, Hartree potential,
        convergence. Spin up and down in the spin colours, the total density
        black, thick-dotted and drawn last (visible on top of a fully
        polarised spin), legends outside the data.
    """
    import matplotlib.pyplot as plt

    ef = result.mu if fermi_energy is None else fermi_energy
    width = result.density.shape[1]
    y = np.arange(width)
    fig, axes = plt.subplots(2, 2, figsize=(10.0, 7.0), layout="constrained")
    (dens, bands), (pot, hist) = axes
    dens.plot(y, result.background / flux, label=r"background $n_b/\phi$", **REFERENCE["background"])
    dens.plot(y, result.density[0] / flux, color=spin_colour("up"), ls=SPIN_LINESTYLES["up"], lw=2.6,
              label="spin up")
    dens.plot(y, result.density[1] / flux, color=spin_colour("down"), ls=SPIN_LINESTYLES["down"], lw=1.8,
              label="spin down")
    # drawn last, narrower and dotted: visible on top of a spin that carries all of it
    dens.plot(y, result.density.sum(axis=0) / flux, color=TOTAL_COLOUR, ls=(0, (1, 1.5)), lw=1.4, zorder=5,
              label="total (both spins)")
    dens.set_xlabel("$y$ (sites)")
    dens.set_ylabel(r"local filling $n/\phi$")
    legend_outside(dens, dens.get_lines(), where="below", ncols=2)
    pot.plot(y, result.hartree, color=TOTAL_COLOUR, lw=1.2)
    pot.set_xlabel("$y$ (sites)")
    pot.set_ylabel("Hartree potential $V_H$ ($t$)")
    pot.axhline(0, color="0.85", lw=0.6, zorder=0)
    if spectrum is not None:
        art = plot_ribbon_spectrum(spectrum, ax=bands, width=width, fermi_energy=ef,
                                   energy_range=(ef - 0.4, ef + 0.4), legend=False)
        handles = list(art["handles"])
        if edges is not None:
            marks = plot_edge_modes(edges, ax=bands)
            handles += edge_mode_handles(spinful=True, stacked=any(getattr(m, "stacked", 0.0) for m in marks),
                                         bulk=bool(edges.bulk))
        legend_outside(bands, handles, fontsize=7)
        import matplotlib.pyplot as plt

        fig.colorbar(plt.cm.ScalarMappable(norm=art["norm"], cmap=art["cmap"]), ax=bands, location="bottom",
                     shrink=0.8, aspect=40, label=r"$\langle y \rangle$ across the ribbon (sites; 0 = bottom edge)")
    else:
        k = (result.k + np.pi) % (2 * np.pi) - np.pi
        order = np.argsort(k)
        for s, name in ((0, "up"), (1, "down")):
            bands.plot(k[order], result.energies[s][order], ".", ms=2, color=spin_colour(name))
        bands.axhline(ef, **REFERENCE["fermi"])
        bands.set_ylim(ef - 0.4, ef + 0.4)
        bands.set_xlabel("$k$ (1/a)")
        bands.set_ylabel("$E$ ($t$)")
        legend_outside(bands, [Line2D([], [], ls="", marker="o", ms=4, color=spin_colour(n), label=f"spin {n}")
                               for n in ("up", "down")] + [Line2D([], [], **REFERENCE["fermi"], label="$E_F$")])
    residual = result.history.get("residual", [])
    hist.semilogy(np.arange(1, len(residual) + 1), residual, "o-", ms=3, color="k",
                  label=f"{result.start}: E = {result.energy:.8f} t (kept)")
    for n, other in enumerate(r for r in runs if r is not result):
        res = other.history.get("residual", [])
        state = "" if other.converged else ", not converged"
        colour, dash = OTHER_STARTS[n % len(OTHER_STARTS)]
        hist.semilogy(np.arange(1, len(res) + 1), res, marker=".", ms=3, lw=1.0, color=colour, ls=dash,
                      label=f"{other.start}: E = {other.energy:.8f} t{state}")
    hist.set_xlabel("iteration")
    hist.set_ylabel(r"max $|G_{out} - G_{in}|$")
    legend_outside(hist, hist.get_lines(), where="below", ncols=1, fontsize=7)
    hist.set_title(result.message, fontsize=8)
    fig.suptitle(title, fontsize=10)
    return fig


def edge_scan_figure(scan, *, magnetic_length: float, title: str = ""):
    """Edge modes of the self-consistent bottom edge against the background width.

    Parameters
    ----------
    scan : sequence of WidthSolution
        The ``interaction.scan`` of a run summary
        (:class:`topoedge.workflows.interacting_records.WidthSolution`: widths in a
        and l_B, every mode's distance from the boundary, spin and direction).
    magnetic_length : float
        ``l_B`` in lattice constants (the second horizontal axis).
    title : str

    Upper panel: each mode at its distance from the boundary (l_B) in its
    spin's colour (spin up drawn a little left of its width, spin down a
    little right, so that coinciding modes both show), the triangle pointing along its velocity (``>`` along
    +x, the chirality of the bottom edge; ``<`` against it), filled as
    every bottom-edge mode in the ribbon figure. Lower panel:
    counter-propagating pairs per spin (bars, integers). The top edge is the
    mirror image (its numbers are in the summary).
    """
    import matplotlib.pyplot as plt

    fig, (modes, pairs) = plt.subplots(2, 1, figsize=(7.0, 6.5), sharex=True, layout="constrained",
                                       gridspec_kw={"height_ratios": [3, 1.3]})
    rows = sorted((r for r in scan if r.converged), key=lambda r: r.width_a)
    span = max((r.width_lB for r in rows), default=1.0) or 1.0
    for row in rows:
        for m in row.bottom.order:
            # spin up a little left, spin down a little right: coinciding modes both stay visible
            x = row.width_lB + {"up": -0.012, "down": 0.012}.get(m.spin, 0.0) * span
            modes.scatter([x], [m.distance_lB], marker=DIRECTION_MARKERS.get(m.direction, "o"), s=55, zorder=3,
                          color=spin_colour(m.spin), linewidths=1.3)
    half = [(r.width_lB, r.background_half_a / magnetic_length) for r in rows
            if r.background_half_a is not None]
    if half:
        modes.plot(*zip(*half), "--", color="0.6", lw=1, zorder=1)
    for spin, dx in (("up", -0.04), ("down", 0.04)):
        xs = [r.width_lB + dx for r in rows]
        ys = [r.bottom.by_spin.get(spin, {}).get("counter_pairs", 0) for r in rows]
        pairs.bar(xs, ys, width=0.08, color=spin_colour(spin), label=f"spin {spin}")
    failed = [r.width_lB for r in scan if not r.converged]
    for x in failed:
        modes.axvline(x, color="0.7", ls=":", lw=1)
    handles = [Line2D([], [], ls="", marker="s", ms=7, color=spin_colour("up"), label="spin up"),
               Line2D([], [], ls="", marker="s", ms=7, color=spin_colour("down"), label="spin down"),
               Line2D([], [], ls="", marker=DIRECTION_MARKERS["+x"], ms=8, color="0.35", label="moving along +x"),
               Line2D([], [], ls="", marker=DIRECTION_MARKERS["-x"], ms=8, color="0.35",
                      label="moving along \N{MINUS SIGN}x")]
    if half:
        handles.append(Line2D([], [], color="0.6", ls="--", label="background at half its bulk value"))
    if failed:
        handles.append(Line2D([], [], color="0.7", ls=":", label="no start converged"))
    legend_outside(modes, handles)
    modes.set_ylabel(r"mode distance from the boundary ($l_B$)")
    modes.set_ylim(bottom=0)
    pairs.set_ylabel("counter-propagating\npairs")
    pairs.set_xlabel(r"background width $w$ ($l_B$)")
    legend_outside(pairs, [Line2D([], [], ls="", marker="s", ms=7, color=spin_colour(n), label=f"spin {n}")
                           for n in ("up", "down")])
    most = max((r.bottom.counter_pairs for r in rows), default=0)
    if rows and most == 0:
        pairs.text(0.5, 0.5, "no counter-propagating pair at any width", transform=pairs.transAxes,
                   ha="center", va="center", fontsize=9, color="0.35")
    pairs.set_ylim(0, most + 0.6)
    pairs.set_yticks(range(most + 1))
    top = modes.secondary_xaxis("top", functions=(lambda x: x * magnetic_length,
                                                  lambda x: x / magnetic_length))
    top.set_xlabel("$w$ (lattice constants)")
    modes.set_title(title, fontsize=9)
    return fig


