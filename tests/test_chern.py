"""Bulk Chern numbers by the link-variable method against published results.

References:
- D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, Phys. Rev. Lett.
  49, 405 (1982): for flux p/q the Chern sum below gap r is t_r, the solution
  of r = q s_r + p t_r with |t_r| <= q/2 (TKNN Diophantine equation).
- T. Fukui, Y. Hatsugai, H. Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005): the
  link-variable Chern number is an integer on any grid and does not change
  under phase changes or unitary mixing of the eigenvectors at each k.
- Band edges at flux 1/3: [-1-sqrt3, -2], [1-sqrt3, sqrt3-1], [2, 1+sqrt3] t,
  from Chambers' relation (W. G. Chambers, Phys. Rev. 140, A135 (1965));
  values recomputed numerically for this project, from memory of the relation.
"""

from __future__ import annotations

import math
import warnings
from fractions import Fraction

import numpy as np
import pytest

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    import kwant

from topoedge.systems.bloch import BlochHamiltonian
from topoedge.models.square import bulk_builder, model_params
from topoedge.solvers.chern import GapClosedError, chern_numbers, link_chern


def tknn(p: int, q: int, r: int) -> int:
    """t_r of r = q s_r + p t_r with |t_r| <= q/2 (unique for odd q and r != q/2)."""
    sols = [t for t in range(-(q // 2), q // 2 + 1) if (r - p * t) % q == 0]
    assert len(sols) == 1, (p, q, r, sols)
    return sols[0]


def bulk(phi, *, spin=False, zeeman=0.0):
    phi = Fraction(phi)
    builder = bulk_builder(phi, spin=spin)
    return BlochHamiltonian.from_kwant(builder, params=model_params(phi=phi, zeeman=zeeman))


FLUXES = [Fraction(p, q) for q in range(2, 13) for p in range(1, q) if math.gcd(p, q) == 1]


@pytest.mark.parametrize("phi", FLUXES, ids=str)
def test_gap_chern_numbers_solve_the_tknn_equation(phi):
    # TKNN (PRL 49, 405): Chern sum below every open gap r equals t_r. The
    # centre gap r = q/2 of even q is closed (bands touch), and must not be
    # reported as a gap.
    p, q = phi.numerator, phi.denominator
    result = chern_numbers(bulk(phi))
    got = {gap.below: gap.chern for gap in result.gaps}
    expected = {r: tknn(p, q, r) for r in range(1, q) if not (q % 2 == 0 and r == q // 2)}
    assert got == expected
    assert all(abs(g.chern_raw - g.chern) < 1e-8 for g in result.groups)  # integer to rounding


def test_table_includes_negative_and_large_chern_numbers():
    # The TKNN cases above include |t_r| > 1 and negative t_r, e.g. 2/5:
    # t = -2, 1, -1, 2 and band Chern numbers -2, 3, -2, 3, -2.
    result = chern_numbers(bulk(Fraction(2, 5)))
    assert [g.chern for g in result.gaps] == [-2, 1, -1, 2]
    assert [b.chern for b in result.bands] == [-2, 3, -2, 3, -2]
    result = chern_numbers(bulk(Fraction(3, 7)))
    assert [g.chern for g in result.gaps] == [-2, 3, 1, -1, -3, 2]


def test_flux_one_third_bands_and_edges():
    # Band Chern numbers 1, -2, 1 (TKNN) and the band edges from Chambers'
    # relation, to 1e-10 t (the grid contains k = 0 and pi, where the edges lie).
    result = chern_numbers(bulk(Fraction(1, 3)), grid=(12, 12))
    s3 = math.sqrt(3)
    assert [b.chern for b in result.bands] == [1, -2, 1]
    edges = [(b.energy_min, b.energy_max) for b in result.bands]
    np.testing.assert_allclose(edges, [(-1 - s3, -2), (1 - s3, s3 - 1), (2, 1 + s3)], atol=1e-10)
    assert sum(b.chern for b in result.bands) == 0


@pytest.mark.parametrize("phi", [Fraction(1, 3), Fraction(2, 5), Fraction(3, 7), Fraction(1, 6)], ids=str)
def test_reversing_the_field_flips_every_chern_number(phi):
    # Time reversal maps phi -> -phi and C -> -C (common practice).
    plus = chern_numbers(bulk(phi))
    minus = chern_numbers(bulk(-phi))
    assert [g.chern for g in minus.gaps] == [-g.chern for g in plus.gaps]
    assert [g.below for g in minus.gaps] == [g.below for g in plus.gaps]


def test_link_chern_is_gauge_invariant():
    # FHS (JPSJ 74, 1674): random phases of single bands and random unitary
    # mixing inside a group leave the integer unchanged.
    rng = np.random.default_rng(20261202)
    bloch = bulk(Fraction(2, 5))
    _, _, hk = bloch.grid(20, 20)
    _, vectors = np.linalg.eigh(hk)
    group = vectors[..., 0:3]
    base, _ = link_chern(group)
    z = rng.normal(size=(20, 20, 3, 3)) + 1j * rng.normal(size=(20, 20, 3, 3))
    unitary, _ = np.linalg.qr(z)
    mixed, _ = link_chern(group @ unitary)
    phased, _ = link_chern(vectors[..., :1] * np.exp(2j * np.pi * rng.random((20, 20, 1, 1))))
    single, _ = link_chern(vectors[..., :1])
    assert round(base) == round(mixed) and abs(base - mixed) < 1e-8
    assert abs(single - phased) < 1e-8 and round(single) == -2


def test_group_sum_equals_the_determinant_over_all_bands_below():
    # The Chern sum below a gap computed as a sum over isolated groups equals
    # the multi-band determinant form over all bands below (FHS, JPSJ 74, 1674).
    bloch = bulk(Fraction(3, 7))
    result = chern_numbers(bloch, grid=(28, 28))
    _, _, hk = bloch.grid(28, 28)
    _, vectors = np.linalg.eigh(hk)
    for gap in result.gaps:
        raw, _ = link_chern(vectors[..., : gap.below])
        assert round(raw) == gap.chern


def test_touching_bands_form_one_group():
    # Flux 1/4: the two middle bands touch (Dirac points at E = 0); the group
    # carries t_3 - t_1 = -2 and its bands have no individual Chern number.
    result = chern_numbers(bulk(Fraction(1, 4)))
    assert [b.chern for b in result.bands] == [1, None, None, 1]
    middle = [g for g in result.groups if len(g.bands) == 2]
    assert len(middle) == 1 and middle[0].chern == -2
    assert middle[0].bands == (1, 2)
    # The solver speaks of bands and gaps; `fermi.gap = 2: ` is added by the scenario layer.
    with pytest.raises(GapClosedError, match=r"^the gap above band 1 is closed") as info:
        result.gap_above(2)
    assert info.value.gap == 2


def test_energy_inside_a_band_is_refused_with_the_band_named():
    result = chern_numbers(bulk(Fraction(1, 3)))
    with pytest.raises(GapClosedError, match=r"E_F = -2\.3 t lies inside bulk band 0"):
        result.gap_at(-2.3)
    assert result.gap_at(-1.0).chern == 1
    with pytest.raises(GapClosedError, match=r"expected 1 <= gap < 3"):
        result.gap_above(3)


def test_zeeman_splitting_gives_spin_resolved_chern_numbers():
    # Small flux, Zeeman smaller than the cyclotron gap: filling 1 is one
    # spin-up Landau level, spin Chern split (1, 0); filling 2 is (1, 1).
    result = chern_numbers(bulk(Fraction(1, 20), spin=True, zeeman=0.1))
    first, second = result.gaps[0], result.gaps[1]
    assert (first.below, first.chern, first.spin_chern) == (1, 1, {"up": 1, "down": 0})
    assert (second.below, second.chern, second.spin_chern) == (2, 2, {"up": 1, "down": 1})
    assert result.bands[0].spin == "up" and result.bands[1].spin == "down"


def test_refined_grid_gives_the_same_integers():
    bloch = bulk(Fraction(2, 7))
    coarse = chern_numbers(bloch)
    fine = chern_numbers(bloch, grid=tuple(int(1.5 * n) for n in coarse.grid))
    assert [(g.below, g.chern) for g in coarse.gaps] == [(g.below, g.chern) for g in fine.gaps]


def test_fourier_components_reproduce_kwant_wraparound():
    # The components extracted once reproduce the wrapped kwant Hamiltonian at
    # arbitrary momenta (kwant.wraparound convention: exp(i k.R)).
    phi = Fraction(2, 5)
    builder = bulk_builder(phi, spin=True)
    params = model_params(phi=phi, zeeman=0.3, onsite=0.1)
    bloch = BlochHamiltonian.from_kwant(builder, params=params)
    fsyst = kwant.wraparound.wraparound(builder).finalized()
    rng = np.random.default_rng(7)
    for k1, k2 in rng.uniform(-np.pi, np.pi, size=(5, 2)):
        ref = fsyst.hamiltonian_submatrix(params=dict(params, k_x=k1, k_y=k2))
        np.testing.assert_allclose(bloch.at(k1, k2), ref, rtol=0, atol=1e-13)


def test_bad_arguments():
    bloch = bulk(Fraction(1, 3))
    with pytest.raises(ValueError, match="at least 3 x 3"):
        chern_numbers(bloch, grid=(2, 8))
    with pytest.raises(ValueError, match="gap_min must be > 0"):
        chern_numbers(bloch, gap_min=0.0)
    ribbon = kwant.Builder(kwant.TranslationalSymmetry((1, 0)))
    with pytest.raises(TypeError, match="exactly two translation symmetries"):
        BlochHamiltonian.from_kwant(ribbon)


def test_divide_and_conquer_failure_falls_back_to_mrrr(monkeypatch):
    # LAPACK's divide-and-conquer eigensolver (numpy's eigh) fails to converge
    # on rare matrices; the failure is forced here for the whole stack and for
    # its first matrix, which must then come from the MRRR driver, the others
    # from eigh one by one, and together still form an exact eigensystem.
    import scipy.linalg as sla

    from topoedge.util.threads import eigh_stack

    bloch = bulk(Fraction(3, 50))
    hk = bloch.at(np.array([0.0, 0.3]), np.array([np.pi / 2, 0.1]))
    eigh, evr = np.linalg.eigh, sla.eigh
    calls = {"failed": 0, "evr": 0}

    def failing(m, *args, **kwargs):
        if m.ndim > 2 or np.array_equal(m, hk[0]):
            calls["failed"] += 1
            raise np.linalg.LinAlgError("Eigenvalues did not converge")
        return eigh(m, *args, **kwargs)

    def counting(m, *args, **kwargs):
        calls["evr"] += kwargs.get("driver") == "evr"
        return evr(m, *args, **kwargs)

    monkeypatch.setattr(np.linalg, "eigh", failing)
    monkeypatch.setattr(sla, "eigh", counting)
    w, v = eigh_stack(hk)
    assert calls == {"failed": 2, "evr": 1}
    for m, e, vec in zip(hk, w, v):
        np.testing.assert_allclose(m @ vec, vec * e, rtol=0, atol=1e-12)
        np.testing.assert_allclose(vec.conj().T @ vec, np.eye(50), rtol=0, atol=1e-12)
