"""Finite flakes of every lattice: a square region cut from a plane with translation symmetry.

A flake is the region ``0 <= x, y < size`` (length unit of the lattice: a,
or a_cc on hexagonal lattices) filled from a template builder whose value
functions depend on the sites' positions only (the Landau gauges of the
square and honeycomb lattices, the zero-field models), so that the cut
flake carries the same Peierls phases as the plane. Its edges are the
open boundaries of a real sample; disorder is added to the finalized
flake's matrix (:mod:`topoedge.systems.flake`).
"""

from __future__ import annotations

import kwant

from .honeycomb import honeycomb_hopping_landau, honeycomb_lattice, honeycomb_onsite

__all__ = ["flake_builder", "honeycomb_plane"]


def honeycomb_plane(*, spin: bool = True, rashba: bool = False) -> kwant.Builder:
    """The honeycomb plane in the position gauge of its ribbons (a template for flakes).

    Its hopping phases ``-2 pi phi / A_hex (y_i + y_j)/2 (x_i - x_j)`` depend
    on the sites' positions only, so any region filled from it has flux
    ``phi`` through every hexagon (``A_hex = 3 sqrt(3)/2 a_cc^2``).
    """
    lat = honeycomb_lattice("zigzag", spin=spin)
    syst = kwant.Builder(kwant.TranslationalSymmetry(*lat.prim_vecs))
    syst[[sub(0, 0) for sub in lat.sublattices]] = honeycomb_onsite(spin, lat.sublattices[0])
    syst[lat.neighbors()] = honeycomb_hopping_landau(spin, rashba)
    return syst


def flake_builder(template: kwant.Builder, size: float) -> kwant.Builder:
    """The sites of ``template`` with ``0 <= x, y < size`` and their hoppings (no symmetry).

    Parameters
    ----------
    template : kwant.Builder
        A plane with two translation symmetries whose values depend on the
        site positions only.
    size : float
        Side of the square region, in the lattice's length unit.
    """
    if not size > 1:
        raise ValueError(f"size must exceed one lattice constant, got {size!r}")
    eps = 1e-9

    def inside(site):
        x, y = site.pos
        return -eps <= x < size - eps and -eps <= y < size - eps

    flake = kwant.Builder()
    flake.fill(template, inside, (0.0, 0.0))     # every template has a site at the origin
    if not len(flake.H):
        raise ValueError(f"no site of the template lies in the flake of size {size!r}")
    return flake
