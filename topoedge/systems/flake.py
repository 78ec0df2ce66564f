"""A finite flake as a sparse matrix with its site positions, and on-site (Anderson) disorder.

The numerical object of the real-space topology solvers
(:mod:`topoedge.solvers.marker`): the Hamiltonian of a finalized kwant
system without translation symmetry (CSR, orbitals of a site adjacent),
the position of every site, the orbitals per site and the area per site
(length unit squared), so that a marker per site integrates to a Chern
number per unit area.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

__all__ = ["Flake", "central_sites"]


@dataclass(frozen=True, eq=False)
class Flake:
    """A finite system: ``hamiltonian`` (N x N CSR, t), ``positions`` (n_sites, 2), ``orbitals`` per site.

    Attributes
    ----------
    hamiltonian : scipy.sparse.csr_matrix
        Hermitian, ``N = n_sites * orbitals``, units of t.
    positions : ndarray, shape (n_sites, 2)
        Site positions in the lattice's length unit.
    orbitals : int
        Orbitals per site (2 with spin).
    site_area : float
        Area per site, length unit squared.
    disorder : float
        Width W (t) of the uniform on-site disorder in [-W/2, W/2] added.
    seed : int or None
        Seed of that disorder.
    """

    hamiltonian: sp.csr_matrix
    positions: np.ndarray
    orbitals: int
    site_area: float
    disorder: float = 0.0
    seed: int | None = None

    @classmethod
    def from_kwant(cls, fsyst, params: dict, *, site_area: float = 1.0) -> "Flake":
        """From a finalized kwant system without symmetry (all sites with the same number of orbitals)."""
        norbs = {site.family.norbs for site in fsyst.sites}
        if len(norbs) != 1 or None in norbs:
            raise ValueError(f"every site needs the same declared number of orbitals, got {sorted(map(str, norbs))}")
        ham = sp.csr_matrix(fsyst.hamiltonian_submatrix(params=params, sparse=True), dtype=complex)
        positions = np.array([site.pos for site in fsyst.sites], dtype=float)
        return cls(ham, positions, norbs.pop(), float(site_area))

    @property
    def size(self) -> int:
        """Number of orbitals N."""
        return self.hamiltonian.shape[0]

    @property
    def sites(self) -> int:
        return len(self.positions)

    def orbital_positions(self) -> tuple[np.ndarray, np.ndarray]:
        """x and y of every orbital (each site's position repeated over its orbitals)."""
        return (np.repeat(self.positions[:, 0], self.orbitals), np.repeat(self.positions[:, 1], self.orbitals))

    def with_disorder(self, strength: float, seed: int) -> "Flake":
        """The flake plus on-site energies uniform in ``[-W/2, W/2]`` (t), one per site (all its orbitals).

        Anderson disorder: P. W. Anderson, Phys. Rev. 109, 1492 (1958).
        """
        if not (strength >= 0 and np.isfinite(strength)):
            raise ValueError(f"disorder strength must be a finite W >= 0 in t, got {strength!r}")
        if strength == 0:
            return replace(self, disorder=0.0, seed=seed)
        rng = np.random.default_rng(seed)
        energies = np.repeat(strength * (rng.random(self.sites) - 0.5), self.orbitals)
        ham = (self.hamiltonian + sp.diags(energies)).tocsr()
        return replace(self, hamiltonian=ham, disorder=float(strength), seed=int(seed))

    def central(self, fraction: float = 0.5) -> np.ndarray:
        """Indices of the sites within the central ``fraction`` of the flake's extent in x and y."""
        return central_sites(self.positions, fraction)

    def orbitals_of(self, sites) -> np.ndarray:
        """Indices of the orbitals of ``sites`` (site by site, each site's orbitals adjacent)."""
        sites = np.asarray(sites, dtype=int)
        return (sites[:, None] * self.orbitals + np.arange(self.orbitals)[None, :]).ravel()


def central_sites(positions: np.ndarray, fraction: float) -> np.ndarray:
    """Indices of the ``positions`` within the central ``fraction`` of their extent in x and y."""
    lo, hi = positions.min(axis=0), positions.max(axis=0)
    middle, half = (lo + hi) / 2, (hi - lo) * fraction / 2
    return np.nonzero(np.all(np.abs(positions - middle) <= half + 1e-9, axis=1))[0]
