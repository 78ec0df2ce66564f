"""The Hall conductivity sigma_xy(E_F) of a finite (disordered) flake: Kubo-Bastin by kernel polynomials.

The Kubo-Bastin formula at temperature T,

    sigma_xy(mu) = (1/V) int dE f(mu - E) Tr[ j_x delta(E - H) j_y dG+/dE - j_x dG-/dE j_y delta(E - H) ],

is evaluated with a two-dimensional Chebyshev expansion of ``delta`` and
``G`` [1]_ (the implementation of ``kwant.kpm.conductivity``), the trace by
random phase vectors on the central sites of the flake (``V`` their area),
so that the boundary, whose edge currents compensate the bulk response,
stays out of the trace. The energy resolution is about ``pi a / M`` for
``M`` moments (``a`` half the bandwidth); the statistical error falls as
``1/sqrt(R)`` with ``R`` random vectors times the sites they cover.

Sign: returned in units of e^2/h with this project's sign, sigma_xy = C in a
clean gap with Chern number C (:mod:`topoedge.solvers.chern`); with the
velocities ``i[H, x]``, ``i[H, y]`` of kwant's correlator that is minus its
``alpha='x', beta='y'`` element.

References
----------
.. [1] J. H. Garcia, L. Covaci and T. G. Rappoport, "Real-space calculation
   of the conductivity tensor for disordered topological matter", Phys.
   Rev. Lett. 114, 116602 (2015).
"""

from __future__ import annotations

import numpy as np

from ..systems.flake import Flake

__all__ = ["hall_conductivity_kpm"]


def hall_conductivity_kpm(flake: Flake, energies, *, sites, moments: int, vectors: int, seed: int = 0,
                          temperature: float = 0.0) -> np.ndarray:
    """sigma_xy (e^2/h) at every Fermi energy of ``energies`` (t), traced over ``sites``.

    Parameters
    ----------
    flake : Flake
    energies : array_like
        Fermi energies, t.
    sites : array_like of int
        Sites of the trace (e.g. :meth:`Flake.central`); the area is their
        number times the area per site.
    moments : int
        Chebyshev moments per dimension (>= 8).
    vectors : int
        Random phase vectors (>= 1).
    seed : int
        Seed of the random vectors.
    temperature : float
        k_B T in t (>= 0).
    """
    import kwant

    if int(moments) < 8 or int(vectors) < 1 or not temperature >= 0:
        raise ValueError(f"expected moments >= 8, vectors >= 1 and temperature >= 0, got {moments!r}, "
                         f"{vectors!r}, {temperature!r}")
    sites = np.asarray(sites, dtype=int)
    orbitals = flake.orbitals_of(sites)
    x, y = flake.orbital_positions()
    factory = kwant.kpm.RandomVectors(flake.hamiltonian, where=orbitals, rng=int(seed))
    correlator = kwant.kpm.conductivity(flake.hamiltonian, alpha="x", beta="y",
                                        positions=np.stack([x, y], axis=1), num_moments=int(moments),
                                        num_vectors=int(vectors), vector_factory=factory)
    area = sites.size * flake.site_area
    values = [correlator(mu=float(e), temperature=float(temperature)) for e in np.atleast_1d(energies)]
    return -np.real(np.asarray(values)) / area
