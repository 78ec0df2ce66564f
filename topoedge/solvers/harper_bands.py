"""Band edges, state counts and band paths of the Harper cell, eigenvalues only (solver stage).

The cheap half of the Landau-level regime: every band of the ring-shaped
tridiagonal cell of :mod:`topoedge.systems.harper` has its extremes at the
two momenta of :meth:`HarperCell.band_edge_momenta` (Chambers' relation [1]_),
so band ranges, the number of bands below an energy and the gap around it
come from LAPACK selected eigenvalues of the banded matrix [2]_ at those two
points, ``O(q)`` memory. Energies in units of the hopping ``t``. The
eigenvectors and Chern numbers are in :mod:`topoedge.solvers.landau`.

References
----------
.. [1] W. G. Chambers, Phys. Rev. 140, A135 (1965).
.. [2] W. Barth, R. S. Martin and J. H. Wilkinson, "Calculation of the
   eigenvalues of a symmetric tridiagonal matrix by the method of bisection",
   Numer. Math. 9, 386 (1967).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import scipy.linalg as sla

from ..systems.harper import HarperCell
from ..util.threads import one_blas_thread

__all__ = ["band_eigvals", "band_ranges", "count_below", "lattice_levels", "landau_path_bands", "landau_states_below"]


def band_eigvals(cell: HarperCell, k1: float, k2: float, lo: int, hi: int, shift: float = 0.0) -> np.ndarray:
    """Eigenvalues ``lo .. hi`` (inclusive, ascending) of one sector at ``(k1, k2)``."""
    ab = cell.lower_band(k1, k2, shift)
    with one_blas_thread():
        return sla.eig_banded(ab, lower=True, eigvals_only=True, select="i", select_range=(lo, hi))


def band_ranges(cell: HarperCell, count: int, shift: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Energy ranges ``(lo, hi)`` of the ``count`` lowest bands of a sector (units of t).

    Exact: every band of the ring has its extremes at the two momenta of
    :meth:`HarperCell.band_edge_momenta` (Chambers' relation).
    """
    count = min(int(count), cell.q)
    a, b = (band_eigvals(cell, k1, k2, 0, count - 1, shift) for k1, k2 in cell.band_edge_momenta())
    return np.minimum(a, b), np.maximum(a, b)


def count_below(cell: HarperCell, energy: float, shift: float = 0.0) -> tuple[int, int]:
    """Eigenvalues below ``energy`` at the two band-edge momenta of a sector.

    The band-edge momenta hold every band's minimum and maximum, so the
    energy lies in a gap exactly when the two counts agree, and then that
    count is the number of bands below it.
    """
    counts = []
    for k1, k2 in cell.band_edge_momenta():
        ab = cell.lower_band(k1, k2, shift)
        floor = float(np.min(ab[0].real)) - 4.0 * abs(cell.t) - 1.0   # below the spectrum (Gershgorin)
        if energy <= floor:
            counts.append(0)
            continue
        with one_blas_thread():
            w = sla.eig_banded(ab, lower=True, eigvals_only=True, select="v", select_range=(floor, energy))
        counts.append(int(w.size))
    return counts[0], counts[1]


def lattice_levels(cell: HarperCell, count: int, shift: float = 0.0) -> np.ndarray:
    """Centres of the ``count`` lowest Landau levels of a sector (groups of ``|p|`` bands), units of t."""
    p = abs(cell.p)
    lo, hi = band_ranges(cell, count * p, shift)
    return 0.5 * (lo.reshape(count, p).min(axis=1) + hi.reshape(count, p).max(axis=1))


def landau_path_bands(cell: HarperCell, count: int, points: int = 120) -> dict:
    """The ``count`` lowest bands of every sector along Gamma - X - M - Gamma (as :func:`topoedge.solvers.chern.path_bands`)."""
    corners = np.array([[0.0, 0.0], [np.pi, 0.0], [np.pi, np.pi], [0.0, 0.0]])
    seg = np.linalg.norm(np.diff(corners, axis=0), axis=1)
    s = np.linspace(0.0, seg.sum(), points)
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    k = np.stack([np.interp(s, cum, corners[:, i]) for i in (0, 1)], axis=-1)
    count = min(int(count), cell.q)
    base = np.array([band_eigvals(cell, k1, k2, 0, count - 1) for k1, k2 in k])
    energies = {spin: base + shift for spin, shift in cell.sectors()}
    return {"distance": s, "ticks": list(zip(cum, ["Γ", "X", "M", "Γ"])), "energies": energies}


def landau_states_below(cell: HarperCell, energy: float, *, tol: float = 1e-9):
    """Bands below ``energy`` and the gap containing it, for the Streda route (:class:`topoedge.solvers.streda.StredaPoint`).

    Counts at the band-edge momenta (every band's extremes): equal counts in
    every sector mean the energy lies in a gap; its edges are the nearest
    eigenvalues there.
    """
    from .streda import StredaPoint

    below, lows, highs = 0, [], []
    inside = False
    for _, shift in cell.sectors():
        ca, cb = count_below(cell, energy, shift)
        if ca != cb:
            inside = True
            break
        c = ca
        below += c
        edges = []
        for k1, k2 in cell.band_edge_momenta():
            lo_i, hi_i = max(c - 1, 0), min(c, cell.q - 1)
            w = band_eigvals(cell, k1, k2, lo_i, hi_i, shift)
            edges.append(w)
        if c > 0:
            lows.append(max(e[0] for e in edges))
        if c < cell.q:
            highs.append(min(e[-1] for e in edges))
    gap = None
    if not inside:
        top = max(lows, default=-np.inf)
        bottom = min(highs, default=np.inf)
        if energy - top <= tol or bottom - energy <= tol:
            inside = True
        else:
            gap = (float(top), float(bottom))
    flux = cell.flux
    return StredaPoint(flux=Fraction(flux), bands_below=below, density=below / flux.denominator,
                       gap=None if inside else gap)
