"""What every figure shares: display units (lattice or meV / nm / 1/nm), markers, colours, titles."""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np
from ..models.lattices import lattice
from ..solvers.spectrum import RibbonSpectrum


# ---------------------------------------------------------------- colour language
#
# Every figure speaks the same visual language, defined here once:
#
# - spin: colour, the orange / purple pair of SPIN_COLOURS (spinless: near black),
#   in the ribbon's band points also the marker (SPIN_MARKERS);
# - spin polarisation of a set of levels: polarisation_cmap, purple (all down) over
#   grey (unpolarised) to orange (all up);
# - edge (bottom / top): the fill of a marker (EDGE_FILLED), never a colour;
# - propagation direction: the way a triangle points (DIRECTION_MARKERS);
# - position across the ribbon: POSITION_CMAP, blue (bottom) over grey to
#   green (top), no orange or purple in it, so it cannot be read as a spin;
# - Chern numbers: one diverging map centred on 0 (chern_colours), grey at 0,
#   warm for C > 0 and cool for C < 0;
# - references (E_F, bulk predictions, backgrounds): greys and black, dashed
#   or dotted (REFERENCE).

#: Colour of each spin, in every figure ("none": a spinless model).
SPIN_COLOURS = {"up": "#e66101", "down": "#5e3c99", "none": "0.15", None: "0.15"}
#: Line style of each spin where lines of both spins overlap.
SPIN_LINESTYLES = {"up": "-", "down": "--", "none": "-", None: "-"}
#: Marker of each spin for band points (up: triangle up).
SPIN_MARKERS = {"up": "^", "down": "v", "none": "o"}
#: Marker of a mode moving along +x / -x.
DIRECTION_MARKERS = {"+x": ">", "-x": "<"}
#: Modes of the bottom edge are filled, those of the top edge open; a bulk crossing is a diamond.
EDGE_FILLED = {"bottom": True, "top": False, "bulk": True}
#: Ends of the position colour map (bottom edge, middle, top edge).
POSITION_COLOURS = ("#2166ac", "#c8c8c8", "#1b7837")
#: Neutral styles of reference lines.
REFERENCE = {"fermi": dict(color="k", ls="--", lw=0.8), "bulk": dict(color="0.45", ls="--", lw=1.4),
             "background": dict(color="0.78", ls="-", lw=4.0)}
#: Colour of data that is not split by spin (both spins together).
TOTAL_COLOUR = "k"


def spin_name(spin) -> str:
    """``"up"``, ``"down"`` or ``"none"`` for a spin label or an ``<S_z>`` value."""
    if spin in ("up", "down"):
        return spin
    if spin is None or spin == "none" or isinstance(spin, str):
        return "none"
    value = float(spin)
    if not np.isfinite(value) or abs(value) < 0.25:
        return "none"
    return "up" if value > 0 else "down"


def spin_colour(spin) -> str:
    """The colour of a spin label (``"up"``, ``"down"``, None) or ``<S_z>``."""
    return SPIN_COLOURS[spin_name(spin)]


def polarisation_cmap():
    """Spin polarisation -1 .. +1: spin down purple, unpolarised grey, spin up orange (the spin colours)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("topoedge_polarisation",
                                             [SPIN_COLOURS["down"], "#d9d9d9", SPIN_COLOURS["up"]])


def position_cmap():
    """The colour map of positions across the ribbon: blue (bottom), grey (middle), green (top)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("topoedge_position", POSITION_COLOURS)


#: Chern sums beyond +-CHERN_CLIP share the colour of +-CHERN_CLIP.
CHERN_CLIP = 8


def chern_colours(clip: int = CHERN_CLIP):
    """Discrete diverging colours for Chern numbers ``-clip .. clip``, grey at 0.

    Positive values run from yellow (``C = 1``) through orange and red to
    dark red (``YlOrRd``), negative ones from pale green through teal and
    blue to navy (``YlGnBu``): the sign reads from warm against cool, the
    size from hue and darkness together, so that neighbouring integers stay
    apart. Values beyond ``+-clip`` take the end colours. Every figure that
    colours a Chern number uses this map.

    Parameters
    ----------
    clip : int
        Largest ``|C|`` with a colour of its own.

    Returns
    -------
    cmap : matplotlib.colors.ListedColormap
        ``2 clip + 1`` colours, with under/over colours for the clipped ends.
    norm : matplotlib.colors.BoundaryNorm
        Bins of width 1 centred on the integers.
    """
    import matplotlib
    from matplotlib import colors

    clip = max(int(clip), 1)
    steps = np.linspace(0.25, 1.0, clip)  # skip the near-white start of both maps
    warm, cool = matplotlib.colormaps["YlOrRd"], matplotlib.colormaps["YlGnBu"]
    rgba = [cool(x) for x in steps[::-1]] + [colors.to_rgba("0.55")] + [warm(x) for x in steps]
    cmap = colors.ListedColormap(rgba, name="chern").with_extremes(under=rgba[0], over=rgba[-1])
    norm = colors.BoundaryNorm(np.arange(-clip - 0.5, clip + 1.5), cmap.N)
    return cmap, norm


def chern_continuous(limit: float):
    """A continuous version of :func:`chern_colours` for non-integer values (local markers, sigma_xy).

    Returns ``(cmap, norm)`` with the same warm (positive) and cool
    (negative) sides, grey at 0, and a linear scale from ``-limit`` to ``+limit``.
    """
    from matplotlib import colors

    listed, _ = chern_colours()
    cmap = colors.LinearSegmentedColormap.from_list("chern-continuous", listed.colors, N=256)
    limit = max(float(limit), 1e-9)
    return cmap, colors.Normalize(vmin=-limit, vmax=limit)


def legend_outside(ax, handles, *, where: str = "right", **kwargs):
    """A legend beside (``"right"``) or below (``"below"``) the axes, never over the data.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    handles : list of artists
    where : {"right", "below"}
    **kwargs
        Passed to :meth:`matplotlib.axes.Axes.legend` (fontsize, title, ncols, ...).

    Returns
    -------
    matplotlib.legend.Legend
        Added to ``ax`` (a constrained layout makes room for it).
    """
    from matplotlib.transforms import ScaledTranslation

    options = dict(fontsize=8, frameon=False)
    if where == "below":
        # below the tick labels and the axis label (set the label first): their heights in points
        ticks = ax.xaxis.get_ticklabels()
        drop = 1.5 * (ticks[0].get_fontsize() if ticks else 10.0) + 6.0
        if ax.get_xlabel():
            drop += 1.4 * ax.xaxis.label.get_fontsize()
        anchor = ax.transAxes + ScaledTranslation(0.0, -drop / 72.0, ax.figure.dpi_scale_trans)
        options.update(loc="upper center", bbox_to_anchor=(0.5, 0.0), bbox_transform=anchor,
                       ncols=min(len(handles), 3) or 1, borderaxespad=0.0)
    else:
        options.update(loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    options.update(kwargs)
    return ax.legend(handles=handles, **options)


@dataclass(frozen=True)
class Display:
    """Units of the figure axes: lattice units by default, meV / nm / 1/nm for physical scenarios.

    ``energy(E) = (E - energy_zero) * energy_scale``, ``momentum(k) = k *
    k_scale``, ``length(y) = y * length_scale``.
    """

    energy_unit: str = "$t$"
    energy_scale: float = 1.0
    energy_zero: float = 0.0
    energy_label: str = "$E$"
    k_unit: str = "$1/a$"
    k_scale: float = 1.0
    length_unit: str = "a"
    length_scale: float = 1.0
    magnetic_length: float | None = None     # in length units, for a second scale

    @property
    def physical(self) -> bool:
        return self.energy_unit == "meV"

    def energy(self, e):
        return (np.asarray(e, dtype=float) - self.energy_zero) * self.energy_scale

    def momentum(self, k):
        return np.asarray(k, dtype=float) * self.k_scale

    def length(self, y):
        return np.asarray(y, dtype=float) * self.length_scale


def display_units(result) -> Display:
    """The :class:`Display` of a run: physical with ``[material]`` and ``[field]``, else lattice units."""
    units = getattr(result, "units", None)
    if units is None:
        return Display()
    a = units.lattice_constant_nm
    return Display(energy_unit="meV", energy_scale=units.hopping_mev,
                   energy_zero=-4.0 + result.scenario.lattice.onsite,
                   energy_label="$E$ above the band bottom", k_unit="1/nm", k_scale=1.0 / a,
                   length_unit="nm", length_scale=a, magnetic_length=units.magnetic_length_nm)


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


def title_of(result) -> str:
    sc = result.scenario
    units = getattr(result, "units", None)
    if units is not None:
        field = sc.field
        carriers = ""
        if units.filling is not None:
            mantissa, exponent = f"{field.density_cm2:.3e}".split("e")
            carriers = (f", $n$ = ${float(mantissa):g}\\times 10^{{{int(exponent)}}}$ cm$^{{-2}}$, "
                        f"$\\nu$ = {units.filling:.3f}")
        elif field.fermi_mev is not None:
            carriers = f", $E_F$ = {field.fermi_mev:g} meV"
        exact = abs(units.b_relative_error) < 1e-12
        lattice_b = "exactly" if exact else f"{units.b_lattice_tesla:.4f} T"
        return (f"{sc.title or 'scenario'}\n$B$ = {units.b_tesla:g} T along {'+z' if units.b_tesla > 0 else '-z'}"
                f"{carriers}\nlattice $a$ = {units.lattice_constant_nm:.3g} nm, flux {sc.lattice.flux} "
                f"$h/e$ per plaquette ({lattice_b})")
    entry = lattice(sc.lattice.kind)
    if not entry.in_field:
        if sc.title and entry.title.lower() in sc.title.lower():
            return sc.title
        return f"{sc.title or 'scenario'}: {entry.title}"
    return f"{sc.title or 'scenario'}: flux {sc.lattice.flux} per {entry.cell}"


def ribbon_geometry(result) -> tuple[tuple[float, float] | None, str, str]:
    """Colour extent, period and length unit of a run's ribbon for the figures."""
    sc = result.scenario
    entry = lattice(sc.lattice.kind)
    if entry.length_unit == "a":
        return None, "a", "sites; 0 = bottom edge"
    pos = result.hamiltonian.position
    period = entry.periods[sc.ribbon.orientation or entry.orientations[0]]
    return (float(pos.min()), float(pos.max())), period, entry.length_unit




def hide_overlapping(texts, *, pad: float = 1.5) -> int:
    """Hide every text whose box would overlap the box of an earlier visible one.

    ``texts`` in the order of priority (the first is always kept). The
    figure is laid out first (without rendering), so the boxes are those of
    the saved figure up to its resolution; ``pad`` (points) keeps a margin.

    Parameters
    ----------
    texts : sequence of matplotlib.text.Text
        Texts of one figure (hidden ones are skipped).
    pad : float

    Returns
    -------
    int
        The number of texts hidden here.
    """
    texts = [t for t in texts if t.get_visible()]
    if not texts:
        return 0
    fig = texts[0].figure
    fig.draw_without_rendering()
    margin = pad * fig.dpi / 72.0
    kept, hidden = [], 0
    for text in texts:
        box = text.get_window_extent().padded(margin)
        if any(box.overlaps(other) for other in kept):
            text.set_visible(False)
            hidden += 1
        else:
            kept.append(box)
    return hidden
