"""Honeycomb lattice in a field, and the Rashba term on both lattices."""

from __future__ import annotations

import math
from dataclasses import replace
from fractions import Fraction

import kwant
import numpy as np
import pytest

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.models.square import bulk_builder, model_params
from topoedge.solvers.chern import GapClosedError, chern_numbers, subspace_chern
from topoedge.scenario import ConfigError, parse_scenario
from topoedge.systems.ribbon import RibbonHamiltonian
from topoedge.models.honeycomb import (
    HEXAGON_AREA, dirac_landau_level, honeycomb_bulk_builder, honeycomb_params,
    honeycomb_ribbon_builder,
)
from topoedge.workflows import run_scenario
from topoedge.solvers.spectrum import ribbon_spectrum


def _bulk(phi, *, spin=False, **params):
    rashba = params.get("rashba", 0.0) != 0.0
    return BlochHamiltonian.from_kwant(honeycomb_bulk_builder(Fraction(phi), spin=spin, rashba=rashba),
                                       params=honeycomb_params(phi=phi, **params), spin=spin)


def _hexagon_fluxes(builder, params, centre):
    """Phases of -H around every hexagon of a flake cut from ``builder``, counter-clockwise, in 2 pi."""
    flake = kwant.Builder()
    centre = np.asarray(centre, dtype=float)
    start = min(builder.sites(), key=lambda s: np.linalg.norm(np.asarray(s.pos) - centre))
    flake.fill(builder, lambda site: np.linalg.norm(np.asarray(site.pos) - centre) < 6, start.pos)
    fsyst = flake.finalized()
    h = fsyst.hamiltonian_submatrix(params=params, sparse=False)
    pos = np.array([s.pos for s in fsyst.sites])
    fluxes = []
    for i in range(len(pos)):
        # Hexagon centres next to site i: the site's position plus each bond rotated by 60 degrees.
        for d in pos[np.abs(np.linalg.norm(pos - pos[i], axis=1) - 1) < 1e-9] - pos[i]:
            c = pos[i] + np.array([[0.5, -math.sqrt(3) / 2], [math.sqrt(3) / 2, 0.5]]) @ d
            ring = np.flatnonzero(np.abs(np.linalg.norm(pos - c, axis=1) - 1) < 1e-9)
            if len(ring) != 6:
                continue
            ring = ring[np.argsort(np.arctan2(*(pos[ring] - c).T[::-1]))]
            total = sum(np.angle(-h[b, a]) for a, b in zip(ring, np.roll(ring, -1)))
            fluxes.append(total / (2 * math.pi))
    return np.array(fluxes)


@pytest.mark.parametrize("which", ["bulk", "zigzag", "armchair"])
def test_every_hexagon_carries_the_flux(which):
    # Gauge check (common practice): the Peierls phases around any hexagon,
    # counter-clockwise, add up to 2 pi phi, in both gauges of the module.
    phi = Fraction(1, 7)
    if which == "bulk":
        builder = honeycomb_bulk_builder(phi, spin=False)
    else:
        builder = honeycomb_ribbon_builder(14, orientation=which, spin=False)
    fluxes = _hexagon_fluxes(builder, honeycomb_params(phi=phi), (0.4, 8.0))
    assert len(fluxes) >= 12
    deviation = (fluxes - float(phi) + 0.5) % 1.0 - 0.5
    assert np.abs(deviation).max() < 1e-12


def test_zero_field_bands_are_the_graphene_dispersion():
    # Wallace, Phys. Rev. 71, 622 (1947); Castro Neto et al., Rev. Mod. Phys.
    # 81, 109 (2009), Eq. (5) with t' = 0: E = +-t |1 + e^{i k.a1} + e^{i k.a2}|.
    # In reduced momenta of the builder's cell (A -> B bonds at cell offsets
    # (0, 0), (0, -1) and (1, -1)): |1 + e^{-i k2} + e^{i (k1 - k2)}|.
    bloch = _bulk(0)
    rng = np.random.default_rng(3)
    k = rng.uniform(0, 2 * np.pi, size=(50, 2))
    e = np.linalg.eigvalsh(bloch.at(k[:, 0], k[:, 1]))
    f = np.abs(1 + np.exp(-1j * k[:, 1]) + np.exp(1j * (k[:, 0] - k[:, 1])))
    assert np.allclose(e, np.stack([-f, f], axis=1), atol=1e-12)
    # Dirac points: E = 0 at k = K (reduced (2 pi/3, 4 pi/3) up to the choice of cell).
    at_k = np.linalg.eigvalsh(bloch.at(2 * np.pi / 3, 4 * np.pi / 3))
    assert np.abs(at_k).max() < 1e-12


def test_staggered_potential_opens_a_gap_of_2m():
    # Semenoff mass (common practice): +M on A, -M on B gives E = +-sqrt(M^2 + t^2 |f|^2),
    # a gap 2 M at the Dirac points.
    bloch = _bulk(0, staggered=0.2)
    e = np.linalg.eigvalsh(bloch.at(2 * np.pi / 3, 4 * np.pi / 3))
    assert np.allclose(e, [-0.2, 0.2], atol=1e-12)


def test_landau_levels_approach_the_dirac_formula():
    # Relativistic Landau levels E_n = sqrt(2 n) hbar v_F / l_B with hbar v_F
    # = 3 t a_cc / 2 (Castro Neto et al., RMP 81, 109 (2009); REFERENCES.md
    # section 11); l_B^2 = A_hex / (2 pi phi). The lattice lowers them by an
    # amount that shrinks with the flux (about proportionally: halving phi
    # halves the relative deviation).
    deviations = {}
    for q in (40, 80):
        phi = Fraction(1, q)
        e = np.linalg.eigvalsh(_bulk(phi).at(0.3, 0.2))
        positive = e[e > 1e-6]  # two states per level (one per valley)
        for n in (1, 2, 3):
            level = dirac_landau_level(n, phi)
            nearest = positive[2 * n - 2]
            assert positive[2 * n - 1] - nearest < 3e-3 * nearest  # valley splitting
            deviations[q, n] = (nearest - level) / level
            # The level at -E_n too (particle-hole symmetry of the bipartite lattice).
            assert np.min(np.abs(e + nearest)) < 1e-9
        # n = 0: two states at zero energy (one per valley).
        assert np.sum(np.abs(e) < 1e-6) == 2
    for n in (1, 2, 3):
        assert -0.04 < deviations[80, n] < 0, deviations
        assert 0.35 < deviations[80, n] / deviations[40, n] < 0.65, deviations
    assert dirac_landau_level(1, Fraction(1, 80)) == pytest.approx(
        math.sqrt(2) * 1.5 / math.sqrt(HEXAGON_AREA * 80 / (2 * math.pi)), rel=1e-12)


def _gap_near(result, energy):
    return min(result.gaps, key=lambda g: abs(g.middle - energy))


def test_half_integer_sequence_near_zero_energy():
    # Hatsugai, Fukui, Aoki, PRB 74, 205414 (2006) (REFERENCES.md section 11,
    # from memory): spinless gap Chern sums near E = 0 are +-1, +-3, +-5, the
    # sign that of electrons above E = 0 (the square lattice's +1 above its
    # lowest level at phi > 0) and of holes below. The occupied subspace is
    # used as a whole, so the grid need not resolve the bands near the van
    # Hove energies with their large Chern numbers.
    phi = Fraction(1, 40)
    bloch = _bulk(phi)
    result = chern_numbers(bloch, grid=(8, 4), gap_min=1e-6)
    levels = [dirac_landau_level(n, phi) for n in range(4)]
    found = {}
    for n in range(3):
        for sign in (1, -1):
            gap = _gap_near(result, sign * 0.5 * (levels[n] + levels[n + 1]) * 0.97)
            sub = subspace_chern(bloch, gap, grid=(32, 8))
            assert sub.link_min > 0.5
            found[sign * (2 * n + 1)] = sub.chern
    assert found == {1: 1, -1: -1, 3: 3, -3: -3, 5: 5, -5: -5}


@pytest.mark.slow
def test_half_integer_sequence_band_by_band_and_with_spin():
    # The same sequence from the band-by-band Chern numbers on the default
    # grid at a larger flux, and doubled with spin (+-2, +-6: the graphene
    # sequence 4 (n + 1/2) counts the valleys too; Novoselov et al., Nature
    # 438, 197 (2005), from memory). Both computations agree.
    phi = Fraction(1, 16)
    spinless = chern_numbers(_bulk(phi), gap_min=1e-6)
    spinful = chern_numbers(_bulk(phi, spin=True, zeeman=0.0), gap_min=1e-6)
    levels = [dirac_landau_level(n, phi) for n in range(3)]
    for n in range(2):
        for sign in (1, -1):
            energy = sign * 0.5 * (levels[n] + levels[n + 1]) * 0.9
            assert spinless.gap_at(energy).chern == sign * (2 * n + 1)
            assert spinful.gap_at(energy).chern == sign * 2 * (2 * n + 1)
            assert spinful.gap_at(energy).spin_chern == {"up": sign * (2 * n + 1), "down": sign * (2 * n + 1)}
            gap = spinless.gap_at(energy)
            assert subspace_chern(_bulk(phi), gap, grid=spinless.grid).chern == gap.chern


def _ribbon(width, orientation, **params):
    builder = honeycomb_ribbon_builder(width, orientation=orientation, spin=False)
    return RibbonHamiltonian.from_kwant(builder, params=honeycomb_params(**params))


def test_zigzag_ribbon_has_a_flat_edge_band_between_the_dirac_points():
    # Fujita, Wakabayashi, Nakada, Kusakabe, J. Phys. Soc. Jpn. 65, 1920
    # (1996); Nakada et al., PRB 54, 17954 (1996) (from memory): at zero field
    # a zigzag ribbon has two nearly flat bands at E = 0 for 2 pi/3 < |k| <= pi
    # (k per period sqrt 3 a_cc; the Dirac points project to |k| = 2 pi/3),
    # localised on the two edges, and none elsewhere.
    ham = _ribbon(40, "zigzag")
    k = np.linspace(-np.pi, np.pi, 181, endpoint=False)
    spec = ribbon_spectrum(ham, k)
    lowest = np.sort(np.abs(spec.energy), axis=1)
    inside = np.abs(k) > 2 * np.pi / 3 + 0.15
    outside = np.abs(k) < 2 * np.pi / 3 - 0.15
    assert np.all(lowest[inside, 1] < 1e-3)        # two states at E = 0
    assert np.all(lowest[inside, 2] > 0.1)          # and no third
    assert np.all(lowest[outside, 0] > 0.05)        # no edge band there
    # Localised at the edges: the two zero-energy states (degenerate, so any
    # mixture of the two edges) keep most of their weight within 6 a_cc of
    # an edge once |k| is away from the Dirac points.
    y = ham.position
    edge_sites = np.minimum(y - y.min(), y.max() - y) < 6.0
    for kk in (2.5, 2.8, np.pi):
        e, v = np.linalg.eigh(ham.bloch(np.array([kk]))[0])
        zero = np.argsort(np.abs(e))[:2]
        weight = np.sum(np.abs(v[edge_sites][:, zero]) ** 2) / 2
        assert weight > 0.9, (kk, weight)


@pytest.mark.parametrize("width, metallic", [(29, True), (30, False), (31, False), (32, True)])
def test_armchair_ribbons_are_metallic_every_third_width(width, metallic):
    # Brey and Fertig, PRB 73, 235411 (2006); Nakada et al., PRB 54, 17954
    # (1996) (from memory): at zero field an armchair ribbon of N dimer lines
    # is gapless for N = 3 M + 2 and gapped otherwise (gap ~ 1/N).
    ham = _ribbon(width, "armchair")
    e = np.linalg.eigvalsh(ham.bloch(np.array([0.0])))[0]
    gap = np.min(np.abs(e))
    if metallic:
        assert gap < 1e-10
    else:
        assert 0.02 < gap < 0.3


def _honeycomb(**sections):
    data = {"lattice": {"kind": "honeycomb", "flux": "1/16"}, "spin": {"enabled": False},
            "ribbon": {"width": 48}, "spectrum": {"k_points": 64}, "chern": {"refine": False}}
    for key, value in sections.items():
        data[key] = {**data.get(key, {}), **value}
    return parse_scenario(data)


@pytest.mark.parametrize("orientation", ["zigzag", "armchair"])
@pytest.mark.parametrize("energy, chern", [(0.25, 1), pytest.param(-0.25, -1, marks=pytest.mark.slow), (0.87, 3),
                                           pytest.param(-0.87, -3, marks=pytest.mark.slow), (-2.55, 2)])
def test_bulk_edge_correspondence_on_both_edges(orientation, energy, chern):
    # Bulk-edge correspondence (Hatsugai, PRL 71, 3697 (1993)): the net
    # chirality of each edge equals the Chern sum of the bulk, for zigzag and
    # armchair edges alike; near the band bottom (E = -2.55 t, two levels
    # below) electron-like Landau levels (+1 each), near E = 0 the Dirac
    # sequence.
    width = 48 if orientation == "zigzag" else 80
    s = _honeycomb(ribbon={"width": width, "orientation": orientation}, fermi={"energy": energy})
    result = run_scenario(s)
    assert result.gap.chern == chern
    assert result.edges.in_gap
    assert result.edges.bottom.net == chern and result.edges.top.net == -chern
    s = result.summary
    assert s.check.bulk_edge_agree
    assert s.bulk.subspace_agree
    assert s.hall.routes.streda == pytest.approx(chern, abs=1e-6)
    assert s.model.lattice == "honeycomb"


def test_smooth_edge_on_a_honeycomb_ribbon_keeps_the_net_chirality():
    # A linear ramp of 6 a_cc pushes the levels up at the edges; extra modes
    # come in counter-propagating pairs, the net chirality stays C
    # (bulk-edge correspondence, as above).
    s = _honeycomb(ribbon={"width": 60, "edge": {"profile": "linear", "width": 8.0, "height": 1.5}},
                   fermi={"energy": 0.25})
    result = run_scenario(s)
    assert result.edges.bottom.net == 1 and result.edges.top.net == -1
    assert result.edges.bottom.counter_pairs >= 1
    assert result.potential.max() == pytest.approx(1.5)


def test_rashba_keeps_the_square_lattice_chern_sums_while_the_gaps_stay_open():
    # Topological invariance (common practice): a perturbation that keeps a
    # gap open keeps its Chern sum. Flux 1/6, Zeeman 0.2 t: the Rashba term
    # switched on in small steps; every gap open at each step has the sum of
    # the spin-conserving model, S_z-resolved sums are no longer given.
    phi = Fraction(1, 6)
    reference = None
    for lam in (0.0, 0.01, 0.02, 0.04, 0.06):
        bloch = BlochHamiltonian.from_kwant(bulk_builder(phi, spin=True, rashba=True),
                                            params=model_params(phi=phi, zeeman=0.2, rashba=lam))
        result = chern_numbers(bloch, grid=(24, 24))
        values = {g.below: g.chern for g in result.gaps}
        if reference is None:
            reference = values
            assert result.gaps[0].spin_chern is not None
            continue
        assert result.gaps[0].spin_chern is None
        both = set(values) & set(reference)
        assert {1, 2, 8, 9, 10, 11} <= both
        assert {r: values[r] for r in both} == {r: reference[r] for r in both}


def test_rashba_mixes_the_spins_of_the_ribbon_states():
    # <S_z> per state: +-1/2 without the Rashba term, in between with it.
    s = parse_scenario({"lattice": {"flux": "1/10"}, "spin": {"zeeman": 0.1, "rashba": 0.1},
                        "ribbon": {"width": 40}, "spectrum": {"k_points": 24},
                        "chern": {"grid": [20, 20], "refine": False}, "fermi": {"gap": 2}})
    result = run_scenario(s)
    sz = result.spectrum.sz[np.isfinite(result.spectrum.sz)]
    assert np.all(np.abs(sz) <= 0.5 + 1e-12)
    assert np.mean(np.abs(np.abs(sz) - 0.5) > 0.01) > 0.1
    assert result.summary.bulk.spin_chern_below_fermi is None
    assert result.summary.check.bulk_edge_agree
    no_soc = run_scenario(replace(s, spin=replace(s.spin, rashba=0.0)))
    assert result.gap.chern == no_soc.gap.chern == 2
    assert np.all(np.abs(np.abs(no_soc.spectrum.sz[np.isfinite(no_soc.spectrum.sz)]) - 0.5) < 1e-9)


@pytest.mark.slow
def test_rashba_on_the_honeycomb_lattice_keeps_the_chern_sum():
    # As above, on the honeycomb lattice in its C = 2 gap (spinful, E_F = 0.25 t).
    phi = Fraction(1, 16)
    for lam in (0.0, 0.03):
        bloch = _bulk(phi, spin=True, zeeman=0.02, rashba=lam)
        result = chern_numbers(bloch, gap_min=1e-6)
        assert result.gap_at(0.25).chern == 2
        assert subspace_chern(bloch, result.gap_at(0.25), grid=result.grid).chern == 2


def test_a_gap_closed_by_the_rashba_term_is_named():
    # Flux 1/6, Zeeman 0.2 t: gap 3 is open without the Rashba term and
    # closed with lambda_R = 0.1 t; the run refuses it with the bands that
    # close it.
    base = {"lattice": {"flux": "1/6"}, "spin": {"zeeman": 0.2}, "ribbon": {"width": 30},
            "chern": {"grid": [24, 24], "refine": False}, "fermi": {"gap": 3}}
    assert run_scenario(parse_scenario(base)).gap.chern == 3
    with pytest.raises(GapClosedError, match=r"fermi.gap = 3: the gap above band 2 is closed"):
        run_scenario(parse_scenario({**base, "spin": {"zeeman": 0.2, "rashba": 0.1}}))


@pytest.mark.parametrize("data, match", [
    ({"lattice": {"staggered": 0.1}},
     r"lattice.staggered: got 0.1 with lattice.kind = 'square'; expected 0 \(it belongs to lattice.kind = 'honeycomb' or"),
    ({"ribbon": {"orientation": "armchair"}}, r"ribbon.orientation: got 'armchair' on the square lattice"),
    ({"lattice": {"kind": "hexagonal"}}, r"lattice.kind: .*expected one of 'square', 'honeycomb'"),
    ({"lattice": {"kind": "honeycomb"}, "ribbon": {"orientation": "chiral"}},
     r"ribbon.orientation: .*expected one of 'zigzag', 'armchair'"),
    ({"spin": {"enabled": False, "rashba": 0.1}}, r"spin.rashba: got 0.1 with spin.enabled = false"),
    ({"lattice": {"kind": "honeycomb"}, "hallbar": {"enabled": True}},
     r"hallbar.enabled: the Hall bar with lattice.kind = 'honeycomb'"),
    ({"spin": {"rashba": 0.1}, "hallbar": {"enabled": True}}, r"spin.rashba: got 0.1 with the Hall bar"),
    ({"spin": {"rashba": 0.1}, "interaction": {"coulomb": 0.3}, "fermi": {"gap": 1}},
     r"spin.rashba: got 0.1 with \[interaction\], which needs S_z conserved"),
    ({"lattice": {"kind": "honeycomb"}, "ribbon": {"width": 10, "edge": {"profile": "linear", "width": 8.0}}},
     r"ribbon.edge.width: got 8.0, wider than half the ribbon \(ribbon.width = 10, 14 a_cc across\)"),
])
def test_bad_lattice_keys_are_refused(data, match):
    with pytest.raises(ConfigError, match=match):
        parse_scenario(data)


@pytest.mark.parametrize("command", ["butterfly", "hallbar"])
@pytest.mark.parametrize("override, match", [
    ("lattice.kind=honeycomb", "lattice.kind: got 'honeycomb'; `topoedge {}` is built for the square lattice only"),
    ("spin.rashba=0.1", "spin.rashba: got 0.1; `topoedge {}` has no Rashba term yet"),
])
def test_square_lattice_commands_refuse_what_they_would_drop(command, override, match, tmp_path, capsys):
    from topoedge import cli

    status = cli.main([command, "--set", override, "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert status == 2
    assert match.format(command) in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()


def test_square_lattice_rashba_bands_at_zero_field():
    # Tight-binding Rashba model on the square lattice (common practice, from
    # memory): E = -2 t (cos kx + cos ky) +- 2 lambda_R sqrt(sin^2 kx + sin^2 ky).
    bloch = BlochHamiltonian.from_kwant(bulk_builder(Fraction(0), spin=True, rashba=True),
                                        params=model_params(phi=0, rashba=0.3))
    rng = np.random.default_rng(7)
    k = rng.uniform(0, 2 * np.pi, size=(40, 2))
    e = np.linalg.eigvalsh(bloch.at(k[:, 0], k[:, 1]))
    band = -2 * (np.cos(k[:, 0]) + np.cos(k[:, 1]))
    split = 2 * 0.3 * np.sqrt(np.sin(k[:, 0]) ** 2 + np.sin(k[:, 1]) ** 2)
    assert np.allclose(e, np.stack([band - split, band + split], axis=1), atol=1e-12)


@pytest.mark.parametrize("orientation", ["zigzag", "armchair"])
def test_honeycomb_ribbon_bands_equal_kwant_bands(orientation):
    # Reference library check: kwant.physics.Bands of the same finalized
    # ribbon (flux 1/9, Zeeman, staggered potential, Rashba, a tanh edge)
    # gives the energies of the project's ribbon spectrum at every momentum.
    builder = honeycomb_ribbon_builder(12, orientation=orientation, spin=True, rashba=True,
                                       potential=lambda d: 0.4 * (1 - np.tanh(d / 2)))
    params = honeycomb_params(phi=Fraction(1, 9), zeeman=0.1, staggered=0.05, rashba=0.07)
    ham = RibbonHamiltonian.from_kwant(builder, params=params)
    k = np.linspace(-np.pi, np.pi, 13)
    ours = ribbon_spectrum(ham, k, observables=False).energy
    bands = kwant.physics.Bands(builder.finalized(), params=params)
    reference = np.array([np.sort(bands(kk)) for kk in k])
    assert np.allclose(ours, reference, atol=1e-10)


def test_the_two_gauges_give_the_same_landau_levels():
    # The bulk (phase on one bond family) and the ribbon (Landau gauge along
    # the bonds) describe the same field: states in the middle of a wide
    # zigzag ribbon lie inside the bulk bands of the levels n = 0, +-1 at
    # flux 1/20 (each a valley pair, 0.01 t wide), and each level is seen.
    # Gauge invariance: common practice.
    phi = Fraction(1, 20)
    _, _, hk = _bulk(phi).grid(24, 24)
    e = np.linalg.eigvalsh(hk).reshape(-1, 40)
    lo, hi = e.min(axis=0), e.max(axis=0)
    ham = _ribbon(60, "zigzag", phi=phi)
    spec = ribbon_spectrum(ham, np.linspace(-np.pi, np.pi, 41, endpoint=False))
    centre = np.abs(spec.y_mean - 0.5 * (ham.position.min() + ham.position.max())) < 10
    found = spec.energy[centre & (np.abs(spec.energy) < 0.9)]
    assert found.size > 20
    inside = (found[:, None] >= lo[None, :] - 1e-4) & (found[:, None] <= hi[None, :] + 1e-4)
    assert inside.any(axis=1).all()
    for level in (-0.7, 0.0, 0.7):  # every level is seen in the ribbon
        assert np.min(np.abs(found - level)) < 0.02


def test_bench_refuses_other_lattices(capsys):
    # The benchmark builds square-lattice ribbons: a honeycomb scenario is refused, not timed as a square one.
    from topoedge import cli

    assert cli.main(["bench", "--set", "lattice.kind=honeycomb", "--parts", "ribbon"]) == 2
    err = capsys.readouterr().err
    assert "lattice.kind: got 'honeycomb'; `topoedge bench` is built for the square lattice only" in err
