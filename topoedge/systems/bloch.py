"""Bloch Hamiltonians of systems periodic in two directions (numerical objects).

A system with two translation symmetries is described by the Fourier
components ``H_R`` of its cell, ``R = (n1, n2)`` counting periods::

    H(k)_{ab} = sum_R <a, 0| H |b, R> exp(i k . R),   k = (k1, k2)

where ``k1`` and ``k2`` are the Bloch phases per period (the reduced momenta,
each in ``[0, 2 pi)``). This is the convention of ``kwant.wraparound``: the
components are extracted once from a wrapped kwant system by an exact
discrete Fourier transform, after which ``H(k)`` on a whole grid is one
vectorised sum.

For the square-lattice builders the periods are ``(1, 0)`` and ``(0, q)``, so
``k1 = k_x a`` and ``k2 = k_y q a``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..util.threads import one_blas_thread
from .ribbon import spin_orbitals

__all__ = ["BlochHamiltonian"]


@dataclass(frozen=True, eq=False)
class BlochHamiltonian:
    """Fourier components of a 2D-periodic tight-binding Hamiltonian.

    Attributes
    ----------
    shifts : (nR, 2) int ndarray
        Cell offsets ``R`` in units of the two periods.
    blocks : (nR, N, N) complex ndarray
        ``<a, 0| H |b, R>`` for every offset (energy units of the model).
    sz : (N,) float ndarray or None
        ``S_z`` of each orbital when the orbitals are spin eigenstates.
    """

    shifts: np.ndarray
    blocks: np.ndarray
    sz: np.ndarray | None = None

    @property
    def size(self) -> int:
        """Number of orbitals per cell."""
        return self.blocks.shape[-1]

    @classmethod
    def from_kwant(cls, builder, *, params: dict | None = None, spin: bool | None = None):
        """Extract the Fourier components of a kwant builder with 2D symmetry.

        Parameters
        ----------
        builder : kwant.Builder
            With exactly two translation symmetries.
        params : dict, optional
            kwant ``params`` for the value functions (without momenta).
        spin : bool, optional
            Whether every site has two orbitals ordered (up, down); by default
            True exactly when every site has two orbitals.

        Returns
        -------
        BlochHamiltonian

        Raises
        ------
        TypeError
            If the builder is not periodic in exactly two directions.
        ValueError
            If ``norbs`` is not declared for every site family.
        """
        import kwant

        periods = builder.symmetry.periods
        if len(periods) != 2:
            raise TypeError(
                f"a Bloch Hamiltonian needs exactly two translation symmetries; this builder has {len(periods)}"
            )
        reach = 0
        for a, b in builder.hoppings():
            da, db = builder.symmetry.which(a), builder.symmetry.which(b)
            reach = max(reach, int(np.abs(np.asarray(db) - np.asarray(da)).max()))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wrapped = kwant.wraparound.wraparound(builder).finalized()
        norbs = [site.family.norbs for site in wrapped.sites]
        if any(n is None for n in norbs):
            raise ValueError("declare the number of orbitals per site (norbs) on the lattice")
        m = 2 * reach + 1
        phases = 2 * np.pi * np.arange(m) / m
        params = dict(params or {})
        samples = np.array([
            [wrapped.hamiltonian_submatrix(params=dict(params, k_x=k1, k_y=k2), sparse=False)
             for k2 in phases]
            for k1 in phases
        ])
        # Exact inverse transform: H(k) is a trigonometric polynomial of
        # degree <= reach in each direction, sampled at m = 2 reach + 1 points.
        comp = np.fft.fft2(samples, axes=(0, 1)) / (m * m)
        shifts, blocks = [], []
        for n1 in range(-reach, reach + 1):
            for n2 in range(-reach, reach + 1):
                block = comp[n1 % m, n2 % m]
                if np.abs(block).max() > 1e-14 * max(1.0, np.abs(comp).max()):
                    shifts.append((n1, n2))
                    blocks.append(block)
        sz = spin_orbitals(norbs, spin)
        return cls(shifts=np.array(shifts, dtype=int).reshape(-1, 2), blocks=np.array(blocks), sz=sz)

    def at(self, k1, k2) -> np.ndarray:
        """``H(k)`` for broadcastable arrays of reduced momenta; shape ``(..., N, N)``."""
        k1, k2 = np.broadcast_arrays(np.asarray(k1, dtype=float), np.asarray(k2, dtype=float))
        phase = np.exp(1j * (k1[..., None] * self.shifts[:, 0] + k2[..., None] * self.shifts[:, 1]))
        # The contraction is short (a few cell offsets): threaded BLAS only
        # adds synchronisation, so it runs on one thread.
        with one_blas_thread():
            return np.tensordot(phase, self.blocks, axes=(-1, 0))

    def grid(self, n1: int, n2: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``H`` on the periodic grid ``k_j = 2 pi j / n``: returns ``(k1, k2, H)``.

        ``H`` has shape ``(n1, n2, N, N)``; ``k1`` and ``k2`` are 1D.
        """
        k1 = 2 * np.pi * np.arange(n1) / n1
        k2 = 2 * np.pi * np.arange(n2) / n2
        return k1, k2, self.at(k1[:, None], k2[None, :])

    def shift_from(self, other: "BlochHamiltonian") -> float | None:
        """``c`` if this Hamiltonian is ``other`` plus ``c`` times the identity (to rounding), else None.

        A spin block that is another shifted by a uniform Zeeman term: the
        solvers reuse the other's eigenvectors.
        """
        if other.size != self.size or not np.array_equal(other.shifts, self.shifts):
            return None
        diff = self.blocks - other.blocks
        onsite = np.flatnonzero(np.all(other.shifts == 0, axis=1))
        if onsite.size != 1:
            return None
        c = float(np.real(diff[onsite[0], 0, 0]))
        expected = np.zeros_like(diff)
        expected[onsite[0]] = c * np.eye(other.size)
        tol = 1e-14 * max(np.abs(other.blocks).max(initial=0.0), 1.0)
        return c if np.abs(diff - expected).max(initial=0.0) <= tol else None

    def spin_blocks(self, tol: float = 1e-14) -> list[np.ndarray] | None:
        """Orbital indices of the spin-up and spin-down blocks if S_z is conserved."""
        if self.sz is None:
            return None
        up = self.sz > 0
        scale = tol * max(np.abs(self.blocks).max(initial=0.0), 1e-300)
        mixing = max(np.abs(self.blocks[:, up][:, :, ~up]).max(initial=0.0),
                     np.abs(self.blocks[:, ~up][:, :, up]).max(initial=0.0))
        if mixing > scale:
            return None
        return [np.flatnonzero(up), np.flatnonzero(~up)]

    def block(self, indices) -> "BlochHamiltonian":
        """The Hamiltonian restricted to the orbitals ``indices``."""
        idx = np.asarray(indices)
        return BlochHamiltonian(
            shifts=self.shifts,
            blocks=self.blocks[:, idx][:, :, idx],
            sz=None if self.sz is None else self.sz[idx],
        )
