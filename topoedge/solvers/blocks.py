"""One ribbon block solver for the spectrum and the edge-mode search (solver stage).

A ribbon is split into its spin blocks when ``S_z`` is conserved; each block
is sorted by position across the ribbon and gets one solver, chosen by one
rule (:func:`choose`) and used by both :func:`topoedge.solvers.spectrum.ribbon_spectrum`
and :mod:`topoedge.solvers.crossings`:

``tridiagonal``
    Hamiltonians that are tridiagonal once the orbitals are ordered across
    the ribbon (nearest-neighbour hopping, one orbital per row and spin
    block): the Hermitian tridiagonal matrix is made real by a diagonal phase
    transformation and passed to LAPACK's real symmetric tridiagonal solvers
    (divide and conquer for all states, bisection with Sturm counts and
    inverse iteration for a window or a range of band indices), ``O(W^2)``
    per momentum instead of ``O(W^3)``.
``banded``
    Wider bands: LAPACK's Hermitian band solvers through
    :func:`scipy.linalg.eig_banded`.
``dense``
    Any ribbon: :func:`numpy.linalg.eigh` (batched over chunks of momenta for
    the spectrum) and :func:`scipy.linalg.eigh` with index ranges.

Every block offers ``rows`` (states and observables at many momenta, for the
spectrum), ``scan`` (the states in an energy window with their band
indices), ``energy`` and ``state`` (one band at one momentum), for the edge
search. A new solver is one subclass of :class:`Block` and one branch of
:func:`choose`.

References
----------
.. [1] J. J. M. Cuppen, "A divide and conquer method for the symmetric
   tridiagonal eigenproblem", Numer. Math. 36, 177 (1981).
.. [2] W. Barth, R. S. Martin and J. H. Wilkinson, "Calculation of the
   eigenvalues of a symmetric tridiagonal matrix by the method of bisection",
   Numer. Math. 9, 386 (1967).
.. [3] R. P. Feynman, "Forces in molecules", Phys. Rev. 56, 340 (1939)
   (the Hellmann-Feynman velocities).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.linalg as sla

from ..systems.ribbon import RibbonHamiltonian, diagonal
from ..util.progress import ticks
from ..util.threads import eigh_stack

__all__ = ["Block", "TridiagonalBlock", "BandedBlock", "DenseBlock", "choose", "make_block", "spin_blocks",
           "observables", "sturm_count", "DENSE_CHUNK_ELEMENTS"]

#: Largest number of complex matrix elements diagonalised in one batched call
#: of the dense solver (about 128 MiB of Hamiltonians).
DENSE_CHUNK_ELEMENTS = 8_000_000


def observables(prob, ham: RibbonHamiltonian, velocity) -> dict:
    """Per-state ``<y>``, spread and ``<S_z>`` from ``|psi|^2`` of shape (..., n, m), with the velocities."""
    y_mean = np.einsum("i,...im->...m", ham.position, prob)
    y2 = np.einsum("i,...im->...m", ham.position**2, prob)
    spread = np.sqrt(np.clip(y2 - y_mean**2, 0.0, None))
    if ham.sz is None:
        sz = np.full(y_mean.shape, np.nan)
    else:
        sz = np.einsum("i,...im->...m", ham.sz, prob)
    return {"velocity": velocity, "y_mean": y_mean, "y_spread": spread, "sz": sz}


def sturm_count(d: np.ndarray, e2: np.ndarray, x: float) -> np.ndarray:
    """Number of eigenvalues below ``x`` of real symmetric tridiagonal matrices.

    ``d`` has shape (Nk, N) (diagonals), ``e2`` shape (Nk, N-1) (squared
    off-diagonals); the LDL^T pivots are counted for all momenta at once.
    """
    pivmin = np.finfo(float).tiny * max(1.0, float(e2.max(initial=0.0)))
    q = d[:, 0] - x
    count = (q < 0).astype(int)
    for i in range(1, d.shape[1]):
        q = np.where(np.abs(q) < pivmin, -pivmin, q)
        q = d[:, i] - x - e2[:, i - 1] / q
        count += q < 0
    return count


def _norm2_bound(m) -> float:
    """Upper bound of the spectral norm: ``sqrt(||m||_1 ||m||_inf)`` (dense or sparse)."""
    if m.shape[0] == 0 or m.shape[1] == 0:
        return 0.0
    a = abs(m)
    return float(math.sqrt(np.asarray(a.sum(axis=0)).max() * np.asarray(a.sum(axis=1)).max()))


def _band_storage(hk: np.ndarray, b: int) -> np.ndarray:
    """Lower band storage ``a[i - j, j] = H[i, j]`` of a batch of matrices."""
    n = hk.shape[-1]
    ab = np.zeros(hk.shape[:-2] + (b + 1, n), dtype=hk.dtype)
    for o in range(b + 1):
        ab[..., o, : n - o] = np.diagonal(hk, offset=-o, axis1=-2, axis2=-1)
    return ab


class Block:
    """The sorted bands of one spin block (or of the whole ribbon) and how to compute them."""

    kind = "generic"

    def __init__(self, ham: RibbonHamiltonian):
        self.ham = ham
        self.size = ham.size
        # Lipschitz constant of every sorted band: ||dH/dk|| <= sum_D 2 D ||h_D||.
        self.lipschitz = sum(2.0 * d * _norm2_bound(h) for d, h in enumerate(ham.hoppings, start=1))

    # ---------------------------------------------------------- spectrum

    def rows(self, k, window, with_observables: bool, progress) -> list[dict]:
        """One dict of 1D arrays (``energy`` and the observables) per momentum."""
        raise NotImplementedError

    # ------------------------------------------------------ edge search

    def scan(self, k, e_low, e_high):
        """Index range and (energies, velocities) of the states in a window.

        Returns ``lo``, ``hi`` (int arrays of shape (Nk,), inclusive band
        indices; ``hi < lo`` for an empty window) and lists of energies and
        velocities per momentum. This generic version makes one LAPACK call
        for all eigenvalues and one for the states in the window per
        momentum (:meth:`_eigenvalues`, :meth:`_eigenpairs`).
        """
        lo = np.empty(len(k), dtype=int)
        hi = np.empty(len(k), dtype=int)
        energies, velocities = [], []
        for i in range(len(k)):
            w_all = self._eigenvalues(k[i])
            lo[i] = np.searchsorted(w_all, e_low, side="left")
            hi[i] = np.searchsorted(w_all, e_high, side="right") - 1
            if hi[i] < lo[i]:
                energies.append(np.empty(0))
                velocities.append(np.empty(0))
                continue
            w, v = self._eigenpairs(k[i], lo[i], hi[i])
            energies.append(w)
            velocities.append(np.real(np.einsum("im,im->m", v.conj(), self.ham.velocity(k[i]) @ v)))
        return lo, hi, energies, velocities

    def state(self, n, k):
        """``(E_n(k), |psi|^2, dE_n/dk)`` of band ``n`` at ``k``."""
        w, v = self._eigenpairs(k, n, n)
        psi = v[:, 0]
        vel = float(np.real(psi.conj() @ self.ham.velocity(k) @ psi))
        return float(w[0]), np.abs(psi) ** 2, vel

    def energy(self, n: int, k: float) -> float:
        """``E_n(k)``."""
        raise NotImplementedError

    def _eigenvalues(self, k):
        """All eigenvalues of ``H(k)``, ascending."""
        raise NotImplementedError

    def _eigenpairs(self, k, lo, hi):
        """Eigenpairs ``lo .. hi`` (inclusive) of ``H(k)``."""
        raise NotImplementedError


class TridiagonalBlock(Block):
    """A block whose ``H(k)`` is tridiagonal in position order.

    The Hermitian tridiagonal matrix is made real and symmetric by a diagonal
    phase transformation; its eigenvalues are those of ``H(k)`` and the
    velocity follows from the transformed ``dH/dk``.
    """

    kind = "tridiagonal"

    def __init__(self, ham):
        super().__init__(ham)
        self._d0 = np.real(diagonal(ham.h0))
        self._d1 = diagonal(ham.h1)
        self._e0 = diagonal(ham.h0, -1)            # h0[i+1, i]
        self._e1 = diagonal(ham.h1, -1)
        self._e1u = np.conj(diagonal(ham.h1, 1))   # conj(h1[i, i+1])

    def coefficients(self, k):
        """Real diagonals ``d``, ``|e|`` and their k-derivatives, shape (Nk, .)."""
        phase = np.exp(-1j * np.atleast_1d(np.asarray(k, dtype=float)))[:, None]
        d = self._d0 + 2 * np.real(self._d1 * phase)
        e = self._e0 + self._e1 * phase + self._e1u / phase
        dd = 2 * np.imag(self._d1 * phase)
        de = np.real((-1j * self._e1 * phase + 1j * self._e1u / phase) * np.exp(-1j * np.angle(e)))
        return d, np.abs(e), dd, de

    @staticmethod
    def _velocity(v, dd, de):
        return dd @ (v * v) + 2 * (de @ (v[:-1] * v[1:]))

    def rows(self, k, window, with_observables, progress):
        d, e_abs, dd, de = self.coefficients(k)
        rows = []
        for i in ticks(range(len(k)), progress, "ribbon spectrum"):
            kwargs = {} if window is None else dict(select="v", select_range=window)
            if not with_observables:
                w = sla.eigh_tridiagonal(d[i], e_abs[i], eigvals_only=True, **kwargs)
                rows.append({"energy": w})
                continue
            if window is None and self.size > 1:
                # All states: LAPACK's divide and conquer (dstevd) is the fastest
                # tridiagonal eigensolver with vectors at ribbon sizes.
                w, v, info = sla.lapack.dstevd(d[i], e_abs[i], compute_v=1)
                if info != 0:  # rare divide-and-conquer failure: MRRR instead
                    w, v = sla.eigh_tridiagonal(d[i], e_abs[i], lapack_driver="stemr")
            else:
                w, v = sla.eigh_tridiagonal(d[i], e_abs[i], **kwargs)
            row = observables(v * v, self.ham, self._velocity(v, dd[i], de[i]))
            row["energy"] = w
            rows.append(row)
        return rows

    def scan(self, k, e_low, e_high):
        d, e, dd, de = self.coefficients(k)
        e2 = e * e
        lo = sturm_count(d, e2, e_low)
        hi = sturm_count(d, e2, e_high) - 1
        energies, velocities = [], []
        for i in range(len(k)):  # one LAPACK call per momentum
            if hi[i] < lo[i]:
                energies.append(np.empty(0))
                velocities.append(np.empty(0))
                continue
            w, v = sla.eigh_tridiagonal(d[i], e[i], select="i", select_range=(lo[i], hi[i]))
            energies.append(w)
            velocities.append(self._velocity(v, dd[i], de[i]))
        return lo, hi, energies, velocities

    def energy(self, n, k):
        d, e, _, _ = self.coefficients(k)
        w = sla.eigh_tridiagonal(d[0], e[0], eigvals_only=True, select="i", select_range=(n, n))
        return float(w[0])

    def state(self, n, k):
        d, e, dd, de = self.coefficients(k)
        w, v = sla.eigh_tridiagonal(d[0], e[0], select="i", select_range=(n, n))
        return float(w[0]), v[:, 0] ** 2, float(self._velocity(v, dd[0], de[0])[0])


class BandedBlock(Block):
    """A block with a narrow band of ``H(k)`` (LAPACK Hermitian band solvers)."""

    kind = "banded"

    def __init__(self, ham):
        super().__init__(ham)
        self.bandwidth = ham.bandwidth()
        self._last = None

    def _storage(self, k):
        """Lower band storage of ``H(k)``; the last one is kept (a scan asks twice per ``k``)."""
        if self._last is not None and self._last[0] == k:
            return self._last[1]
        ab = _band_storage(self.ham.bloch(k), self.bandwidth)
        self._last = (k, ab)
        return ab

    def rows(self, k, window, with_observables, progress):
        rows = []
        for i in ticks(range(len(k)), progress, "ribbon spectrum"):
            ab = _band_storage(self.ham.bloch(k[i]), self.bandwidth)
            kwargs = {} if window is None else dict(select="v", select_range=window)
            if not with_observables:
                rows.append({"energy": sla.eig_banded(ab, lower=True, eigvals_only=True, **kwargs)})
                continue
            w, v = sla.eig_banded(ab, lower=True, **kwargs)
            vel = np.real(np.einsum("im,im->m", v.conj(), self.ham.velocity(k[i]) @ v))
            row = observables(np.abs(v) ** 2, self.ham, vel)
            row["energy"] = w
            rows.append(row)
        return rows

    def _eigenvalues(self, k):
        return sla.eig_banded(self._storage(k), lower=True, eigvals_only=True)

    def _eigenpairs(self, k, lo, hi):
        return sla.eig_banded(self._storage(k), lower=True, select="i", select_range=(lo, hi))

    def energy(self, n, k):
        w = sla.eig_banded(self._storage(k), lower=True, eigvals_only=True, select="i", select_range=(n, n))
        return float(w[0])


class DenseBlock(Block):
    """Any block: dense Hermitian eigensolvers."""

    kind = "dense"

    def rows(self, k, window, with_observables, progress):
        n = self.size
        chunk = max(1, DENSE_CHUNK_ELEMENTS // (n * n))
        rows = []
        for s in ticks(range(0, len(k), chunk), progress, "ribbon spectrum"):
            ks = k[s : s + chunk]
            hk = self.ham.bloch(ks)
            if with_observables:
                w, v = eigh_stack(hk)
                vel = np.real(np.einsum("kim,kim->km", v.conj(), self.ham.velocity(ks) @ v))
                obs = observables(np.abs(v) ** 2, self.ham, vel)
            else:
                w = eigh_stack(hk, vectors=False)
            for j in range(len(ks)):
                keep = slice(None) if window is None else (w[j] >= window[0]) & (w[j] <= window[1])
                row = {"energy": w[j][keep]}
                if with_observables:
                    row.update({key: val[j][keep] for key, val in obs.items()})
                rows.append(row)
        return rows

    def steps(self, nk: int) -> int:
        """Progress steps of :meth:`rows` for ``nk`` momenta (one per chunk)."""
        return len(range(0, nk, max(1, DENSE_CHUNK_ELEMENTS // (self.size * self.size))))

    def _eigenvalues(self, k):
        return sla.eigh(self.ham.bloch(k), eigvals_only=True)

    def _eigenpairs(self, k, lo, hi):
        return sla.eigh(self.ham.bloch(k), subset_by_index=(lo, hi))

    def energy(self, n, k):
        return float(sla.eigh(self.ham.bloch(k), eigvals_only=True, subset_by_index=(n, n))[0])


_KINDS = {"tridiagonal": TridiagonalBlock, "banded": BandedBlock, "dense": DenseBlock}


def choose(block: RibbonHamiltonian, solver: str = "auto") -> str:
    """The solver of one block: ``"tridiagonal"``, ``"banded"`` or ``"dense"``.

    ``solver = "dense"`` forces the dense solver; otherwise a block of
    half-bandwidth 1 without far hoppings is tridiagonal, one of half-bandwidth
    up to a quarter of its size (or any, with ``solver = "banded"``) banded,
    anything else dense.
    """
    if solver == "dense":
        return "dense"
    b = block.bandwidth()
    if b <= 1 and not block.far:  # the tridiagonal solver knows h0 and h1 only
        return "tridiagonal"
    if solver == "banded" or b <= block.size // 4:
        return "banded"
    return "dense"


def make_block(block: RibbonHamiltonian, solver: str = "auto") -> Block:
    """The :class:`Block` of a (position-sorted) block with the solver :func:`choose` picks."""
    return _KINDS[choose(block, solver)](block)


def spin_blocks(ham: RibbonHamiltonian, solver: str = "auto") -> list[Block]:
    """The blocks of a ribbon: its spin blocks when S_z is conserved (except for ``solver = "dense"``)."""
    if solver == "dense":
        return [DenseBlock(ham)]
    indices = ham.spin_blocks() or [np.arange(ham.size)]
    return [make_block(ham.block(idx), solver) for idx in indices]
