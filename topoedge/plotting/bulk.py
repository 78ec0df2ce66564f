"""The bulk bands with their Chern numbers: a momentum path, or a Landau-level diagram for flat bands."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from ..models.lattices import lattice
from .style import (REFERENCE, SPIN_LINESTYLES, Display, display_units, hide_overlapping, spin_colour,
                    title_of)

#: Distance between the spin columns of the level diagram (a bar is 0.55 wide, its label follows).
COLUMN_STEP = 1.6
#: Shade of E_F's gap (the only gap shaded).
FERMI_GAP_SHADE = "0.9"


def plot_bulk_bands(path: dict, chern, *, ax, fermi_energy: float | None = None,
                    energy_range: tuple[float, float] | None = None, display: Display | None = None,
                    xlabel: str | None = None):
    """Bulk bands along a momentum path with each band's Chern number beside it.

    Only E_F's gap is shaded. Every gap in view wide enough for its label
    (at least 1.3 label heights, E_F's gap always) gets "gap r: sum C";
    labels that would overlap another are hidden by the figure
    (:func:`topoedge.plotting.style.hide_overlapping`, E_F's first).

    Parameters
    ----------
    path : dict
        ``distance`` (P,), ``ticks`` [(position, label)] and
        ``energies[spin]`` (P, n): from :func:`topoedge.solvers.chern.path_bands`
        (Gamma-X-M-Gamma of the reduced zone) or :func:`hexagonal_path_bands`
        (Gamma-K-M-Gamma); an optional ``label`` names the horizontal axis.
    chern : topoedge.solvers.chern.ChernResult
        Chern numbers of the bands (a band that touches a neighbour shows the
        Chern number of its group).
    ax : matplotlib.axes.Axes
    fermi_energy : float, optional
    energy_range : (float, float), optional
        Vertical limits (units of t); all bands by default.
    display : Display, optional
        Units of the energy axis (lattice units by default).
    xlabel : str, optional
        Label of the momentum axis (default: ``path["label"]``, else the
        reduced momenta of the magnetic unit cell).

    Returns
    -------
    dict
        ``{"lines": [...], "labels": [...], "gap_labels": [...], "band_labels": [...],
        "skipped_gaps": int}``; ``labels`` in the order of priority (E_F's
        gap first, then by distance from E_F), ``skipped_gaps`` counts gaps
        in view too narrow for a label.
    """
    d = display or Display()
    E = d.energy
    s = path["distance"]
    lines = []
    for spin, energies in path["energies"].items():
        for n in range(energies.shape[1]):
            lines += ax.plot(s, E(energies[:, n]), lw=1.0, color=spin_colour(spin), ls=SPIN_LINESTYLES[spin])
    lo, hi = energy_range or (min(b.energy_min for b in chern.bands), max(b.energy_max for b in chern.bands))
    pad = 0.04 * (hi - lo)
    ax.set_ylim(float(E(lo - pad)), float(E(hi + pad)))
    reference = fermi_energy if fermi_energy is not None else 0.5 * (lo + hi)
    band_labels, shown_groups = [], set()
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
        band_labels.append((abs(centre - reference), ax.annotate(
            text, (1.0, float(E(centre))), xycoords=("axes fraction", "data"), xytext=(4, 0),
            textcoords="offset points", va="center", fontsize=7, color=spin_colour(band.spin),
            annotation_clip=False)))
    # Text height in data units, for "wide enough": the axes' height in points
    # is not known before the layout; the figure's is an upper bound.
    text_pt = 7.0 * 1.2
    axes_pt = max(ax.get_position().height * ax.figure.get_figheight() * 72.0, 1.0)
    text_height = text_pt / axes_pt * (hi - lo + 2 * pad)
    gap_labels, skipped = [], 0
    for gap in chern.gaps:  # Chern sum of everything below each gap in view
        if not (gap.energy_min >= lo - pad and gap.energy_max <= hi + pad):
            continue
        at_fermi = fermi_energy is not None and gap.energy_min < fermi_energy < gap.energy_max
        if at_fermi:
            ax.axhspan(float(E(gap.energy_min)), float(E(gap.energy_max)), color=FERMI_GAP_SHADE, zorder=0)
            gap_labels.append((-1.0, ax.annotate(
                f"$E_F$ in gap {gap.below} (above {gap.below} band{'s' if gap.below != 1 else ''}): "
                f"sum C = {gap.chern}",
                (0.02, float(E(0.5 * (fermi_energy + gap.energy_max)))), xycoords=("axes fraction", "data"),
                ha="left", va="center", fontsize=7, color="k")))
        elif gap.energy_max - gap.energy_min >= 1.3 * text_height:
            gap_labels.append((abs(gap.middle - reference), ax.annotate(
                f"gap {gap.below}: sum C = {gap.chern}", (0.02, float(E(gap.middle))),
                xycoords=("axes fraction", "data"), ha="left", va="center", fontsize=7, color="0.35")))
        else:
            skipped += 1
    if fermi_energy is not None:
        ax.axhline(float(E(fermi_energy)), **{**REFERENCE["fermi"], "ls": ":"})
    for pos, name in path["ticks"]:
        ax.axvline(pos, color="0.85", lw=0.6, zorder=0)
    ax.set_xticks([p for p, _ in path["ticks"]], [n for _, n in path["ticks"]])
    ax.set_xlim(s[0], s[-1])
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    ax.set_xlabel(xlabel or path.get("label") or "reduced momentum $(k_1, k_2)$ of the magnetic unit cell")
    gap_labels = [t for _, t in sorted(gap_labels, key=lambda x: x[0])]
    band_labels = [t for _, t in sorted(band_labels, key=lambda x: x[0])]
    return {"lines": lines, "labels": gap_labels + band_labels, "gap_labels": gap_labels,
            "band_labels": band_labels, "skipped_gaps": skipped}


def hexagonal_path_bands(bloch, periods, *, points: int = 240) -> dict:
    """Bulk bands along Gamma-K-M-K'-Gamma of a hexagonal Brillouin zone (both valleys).

    Parameters
    ----------
    bloch : topoedge.systems.bloch.BlochHamiltonian
        The bulk, whose reduced momenta are ``k_i = k . R_i``.
    periods : (2, 2) array_like
        The real-space periods ``R_1``, ``R_2`` of the bulk builder's
        translation symmetry (Cartesian, lattice length unit), 60 or 120
        degrees apart.
    points : int

    Returns
    -------
    dict
        As :func:`topoedge.solvers.chern.path_bands`, ``distance`` in
        Cartesian momentum (1/length unit; every corner is a sample), ``ticks``
        at Gamma, K, M, K', Gamma,
        ``k_reduced`` (P, 2) and ``corners`` {name: Cartesian k}. K and K'
        are the two inequivalent corners of the zone where the Dirac cones of
        the plain honeycomb lattice sit (a Haldane or staggered mass opens
        different gaps there), M the middle of the zone edge between them.
    """
    R = np.asarray(periods, dtype=float).reshape(2, 2)
    G = 2 * np.pi * np.linalg.inv(R).T                     # G_i . R_j = 2 pi delta_ij
    candidates = sorted((i * G[0] + j * G[1] for i in (-1, 0, 1) for j in (-1, 0, 1) if (i, j) != (0, 0)),
                        key=lambda g: (round(float(np.linalg.norm(g)), 9), float(np.arctan2(g[1], g[0]))))
    ga = candidates[0]
    # The shortest reciprocal vector 60 degrees from ga: K is equidistant from 0, ga and gb.
    gb = min(candidates[1:], key=lambda g: abs(float(g @ ga) / float(np.linalg.norm(g) * np.linalg.norm(ga))
                                             - 0.5) + 1e-9 * float(np.linalg.norm(g)))
    K = np.linalg.solve(np.array([ga, gb]), [float(ga @ ga) / 2, float(gb @ gb) / 2])
    M = ga / 2
    K2 = 2 * M - K                                          # the other end of the zone edge: K'
    corners = np.array([[0.0, 0.0], K, M, K2, [0.0, 0.0]])
    seg = np.linalg.norm(np.diff(corners, axis=0), axis=1)
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    # every corner sampled exactly (the Dirac point is a single point)
    counts = [max(2, int(round(points * length / cum[-1]))) for length in seg]
    s = np.concatenate([np.linspace(cum[i], cum[i + 1], n, endpoint=(i == len(seg) - 1))
                        for i, n in enumerate(counts)])
    k = np.stack([np.interp(s, cum, corners[:, i]) for i in (0, 1)], axis=-1)
    reduced = k @ R.T
    blocks = bloch.spin_blocks()
    parts = {"up": bloch.block(blocks[0]), "down": bloch.block(blocks[1])} if blocks else {None: bloch}
    energies = {spin: np.linalg.eigvalsh(part.at(reduced[:, 0], reduced[:, 1])) for spin, part in parts.items()}
    return {"distance": s, "ticks": list(zip(cum, ["Γ", "K", "M", "K'", "Γ"])), "energies": energies,
            "k_reduced": reduced, "corners": {"Γ": corners[0], "K": K, "M": M, "K'": K2}}


def bulk_path_of(result) -> dict:
    """The momentum path of a run's bulk figure, with the label of its axis.

    Zero-field hexagonal lattices (registry entries without field and with
    ``length_unit == "a_cc"``) get Gamma-K-M-K'-Gamma of their own Brillouin
    zone (computed here from the bulk builder), other zero-field lattices
    the run's Gamma-X-M-Gamma of the unit cell, lattices in a field that of
    the magnetic unit cell.
    """
    sc = result.scenario
    entry = lattice(sc.lattice.kind)
    path = dict(result.bulk_path)
    names = [n for _, n in path.get("ticks", [])]
    if not entry.in_field and entry.length_unit == "a_cc" and "K" not in names:
        from ..workflows.build import build_bulk

        periods = entry.bulk(sc.lattice, sc.spin).symmetry.periods
        path = hexagonal_path_bands(build_bulk(sc), periods)
    if "label" not in path:
        cell = "magnetic unit cell" if entry.in_field else "unit cell"
        if "K" in [n for _, n in path["ticks"]]:
            unit = entry.length_unit.replace("a_cc", "a_{cc}")
            path["label"] = f"momentum along Γ-K-M-K'-Γ, hexagonal Brillouin zone of the {cell} ($1/{unit}$)"
        else:
            path["label"] = f"reduced momentum $(k_1, k_2)$ of the {cell}"
    return path


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
        ``{"bars": [...], "labels": [...]}``, the labels in the order of
        priority (E_F's gap first, then by distance from E_F).
    """
    d = display or Display()
    E = d.energy
    spins = [s for s in chern.sectors]
    columns = {spin: i for i, spin in enumerate(spins)}
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
        x = COLUMN_STEP * columns[group.spin]
        top, bottom = float(E(group.energy_max)), float(E(group.energy_min))
        thick = max(top - bottom, 0.004 * float(E(hi) - E(lo)))
        bars.append(ax.add_patch(Rectangle(
            (x + 0.1, 0.5 * (top + bottom) - thick / 2), 0.55, thick, color=spin_colour(group.spin))))
        distance = abs(centre - fermi_energy) if fermi_energy is not None else 0.0
        labels.append((distance, ax.annotate(f"n = {n}: C = {group.chern}"
                                             + (f" ({len(group.bands)} bands)" if len(group.bands) > 1 else ""),
                                             (x + 0.72, 0.5 * (top + bottom)), va="center", fontsize=7,
                                             color=spin_colour(group.spin))))
    if continuum:
        for spin, levels in continuum.items():
            if spin not in columns:
                continue
            x = COLUMN_STEP * columns[spin]
            for e in levels:
                if lo - pad <= e <= hi + pad:
                    ax.plot([x + 0.04, x + 0.71], [float(E(e))] * 2, color="0.4", ls="--", lw=0.8, zorder=3)
    if fermi_energy is not None:
        ax.axhline(float(E(fermi_energy)), **{**REFERENCE["fermi"], "ls": ":"})
        for gap in chern.gaps:
            if gap.energy_min < fermi_energy < gap.energy_max:
                ax.axhspan(float(E(gap.energy_min)), float(E(gap.energy_max)), color=FERMI_GAP_SHADE, zorder=0)
                per_level = max(len(g.bands) for g in chern.groups) if chern.groups else 1
                nu = (f" ($\\nu$ = {gap.below // per_level})" if per_level > 1 and gap.below % per_level == 0
                      else "")
                labels.append((-1.0, ax.annotate(f"$E_F$ in the gap above {gap.below} bands{nu}: "
                                                 f"sum C = {gap.chern}",
                                                 (0.02, float(E(0.5 * (fermi_energy + gap.energy_max)))),
                                                 xycoords=("axes fraction", "data"), va="center", fontsize=7,
                                                 color="k")))
    ax.set_xlim(0, COLUMN_STEP * (len(spins) - 1) + 1.5)     # room for the labels of the last column
    ax.set_ylim(float(E(lo - pad)), float(E(hi + 2 * pad)))
    ax.set_xticks([COLUMN_STEP * i + 0.4 for i in range(len(spins))],
                  [f"spin {s}" if s else "spinless" for s in spins])
    ax.set_ylabel(f"{d.energy_label} ({d.energy_unit})")
    return {"bars": bars, "labels": [t for _, t in sorted(labels, key=lambda x: x[0])]}


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
    """Figure of the bulk bands with their Chern numbers.

    A momentum path (Gamma-K-M-Gamma for zero-field hexagonal lattices,
    see :func:`bulk_path_of`) or, with the Landau-level solver, a level
    diagram. Only E_F's gap is shaded; labels that would overlap are left
    out, and the legend below the axes says how many.
    """
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6.5, 5.8), layout="constrained")
    ef = result.fermi_energy
    d = display_units(result)
    window = bulk_energy_range(result.chern, ef)
    fermi_handles = [Line2D([], [], **{**REFERENCE["fermi"], "ls": ":"}, label="$E_F$"),
                     Patch(color=FERMI_GAP_SHADE, label="$E_F$'s gap")]
    if result.chern.solver == "landau":
        art = plot_level_diagram(result.chern, ax=ax, fermi_energy=ef, energy_range=window, display=d,
                                 continuum=continuum_levels(result, *window))
        hidden = hide_overlapping(art["labels"])
        handles = fermi_handles + [Line2D([], [], color="0.4", ls="--",
                                          label=r"continuum $\hbar\omega_c(n+1/2) \mp \Delta_Z/2$")]
        if hidden:
            handles.append(Line2D([], [], ls="", label=f"{hidden} overlapping label(s) left out"))
        ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.08), ncols=2, fontsize=8,
                  frameon=False)
        ax.set_title(f"{title_of(result)}\nbulk Landau levels (bars: band ranges, at least a line wide), "
                     f"Chern numbers on {result.chern.grid[0]}x{result.chern.grid[1]}", fontsize=9)
        return fig
    path = bulk_path_of(result)
    art = plot_bulk_bands(path, result.chern, ax=ax, fermi_energy=ef, energy_range=window, display=d)
    handles = []
    if result.scenario.spin.enabled:
        handles = [Line2D([], [], color=spin_colour(s), ls=SPIN_LINESTYLES[s], label=f"spin {s}")
                   for s in ("up", "down")]
    handles += fermi_handles
    legend = ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.1), ncols=len(handles),
                       fontsize=8, frameon=False)
    hidden_gaps = hide_overlapping(art["gap_labels"])
    hidden_bands = hide_overlapping(art["band_labels"])
    notes = []
    if hidden_gaps + art["skipped_gaps"]:
        notes.append(f"{hidden_gaps + art['skipped_gaps']} gap(s) in view not labelled (too narrow or crowded)")
    if hidden_bands:
        notes.append(f"{hidden_bands} band label(s) left out (crowded)")
    if notes:
        legend.set_title("; ".join(notes), prop={"size": 7})
    entry = lattice(result.scenario.lattice.kind)
    cell = "magnetic unit cell" if entry.in_field else "unit cell"
    ax.set_title(f"{title_of(result)}\nbulk bands of the {cell}, Chern numbers on a "
                 f"{result.chern.grid[0]}x{result.chern.grid[1]} grid", fontsize=9)
    return fig
