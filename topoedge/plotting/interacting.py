"""Figures of a self-consistent run: profiles, bands and convergence; the edge against the background width."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from ..solvers.spectrum import RibbonSpectrum
from .ribbon import plot_edge_modes, plot_ribbon_spectrum


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
    rows = sorted((r for r in scan if r.converged), key=lambda r: r.width_a)
    for row in rows:
        x = row.width_lB
        for m in row.bottom.order:
            c = colours[m.spin]
            modes.scatter([x], [m.distance_lB], marker=markers[m.spin], s=55, zorder=3, edgecolors=c,
                          facecolors=c if m.direction == "+x" else "white", linewidths=1.3)
    half = [(r.width_lB, r.background_half_a / magnetic_length) for r in rows
            if r.background_half_a is not None]
    if half:
        modes.plot(*zip(*half), "--", color="0.6", lw=1, zorder=1)
    for spin, dx in (("up", -0.04), ("down", 0.04)):
        xs = [r.width_lB + dx for r in rows]
        ys = [r.bottom.by_spin.get(spin, {}).get("counter_pairs", 0) for r in rows]
        pairs.bar(xs, ys, width=0.08, color=colours[spin], label=f"spin {spin}")
    failed = [r.width_lB for r in scan if not r.converged]
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
    most = max((r.bottom.counter_pairs for r in rows), default=0)
    pairs.set_ylim(0, most + 0.6)
    pairs.set_yticks(range(most + 1))
    top = modes.secondary_xaxis("top", functions=(lambda x: x * magnetic_length,
                                                  lambda x: x / magnetic_length))
    top.set_xlabel("$w$ (lattice constants)")
    modes.set_title(title, fontsize=9)
    return fig


