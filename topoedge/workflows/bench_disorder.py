"""Benchmark of the local Chern marker: kernel polynomials against the dense projector, and its growth with size."""

from __future__ import annotations

import time

import numpy as np

from ..scenario import parse_scenario, resolve
from ..solvers.chern import chern_numbers
from ..solvers.kpm import moments_for_gap, spectral_bounds
from ..solvers.marker import local_chern_marker, local_chern_marker_kpm
from .build import build_bulk
from .disorder import build_flake

__all__ = ["bench_marker"]


def _scenario(flux: str, size: int):
    return resolve(parse_scenario({"lattice": {"flux": flux}, "spin": {"enabled": False}, "fermi": {"gap": 1},
                                   "disorder": {"flake": size}})).scenario


def bench_marker(*, flux: str = "1/20", sizes=(50, 100, 200), dense_size: int = 60, half: float = 5.0) -> dict:
    """Marker on the central ``(2 half)^2`` sites: KPM and dense at ``dense_size``; KPM at ``sizes``.

    Returns the seconds of each, the ratio dense / KPM, the largest
    difference of the two on the central sites, and seconds per orbital at
    every size (constant for a cost linear in the flake).
    """
    base = _scenario(flux, dense_size)
    gap = chern_numbers(build_bulk(base), grid=(16, 16)).gap_above(1)
    ef, width = gap.middle, gap.energy_max - gap.energy_min

    def central(flake):
        middle = flake.positions.mean(axis=0)
        return np.nonzero(np.all(np.abs(flake.positions - middle) <= half, axis=1))[0]

    flake = build_flake(base)
    lo, hi = spectral_bounds(flake.hamiltonian)
    moments = moments_for_gap(width, hi - lo, digits=6.0)
    sites = central(flake)
    start = time.perf_counter()
    dense = local_chern_marker(flake, ef)[sites]
    dense_seconds = time.perf_counter() - start
    start = time.perf_counter()
    kpm = local_chern_marker_kpm(flake, ef, sites, moments=moments)
    kpm_seconds = time.perf_counter() - start
    rows = []
    for size in sizes:
        f = build_flake(_scenario(flux, size))
        s = central(f)
        start = time.perf_counter()
        values = local_chern_marker_kpm(f, ef, s, moments=moments)
        seconds = time.perf_counter() - start
        rows.append({"size": int(size), "orbitals": int(f.size), "central_sites": int(s.size), "seconds": seconds,
                     "seconds_per_orbital": seconds / f.size, "central_mean": float(values.mean())})
    return {"flux": flux, "fermi_energy": float(ef), "gap": float(width), "moments": int(moments),
            "dense": {"size": dense_size, "orbitals": int(flake.size), "central_sites": int(sites.size),
                      "dense_seconds": dense_seconds, "kpm_seconds": kpm_seconds,
                      "ratio_dense_over_kpm": dense_seconds / kpm_seconds,
                      "largest_difference": float(np.abs(dense - kpm).max())},
            "sizes": rows}
