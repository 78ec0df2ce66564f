"""Hall conductance from the density response (Streda route) against TKNN.

Sources: P. Streda, J. Phys. C 15, L717 (1982): sigma_xy = e (dn/dB)_mu;
on the lattice n_site = s_r + t_r phi inside gap r, with r = q s_r + p t_r and
|t_r| <= q/2 (Thouless, Kohmoto, Nightingale, den Nijs, PRL 49, 405 (1982)).
The test solves the Diophantine equation itself.
"""

from __future__ import annotations

import math
from fractions import Fraction

import pytest

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.models.square import bulk_builder, model_params
from topoedge.solvers.chern import chern_numbers
from topoedge.solvers.streda import neighbour_fluxes, streda_slope


def bulk_factory(*, spin=False, zeeman=0.0):
    def bulk(phi):
        return BlochHamiltonian.from_kwant(bulk_builder(phi, spin=spin),
                                           params=model_params(phi=phi, zeeman=zeeman))
    return bulk


def tknn(p, q, r):
    (t,) = [t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0]
    return t


# q = 2 has no open gap (its two bands touch at E = 0).
FLUXES = [Fraction(p, q) for q in range(3, 8) for p in range(1, q) if math.gcd(p, q) == 1]


@pytest.mark.parametrize("phi", FLUXES, ids=str)
def test_streda_slope_is_the_tknn_integer(phi):
    # Every open gap of every flux with q <= 7: d n_site / d phi at fixed E_F
    # (mid-gap) equals t_r exactly (the densities are exact rationals).
    bulk = bulk_factory()
    gaps = chern_numbers(bulk(phi)).gaps
    assert gaps
    for gap in gaps:
        result = streda_slope(bulk, phi, gap.middle)
        assert result.slope == pytest.approx(tknn(phi.numerator, phi.denominator, gap.below), abs=1e-9)
        assert abs(result.deviation) < 1e-9
        assert len(result.points) >= 2


def test_spin_split_landau_levels():
    # Flux 1/20, Zeeman 0.1 t: E_F above the spin-up lowest level gives 1,
    # above both spins 2 (each filled level adds one state per flux quantum).
    bulk = bulk_factory(spin=True, zeeman=0.1)
    gaps = chern_numbers(bulk(Fraction(1, 20))).gaps
    assert [round(streda_slope(bulk, Fraction(1, 20), g.middle).slope, 9) for g in gaps[:3]] == [1, 2, 3]


def test_energy_in_a_band_is_refused():
    bulk = bulk_factory()
    with pytest.raises(ValueError, match="is not in a gap at flux 1/3"):
        streda_slope(bulk, Fraction(1, 3), -2.3)


def test_neighbours_are_the_nearest_fractions():
    # |3/10 - 1/3| = 1/30 and |4/11 - 1/3| = 1/33 are the closest with q <= 12;
    # near -2/5 with q <= 8: 3/8 (1/40), 3/7 (1/35), 1/3 (1/15), sign kept.
    assert neighbour_fluxes(Fraction(1, 3), count=2, q_max=12) == [Fraction(3, 10), Fraction(4, 11)]
    assert neighbour_fluxes(Fraction(-2, 5), count=3, q_max=8) == [Fraction(-3, 7), Fraction(-3, 8), Fraction(-1, 3)]


@pytest.mark.parametrize("flux, gap, expected", [("2/5", 1, -2), ("3/7", 2, 3), ("1/20", 2, 2)],
                         ids=["2/5-gap1", "3/7-gap2", "1/20-gap2"])
def test_routes_agree_through_the_pipeline(flux, gap, expected):
    # Chern sum, bottom-edge chirality and Streda slope: three routes sharing
    # no code beyond the model give the TKNN integer (PRL 49, 405; Streda 1982).
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import run_scenario

    q = Fraction(flux).denominator
    scenario = parse_scenario({
        "lattice": {"flux": flux}, "spin": {"enabled": False}, "ribbon": {"width": 12 * q + 40},
        "fermi": {"gap": gap}, "spectrum": {"k_points": 16}, "chern": {"refine": False},
    })
    summary = run_scenario(scenario).summary.to_dict()
    routes = summary["hall"]["routes"]
    assert routes["chern"] == expected and routes["edge"] == expected
    assert routes["streda"] == pytest.approx(expected, abs=1e-9)
    assert abs(routes["streda_deviation"]) < 1e-9 and routes["hallbar"] is None
    assert summary["check"]["routes_agree"] is True


@pytest.mark.parametrize("zeeman", [0.28, 0.3, 0.31, 0.33])
def test_streda_follows_the_gap_through_a_zeeman_level_crossing(zeeman):
    # Flux 1/40: the Zeeman splitting equals the lattice Landau spacing
    # (0.302 t) near 0.3 t, where spin-down n = 0 and spin-up n = 1 cross and
    # the gap above two bands is only 0.002 t wide. Neighbouring fluxes then
    # put E_F in other gaps whose band counts still fit a line (slope -38 at
    # 0.3 t and -78 at 0.31 t before this check); the Streda slope must be
    # the Chern sum 2 of the gap (common practice: one per filled spin level)
    # or no slope at all.
    from topoedge.scenario import parse_scenario
    from topoedge.workflows import bulk_chern, fermi_level, streda_route

    s = parse_scenario({"lattice": {"flux": "1/40"}, "spin": {"zeeman": zeeman},
                        "chern": {"grid": [24, 24], "refine": False}, "fermi": {"gap": 2}})
    chern, _, _ = bulk_chern(s)
    ef, gap = fermi_level(s, chern)
    assert gap.chern == 2
    result, error = streda_route(s, ef)
    assert error is None or "closes before the nearest other flux" in error
    if result is not None:
        assert result.slope == pytest.approx(2, abs=1e-6)
