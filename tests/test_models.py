"""Zero-field Chern insulators and user-built kwant systems (topoedge.models.zero_field, chern.builder_chern)."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.solvers.chern import GapClosedError, builder_chern
from topoedge.models.zero_field import haldane_builder, honeycomb_vectors, qwz_builder

SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]])
SZ = np.diag([1.0, -1.0]).astype(complex)


def _reciprocal(periods: np.ndarray) -> np.ndarray:
    """Rows G_i with G_i . period_j = 2 pi delta_ij."""
    return 2 * np.pi * np.linalg.inv(periods).T


# ------------------------------------------------------------------- QWZ model


def _qwz(kx, ky, m):
    # Qi, Wu and Zhang, PRB 74, 085308 (2006), as in ../shared/REFERENCES.md section 6.
    return np.sin(kx) * SX + np.sin(ky) * SY + (m + np.cos(kx) + np.cos(ky)) * SZ


def test_qwz_builder_is_the_published_hamiltonian():
    # Pointwise spectrum of the published H(k) at -k (the Fourier sign of
    # kwant's Bloch convention, see topoedge.models.zero_field), to rounding.
    rng = np.random.default_rng(3)
    for m in (-2.5, -1.0, 0.7):
        bloch = BlochHamiltonian.from_kwant(qwz_builder(), params=dict(m=m))
        for k1, k2 in rng.uniform(0, 2 * np.pi, (10, 2)):
            assert np.allclose(np.linalg.eigvalsh(bloch.at(k1, k2)), np.linalg.eigvalsh(_qwz(-k1, -k2, m)),
                               atol=1e-12)


@pytest.mark.parametrize("m, chern", [(-3.0, 0), (-2.4, 0), (-1.6, -1), (-1.0, -1), (-0.3, -1),
                                      (0.3, 1), (1.0, 1), (1.6, 1), (2.4, 0), (3.0, 0)])
def test_qwz_chern_number_against_m(m, chern):
    # Lower-band Chern number 0 for |m| > 2 and, with the link-variable sign
    # convention, +1 for 0 < m < 2 and -1 for -2 < m < 0 (Qi, Wu, Zhang PRB 74,
    # 085308 (2006); signs recomputed in ../shared/REFERENCES.md section 6).
    # A 12 x 12 grid is plenty (6 x 6 suffices at m = 1, same reference).
    assert builder_chern(qwz_builder(), params=dict(m=m), grid=(12, 12)).gap_above(1).chern == chern


@pytest.mark.parametrize("m", [0.0, 2.0, -2.0])
def test_qwz_gap_closes_at_the_transitions(m):
    # The gap closes at m = 0 (at (pi, 0) and (0, pi)) and m = +-2 (at M and
    # Gamma): reported as a closed gap, never as a Chern number. An even grid
    # contains those momenta.
    with pytest.raises(GapClosedError, match="the gap above band 0 is closed"):
        builder_chern(qwz_builder(), params=dict(m=m), grid=(12, 12)).gap_above(1)


# --------------------------------------------------------------- Haldane model


def _haldane(k, t1, t2, phi, mass):
    # Haldane, PRL 61, 2015 (1988), in the form of ../shared/REFERENCES.md section 5.
    a, b = honeycomb_vectors()
    return (2 * t2 * np.cos(phi) * np.cos(b @ k).sum() * np.eye(2)
            + t1 * (np.cos(a @ k).sum() * SX + np.sin(a @ k).sum() * SY)
            + (mass - 2 * t2 * np.sin(phi) * np.sin(b @ k).sum()) * SZ)


def test_haldane_builder_is_the_published_hamiltonian():
    a, b = honeycomb_vectors()
    g = _reciprocal(b[:2])
    rng = np.random.default_rng(5)
    for phi, mass in ((np.pi / 2, 0.3), (0.7, -0.2)):
        params = dict(t1=1.0, t2=0.1, t2_phase=phi, M=mass)
        bloch = BlochHamiltonian.from_kwant(haldane_builder(), params=params)
        for k1, k2 in rng.uniform(0, 2 * np.pi, (10, 2)):
            k = -(k1 * g[0] + k2 * g[1]) / (2 * np.pi)
            assert np.allclose(np.linalg.eigvalsh(bloch.at(k1, k2)),
                               np.linalg.eigvalsh(_haldane(k, 1.0, 0.1, phi, mass)), atol=1e-12)


@pytest.mark.parametrize("phi", [np.pi / 2, np.pi / 4, -np.pi / 2])
def test_haldane_chern_number_inside_and_outside_the_boundary(phi):
    # |C| = 1 for |M| < 3 sqrt(3) |t2 sin(phi)| and 0 outside (Haldane, PRL 61,
    # 2015 (1988)); C(-phi) = -C(phi). At t2 = 0.1, phi = pi/2 the lower band
    # has C = -1 (link-variable sign convention, ../shared/REFERENCES.md
    # section 5: -1 at M = 0, 0.4, -0.5; 0 at 0.6). Points 0.05 to 0.3 t1
    # from the boundary; 24 x 24 momenta.
    t2 = 0.1
    boundary = 3 * np.sqrt(3) * abs(t2 * np.sin(phi))
    sign = -int(np.sign(np.sin(phi)))
    for mass in (0.0, 0.5 * boundary, -0.5 * boundary, boundary - 0.06, -(boundary - 0.06)):
        result = builder_chern(haldane_builder(), params=dict(t1=1.0, t2=t2, t2_phase=phi, M=mass), grid=(24, 24))
        assert result.gap_above(1).chern == sign, mass
    for mass in (boundary + 0.06, -(boundary + 0.06), boundary + 0.3, -(boundary + 0.3)):
        result = builder_chern(haldane_builder(), params=dict(t1=1.0, t2=t2, t2_phase=phi, M=mass), grid=(24, 24))
        assert result.gap_above(1).chern == 0, mass


# ------------------------------------------------------------- user builders


def test_user_builder_path_equals_the_built_in_lattice():
    # The Hofstadter bulk of the project's builder handed in as a user's
    # builder gives the run's Chern numbers, and at flux 1/5 the band Chern
    # numbers 1, 1, -4, 1, 1 (TKNN, PRL 49, 405 (1982); table in
    # ../shared/REFERENCES.md section 1).
    from topoedge.models.square import bulk_builder, model_params
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import bulk_chern

    phi = Fraction(1, 5)
    user = builder_chern(bulk_builder(phi, spin=False), params=model_params(phi=phi, zeeman=0.0))
    run, _, _ = bulk_chern(parse_scenario({"lattice": {"flux": "1/5"}, "spin": {"enabled": False},
                                           "chern": {"refine": False}}))
    assert [(g.below, g.chern) for g in user.gaps] == [(g.below, g.chern) for g in run.gaps]
    assert [b.chern for b in user.bands] == [1, 1, -4, 1, 1]


def test_user_builder_needs_two_symmetries():
    import kwant

    lat = kwant.lattice.square(norbs=1)
    ribbon = kwant.Builder(kwant.TranslationalSymmetry((1, 0)))
    ribbon[lat(0, 0)] = 0
    with pytest.raises(TypeError, match="exactly two translation symmetries; this builder has 1"):
        builder_chern(ribbon)


# ------------------------------------------------------- user ribbons (1D)


def _ribbon(template, period, width):
    import kwant

    ribbon = kwant.Builder(kwant.TranslationalSymmetry(period))
    ribbon.fill(template, lambda site: 0 <= site.pos[1] < width, (0, 0))
    return ribbon


@pytest.mark.parametrize("model, params, period", [
    ("qwz", dict(m=1.0), (1, 0)), ("qwz", dict(m=-1.0), (1, 0)), ("qwz", dict(m=3.0), (1, 0)),
    ("haldane", dict(t1=1.0, t2=0.1, t2_phase=np.pi / 2, M=0.0), "b1"),
    ("haldane", dict(t1=1.0, t2=0.1, t2_phase=-np.pi / 2, M=0.2), "b1"),
    ("haldane", dict(t1=1.0, t2=0.1, t2_phase=np.pi / 2, M=0.8), "b1"),
], ids=["qwz m=1", "qwz m=-1", "qwz m=3", "haldane", "haldane -phi", "haldane trivial"])
def test_user_ribbon_edges_follow_the_bulk_chern_number(model, params, period):
    # Bulk-edge correspondence (Hatsugai, PRL 71, 3697 (1993)) for a user's
    # ribbon cut from the same template (a zigzag ribbon for the Haldane
    # model): net chirality of one edge = the lower band's Chern number, the
    # other edge the opposite, at an E_F inside the bulk gap but off the
    # symmetric point E = 0 (see the next test).
    from topoedge.solvers.edges import builder_edge_modes

    template = qwz_builder() if model == "qwz" else haldane_builder()
    if period == "b1":
        period = tuple(honeycomb_vectors()[1][0])
    chern = builder_chern(template, params=params, grid=(24, 24)).gap_above(1).chern
    modes = builder_edge_modes(_ribbon(template, period, 30), 0.1, params=params, spectrum_k_points=32)
    edges = modes.edges
    assert modes.spectrum.energy.shape[0] == 32
    assert edges.in_gap, edges.message
    assert edges.bottom.net == chern and edges.top.net == -chern


def test_user_ribbon_path_equals_the_built_in_ribbon():
    # The project's own square ribbon (flux 1/10, Zeeman 0.05 t, linear
    # edge) handed in as a user's builder gives the run's spectrum and edge
    # count: net chirality = C = 2 = the TKNN value of the gap above two spin
    # bands (common practice: one per filled Landau level of each spin).
    from topoedge.models.square import model_params, ribbon_builder
    from topoedge.scenario import parse_scenario
    from topoedge.solvers.edges import builder_edge_modes
    from topoedge.workflows import run_scenario, scenario_potential

    scenario = parse_scenario({"lattice": {"flux": "1/10"}, "spin": {"zeeman": 0.05},
                               "ribbon": {"width": 40, "edge": {"profile": "linear", "width": 6.0, "height": 1.0}},
                               "spectrum": {"k_points": 41}, "chern": {"refine": False}, "fermi": {"gap": 2}})
    run = run_scenario(scenario)
    user = builder_edge_modes(ribbon_builder(40, spin=True, potential=scenario_potential(scenario)),
                              run.fermi_energy, params=model_params(phi=Fraction(1, 10), zeeman=0.05),
                              spectrum_k_points=41)
    assert np.allclose(user.spectrum.energy, run.spectrum.energy, atol=1e-12)
    assert user.edges.bottom.net == run.edges.bottom.net == 2
    assert user.edges.top.net == run.edges.top.net == -2
    assert [m.k for m in user.edges.bottom.modes] == pytest.approx([m.k for m in run.edges.bottom.modes])


def test_finite_size_gap_at_the_fermi_energy_is_reported():
    # At E_F = 0 the two zigzag edge modes of the Haldane ribbon (M = 0,
    # phi = pi/2) meet at k = 0 and hybridise through the 20-cell ribbon: a
    # gap of 2.9e-6 t (measured) with E_F in its middle. No band crosses E_F,
    # yet the edges carry modes: the count must say it is not meaningful
    # rather than report zero modes.
    from topoedge.solvers.edges import count_edge_modes
    from topoedge.systems.ribbon import RibbonHamiltonian

    params = dict(t1=1.0, t2=0.1, t2_phase=np.pi / 2, M=0.0)
    ham = RibbonHamiltonian.from_kwant(_ribbon(haldane_builder(), tuple(honeycomb_vectors()[1][0]), 30),
                                       params=params)
    edges = count_edge_modes(ham, 0.0)
    assert not edges.in_gap
    assert "lies only 1.4e-06 t from a band at k = 0.0000 without crossing it" in edges.message
    assert "hybridise through the ribbon" in edges.message


# ------------------------------------------------- the presets from a scenario


@pytest.mark.parametrize("lattice, chern", [
    ({"kind": "qwz", "mass": -3.0}, 0), ({"kind": "qwz", "mass": -1.0}, -1),
    ({"kind": "qwz", "mass": 1.0}, 1), ({"kind": "qwz", "mass": 2.5}, 0),
    ({"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2, "staggered": 0.2}, -1),
    ({"kind": "haldane", "t2": 0.1, "t2_phase": -np.pi / 2, "staggered": -0.3}, 1),
    ({"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2, "staggered": 0.8}, 0),
], ids=["qwz m=-3", "qwz m=-1", "qwz m=1", "qwz m=2.5", "haldane", "haldane -phi", "haldane trivial"])
def test_zero_field_presets_run_from_a_scenario(lattice, chern):
    # The presets through `run`: the Chern number of the published phase
    # diagrams (QWZ, PRB 74, 085308 (2006): 0, -1, +1, 0 across m = -2, 0, 2;
    # Haldane, PRL 61, 2015 (1988): |C| = 1 inside |M| < 3 sqrt(3) |t2 sin
    # phi| = 0.52, sign with phi, 0 outside) and one edge mode per unit of C
    # on each edge (bulk-edge correspondence, Hatsugai, PRL 71, 3697 (1993)).
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    s = parse_scenario({"lattice": lattice, "ribbon": {"width": 30}, "spectrum": {"k_points": 32},
                        "fermi": {"energy": 0.1}})
    assert s.lattice.flux == 0 and not s.spin.enabled
    result = run_scenario(s)
    assert result.gap.chern == chern
    assert result.edges.in_gap, result.edges.message
    assert result.edges.bottom.net == chern and result.edges.top.net == -chern
    s = result.summary
    assert s.check.bulk_edge_agree and s.check.routes_agree
    assert s.hall.streda_error.startswith("no Streda route for the zero-field")
    assert s.model.lattice == lattice["kind"]


def test_zero_field_preset_with_a_smooth_edge_keeps_its_net_chirality():
    # An edge ramp of 1.5 t over 6 a_cc on the Haldane ribbon bends the edge
    # bands; whatever crosses E_F, the net chirality stays C = -1.
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    s = parse_scenario({"lattice": {"kind": "haldane", "t2": 0.1, "t2_phase": np.pi / 2},
                        "ribbon": {"width": 40, "edge": {"profile": "linear", "width": 6.0, "height": 1.5}},
                        "spectrum": {"k_points": 32}, "fermi": {"energy": 0.1}})
    result = run_scenario(s)
    assert result.edges.bottom.net == -1 and result.edges.top.net == 1
    assert result.potential.max() == pytest.approx(1.5)


@pytest.mark.parametrize("data, match", [
    ({"lattice": {"kind": "qwz", "flux": "1/10", "mass": 1.0}},
     r"lattice.flux: got '1/10' with lattice.kind = 'qwz', a zero-field model; expected no flux"),
    ({"lattice": {"kind": "haldane"}, "spin": {"enabled": True}},
     r"spin.enabled: true with lattice.kind = 'haldane', a spinless two-band model"),
    ({"lattice": {"mass": 1.0}}, r"lattice.mass: got 1.0 with lattice.kind = 'square'; expected 0"),
    ({"lattice": {"kind": "qwz", "t2": 0.1}}, r"lattice.t2: got 0.1 with lattice.kind = 'qwz'; expected 0"),
    ({"lattice": {"kind": "haldane"}, "ribbon": {"orientation": "armchair"}},
     r"ribbon.orientation: got 'armchair' with lattice.kind = 'haldane'; expected no orientation or 'zigzag'"),
    ({"lattice": {"kind": "qwz"}, "hallbar": {"enabled": True}},
     r"hallbar.enabled: the Hall bar with lattice.kind = 'qwz'; expected the square lattice"),
])
def test_bad_preset_keys_are_refused(data, match):
    from topoedge.scenario import ConfigError, parse_scenario

    with pytest.raises(ConfigError, match=match):
        parse_scenario(data)


def test_ribbon_edge_potential_keeps_the_model_on_site_terms():
    # A zero edge profile leaves the Haldane (M != 0) and QWZ ribbons exactly
    # as without one: the rebuilt on-site terms keep +-M per sublattice and m sigma_z.
    from topoedge.systems.ribbon import RibbonHamiltonian
    from topoedge.models.zero_field import haldane_ribbon_builder, qwz_ribbon_builder

    for make, params in ((haldane_ribbon_builder, dict(t1=1.0, t2=0.1, t2_phase=np.pi / 2, M=0.2)),
                         (qwz_ribbon_builder, dict(m=1.3))):
        plain = RibbonHamiltonian.from_kwant(make(10), params=params, spin=False)
        zero = RibbonHamiltonian.from_kwant(make(10, potential=lambda d: 0 * d), params=params, spin=False)
        assert np.array_equal(plain.h0, zero.h0) and np.array_equal(plain.h1, zero.h1)
