"""Hall conductance from the density response to the field (Streda route).

At a Fermi energy in a gap, the Streda formula gives the Hall conductance as
the change of the electron density with the field at fixed chemical
potential::

    sigma_xy = e (dn/dB)_mu,   i.e.   sigma_xy / (e^2/h) = d n_site / d phi

with ``n_site`` the number of states below E_F per plaquette (per lattice
site on the square lattice, per hexagon on the honeycomb lattice) and
``phi`` the flux per plaquette in flux quanta. On the lattice the flux is
rational: at ``phi' = p'/q'`` the magnetic cell has ``q'`` plaquettes and
every band holds one state per cell, so ``n_site = (bands below E_F) / q'``
(with or without spin, and whether or not S_z is conserved). Within one gap
``n_site = s + t phi`` exactly (``r = q s + p t``), so the slope across
neighbouring fluxes whose gap still contains E_F is the integer ``t``. This
route counts states only: no eigenvectors, no Berry phases, no edges.

Band energy ranges come from eigenvalues on a momentum grid that contains
the extremes of the square-lattice bands (``k1`` a multiple of ``pi/q``,
``k2`` 0 or ``pi``, Chambers' relation), so the counts are exact for the
builders of :mod:`topoedge.models.square`; for other bulks (the honeycomb
lattice, a Rashba term) the grid samples the bands without that guarantee.

References
----------
.. [1] P. Streda, "Theory of quantised Hall conductivity in two dimensions",
   J. Phys. C 15, L717 (1982).
.. [2] D. J. Thouless, M. Kohmoto, M. P. Nightingale, M. den Nijs, "Quantized
   Hall conductance in a two-dimensional periodic potential", Phys. Rev. Lett.
   49, 405 (1982).
.. [3] W. G. Chambers, "Linear-network model for magnetic breakdown in two
   dimensions", Phys. Rev. 140, A135 (1965).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction
from math import gcd

import numpy as np

from ..util.threads import eigh_stack
from ..systems.bloch import BlochHamiltonian

__all__ = ["StredaPoint", "StredaResult", "states_below", "streda_slope", "neighbour_fluxes"]


@dataclass(frozen=True)
class StredaPoint:
    """States below E_F at one flux."""

    flux: Fraction
    bands_below: int
    density: float          # states per site below E_F
    gap: tuple[float, float] | None   # energy window of the gap containing E_F (t); None: E_F in a band


@dataclass(frozen=True)
class StredaResult:
    """Least-squares slope of ``n_site(phi)`` over the fluxes whose gap contains E_F."""

    slope: float
    deviation: float        # slope minus the nearest integer
    intercept: float
    points: tuple[StredaPoint, ...]     # the fluxes used, sorted
    rejected: tuple[StredaPoint, ...]   # fluxes with E_F in a band or in another gap

    def to_dict(self) -> dict:
        return {
            "slope": self.slope,
            "deviation_from_integer": self.deviation,
            "intercept": self.intercept,
            "fluxes": [f"{p.flux.numerator}/{p.flux.denominator}" for p in self.points],
            "densities": [p.density for p in self.points],
            "rejected": [f"{p.flux.numerator}/{p.flux.denominator}" for p in self.rejected],
        }


def _sites(bloch: BlochHamiltonian) -> int:
    spin = bloch.spin_blocks() is not None
    return bloch.size // (2 if spin else 1)


def states_below(bloch: BlochHamiltonian, fermi_energy: float, *, flux: Fraction, tol: float = 1e-9) -> StredaPoint:
    """Count the bulk bands below E_F and whether E_F lies in a gap.

    Parameters
    ----------
    bloch : BlochHamiltonian
        Bulk of the magnetic cell at ``flux`` (``q`` sites, 1 or 2 orbitals each).
    fermi_energy : float
        E_F in t.
    flux : Fraction
        The flux of ``bloch``, for the record.
    tol : float
        E_F closer than this (t) to a band edge counts as inside the band.
    """
    sites = _sites(bloch)
    n1 = 2 * sites * -(-6 // sites)        # multiple of 2q, >= 12: contains k1 = pi m / q
    blocks = bloch.spin_blocks() or [np.arange(bloch.size)]
    lo, hi, previous = [], [], None
    for idx in blocks:                     # spin sectors separately: smaller matrices
        part = bloch.block(idx)
        shift = part.shift_from(previous[0]) if previous is not None else None
        if shift is None:
            _, _, hk = part.grid(n1, 8)    # n2 = 8 is even: contains k2 = 0 and pi
            energies = eigh_stack(hk, vectors=False).reshape(-1, len(idx))
            previous = (part, energies)
        else:                              # the other spin shifted by a uniform Zeeman term
            energies = previous[1] + shift
        lo.append(energies.min(axis=0))
        hi.append(energies.max(axis=0))
    lo, hi = np.concatenate(lo), np.concatenate(hi)
    inside = (lo - tol <= fermi_energy) & (fermi_energy <= hi + tol)
    below = int(np.sum(hi < fermi_energy))
    gap = None
    if not inside.any():
        gap = (float(hi[hi < fermi_energy].max(initial=-np.inf)), float(lo[lo > fermi_energy].min(initial=np.inf)))
    cells = Fraction(flux).denominator     # plaquettes per magnetic cell
    return StredaPoint(flux=Fraction(flux), bands_below=below, density=below / cells, gap=gap)


def neighbour_fluxes(flux: Fraction, *, count: int = 4, q_max: int | None = None) -> list[Fraction]:
    """The ``count`` fluxes closest to ``flux`` with denominators up to ``q_max``.

    ``q_max`` defaults to ``max(4 q, 16)``; fluxes keep the sign of ``flux``
    and stay within ``(0, 1)`` in magnitude. For every denominator ``d`` only
    the ``count`` numerators next to ``|flux| d`` can be among the closest, so
    the search costs ``O(q_max count)``.
    """
    q = flux.denominator
    q_max = q_max or max(4 * q, 16)
    sign = -1 if flux < 0 else 1
    target = abs(flux)
    candidates = set()
    for d in range(2, q_max + 1):
        centre = (target.numerator * d) // target.denominator
        for p in range(centre - count, centre + count + 2):
            if 1 <= p < d and gcd(p, d) == 1:
                candidates.add(Fraction(p, d))
    candidates.discard(target)
    nearest = sorted(candidates, key=lambda f: (abs(f - target), f.denominator))[:count]
    return sorted(sign * f for f in nearest)


def _candidates(flux: Fraction, neighbours: int, q_max: int | None) -> list[Fraction]:
    """Candidate fluxes for :func:`streda_slope`, nearest first."""
    found = neighbour_fluxes(flux, count=6 * neighbours, q_max=q_max)
    return sorted(found, key=lambda f: (abs(f - flux), f.denominator))


def streda_slope(
    bulk: Callable[[Fraction], BlochHamiltonian] | None,
    flux: Fraction,
    fermi_energy: float,
    *,
    neighbours: int = 4,
    q_max: int | None = None,
    states: Callable[[Fraction], StredaPoint] | None = None,
) -> StredaResult:
    """Hall conductance in e^2/h from ``d n_site / d phi`` at fixed E_F.

    Parameters
    ----------
    bulk : callable or None
        ``bulk(phi)`` returns the BlochHamiltonian of the model at flux ``phi``
        (everything else fixed); the counts are then :func:`states_below`.
    states : callable, optional
        Instead of ``bulk``: ``states(phi)`` returns the :class:`StredaPoint`
        at flux ``phi`` directly (e.g.
        :func:`topoedge.solvers.landau.landau_states_below`, which counts with
        band-matrix eigenvalues at the band-edge momenta).
    flux : Fraction
        The flux of the scenario; E_F must lie in one of its gaps.
    fermi_energy : float
        E_F in t.
    neighbours : int
        How many nearby fluxes to try (see :func:`neighbour_fluxes`).
    q_max : int, optional
        Largest denominator of the nearby fluxes; by default ``max(2 q, 12)``,
        then ``max(4 q, 16)`` if the gap closes before any of those.

    Returns
    -------
    StredaResult

    Raises
    ------
    ValueError
        When E_F is not in a gap at ``flux`` or no nearby flux keeps it in a gap.
    """
    flux = Fraction(flux)
    if states is None:
        if bulk is None:
            raise ValueError("streda_slope needs bulk or states")

        def states(phi):
            return states_below(bulk(phi), fermi_energy, flux=phi)

    centre = states(flux)
    if centre.gap is None:
        raise ValueError(f"E_F = {fermi_energy:.6g} t is not in a gap at flux {flux}; the Streda route needs one")
    if q_max is None:  # nearby fluxes with small denominators first, then finer ones
        try:
            return _slope(states, flux, fermi_energy, centre, neighbours, max(2 * flux.denominator, 12))
        except ValueError:
            q_max = max(4 * flux.denominator, 16)
    return _slope(states, flux, fermi_energy, centre, neighbours, q_max)


def _slope(states, flux, fermi_energy, centre, neighbours, q_max) -> StredaResult:
    points, rejected = [centre], []
    # Nearest fluxes first. The gap must stay open from the centre to a
    # neighbour: on each side, the first flux with E_F in a band ends that
    # side (farther fluxes could have E_F in another gap of the butterfly).
    # The gap must also be the same gap. Between rational fluxes of the
    # butterfly the edges of one gap move by up to about its width (measured:
    # 1.2 times it for the gap above one band at flux 2/5); a level that
    # crosses E_F between two sampled fluxes (e.g. a Zeeman splitting near
    # hbar omega_c, leaving a gap of 0.002 t at flux 1/40) makes an edge jump
    # by tens to hundreds of widths, even when the band counts of the other
    # gap still fit a line (they give slope -38 there). A neighbour whose
    # gap edge moved by more than twice the centre's gap width is refused.
    lo, hi = centre.gap
    limit = 2.0 * (hi - lo)

    def same_gap(point):
        (lo2, hi2) = point.gap
        return all(abs(b - a) < limit for a, b in ((lo, lo2), (hi, hi2)) if np.isfinite(a) and np.isfinite(b))

    closed = {-1: False, 1: False}
    for other in _candidates(flux, neighbours, q_max):
        side = 1 if other > flux else -1
        if closed[side]:
            continue
        point = states(other)
        if point.gap is None or not same_gap(point):
            closed[side] = True
            rejected.append(point)
        else:
            points.append(point)
        if len(points) > neighbours or all(closed.values()):
            break
    if len(points) < 2:
        raise ValueError(f"the gap containing E_F = {fermi_energy:.6g} t at flux {flux} closes before the "
                         "nearest other flux; the Streda slope needs at least two fluxes in the same gap")
    # A flux can still put E_F in another gap when the fluxes between were not
    # sampled: keep the neighbours that share the most common slope to the
    # centre (ties: the one of the nearest neighbour).
    near = sorted(points[1:], key=lambda p: abs(p.flux - flux))
    pair = [round((p.density - centre.density) / float(p.flux - flux), 6) for p in near]
    common = max(pair, key=lambda v: (pair.count(v), -pair.index(v)))
    rejected += [p for p, v in zip(near, pair) if v != common]
    points = [centre] + [p for p, v in zip(near, pair) if v == common]
    points.sort(key=lambda p: p.flux)
    x = np.array([float(p.flux) for p in points])
    y = np.array([p.density for p in points])
    slope, intercept = np.polyfit(x, y, 1)
    return StredaResult(slope=float(slope), deviation=float(slope - round(slope)), intercept=float(intercept),
                        points=tuple(points), rejected=tuple(rejected))
