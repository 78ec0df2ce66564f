"""The local Chern marker of a finite flake (dense projector).

For a finite system with ground-state projector ``P`` (all states below
E_F) and ``Q = 1 - P``, the local Chern marker of site ``i`` is

    c(i) = (4 pi / A_site) Im sum_{a in i} <a| P x Q y P |a>

with ``A_site`` the area per site ([1]_ writes the prefactor -4 pi; the
sign here is the one that makes the marker equal the Chern numbers of this
project, whose Peierls phases wind counter-clockwise for flux > 0). Deep inside an insulator its
average is the Chern number of the occupied bands; near the boundary it
compensates, since its trace over the whole flake vanishes exactly (the
trace of ``P x Q y P - P y Q x P`` is ``Tr(P x P y) - Tr(P y P x) = 0`` in
finite dimension). Sign: with the positions and the Peierls phases of this
project the marker equals the Chern numbers of :mod:`topoedge.solvers.chern`
(``C = +1`` for the gap above the lowest Landau level at flux ``+1/q``).

Here ``Im <a|P x Q y P|a> = -Im <a|(P x P) y P|a>`` (the term ``P x y P``
has a real diagonal), so one product ``B = P x P`` of two N x N matrices and
an O(N^2) contraction give every site: the cost of the dense projector.

References
----------
.. [1] R. Bianco and R. Resta, "Mapping topological order in coordinate
   space", Phys. Rev. B 84, 241106(R) (2011).
"""

from __future__ import annotations

import numpy as np

from ..systems.flake import Flake

__all__ = ["flake_eigen", "ground_projector", "local_chern_marker", "local_chern_marker_kpm", "marker_average"]


def flake_eigen(flake: Flake) -> tuple[np.ndarray, np.ndarray]:
    """Every eigenvalue (t) and eigenvector of the flake (dense; O(N^3) time, O(N^2) memory)."""
    return np.linalg.eigh(flake.hamiltonian.toarray())


def ground_projector(flake: Flake, fermi_energy: float, *, eigen=None) -> np.ndarray:
    """Dense projector (N x N) on the eigenstates of the flake below ``fermi_energy`` (t).

    ``eigen``: :func:`flake_eigen` of the flake, to reuse it for several E_F.
    """
    energies, vectors = flake_eigen(flake) if eigen is None else eigen
    occupied = vectors[:, energies < fermi_energy]
    return occupied @ occupied.conj().T


def local_chern_marker(flake: Flake, fermi_energy: float, *, projector: np.ndarray | None = None,
                       eigen=None) -> np.ndarray:
    """The local Chern marker of every site (dimensionless), by the dense projector.

    Parameters
    ----------
    flake : Flake
    fermi_energy : float
        E_F in t; states below it are occupied.
    projector : ndarray, optional
        ``ground_projector(flake, fermi_energy)`` when already computed.
    eigen : tuple, optional
        :func:`flake_eigen` of the flake (several E_F from one diagonalisation).

    Returns
    -------
    ndarray, shape (n_sites,)
    """
    p = ground_projector(flake, fermi_energy, eigen=eigen) if projector is None else projector
    x, y = flake.orbital_positions()
    b = p @ (x[:, None] * p)                       # P x P
    per_orbital = (b * (y[None, :] * p.T)).sum(axis=1)   # <a| (P x P) y P |a> = sum_b B_ab y_b P_ba
    per_site = per_orbital.reshape(flake.sites, flake.orbitals).sum(axis=1)
    return -4 * np.pi / flake.site_area * per_site.imag


def local_chern_marker_kpm(flake: Flake, fermi_energy: float, sites, *, moments: int, block: int = 64,
                           progress=None) -> np.ndarray:
    """The local Chern marker of the given sites with the Fermi projector by kernel polynomials.

    ``<a|P x Q y P|a> = <x u| y u> - <x u| P y u>`` with ``u = P|a>``: two
    applications of the projector (:func:`topoedge.solvers.kpm.apply_fermi_projector`)
    per orbital of the sites asked for, in blocks of ``block`` orbitals;
    the cost grows linearly with the flake and with the number of sites
    asked for, and nothing N x N is formed.

    Parameters
    ----------
    flake : Flake
    fermi_energy : float
        E_F in t (inside a gap).
    sites : array_like of int
        Indices of the sites (e.g. :meth:`Flake.central`).
    moments : int
        Chebyshev moments (see :func:`topoedge.solvers.kpm.moments_for_gap`).
    block : int
        Orbitals per block (memory about ``6 N block`` complex numbers).
    progress : Stage, optional
        Advanced once per block.

    Returns
    -------
    ndarray, shape (len(sites),)
    """
    from .kpm import apply_fermi_projector, spectral_bounds

    sites = np.asarray(sites, dtype=int)
    x, y = flake.orbital_positions()
    orbitals = flake.orbitals_of(sites)
    bounds = spectral_bounds(flake.hamiltonian)
    values = np.empty(orbitals.size)
    for start in range(0, orbitals.size, block):
        chunk = orbitals[start:start + block]
        unit = np.zeros((flake.size, chunk.size), dtype=complex)
        unit[chunk, np.arange(chunk.size)] = 1.0
        u = apply_fermi_projector(flake.hamiltonian, unit, fermi_energy, moments, bounds=bounds)
        yu = y[:, None] * u
        w = apply_fermi_projector(flake.hamiltonian, yu, fermi_energy, moments, bounds=bounds)
        values[start:start + chunk.size] = np.einsum("na,na->a", np.conj(x[:, None] * u), yu - w).imag
        if progress is not None:
            progress.update(1)
    per_site = values.reshape(sites.size, flake.orbitals).sum(axis=1)
    return 4 * np.pi / flake.site_area * per_site


def marker_average(marker: np.ndarray, flake: Flake, fraction: float = 0.5) -> tuple[float, float]:
    """Mean and standard deviation of the marker over the central ``fraction`` of the flake."""
    values = marker[flake.central(fraction)]
    return float(values.mean()), float(values.std())
