"""Continuum Hartree-Fock of filled Landau levels: exchange integrals, the nu = 1 gap, transitions."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from topoedge.solvers.landau_exchange import (Level, FilledSet, candidate_sets, exchange_integral, exchange_matrix,
                                              exchange_rational, ground_state, lower_envelope, transitions)

ROOT = math.sqrt(math.pi / 2)


@pytest.mark.parametrize("n, m", [(n, m) for n in range(4) for m in range(n + 1)])
def test_closed_forms_equal_the_quadrature(n, m):
    # X_nm = int_0^inf dx (m!/n!) u^(n-m) e^-u [L_m^(n-m)(u)]^2, u = x^2/2, with the
    # 2D Coulomb interaction (Landau-level form factors: Giuliani and Vignale,
    # Quantum Theory of the Electron Liquid, CUP 2005): the exact rational
    # times sqrt(pi/2) against scipy's quadrature of the integrand.
    assert exchange_integral(n, m) == pytest.approx(exchange_integral(n, m, quadrature=True), rel=1e-11)
    assert exchange_rational(n, m) == exchange_rational(m, n)


def test_published_exchange_values():
    # X_00 = sqrt(pi/2) E_C: C. Kallin and B. I. Halperin, PRB 30, 5655 (1984).
    # X_01 = 1/2, X_11 = 3/4, X_02 = 3/8, X_12 = 7/16, X_22 = 41/64 in units of sqrt(pi/2) E_C:
    # ../shared/REFERENCES.md section 15 (form factors: Giuliani and Vignale, CUP 2005).
    table = {(0, 0): 1, (0, 1): 1 / 2, (1, 1): 3 / 4, (0, 2): 3 / 8, (1, 2): 7 / 16, (2, 2): 41 / 64}
    for (n, m), value in table.items():
        assert exchange_integral(n, m) == pytest.approx(value * ROOT, rel=1e-14)
        assert exchange_integral(n, m, quadrature=True) == pytest.approx(value * ROOT, rel=1e-12)
    # exchange falls with the level index and with the distance between levels
    x = exchange_matrix(5)
    assert np.all(np.diff(np.diag(x)) < 0) and np.all(np.diff(x[0]) < 0)


def test_a_gate_screens_the_exchange_and_a_far_gate_does_not():
    # V(q) (1 - exp(-2 q d)): an image charge at distance 2d (common practice, no source).
    far = exchange_integral(1, 0, gate=1e4)
    near = exchange_integral(1, 0, gate=0.5)
    assert far == pytest.approx(exchange_integral(1, 0), rel=1e-3) and near < 0.8 * far
    with pytest.raises(ValueError, match="gate distance"):
        exchange_integral(0, 0, gate=0.0)


@pytest.mark.parametrize("coulomb, zeeman", [(0.3, 0.0), (1.0, 0.02), (2.5, 0.3), (4.0, 0.1)])
def test_nu1_gap_is_zeeman_plus_the_exchange(coulomb, zeeman):
    # The spin-flip gap Delta_Z + sqrt(pi/2) E_C: Kallin and Halperin, PRB 30, 5655 (1984).
    x = exchange_matrix(3)
    sets = candidate_sets(1, x)
    best = sets[int(ground_state(sets, coulomb, zeeman))]
    assert best.levels == (Level(0, "up"),)
    qp = best.quasiparticles(coulomb, zeeman, x)
    assert qp[Level(0, "down")] - qp[Level(0, "up")] == pytest.approx(zeeman + ROOT * coulomb, rel=1e-13)
    gap, kind, top, bottom = best.gap(coulomb, zeeman, x)
    if coulomb <= 1.0:
        # the activation gap is that spin flip while E_C is below hbar omega_c
        assert kind == "spin" and (top, bottom) == (Level(0, "up"), Level(0, "down"))
        assert gap == pytest.approx(zeeman + ROOT * coulomb, rel=1e-13)
    else:
        # beyond, the empty 1up (exchange X_01 with the filled 0up) lies below 0down:
        # the smallest gap, measured from 0up, is 1 + (X_00 - X_01) lambda
        assert kind == "cyclotron" and bottom == Level(1, "up")
        assert gap == pytest.approx(1 + (ROOT - ROOT / 2) * coulomb, rel=1e-13)


def test_nu2_transition_at_zero_zeeman():
    # E({0up,0down}) = 1 - X_00 lambda, E({0up,1up}) = 2 - (X_00 + X_11 + 2 X_01) lambda / 2
    # (continuum Hartree-Fock of filled levels: G. F. Giuliani and J. J. Quinn, PRB 31, 6228
    # (1985)); they cross at lambda = 8 / (3 sqrt(pi/2)), worked out by hand from the closed forms.
    sets = candidate_sets(2, exchange_matrix(4))
    (where, before, after), = transitions(sets, 0.0, 6.0)
    assert where == pytest.approx(8 / (3 * ROOT), rel=1e-12)
    assert sets[before].label == "0up,0down" and sets[after].label == "0up,1up"


def test_nu3_transition_at_zero_zeeman():
    # {0up,0down,1up} -> {0up,1up,2up}: the energy difference is
    # 2 - lambda (X_22 + 2 X_02 + 2 X_12 - X_00) / 2 = 2 - (81/128) sqrt(pi/2) lambda,
    # so lambda = 256 / (81 sqrt(pi/2)) (by hand from the same continuum energies).
    sets = candidate_sets(3, exchange_matrix(5))
    (where, before, after), = transitions(sets, 0.0, 6.0)
    assert where == pytest.approx(256 / (81 * ROOT), rel=1e-12)
    assert sets[before].label == "0up,0down,1up" and sets[after].label == "0up,1up,2up"


@pytest.mark.parametrize("filling", [1, 2, 3, 4, 5])
def test_sets_with_holes_are_never_the_ground_state(filling):
    # The candidates fill each spin from n = 0 without holes; every subset of the
    # levels n <= filling + 1 of both spins, brute force, gives no lower energy.
    x = exchange_matrix(filling + 2)
    kept = candidate_sets(filling, x)
    every = [(n, spin) for n in range(filling + 2) for spin in ("up", "down")]
    lam, z = np.meshgrid(np.linspace(0, 4, 17), np.linspace(0, 0.9, 7))
    best_kept = np.min([s.energy(lam, z) for s in kept], axis=0)
    for chosen in itertools.combinations(every, filling):
        levels = tuple(Level(n, s) for n, s in chosen)
        same = [(a, b) for a in levels for b in levels if a.spin == b.spin]
        energy = FilledSet(levels, sum(l.n + 0.5 for l in levels),
                           -0.5 * sum(1 if l.spin == "up" else -1 for l in levels),
                           -0.5 * sum(x[a.n, b.n] for a, b in same)).energy(lam, z)
        assert np.all(energy >= best_kept - 1e-12)


def test_the_exact_envelope_agrees_with_the_grid():
    x = exchange_matrix(6)
    sets = candidate_sets(4, x)
    for z in (0.0, 0.05, 0.4):
        pieces = lower_envelope(sets, 0.0, 5.0, zeeman=z)
        assert pieces[0][0] == 0.0 and pieces[-1][1] == 5.0
        for start, end, index in pieces:
            middle = np.linspace(start, end, 7)[1:-1]
            assert np.all(ground_state(sets, middle, z) == index)
    # along z at fixed lambda as well
    for start, end, index in lower_envelope(sets, 0.0, 0.9, coulomb=1.5):
        middle = np.linspace(start, end, 5)[1:-1]
        assert np.all(ground_state(sets, 1.5, middle) == index)


def test_bad_arguments():
    with pytest.raises(ValueError, match="filling factor: got 0"):
        candidate_sets(0, exchange_matrix(2))
    with pytest.raises(ValueError, match="expected at most 4"):
        candidate_sets(5, exchange_matrix(2))
    with pytest.raises(ValueError, match="Landau level indices"):
        exchange_rational(-1, 0)
