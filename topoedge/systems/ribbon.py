"""Numerical ribbon Hamiltonians extracted from finalized kwant systems.

A ribbon (any system periodic in one direction) is fully described by its
cell Hamiltonian ``h0`` and the hopping ``h1`` from one cell into the next one
along the period vector (and, for effective Hamiltonians such as the
Hartree-Fock one, the hoppings ``h_D`` into the cell ``D >= 2`` ahead, kept in
``far``). The Bloch Hamiltonian at crystal momentum ``k`` (units of 1/period,
Bloch waves ``exp(i k x)``) is::

    H(k) = h0 + sum_D (h_D exp(-i k D) + h_D^dagger exp(i k D))

which is the convention of :class:`kwant.physics.Bands`, so energies agree
point by point. The velocity operator (Hellmann-Feynman) is
``dH/dk = sum_D (-i D h_D exp(-i k D) + i D h_D^dagger exp(i k D))``.

Wide ribbons (more than ``SPARSE_FROM`` orbitals per cell) keep ``h0`` and
``h1`` as SciPy sparse matrices, so that memory grows with the number of
orbitals, not its square; the tridiagonal and band solvers read only their
diagonals. :meth:`RibbonHamiltonian.bloch` and ``velocity`` return dense
matrices (for the dense solver and for small ribbons).

This module is the numerical-object stage: it knows nothing of scenarios or
files and is used by the solvers in :mod:`topoedge.solvers.spectrum`.
"""

from __future__ import annotations

from dataclasses import dataclass

import kwant
import numpy as np
import scipy.sparse as sp

__all__ = ["RibbonHamiltonian", "spin_orbitals", "diagonal", "abs_max", "SPARSE_FROM"]

#: Cells with more orbitals than this are stored sparse by :meth:`RibbonHamiltonian.from_kwant`.
SPARSE_FROM = 1200


def diagonal(m, offset: int = 0) -> np.ndarray:
    """The ``offset``-th diagonal of a dense or sparse matrix (``m[i, i + offset]``)."""
    if sp.issparse(m):
        return np.asarray(m.diagonal(offset))
    return np.diagonal(m, offset).copy()


def abs_max(m) -> float:
    """Largest modulus of the entries of a dense or sparse matrix (0 when empty)."""
    if sp.issparse(m):
        return float(abs(m).max()) if m.nnz else 0.0
    return float(np.abs(m).max(initial=0.0))


def _dense(m) -> np.ndarray:
    return m.toarray() if sp.issparse(m) else m


def spin_orbitals(norbs, spin: bool | None) -> np.ndarray | None:
    """``S_z`` of every orbital when the sites carry (up, down) spin orbitals.

    Parameters
    ----------
    norbs : sequence of int
        Orbitals of every site, in orbital order.
    spin : bool or None
        True: every site must have two orbitals (up, down); None: True exactly
        when every site has two; False: no spin.

    Returns
    -------
    (N,) ndarray of +-1/2, or None without spin.
    """
    norbs = np.asarray(norbs)
    if spin is None:
        spin = bool(norbs.size and np.all(norbs == 2))
    if not spin:
        return None
    if not np.all(norbs == 2):
        raise ValueError("spin=True needs two orbitals (up, down) on every site")
    return np.tile([0.5, -0.5], len(norbs))


@dataclass(frozen=True, eq=False)
class RibbonHamiltonian:
    """Bloch Hamiltonian of a ribbon in orbital space.

    Attributes
    ----------
    h0 : (N, N) complex ndarray or scipy sparse matrix
        Cell Hamiltonian (energy units of the model, ``t`` for the builders).
    h1 : (N, N) complex ndarray or scipy sparse matrix
        Hopping from a cell into the next one along the period.
    position : (N,) float ndarray
        Coordinate of each orbital across the ribbon (lattice constants).
    sz : (N,) float ndarray or None
        ``S_z`` of each orbital (+1/2 or -1/2) when the orbitals are spin
        eigenstates, else None.
    far : tuple of (N, N) complex ndarray
        Hoppings ``h_2, h_3, ...`` into the cells 2, 3, ... ahead (empty for
        a nearest-cell model such as every kwant ribbon).
    """

    h0: np.ndarray
    h1: np.ndarray
    position: np.ndarray
    sz: np.ndarray | None = None
    far: tuple = ()

    def __post_init__(self):
        n = self.h0.shape[0]
        if self.h0.shape != (n, n) or self.h1.shape != (n, n):
            raise ValueError(
                f"h0 and h1 must be square and of equal size, got {self.h0.shape} and {self.h1.shape}"
            )
        scale = max(1.0, abs_max(self.h0))
        if abs_max(self.h0 - self.h0.conj().T) > 1e-12 * scale:
            raise ValueError("the cell Hamiltonian h0 is not Hermitian")
        if self.position.shape != (n,):
            raise ValueError(f"position must have shape ({n},), got {self.position.shape}")
        if self.sz is not None and self.sz.shape != (n,):
            raise ValueError(f"sz must have shape ({n},), got {self.sz.shape}")
        if any(m.shape != (n, n) for m in self.far):
            raise ValueError(f"every far hopping must have shape ({n}, {n})")

    @property
    def hoppings(self) -> tuple:
        """``(h1, h2, ...)``: the hopping into the cell ``D`` ahead is ``hoppings[D - 1]``."""
        return (self.h1, *self.far)

    @property
    def size(self) -> int:
        """Number of orbitals in a cell."""
        return self.h0.shape[0]

    @property
    def sparse(self) -> bool:
        """True when ``h0`` and ``h1`` are stored as sparse matrices."""
        return sp.issparse(self.h0)

    @classmethod
    def from_kwant(cls, syst, *, params: dict | None = None, spin: bool | None = None,
                   sparse: bool | None = None):
        """Extract the ribbon Hamiltonian of a kwant system with 1D symmetry.

        Parameters
        ----------
        syst : kwant.Builder or kwant.system.InfiniteSystem
            A builder with one translation symmetry (finalized here) or an
            already finalized infinite system.
        params : dict, optional
            Passed to kwant's value functions.
        spin : bool, optional
            Whether every site has two orbitals ordered (up, down). The default
            is True exactly when every site has two orbitals.
        sparse : bool, optional
            Store ``h0`` and ``h1`` as sparse matrices; by default when the cell
            has more than ``SPARSE_FROM`` orbitals.

        Returns
        -------
        RibbonHamiltonian

        Raises
        ------
        TypeError
            If ``syst`` is not periodic in exactly one direction.
        ValueError
            If the number of orbitals per site is not declared (``norbs``).
        """
        if isinstance(syst, kwant.Builder):
            if len(syst.symmetry.periods) != 1:
                raise TypeError(
                    "a ribbon needs exactly one translation symmetry; "
                    f"this builder has {len(syst.symmetry.periods)}"
                )
            syst = syst.finalized()
        if not isinstance(syst, kwant.system.InfiniteSystem):
            raise TypeError(
                f"expected a kwant Builder or InfiniteSystem with 1D symmetry, got {type(syst).__name__}"
            )
        n_orbs = sum(site.family.norbs or 0 for site in syst.sites[: syst.cell_size])
        if sparse is None:
            sparse = n_orbs > SPARSE_FROM
        if sparse:
            h0 = sp.csr_matrix(syst.cell_hamiltonian(params=params, sparse=True), dtype=complex)
            hop = sp.coo_matrix(syst.inter_cell_hopping(params=params, sparse=True))
            h1 = sp.csr_matrix((hop.data.astype(complex), (hop.row, hop.col)), shape=h0.shape)
        else:
            h0 = np.asarray(syst.cell_hamiltonian(params=params), dtype=complex)
            hop = np.asarray(syst.inter_cell_hopping(params=params), dtype=complex)
            h1 = np.zeros_like(h0)
            h1[:, : hop.shape[1]] = hop

        period = np.asarray(syst.symmetry.periods, dtype=float)[0]
        if period.size == 1:
            raise TypeError("a ribbon needs a 2D lattice; this system is one-dimensional")
        along = period / np.linalg.norm(period)
        across = np.array([-along[1], along[0]])
        norbs = []
        coords = []
        for site in syst.sites[: syst.cell_size]:
            n = site.family.norbs
            if n is None:
                raise ValueError("declare the number of orbitals per site (norbs) on the lattice")
            norbs.append(n)
            coords.append(float(np.dot(np.asarray(site.pos, dtype=float)[:2], across)))
        norbs = np.asarray(norbs)
        position = np.repeat(coords, norbs)
        sz = spin_orbitals(norbs, spin)
        return cls(h0=h0, h1=h1, position=position, sz=sz)

    def bloch(self, k) -> np.ndarray:
        """``H(k)`` for an array of momenta, shape ``k.shape + (N, N)`` (dense)."""
        k = np.asarray(k, dtype=float)[..., None, None]
        hk = sum(_dense(h) * np.exp(-1j * k * d) for d, h in enumerate(self.hoppings, start=1))
        return _dense(self.h0) + hk + np.swapaxes(hk, -1, -2).conj()

    def velocity(self, k) -> np.ndarray:
        """Velocity operator ``dH/dk`` for an array of momenta (dense)."""
        k = np.asarray(k, dtype=float)[..., None, None]
        hk = sum(-1j * d * _dense(h) * np.exp(-1j * k * d) for d, h in enumerate(self.hoppings, start=1))
        return hk + np.swapaxes(hk, -1, -2).conj()

    def spin_blocks(self, tol: float = 1e-14) -> list[np.ndarray] | None:
        """Orbital indices of the spin-up and spin-down blocks, if S_z is conserved.

        Returns None for a spinless system or when ``h0`` or ``h1`` couple the
        two spins by more than ``tol`` times the largest matrix element.
        """
        if self.sz is None:
            return None
        up = self.sz > 0
        scale = tol * max(max(abs_max(m) for m in (self.h0, *self.hoppings)), 1e-300)
        for m in (self.h0, *self.hoppings):
            if sp.issparse(m):
                c = m.tocoo()
                mixed = up[c.row] != up[c.col]
                if mixed.any() and np.abs(c.data[mixed]).max() > scale:
                    return None
                continue
            if np.abs(m[np.ix_(up, ~up)]).max(initial=0.0) > scale:
                return None
            if np.abs(m[np.ix_(~up, up)]).max(initial=0.0) > scale:
                return None
        return [np.flatnonzero(up), np.flatnonzero(~up)]

    def block(self, indices: np.ndarray) -> "RibbonHamiltonian":
        """The Hamiltonian restricted to ``indices``, reordered by position."""
        order = np.asarray(indices)[np.argsort(self.position[indices], kind="stable")]
        ix = np.ix_(order, order)

        def take(m):
            return sp.csr_matrix(m.tocsr()[order][:, order]) if sp.issparse(m) else m[ix]

        return RibbonHamiltonian(
            h0=take(self.h0),
            h1=take(self.h1),
            position=self.position[order],
            sz=None if self.sz is None else self.sz[order],
            far=tuple(take(m) for m in self.far),
        )

    def shift_from(self, other: "RibbonHamiltonian") -> float | None:
        """``c`` if this Hamiltonian is ``other`` plus ``c`` times the identity, else None.

        Exact to rounding (1e-14 of the largest element); both must have the
        same orbital positions, and this one a uniform ``S_z`` (a spin block
        that is another shifted by a uniform Zeeman term).
        """
        if other.size != self.size or not np.array_equal(other.position, self.position):
            return None
        if self.sz is not None and np.ptp(self.sz) != 0:
            return None
        if len(other.far) != len(self.far):
            return None
        tol = 1e-14 * max(max(abs_max(m) for m in (other.h0, *other.hoppings)), 1.0)
        diff = self.h0 - other.h0
        c = float(np.real(diff[0, 0]))
        if any(abs_max(mb - ma) > tol for ma, mb in zip(other.hoppings, self.hoppings)):
            return None
        identity = sp.identity(self.size, format="csr") if sp.issparse(diff) else np.eye(self.size)
        if abs_max(diff - c * identity) > tol:
            return None
        return c

    def bandwidth(self, tol: float = 0.0) -> int:
        """Half-bandwidth of ``H(k)`` in the current orbital order."""
        if self.sparse:
            b = 0
            for m in (self.h0, *self.hoppings):
                c = m.tocoo()
                keep = np.abs(c.data) > tol
                b = max(b, int(np.abs(c.row[keep] - c.col[keep]).max(initial=0)))
            return b
        nz = np.abs(self.h0) > tol
        for m in self.hoppings:
            nz |= (np.abs(m) > tol) | (np.abs(m.T) > tol)
        i, j = np.nonzero(nz)
        return int(np.abs(i - j).max(initial=0))
