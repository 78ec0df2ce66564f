"""The Landau-level-regime bulk solvers against the dense route, TKNN and the continuum.

Sources:
- kwant (reference library): the Bloch Hamiltonian of the 1 x q magnetic cell
  (kwant.wraparound of topoedge.models.square.bulk_builder) equals the ring form.
- Magnetic translation (Zak, Phys. Rev. 134, A1602 (1964)): shifting the rows
  of the Landau-gauge cell by one maps H(k1) onto H(k1 - 2 pi phi).
- Chambers' relation (Phys. Rev. 140, A135 (1965), from memory): every band
  has its extremes at (k1, k2) = (0, 0) or (pi/q, pi).
- TKNN, Phys. Rev. Lett. 49, 405 (1982) (from memory): the Chern sum t_r
  below gap r solves r = q s_r + p t_r with |t_r| <= q/2
  (../shared/REFERENCES.md section 1).
- Link-variable method: Fukui, Hatsugai, Suzuki, JPSJ 74, 1674 (2005): the
  dense route on the same grid gives the same integers.
- Landau levels of the square lattice in a small flux (REFERENCES.md
  sections 4 and 13; own perturbation theory of the Harper equation, checked
  there against exact diagonalisation): E_n = -4t + 2 t b (n + 1/2) ... with
  b = 2 pi phi, the leading term hbar omega_c (n + 1/2) (Hofstadter, Phys.
  Rev. B 14, 2239 (1976)).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.models.square import bulk_builder, model_params
from topoedge.solvers.chern import chern_numbers, default_grid
from topoedge.systems.harper import HarperCell, magnetic_shift
from topoedge.solvers.landau import (LandauSolverError, band_ranges, count_below, landau_chern, landau_states_below,
                             landau_subspace_chern, lattice_levels)
from topoedge.solvers.streda import states_below


def _kwant_bulk(flux, zeeman=0.0, spin=False, onsite=0.0):
    return BlochHamiltonian.from_kwant(bulk_builder(Fraction(flux), spin=spin),
                                       params=model_params(phi=flux, zeeman=zeeman, onsite=onsite), spin=spin)


@pytest.mark.parametrize("flux", [Fraction(1, 7), Fraction(2, 9), Fraction(-1, 11), Fraction(3, 13)])
def test_ring_form_equals_the_kwant_bloch_hamiltonian(flux):
    cell = HarperCell(flux, onsite=0.3, spin=False)
    bloch = _kwant_bulk(flux, onsite=0.3)
    rng = np.random.default_rng(1)
    for k1, k2 in rng.uniform(0, 2 * np.pi, (6, 2)):
        np.testing.assert_allclose(cell.dense(k1, k2, 0.3), bloch.at(k1, k2), atol=1e-13)
        v = rng.standard_normal((flux.denominator, 3)) + 1j * rng.standard_normal((flux.denominator, 3))
        np.testing.assert_allclose(cell.matvec(k1, k2, v, 0.3), cell.dense(k1, k2, 0.3) @ v, atol=1e-12)


def test_band_storage_has_the_eigenvalues_of_the_ring():
    import scipy.linalg as sla

    cell = HarperCell(Fraction(3, 17), spin=False)
    for k1, k2 in [(0.2, 1.3), (0.0, 0.0), (np.pi / 17, np.pi)]:
        w = sla.eig_banded(cell.lower_band(k1, k2), lower=True, eigvals_only=True)
        np.testing.assert_allclose(w, np.linalg.eigvalsh(cell.dense(k1, k2)), atol=1e-12)


@pytest.mark.parametrize("flux", [Fraction(1, 9), Fraction(2, 11), Fraction(-3, 10)])
def test_magnetic_translation_shifts_the_rows(flux):
    cell = HarperCell(flux, spin=False)
    k1, k2 = 0.37, 1.9
    w, v = np.linalg.eigh(cell.dense(k1, k2))
    shifted = magnetic_shift(v, 1, k2)
    h = cell.dense(k1 - 2 * np.pi * float(flux), k2)
    np.testing.assert_allclose(h @ shifted, shifted * w, atol=1e-12)
    # s shifts at once: k1 - 2 pi phi s
    s = 4
    h = cell.dense(k1 - 2 * np.pi * float(flux) * s, k2)
    np.testing.assert_allclose(h @ magnetic_shift(v, s, k2), magnetic_shift(v, s, k2) * w, atol=1e-12)


@pytest.mark.parametrize("flux", [Fraction(1, 10), Fraction(2, 15), Fraction(1, 24)])
def test_band_edges_are_at_the_two_chambers_momenta(flux):
    # Dense eigenvalues on a grid containing the extremes (multiples of pi/q
    # along k1, 0 and pi along k2): the same ranges to rounding.
    cell = HarperCell(flux, spin=False)
    q = flux.denominator
    lo, hi = band_ranges(cell, q)
    bloch = _kwant_bulk(flux)
    _, _, hk = bloch.grid(4 * q, 8)
    e = np.linalg.eigvalsh(hk).reshape(-1, q)
    np.testing.assert_allclose(lo, e.min(axis=0), atol=1e-11)
    np.testing.assert_allclose(hi, e.max(axis=0), atol=1e-11)
    # and a random momentum never leaves them
    rng = np.random.default_rng(2)
    for k1, k2 in rng.uniform(0, 2 * np.pi, (20, 2)):
        w = np.linalg.eigvalsh(cell.dense(k1, k2))
        assert np.all(w >= lo - 1e-11) and np.all(w <= hi + 1e-11)


# ---------------------------------------------------- against the dense route


DENSE_CASES = [(Fraction(1, 20), 0.0), (Fraction(1, 47), 0.02), (Fraction(2, 61), 0.0),
               (Fraction(-1, 80), 0.01), (Fraction(3, 113), 0.0), (Fraction(1, 150), 0.0)]


@pytest.mark.parametrize("flux, zeeman", [pytest.param(f, z, marks=pytest.mark.slow) if f.denominator > 100 else (f, z)
                                          for f, z in DENSE_CASES], ids=[f"{f}-Z{z}" for f, z in DENSE_CASES])
def test_landau_chern_numbers_equal_the_dense_ones_on_the_same_grid(flux, zeeman):
    spin = zeeman != 0
    cell = HarperCell(flux, zeeman=zeeman, spin=spin)
    p = abs(flux.numerator)
    result = landau_chern(cell, bands=4 * p)
    assert result.solver == "landau" and result.grid == (flux.denominator, 8)
    dense = chern_numbers(_kwant_bulk(flux, zeeman, spin), grid=result.grid)
    # every open gap up to the fourth Landau level (of each spin)
    top = 4 * p * (2 if spin else 1)
    ours = [(g.below, g.chern, g.spin_chern) for g in result.gaps if g.below <= top]
    theirs = [(g.below, g.chern, g.spin_chern) for g in dense.gaps if g.below <= top]
    assert ours == theirs and len(ours) >= 4
    for a, b in zip(result.bands, dense.bands):
        assert (a.spin, a.chern) == (b.spin, b.chern)
        # exact ranges (band-edge momenta) contain those sampled on the grid
        width = a.energy_max - a.energy_min
        assert a.energy_min - 1e-12 <= b.energy_min <= a.energy_min + width + 1e-12
        assert a.energy_max - width - 1e-12 <= b.energy_max <= a.energy_max + 1e-12
    # The raw sums agree too (same link variables up to the gauge).
    for g in result.groups[: len(result.groups) // (2 if spin else 1)]:
        match = [h for h in dense.groups if h.spin == g.spin and h.bands == g.bands]
        assert match and match[0].chern_raw == pytest.approx(g.chern_raw, abs=1e-8)


def test_landau_chern_numbers_equal_the_dense_ones_on_the_default_grid():
    # The dense route on its own default grid (2q x 2q) and the Landau-level
    # solver on q x 8 give the same integers.
    flux = Fraction(1, 30)
    cell = HarperCell(flux, spin=False)
    ours = landau_chern(cell, bands=6)
    bloch = _kwant_bulk(flux)
    dense = chern_numbers(bloch, grid=default_grid(bloch))
    assert [(g.below, g.chern) for g in ours.gaps] == [(g.below, g.chern) for g in dense.gaps[: len(ours.gaps)]]


def test_subspace_check_equals_the_band_sum():
    cell = HarperCell(Fraction(1, 150), zeeman=0.004, spin=True)
    result = landau_chern(cell, bands=8)
    for gap in result.gaps[:8]:
        sub = landau_subspace_chern(cell, gap)
        assert sub.chern == gap.chern and sub.spin_chern == gap.spin_chern and sub.link_min > 0.5


# ---------------------------------------------------------------- TKNN at large q


@pytest.mark.parametrize("flux", [Fraction(1, 500), Fraction(3, 1000), Fraction(-2, 997), Fraction(1, 2000)],
                         ids=str)
def test_tknn_diophantine_equation_at_large_q(flux):
    p, q = flux.numerator, flux.denominator
    result = landau_chern(HarperCell(flux, spin=False), bands=4 * abs(p))
    below = [g.below for g in result.gaps]
    # the gaps above whole Landau levels are open, with t_r = n sign(p)
    for n in range(1, 5):
        assert n * abs(p) in below
        assert result.gap_above(n * abs(p)).chern == n * np.sign(p)
    for g in result.gaps:
        # r = q s + p t with |t| <= q/2
        assert (g.below - p * g.chern) % q == 0 and abs(g.chern) <= q / 2


# ------------------------------------------------------------------ continuum limit


def _levels_series(n, phi):
    """Harper levels to third order in b = 2 pi phi (REFERENCES.md section 13)."""
    b = 2 * math.pi * phi
    third = ((20 * n**3 + 30 * n**2 + 40 * n + 15) / 1440
             + (n * (n - 1) * (n - 2) * (n - 3) - (n + 1) * (n + 2) * (n + 3) * (n + 4)) / 4608)
    return -4 + 2 * b * (n + 0.5) - b**2 / 8 * (2 * n * n + 2 * n + 1) + b**3 * third


def test_lattice_landau_levels_approach_the_continuum():
    deviations = []
    for q in (100, 400, 1600):
        phi = 1 / q
        levels = lattice_levels(HarperCell(Fraction(1, q), spin=False), 4)
        hw = 4 * math.pi * phi
        continuum = -4 + hw * (np.arange(4) + 0.5)
        deviations.append(np.abs(levels - continuum) / hw)
        # the third-order series (REFERENCES.md section 13: 2e-6 t at phi = 1/100)
        for n in range(4):
            assert levels[n] == pytest.approx(_levels_series(n, phi), abs=3e-6 * (100 / q) ** 3 + 1e-12)
    deviations = np.array(deviations)
    # relative deviation from hbar omega_c (n + 1/2) shrinks like phi: 4 times per step
    assert np.all(deviations[1:] < deviations[:-1])
    np.testing.assert_allclose(deviations[0] / deviations[1], 4.0, rtol=0.02)
    np.testing.assert_allclose(deviations[1] / deviations[2], 4.0, rtol=0.01)


# ----------------------------------------------------------------- Streda counts


@pytest.mark.parametrize("flux", [Fraction(1, 12), Fraction(2, 25), Fraction(-3, 32)])
def test_state_counts_equal_the_dense_counts(flux):
    cell = HarperCell(flux, zeeman=0.05, spin=True)
    bloch = _kwant_bulk(flux, 0.05, True)
    lo, hi = band_ranges(cell, flux.denominator)
    for energy in np.linspace(-3.9, -1.0, 23):
        ours = landau_states_below(cell, float(energy))
        theirs = states_below(bloch, float(energy), flux=flux)
        assert ours.bands_below == theirs.bands_below or theirs.gap is None
        assert (ours.gap is None) == (theirs.gap is None)
        if ours.gap is not None:
            np.testing.assert_allclose(ours.gap, theirs.gap, atol=1e-10)
    # counts at the band-edge momenta bracket a gap exactly
    e = 0.5 * (hi[0] + lo[1])
    assert count_below(cell, e, 0.0) == (1, 1)


def test_wide_groups_are_refused_not_miscounted():
    # Near the band centre the bands are as wide as their gaps: the block
    # iteration cannot converge there and says so (not the Landau-level regime).
    cell = HarperCell(Fraction(1, 60), spin=False)
    with pytest.raises(LandauSolverError, match="not the Landau-level regime|did not converge"):
        from topoedge.solvers.landau import _solve_group

        lo, hi = band_ranges(cell, 31)
        _solve_group(cell, 0.0, float(lo[0]), float(hi[29]), 30, 1, 4, np.random.default_rng(0))
