"""The square-lattice magnetic cell as a cyclic tridiagonal matrix (numerical system).

The bulk of :func:`topoedge.models.square.bulk_builder` at flux ``phi = p/q`` has
the ``1 x q`` magnetic cell (periods ``(1, 0)`` and ``(0, q)``). With the
Bloch convention of :mod:`topoedge.systems.bloch` (``H(k) = sum_R H_R exp(i k.R)``,
``k1 = k_x a``, ``k2 = k_y q a``) and S_z conserved, each spin sector of
``H(k1, k2)`` is the ``q x q`` Harper matrix::

    H_yy       = -2 t cos(k1 + 2 pi phi y) + onsite + s      (y = 0 .. q-1)
    H_y,y+1    = -t
    H_q-1,0    = -t exp(i k2)        (and its conjugate H_0,q-1)

with ``s = -Delta/2`` for spin up and ``+Delta/2`` for spin down: a
tridiagonal matrix closed into a ring by the corner element. Nothing of size
``q x q`` is ever stored: the cell keeps only the parameters and builds the
diagonals, the band storage of LAPACK (after the reordering
``0, q-1, 1, q-2, ...`` the ring becomes a band of half-width 2) and the
matrix-vector product on demand, so that ``q`` of several thousand costs
``O(q)`` memory.

Two structural facts are used by :mod:`topoedge.solvers.landau`:

- *Magnetic translation.* With ``(S psi)_y = psi_{y-1}`` for ``y >= 1`` and
  ``(S psi)_0 = exp(-i k2) psi_{q-1}``, ``S H(k1, k2) S^-1 = H(k1 - 2 pi phi, k2)``.
  The eigenvectors at ``k1 - 2 pi phi s`` are those at ``k1`` shifted by ``s``
  rows (:func:`magnetic_shift`), so one diagonalisation per ``k2`` gives a
  whole row of ``q`` momenta ``k1 = 2 pi j / q``.
- *Band edges (Chambers' relation).* ``det(E - H(k1, k2))`` depends on the
  momenta only through ``cos(q k1) + cos(k2)``, so every band has its
  extremes at ``(k1, k2) = (0, 0)`` and ``(pi/q, pi)``, where the matrix is
  real.

References
----------
.. [1] P. G. Harper, "Single band motion of conduction electrons in a uniform
   magnetic field", Proc. Phys. Soc. A 68, 874 (1955).
.. [2] D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976).
.. [3] W. G. Chambers, "Linear-network model for magnetic breakdown in two
   dimensions", Phys. Rev. 140, A135 (1965).
.. [4] J. Zak, "Magnetic translation group", Phys. Rev. 134, A1602 (1964).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np

__all__ = ["HarperCell", "magnetic_shift"]


def _ring_order(q: int) -> np.ndarray:
    """Row order ``0, q-1, 1, q-2, ...``: the ring as a band of half-width 2."""
    order = np.empty(q, dtype=int)
    order[0::2] = np.arange((q + 1) // 2)
    order[1::2] = q - 1 - np.arange(q // 2)
    return order


@dataclass(frozen=True, eq=False)
class HarperCell:
    """The ``1 x q`` magnetic cell of the square lattice in a field, one spin sector at a time.

    Attributes
    ----------
    flux : Fraction
        Flux ``p/q`` per plaquette in flux quanta (the builders' ``phi``).
    t : float
        Hopping, the energy unit.
    onsite : float
        Uniform on-site energy (units of t).
    zeeman : float
        Zeeman splitting ``Delta`` (units of t): spin up at ``-Delta/2``.
    spin : bool
        Two spin sectors (up, down) when True, one spinless sector otherwise.
    """

    flux: Fraction
    t: float = 1.0
    onsite: float = 0.0
    zeeman: float = 0.0
    spin: bool = True

    def __post_init__(self):
        flux = Fraction(self.flux)
        object.__setattr__(self, "flux", flux)
        if flux == 0 or flux.denominator < 3:
            raise ValueError(f"the ring form needs a flux p/q with q >= 3, got {flux}")

    @property
    def q(self) -> int:
        """Rows of the magnetic cell (bands per spin sector)."""
        return self.flux.denominator

    @property
    def p(self) -> int:
        return self.flux.numerator

    def sectors(self) -> list[tuple[str | None, float]]:
        """``(spin, shift)`` of every sector: the energy added to the spinless cell."""
        if not self.spin:
            return [(None, self.onsite)]
        return [("up", self.onsite - 0.5 * self.zeeman), ("down", self.onsite + 0.5 * self.zeeman)]

    def diagonal(self, k1: float, shift: float = 0.0) -> np.ndarray:
        """``H_yy(k1)`` of the sector with energy ``shift``, shape ``(q,)``."""
        y = np.arange(self.q)
        return -2.0 * self.t * np.cos(k1 + 2.0 * np.pi * float(self.flux) * y) + shift

    def matvec(self, k1: float, k2: float, v: np.ndarray, shift: float = 0.0) -> np.ndarray:
        """``H(k1, k2) v`` for ``v`` of shape ``(q,)`` or ``(q, m)``, in ``O(q m)``."""
        v = np.asarray(v)
        d = self.diagonal(k1, shift)
        out = (d[:, None] * v) if v.ndim == 2 else d * v
        t = self.t
        out[:-1] -= t * v[1:]
        out[1:] -= t * v[:-1]
        out[-1] -= t * np.exp(1j * k2) * v[0]
        out[0] -= t * np.exp(-1j * k2) * v[-1]
        return out

    def dense(self, k1: float, k2: float, shift: float = 0.0) -> np.ndarray:
        """The full ``q x q`` matrix (for tests and small cells only)."""
        q, t = self.q, self.t
        h = np.diag(self.diagonal(k1, shift)).astype(complex)
        idx = np.arange(q - 1)
        h[idx, idx + 1] = -t
        h[idx + 1, idx] = -t
        h[q - 1, 0] += -t * np.exp(1j * k2)
        h[0, q - 1] += -t * np.exp(-1j * k2)
        return h

    def band_edge_momenta(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """``(k1, k2)`` = ``(0, 0)`` and ``(pi/q, pi)``: every band has its extremes there."""
        return (0.0, 0.0), (np.pi / self.q, np.pi)

    # --------------------------------------------------------- band storage

    @property
    def order(self) -> np.ndarray:
        """Row order of the band storage (see :func:`_ring_order`)."""
        return _ring_order(self.q)

    def lower_band(self, k1: float, k2: float, shift: float = 0.0) -> np.ndarray:
        """Lower band storage ``ab[i - j, j] = H[i, j]`` (reordered rows), shape ``(3, q)``.

        Real for real ``exp(i k2)`` (``k2`` a multiple of pi), complex otherwise.
        """
        q, t = self.q, self.t
        order = self.order
        pos = np.empty(q, dtype=int)
        pos[order] = np.arange(q)
        real = np.isclose(np.imag(np.exp(1j * k2)), 0.0, atol=1e-15)
        ab = np.zeros((3, q), dtype=float if real else complex)
        ab[0] = self.diagonal(k1, shift)[order]
        i, j = pos[:-1], pos[1:]                 # H[y, y+1] = -t (real)
        lo, hi = np.maximum(i, j), np.minimum(i, j)
        ab[lo - hi, hi] = -t
        corner = -t * np.exp(1j * k2)            # H[q-1, 0]
        i, j = pos[q - 1], pos[0]
        value = corner if i > j else np.conj(corner)
        ab[abs(i - j), min(i, j)] = value.real if real else value
        return ab

    def general_band(self, k1: float, k2: float, sigma: float, shift: float = 0.0) -> np.ndarray:
        """``H - sigma`` in LAPACK's general band storage for ``?gbtrf`` (kl = ku = 2), shape ``(7, q)``."""
        low = self.lower_band(k1, k2, shift).astype(complex)
        q = self.q
        ab = np.zeros((7, q), dtype=complex)
        for o in range(3):
            j = np.arange(q - o)
            ab[4 + o, j] = low[o, j] - (sigma if o == 0 else 0.0)
            if o:
                ab[4 - o, j + o] = np.conj(low[o, j])
        return ab


def magnetic_shift(v: np.ndarray, s: int, k2: float) -> np.ndarray:
    """``S^s v``: rows shifted down by ``s`` (``0 <= s < q``), wrapped rows times ``exp(-i k2)``.

    ``S^s`` maps eigenvectors of ``H(k1, k2)`` onto eigenvectors of
    ``H(k1 - 2 pi phi s, k2)`` (see the module notes).
    """
    out = np.roll(v, s, axis=0)
    if s:
        out[:s] = out[:s] * np.exp(-1j * k2)
    return out
