"""Properties of the figures (not pixels): legends beside the data, one colour per spin everywhere,
no overlapping labels, the hexagonal path, readable Hall-bar panels, visible densities, sweep units."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.colors import to_rgba  # noqa: E402

from topoedge.plotting import bulk_figure, hallbar_figure, hartree_fock_figure, ribbon_figure  # noqa: E402
from topoedge.plotting.bulk import hexagonal_path_bands, plot_bulk_bands  # noqa: E402
from topoedge.plotting.style import SPIN_COLOURS, hide_overlapping  # noqa: E402
from topoedge.plotting.sweep import sweep_figures  # noqa: E402
from topoedge.scenario import load_scenario, parse_scenario  # noqa: E402

# A ribbon that runs in about a second: W = 30, flux 1/10, no Zeeman splitting
# (so the two spins of every edge mode cross E_F at the same k), E_F in the
# gap above the lowest Landau level of both spins.
TINY = {
    "title": "tiny figure ribbon",
    "lattice": {"flux": "1/10"},
    "spin": {"enabled": True, "zeeman": 0.0},
    "ribbon": {"width": 30, "edge": {"profile": "linear", "width": 4.0, "height": 1.0}},
    "spectrum": {"k_points": 21},
    "chern": {"grid": [12, 12], "refine": False},
    "fermi": {"gap": 2},
}


@pytest.fixture(scope="module")
def tiny():
    from topoedge.workflows import run_scenario

    return run_scenario(parse_scenario(TINY))


@pytest.fixture(scope="module")
def haldane():
    from topoedge.workflows import run_scenario

    return run_scenario(load_scenario("haldane", ["ribbon.width=12", "spectrum.k_points=21"]))


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


def _span(patch) -> tuple[float, float, float, float]:
    """``(x0, x1, y0, y1)`` of a span patch in its own coordinates (data along the spanned direction)."""
    xy = patch.get_patch_transform().transform(patch.get_path().vertices)
    return xy[:, 0].min(), xy[:, 0].max(), xy[:, 1].min(), xy[:, 1].max()


def _overlap(a, b) -> bool:
    return a.x0 < b.x1 and b.x0 < a.x1 and a.y0 < b.y1 and b.y0 < a.y1


def _spin_up_colours(fig) -> set:
    """RGBA of every artist labelled or drawn as spin up that the figure's first axes show."""
    found = set()
    for ax in fig.axes:
        for line in ax.get_lines():
            if line.get_label() in ("spin up",):
                found.add(to_rgba(line.get_color()))
    return found


# ------------------------------------------------------------------ ribbon


def test_ribbon_legend_lies_outside_the_data(tiny):
    fig = ribbon_figure(tiny)
    fig.canvas.draw()
    ax = fig.axes[0]
    legends = [ax.get_legend()] + [a for a in ax.artists if isinstance(a, matplotlib.legend.Legend)]
    assert legends[0] is not None
    for legend in legends:
        assert not _overlap(legend.get_window_extent(), ax.get_window_extent())


def test_ribbon_coinciding_crossings_are_all_visible(tiny):
    # Without Zeeman splitting both spins of an edge mode cross E_F at the same k.
    fig = ribbon_figure(tiny)
    fig.canvas.draw()
    ax = fig.axes[0]
    marks = [c for c in ax.collections if hasattr(c, "stacked")]
    assert len(marks) == 4
    # centres on the canvas (pixels) and marker sizes (pixels)
    centres = [m.get_offset_transform().transform(m.get_offsets())[0] for m in marks]
    sizes = [np.sqrt(m.get_sizes()[0]) * fig.dpi / 72 for m in marks]
    close = 0
    for i in range(len(centres)):
        for j in range(i + 1, len(centres)):
            distance = float(np.hypot(*(centres[i] - centres[j])))
            assert distance > 0.6 * min(sizes[i], sizes[j]), "two crossings drawn on top of each other"
            close += distance < 2 * max(sizes[i], sizes[j])
    assert close >= 2          # the spin-degenerate pairs: stacked next to each other
    assert any("stacked" in t.get_text() for t in ax.get_legend().get_texts())


def test_ribbon_marks_spin_with_the_spin_colours_not_the_edge(tiny):
    fig = ribbon_figure(tiny)
    marks = [c for c in fig.axes[0].collections if hasattr(c, "stacked")]
    edge_colours = {tuple(np.round(m.get_edgecolor()[0], 3)) for m in marks}
    spins = {tuple(np.round(to_rgba(SPIN_COLOURS[s]), 3)) for s in ("up", "down")}
    assert edge_colours == spins
    # bottom and top edge differ in the fill, not the colour
    fills = {tuple(np.round(m.get_facecolor()[0], 3)) for m in marks}
    assert (1.0, 1.0, 1.0, 1.0) in fills and len(fills) == 3


def test_spin_up_has_one_colour_in_every_figure(tiny):
    ribbon = ribbon_figure(tiny)
    ribbon_up = {to_rgba(h.get_color()) for h in ribbon.axes[0].get_legend().legend_handles
                 if h.get_label() == "spin up"}
    bulk = bulk_figure(tiny)
    bulk_up = {to_rgba(h.get_color()) for h in bulk.axes[0].get_legend().legend_handles
               if h.get_label() == "spin up"}
    hf = hartree_fock_figure(_fake_hf(), flux=0.1, title="fake")
    hf_up = _spin_up_colours(hf)
    assert ribbon_up == bulk_up == hf_up == {to_rgba(SPIN_COLOURS["up"])}
    assert to_rgba(SPIN_COLOURS["up"]) != to_rgba(SPIN_COLOURS["down"])


# -------------------------------------------------------------------- bulk


def _crowded_bands(n: int = 24):
    """Fake Chern result: ``n`` narrow bands, gaps of alternating widths, some tiny."""
    bands, groups, gaps = [], [], []
    e = 0.0
    for i in range(n):
        band = SimpleNamespace(energy_min=e, energy_max=e + 0.002, chern=1, spin="up", group=i)
        bands.append(band)
        groups.append(SimpleNamespace(energy_min=e, energy_max=e + 0.002, chern=1, bands=[band]))
        width = 0.05 if i % 3 else 0.004
        if i < n - 1:
            gaps.append(SimpleNamespace(energy_min=e + 0.002, energy_max=e + 0.002 + width,
                                        middle=e + 0.002 + width / 2, below=i + 1, chern=i + 1))
        e += 0.002 + width
    chern = SimpleNamespace(bands=bands, groups=groups, gaps=gaps)
    s = np.linspace(0, 1, 5)
    path = {"distance": s, "ticks": [(0.0, "Γ"), (1.0, "X")],
            "energies": {"up": np.array([[b.energy_min for b in bands]] * 5)}}
    return path, chern


def test_bulk_gap_labels_never_overlap():
    path, chern = _crowded_bands()
    fig, ax = plt.subplots(figsize=(6.5, 5.0), layout="constrained")
    art = plot_bulk_bands(path, chern, ax=ax, fermi_energy=chern.gaps[10].middle)
    # A lower figure than the labels were chosen for (a layout that shrinks the axes): they collide.
    fig.set_size_inches(6.5, 2.2)
    fig.canvas.draw()
    boxes = [t.get_window_extent() for t in art["gap_labels"]]
    # the test means something: drawn as placed, some labels collide
    assert any(_overlap(a, b) for i, a in enumerate(boxes) for b in boxes[i + 1:])
    hidden = hide_overlapping(art["gap_labels"])
    hide_overlapping(art["band_labels"])
    fig.canvas.draw()
    assert hidden > 0
    for group in (art["gap_labels"], art["band_labels"]):
        shown = [t.get_window_extent() for t in group if t.get_visible()]
        assert shown
        assert not any(_overlap(a, b) for i, a in enumerate(shown) for b in shown[i + 1:])
    # E_F's gap keeps its label; only E_F's gap is shaded
    assert art["gap_labels"][0].get_visible() and "E_F" in art["gap_labels"][0].get_text()
    assert len([p for p in ax.patches if p.get_zorder() == 0]) == 1
    # tiny gaps are not labelled at all (and counted)
    assert art["skipped_gaps"] > 0


def test_bulk_figure_shades_only_the_gap_of_e_f(tiny):
    fig = bulk_figure(tiny)
    ax = fig.axes[0]
    spans = [p for p in ax.patches if p.get_zorder() == 0]
    assert len(spans) == 1
    _, _, y0, y1 = _span(spans[0])
    assert y0 < tiny.fermi_energy < y1


def test_haldane_bulk_path_goes_through_k(haldane):
    fig = bulk_figure(haldane)
    ax = fig.axes[0]
    names = [t.get_text() for t in ax.get_xticklabels()]
    assert names == ["Γ", "K", "M", "K'", "Γ"]
    assert "magnetic" not in ax.get_xlabel() and "magnetic" not in ax.get_title()
    assert "unit cell" in ax.get_xlabel()


def test_hexagonal_path_finds_the_dirac_point():
    # t2 = 0 and no sublattice mass: graphene, whose bands +-t|1 + e^{ik.a1} + e^{ik.a2}|
    # touch at K and K' (E = 0) only, with 2 x 3t at Gamma and 2 x t at M (the
    # nearest-neighbour dispersion of P. R. Wallace, Phys. Rev. 71, 622 (1947),
    # from memory).
    from topoedge.models.lattices import lattice
    from topoedge.workflows.build import build_bulk

    sc = load_scenario("haldane", ["lattice.t2=0", "lattice.staggered=0"])
    periods = lattice(sc.lattice.kind).bulk(sc.lattice, sc.spin).symmetry.periods
    path = hexagonal_path_bands(build_bulk(sc), periods, points=301)
    e = path["energies"][None]
    gap = e[:, 1] - e[:, 0]
    ticks = dict((name, pos) for pos, name in path["ticks"])
    for valley in ("K", "K'"):
        closest = int(np.argmin(np.abs(path["distance"] - ticks[valley])))
        assert gap[closest] < 1e-2
    assert gap[0] == pytest.approx(6.0) and gap.min() < 1e-2
    # M: the middle of the zone edge, gap 2 t1 (same dispersion)
    at_m = int(np.argmin(np.abs(path["distance"] - path["ticks"][2][0])))
    assert gap[at_m] == pytest.approx(2.0, abs=1e-6)


# ------------------------------------------------------------------ Hall bar


def _scan():
    energy = np.linspace(-3.9, -3.4, 21)
    chern = [None] + [1] * 7 + [2] * 13
    r_xy = [np.nan, np.nan] + [-1.0] * 6 + [-0.5] * 13
    noise = np.random.default_rng(0).normal(0, 1e-15, 21)
    return {"energy": list(energy), "chern": chern, "r_xy_bulk": [None if c is None else -1 / c for c in chern],
            "r_xy": r_xy, "r_xx": [np.nan, np.nan] + list(np.abs(noise[2:])), "r_xy_sem": [0.0] * 21,
            "r_xx_sem": [0.0] * 21, "errors": []}


def test_hallbar_r_xx_axis_is_not_scaled_to_noise():
    fig = hallbar_figure(_scan(), axis="energy", title="fake")
    r_xx = fig.axes[1]
    lo, hi = r_xx.get_ylim()
    assert hi >= 0.05
    assert abs(lo) > 1e-6 and lo <= 0


def test_hallbar_marks_points_without_channel():
    scan = _scan()
    fig = hallbar_figure(scan, axis="energy", title="fake")
    top = fig.axes[0]
    spans = [p for p in top.patches if p.get_hatch()]
    assert spans
    x0, x1, _, _ = _span(spans[0])
    assert x0 <= scan["energy"][0] and x1 >= scan["energy"][1]
    labels = [t.get_text() for legend in fig.legends for t in legend.get_texts()]
    assert any("no open channel" in t for t in labels)


def test_hallbar_bulk_prediction_is_steps_with_labels_and_data_unjoined():
    fig = hallbar_figure(_scan(), axis="energy", title="fake")
    top = fig.axes[0]
    wide = [line for line in top.get_lines() if line.get_linewidth() > 3]
    assert len(wide) == 2                       # two plateaus: C = 1 and C = 2
    for line in wide:
        y = line.get_ydata()
        assert np.all(y == y[0])                # flat steps
    assert {t.get_text() for t in top.texts} >= {"$\\nu$ = 1", "$\\nu$ = 2"}
    # the bar's data are points, not joined by lines
    data = [c for c in top.containers]
    assert data and all(c.lines[0].get_linestyle() in ("None", "", " ") for c in data)


def test_hallbar_field_scan_axis_in_tesla():
    scan = {"b_tesla": [2.0, 3.0, 4.0], "r_xy": [0.25, 0.33, 0.5], "r_xx": [0.0, 1e-15, 0.0],
            "r_xy_bulk": [0.25, None, 0.5], "chern": [-4, None, -2]}
    fig = hallbar_figure(scan, axis="b_tesla")
    assert fig.axes[1].get_xlabel() == "$B$ (T)"


# ----------------------------------------------------------- Hartree-Fock


def _fake_hf(width: int = 40):
    y = np.arange(width)
    up = 0.1 * np.clip(np.minimum(y, width - 1 - y) / 6, 0, 1)
    return SimpleNamespace(mu=-3.7, density=np.array([up, np.zeros(width)]), background=up,
                           hartree=np.zeros(width), k=np.linspace(-np.pi, np.pi, 9),
                           energies=np.full((2, 9, width), -3.7), history={"residual": [1e-2, 1e-5, 1e-8]},
                           start="polarised", energy=-1.0, converged=True, message="converged")


def test_hartree_fock_total_density_is_visible_over_spin_up():
    fig = hartree_fock_figure(_fake_hf(), flux=0.1, title="fake")
    dens = fig.axes[0]
    lines = {line.get_label(): line for line in dens.get_lines()}
    total, up = lines["total (both spins)"], lines["spin up"]
    np.testing.assert_allclose(total.get_ydata(), up.get_ydata())     # a fully polarised profile
    assert total.get_zorder() > max(line.get_zorder() for line in dens.get_lines() if line is not total)
    assert total.get_linestyle() != up.get_linestyle()
    assert to_rgba(total.get_color()) != to_rgba(up.get_color())
    assert total.get_linewidth() < up.get_linewidth()
    fig.canvas.draw()
    legend = dens.get_legend()
    assert not _overlap(legend.get_window_extent(), dens.get_window_extent())


# ---------------------------------------------------------------- sweeps


def _sweep():
    from topoedge.workflows.sweep import parse_sweep

    sweep = parse_sweep({"title": "fake sweep", "scenario": {"spin": {"enabled": True}},
                         "axis": [{"key": "ribbon.edge.width", "values": [0.0, 4.0, 8.0]},
                                  {"key": "spin.zeeman", "values": [0.0, 0.2]}],
                         "plot": {"quantities": ["chern", "fermi_energy", "outermost_spin_bottom"]}})
    rows = [{"ribbon.edge.width": w, "spin.zeeman": z, "status": "ok" if (w, z) != (8.0, 0.2) else "failed",
             "chern": 2 if z < 0.1 else 1, "fermi_energy": -3.7 + w / 100, "outermost_spin_bottom": "up"}
            for w in (0.0, 4.0, 8.0) for z in (0.0, 0.2)]
    return sweep, rows


def test_sweep_map_axes_carry_units_and_sample_points():
    sweep, rows = _sweep()
    figures = sweep_figures(sweep, rows)
    ax = figures["map-chern"].axes[0]
    assert ax.get_xlabel() == "ribbon.edge.width (a)"
    assert ax.get_ylabel() == "spin.zeeman (t)"
    dots = [line for line in ax.get_lines() if line.get_marker() not in (None, "None", "")]
    assert dots and len(dots[0].get_xdata()) == 5          # the five computed points


def test_sweep_lines_do_not_slope_between_integers():
    from topoedge.workflows.sweep import parse_sweep

    sweep, rows = _sweep()
    line = parse_sweep({"title": "fake line", "scenario": {"spin": {"enabled": True}},
                        "axis": [{"key": "ribbon.edge.width", "values": [0.0, 4.0, 8.0]}],
                        "plot": {"quantities": ["chern", "fermi_energy"]}})
    fig = sweep_figures(line, [r for r in rows if r["spin.zeeman"] == 0.0])["lines"]
    chern_ax, energy_ax = fig.axes[:2]
    assert fig.axes[-1].get_xlabel() == "ribbon.edge.width (a)"
    for drawn in chern_ax.get_lines():
        if drawn.get_linestyle() not in ("None", "", " "):
            assert drawn.get_drawstyle().startswith("steps")
    assert any(d.get_marker() not in (None, "None", "") for d in chern_ax.get_lines())
    assert any(d.get_marker() not in (None, "None", "") for d in energy_ax.get_lines())


def test_hexagonal_path_shows_both_valley_gaps_of_the_haldane_model():
    # Haldane, PRL 61, 2015 (1988): the masses at the two valleys are
    # M -+ 3 sqrt(3) t2 sin(phi), so the direct gaps are 2 |M -+ 3 sqrt(3) t2|
    # at phi = pi/2 (shipped haldane: M = 0.2, t2 = 0.1): 0.639 and 1.439 t.
    from topoedge.models.lattices import lattice
    from topoedge.workflows.build import build_bulk

    sc = load_scenario("haldane")
    periods = lattice(sc.lattice.kind).bulk(sc.lattice, sc.spin).symmetry.periods
    path = hexagonal_path_bands(build_bulk(sc), periods, points=301)
    e = path["energies"][None]
    gap = e[:, 1] - e[:, 0]
    ticks = dict((name, pos) for pos, name in path["ticks"])
    at = {v: gap[int(np.argmin(np.abs(path["distance"] - ticks[v])))] for v in ("K", "K'")}
    expected = sorted(2 * abs(0.2 + s * 3 * np.sqrt(3) * 0.1) for s in (-1, 1))
    assert sorted(at.values()) == pytest.approx(expected, abs=1e-9)
    assert gap.min() == pytest.approx(expected[0], abs=1e-9)
