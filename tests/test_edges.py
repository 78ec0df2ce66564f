"""Edge-mode counting against outside references.

References used here:
- TKNN: in the r-th gap of the square-lattice Hofstadter model at flux p/q
  the Hall conductance is t_r e^2/h with r = q s_r + p t_r, |t_r| <= q/2
  (D. J. Thouless, M. Kohmoto, M. P. Nightingale and M. den Nijs,
  Phys. Rev. Lett. 49, 405 (1982)). Bulk-edge correspondence: the net number
  of edge modes of one edge crossing E_F in that gap equals t_r (Y. Hatsugai,
  Phys. Rev. Lett. 71, 3697 (1993)); edge potentials only add
  counter-propagating pairs.
- Band edges of the bulk Hofstadter bands: by Chambers' relation (W. G.
  Chambers, Phys. Rev. 140, A135 (1965)) the bulk energies depend on the
  momenta only through cos(q k_x) + cos(k_y) (k_y per magnetic cell), so
  every band edge is reached at k_x in {0, pi/q}, k_y in {0, pi}.
- Landau levels and E x B drift (textbook; e.g. B. I. Halperin, Phys. Rev. B
  25, 2185 (1982)): in a potential with slope dV/dy the Landau-gauge state
  with guiding centre y0 has dE/dk = (dV/dy) l_B^2, l_B^2 = a^2 / (2 pi phi).
- Central finite differences of the energies for the velocities (common
  practice).
"""

from __future__ import annotations

import json
import math
import warnings
from fractions import Fraction

import numpy as np
import pytest

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    import kwant

from topoedge.models.square import bulk_builder, model_params, ribbon_builder
from topoedge.solvers.edges import EdgeCount, count_edge_modes, find_crossings
from topoedge.systems.ribbon import RibbonHamiltonian
from topoedge.models.profiles import edge_potential
from topoedge.solvers.spectrum import k_grid, ribbon_spectrum


def _ribbon(width, *, spin=False, profile="none", ramp=0.0, height=0.0, **params):
    pot = edge_potential(width, profile, ramp=ramp, height=height)
    builder = ribbon_builder(width, spin=spin, potential=pot)
    return RibbonHamiltonian.from_kwant(builder, params=model_params(**params))


def _bulk_band_edges(p, q):
    """(min, max) of every bulk band at flux p/q, from the Chambers points."""
    syst = kwant.wraparound.wraparound(bulk_builder(Fraction(p, q), spin=False)).finalized()
    levels = np.array([
        np.linalg.eigvalsh(syst.hamiltonian_submatrix(params=dict(model_params(phi=p / q), k_x=kx, k_y=ky)))
        for kx in (0.0, math.pi / q)
        for ky in (0.0, math.pi)
    ])
    return levels.min(axis=0), levels.max(axis=0)


def _tknn(p, q, r):
    """t_r of r = q s_r + p t_r with |t_r| <= q/2, found by search."""
    solutions = [t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0]
    assert len(solutions) == 1, (p, q, r, solutions)
    return solutions[0]


def test_tknn_solver_reproduces_the_published_table():
    # Known solutions of the TKNN equation for 2/5 and 3/7 (TKNN 1982).
    assert [_tknn(2, 5, r) for r in range(1, 5)] == [-2, 1, -1, 2]
    assert [_tknn(3, 7, r) for r in range(1, 7)] == [-2, 3, 1, -1, -3, 2]


FLUXES = [(p, q) for q in range(2, 8) for p in range(1, q) if math.gcd(p, q) == 1]
# A few larger denominators (|t_r| up to 5), checked without the reversed flux
# to keep the suite fast. (Gaps much narrower than ~0.01 t, e.g. the lowest
# gap of 2/9 at 0.0023 t, have edge states decaying over tens of rows and
# need far wider ribbons than 12 q + 5.)
FLUXES += [(1, 9), (5, 11), (5, 12)]

# Hard-wall gaps whose edge branch is not monotonic at mid-gap: besides the
# |t_r| net modes, one counter-propagating pair crosses E_F on each edge
# (found here; the net count is still t_r). All other gaps have none.
HARD_WALL_PAIRS = {(1, 7, 3): 1, (1, 7, 4): 1, (6, 7, 3): 1, (6, 7, 4): 1, (5, 12, 4): 1, (5, 12, 8): 1}


@pytest.mark.parametrize("p, q", FLUXES, ids=[f"{p}/{q}" for p, q in FLUXES])
def test_edge_chirality_equals_tknn_integer(p, q):
    # TKNN / Hatsugai: net chirality of each edge in gap r is +-t_r. With
    # the conventions of topoedge.models.square (phi > 0) the bottom edge carries
    # exactly +t_r and the top edge -t_r; reversing the flux flips both.
    width = 12 * q + 5
    ham = _ribbon(width, phi=p / q)
    reverse = _ribbon(width, phi=-p / q) if q <= 7 else None
    low, high = _bulk_band_edges(p, q)
    checked = 0
    for r in range(1, q):
        if 2 * r == q:
            continue  # the centre gap of even q is closed
        assert low[r] > high[r - 1], "an open bulk gap"
        ef = 0.5 * (high[r - 1] + low[r])
        t_r = _tknn(p, q, r)
        count = count_edge_modes(ham, ef)
        assert count.in_gap and count.message is None and not count.bulk and not count.touching
        assert count.bottom.net == t_r, (r, count.bottom.net, t_r)
        assert count.top.net == -t_r
        # Hard wall: only the net modes, except the documented cases.
        pairs = HARD_WALL_PAIRS.get((p, q, r), 0)
        assert count.bottom.counter_pairs == count.top.counter_pairs == pairs
        assert len(count.bottom.modes) == abs(t_r) + 2 * pairs
        assert all(m.edge == "bottom" and m.y < width / 2 for m in count.bottom.modes)
        assert all(m.edge == "top" and m.y > width / 2 for m in count.top.modes)
        assert all(m.spin is None and m.sz is None for m in count.bottom.modes)
        if reverse is not None:
            flipped = count_edge_modes(reverse, ef)
            assert (flipped.bottom.net, flipped.top.net) == (-t_r, t_r)
        checked += 1
    assert checked == q - 1 - (q % 2 == 0)


@pytest.mark.parametrize("p, q, r", [(2, 5, 1), (1, 7, 3)], ids=["2/5-r1", "1/7-r3"])
def test_net_chirality_is_the_same_across_the_gap(p, q, r):
    # Hatsugai: the net count is a winding number, the same for every E_F in
    # the gap, while the number of counter-propagating pairs of a hard wall
    # changes with E_F (found here: 2/5, r = 1 has one pair in the lower 40 %
    # of the gap; 1/7, r = 3 one pair in the middle).
    low, high = _bulk_band_edges(p, q)
    ham = _ribbon(12 * q + 5, phi=p / q)
    t_r = _tknn(p, q, r)
    pairs = set()
    for fraction in np.linspace(0.1, 0.9, 9):
        count = count_edge_modes(ham, high[r - 1] + fraction * (low[r] - high[r - 1]))
        assert count.in_gap and (count.bottom.net, count.top.net) == (t_r, -t_r)
        pairs.add(count.bottom.counter_pairs)
    assert pairs == {0, 1}


def test_bottom_edge_modes_move_forward_in_the_lowest_gap():
    # phi = 1/q, r = 1 (t_1 = 1): one mode per edge, dE/dk > 0 at the bottom.
    count = count_edge_modes(_ribbon(65, phi=1 / 5), -2.1)
    (bottom,), (top,) = count.bottom.modes, count.top.modes
    assert bottom.velocity > 0 > top.velocity
    assert bottom.y < 2 and top.y > 62


def _landau_levels(q=40):
    """Bulk n = 0 and n = 1 Landau levels (spinless) at flux 1/q, units of t."""
    syst = kwant.wraparound.wraparound(bulk_builder(Fraction(1, q), spin=False)).finalized()
    h = syst.hamiltonian_submatrix(params=dict(model_params(phi=1 / q), k_x=0.0, k_y=0.0))
    levels = np.linalg.eigvalsh(h)
    return levels[0], levels[1]


def test_spin_resolved_modes_at_filling_one_and_two():
    # Zeeman Delta = 0.1 t shifts spin up by -Delta/2 and down by +Delta/2.
    # Filling 1: E_F between LL0 up and LL0 down, one spin-up mode per edge.
    # Filling 2: E_F between LL0 down and LL1 up, one mode of each spin.
    e0, e1 = _landau_levels()
    ham = _ribbon(80, spin=True, phi=1 / 40, zeeman=0.1)
    one = count_edge_modes(ham, e0)
    assert one.in_gap
    for edge, sign in ((one.bottom, 1), (one.top, -1)):
        assert [m.spin for m in edge.modes] == ["up"]
        assert edge.modes[0].sz == pytest.approx(0.5, abs=1e-12)
        assert edge.by_spin == {"up": {"net": sign, "counter_pairs": 0}, "down": {"net": 0, "counter_pairs": 0}}
    two = count_edge_modes(ham, 0.5 * (e0 + 0.05 + e1 - 0.05))
    assert two.in_gap
    for edge, sign in ((two.bottom, 1), (two.top, -1)):
        assert edge.net == 2 * sign and edge.counter_pairs == 0
        # Spin up is lower in energy, so its edge mode lies nearer the wall.
        assert [m.spin for m in edge.modes] == ["up", "down"]
        assert edge.by_spin == {"up": {"net": sign, "counter_pairs": 0}, "down": {"net": sign, "counter_pairs": 0}}


def test_linear_ramp_keeps_the_net_chirality():
    # Hatsugai: edge potentials change the number of crossings only by
    # counter-propagating pairs; net chirality stays 2 at filling 2. Inside a
    # wide ramp the mode drifts with dE/dk = (V0 / w) l_B^2 (E x B drift,
    # l_B^2 = 1 / (2 pi phi) a^2).
    e0, e1 = _landau_levels()
    ef = 0.5 * (e0 + e1)
    phi, height = 1 / 40, 1.0
    depth = []
    for ramp in (5, 15, 30):
        ham = _ribbon(140, spin=True, profile="linear", ramp=ramp, height=height, phi=phi, zeeman=0.1)
        count = count_edge_modes(ham, ef)
        assert count.in_gap
        for edge, sign in ((count.bottom, 1), (count.top, -1)):
            assert edge.net == 2 * sign
            assert isinstance(edge.counter_pairs, int) and edge.counter_pairs >= 0
            assert edge.by_spin["up"]["net"] == edge.by_spin["down"]["net"] == sign
        depth.append(count.bottom.modes[0].y)
        if ramp == 30:
            up = count.bottom.modes[0]
            assert up.spin == "up" and 3 * up.spread < up.y < ramp - 2 * up.spread  # inside the slope
            drift = (height / ramp) / (2 * math.pi * phi)
            assert up.velocity == pytest.approx(drift, rel=0.03)
    assert depth == sorted(depth)  # wider ramps push the modes inwards


def test_fermi_energy_in_a_dispersive_bulk_band():
    # phi = 1/3: the lowest bulk band spans [-1 - sqrt 3, -2] t.
    ef = 0.5 * (-1 - math.sqrt(3) - 2)
    count = count_edge_modes(_ribbon(41, phi=1 / 3), ef)
    assert not count.in_gap
    assert count.bulk and all(m.edge == "bulk" for m in count.bulk)
    assert "bulk band" in count.message and f"{len(count.bulk)} delocalised" in count.message


def test_fermi_energy_at_a_flat_landau_level_is_not_silent():
    # At flux 1/40 the n = 0 level is flat to machine precision in the bulk;
    # E_F exactly there is not in a gap and must be reported as such.
    e0, _ = _landau_levels()
    count = count_edge_modes(_ribbon(100, phi=1 / 40), e0)
    assert not count.in_gap
    assert count.touching or count.bulk
    assert "touches" in count.message
    for t in count.touching:
        assert abs(t["energy"] - e0) <= 1e-9
        assert set(t) == {"k", "energy", "y", "spin"}


def test_roots_are_accurate_and_velocities_are_derivatives():
    # |E(k_root) - E_F| < 1e-9 t and v = dE/dk by a central difference
    # (h = 1e-6: truncation and rounding both ~1e-10 t a).
    ham = _ribbon(45, profile="linear", ramp=4, height=0.8, phi=2 / 9)
    ef = -1.9
    crossings, _ = find_crossings(ham, ef)
    assert len(crossings) >= 2
    step = 1e-6
    for mode in crossings:
        energies = ribbon_spectrum(ham, [mode.k - step, mode.k, mode.k + step]).energy
        n = int(np.argmin(np.abs(energies[1] - ef)))
        assert abs(energies[1, n] - ef) < 1e-9
        assert abs(mode.energy - ef) < 1e-9
        fd = (energies[2, n] - energies[0, n]) / (2 * step)
        assert mode.velocity == pytest.approx(fd, abs=1e-7)
        assert -math.pi <= mode.k < math.pi


def test_hidden_pair_in_one_coarse_interval():
    # W = 61 at flux 1/5: the bottom and top edge branches of the lowest gap
    # cross at k = 0. Just above that energy one bottom and one top mode
    # cross E_F within a single interval of a 5-point grid, and no sorted
    # band changes sign on that grid: only the guard can find them.
    ham = _ribbon(61, phi=1 / 5)
    spec = ribbon_spectrum(ham, [0.0], window=(-2.9, -1.4))
    e_cross = spec.energy[0][0]
    assert spec.energy[0][1] - e_cross < 1e-9 and spec.y_mean[0][0] + spec.y_mean[0][1] == pytest.approx(60)
    ef = e_cross + 0.02
    fine = count_edge_modes(ham, ef)
    roots = sorted(m.k for m in fine.bottom.modes + fine.top.modes)
    assert len(roots) == 2 and -2 * math.pi / 10 < roots[0] < roots[1] < 2 * math.pi / 10
    coarse_grid = ribbon_spectrum(ham, k_grid(5)).energy - ef
    assert np.all(np.sign(coarse_grid) == np.sign(np.roll(coarse_grid, 1, axis=0)))
    for k_points in (3, 5, 7):
        coarse = count_edge_modes(ham, ef, k_points=k_points)
        assert coarse.in_gap
        assert (coarse.bottom.net, coarse.top.net) == (fine.bottom.net, fine.top.net) == (1, -1)
        assert len(coarse.bottom.modes) == len(coarse.top.modes) == 1
        np.testing.assert_allclose(sorted(m.k for m in coarse.bottom.modes + coarse.top.modes), roots, atol=1e-9)


def test_spin_mixing_path_agrees_with_spin_sectors():
    # A spin-flip term of 1e-7 t on every site breaks S_z conservation, so
    # the ribbon is solved as one banded sector with <S_z> read from the
    # eigenvectors. The modes must equal those of the two spin sectors of the
    # unperturbed ribbon up to second order in the coupling (~1e-12).
    e0, e1 = _landau_levels(10)
    ham = _ribbon(30, spin=True, phi=1 / 10, zeeman=0.1)
    ef = 0.5 * (e0 + e1)
    split = count_edge_modes(ham, ef)
    h0 = ham.h0.copy()
    up = np.flatnonzero(ham.sz > 0)
    assert np.array_equal(ham.position[up], ham.position[up + 1])  # (up, down) per site
    h0[up, up + 1] = h0[up + 1, up] = 1e-7
    mixed = RibbonHamiltonian(h0=h0, h1=ham.h1, position=ham.position, sz=ham.sz)
    assert mixed.spin_blocks() is None
    merged = count_edge_modes(mixed, ef)
    assert merged.in_gap
    for a, b in ((merged.bottom, split.bottom), (merged.top, split.top)):
        assert len(a.modes) == len(b.modes) == 2
        for m, ref in zip(a.modes, b.modes):
            assert m.k == pytest.approx(ref.k, abs=1e-9) and m.velocity == pytest.approx(ref.velocity, abs=1e-8)
            assert m.spin == ref.spin and m.sz == pytest.approx(ref.sz, abs=1e-8)
        assert a.by_spin == b.by_spin
    assert (merged.bottom.net, merged.top.net) == (split.bottom.net, split.top.net) == (2, -2)


@pytest.mark.parametrize("kind", ["BandedBlock", "DenseBlock"])
def test_band_and_dense_sectors_agree_with_the_tridiagonal_one(kind, monkeypatch):
    # The same ribbon through each eigensolver path: identical modes.
    ham = _ribbon(37, profile="linear", ramp=3, height=0.5, phi=2 / 7)
    ef = -0.4
    ref, _ = find_crossings(ham, ef, k_points=100)
    assert len(ref) == 4
    from topoedge.solvers import blocks, crossings

    solver = getattr(blocks, kind)
    monkeypatch.setattr(crossings, "spin_blocks", lambda h: [solver(h.block(np.arange(h.size)))])
    got, _ = find_crossings(ham, ef, k_points=100)
    assert len(got) == len(ref)
    for m, r in zip(got, ref):
        assert (m.edge, m.spin) == (r.edge, r.spin)
        np.testing.assert_allclose(
            [m.k, m.velocity, m.y, m.spread], [r.k, r.velocity, r.y, r.spread], rtol=0, atol=1e-8
        )


def test_positions_are_measured_from_the_bottom_row():
    # Shifting every orbital across the ribbon changes no mode but <y> is
    # still counted from the bottom row.
    ham = _ribbon(40, phi=1 / 5)
    moved = RibbonHamiltonian(h0=ham.h0, h1=ham.h1, position=ham.position + 7.5, sz=None)
    a, b = count_edge_modes(ham, -2.1), count_edge_modes(moved, -2.1)
    ys = [m.y for m in a.bottom.modes + a.top.modes]
    assert ys == pytest.approx([m.y for m in b.bottom.modes + b.top.modes], abs=1e-12)
    assert a.bottom.modes[0].y < 1


def test_to_dict_is_json_serialisable():
    e0, e1 = _landau_levels()
    count = count_edge_modes(_ribbon(60, spin=True, phi=1 / 40, zeeman=0.1), 0.5 * (e0 + e1))
    data = json.loads(json.dumps(count.to_dict()))
    assert set(data) == {"fermi_energy", "bottom", "top", "bulk", "touching", "in_gap", "message"}
    assert set(data["bottom"]) == {"net", "counter_pairs", "modes", "by_spin"}
    assert set(data["bottom"]["modes"][0]) == {"k", "velocity", "y", "spread", "sz", "spin", "edge", "energy"}
    assert data["bottom"]["by_spin"] == {"up": {"net": 1, "counter_pairs": 0}, "down": {"net": 1, "counter_pairs": 0}}
    assert isinstance(count, EdgeCount) and data["in_gap"] is True


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        (dict(fermi_energy=float("nan")), ValueError, "fermi_energy must be finite"),
        (dict(fermi_energy=0.0, k_points=1), ValueError, "k_points must be an integer >= 2"),
        (dict(fermi_energy=0.0, tol=0.0), ValueError, "tol must be a positive energy"),
        (dict(fermi_energy=0.0, bulk_spread=-1.0), ValueError, "bulk_spread must be a positive length"),
    ],
    ids=["nan-energy", "one-k-point", "zero-tol", "negative-spread"],
)
def test_bad_arguments(kwargs, error, message):
    ham = _ribbon(10, phi=0.1)
    with pytest.raises(error, match=message):
        count_edge_modes(ham, **kwargs)


def test_rejects_a_builder():
    with pytest.raises(TypeError, match="RibbonHamiltonian.from_kwant"):
        count_edge_modes(ribbon_builder(10), 0.0)
