"""Mixing of self-consistent iterations: Pulay/Anderson extrapolation (DIIS) shared by the Hartree-Fock solvers.

References
----------
.. [1] P. Pulay, "Convergence acceleration of iterative sequences. The case
   of SCF iteration", Chem. Phys. Lett. 73, 393 (1980).
.. [2] D. G. Anderson, "Iterative procedures for nonlinear integral
   equations", J. ACM 12, 547 (1965).
"""

from __future__ import annotations

import numpy as np

__all__ = ["Pulay", "LeanAnderson"]


def _grown(overlap: np.ndarray, stored: list, r: np.ndarray) -> np.ndarray:
    """The overlap matrix ``<r_i, r_j>`` of the stored residuals with the new ``r`` appended."""
    new = np.array([np.real(np.vdot(ri, r)) for ri in stored] + [np.real(np.vdot(r, r))])
    m = len(stored) + 1
    b = np.zeros((m, m))
    b[:m - 1, :m - 1] = overlap
    b[m - 1, :] = b[:, m - 1] = new
    return b


def _coefficients(overlap: np.ndarray) -> np.ndarray:
    """``c`` minimising ``|sum c_i r_i|`` with ``sum c_i = 1`` (the last residual alone if singular)."""
    m = overlap.shape[0]
    a = np.zeros((m + 1, m + 1))
    scale = np.abs(np.diag(overlap)).max()
    a[:m, :m] = overlap / (scale if scale > 0 else 1.0)
    a[m, :m] = a[:m, m] = -1.0
    rhs = np.zeros(m + 1)
    rhs[m] = -1.0
    try:
        return np.linalg.lstsq(a, rhs, rcond=1e-12)[0][:m]
    except np.linalg.LinAlgError:
        c = np.zeros(m)
        c[-1] = 1.0
        return c


class Pulay:
    """Pulay/Anderson extrapolation over the last ``depth`` iterates.

    The overlaps ``<r_i, r_j>`` of the residuals are kept between steps, so
    a step costs ``depth`` inner products of new against old residuals (not
    ``depth^2``).
    """

    def __init__(self, depth: int):
        self.depth = int(depth)
        self.xs: list = []
        self.rs: list = []
        self.overlap = np.zeros((0, 0))

    def step(self, x: np.ndarray, r: np.ndarray, alpha: float) -> np.ndarray:
        """Store ``(x, r)`` and return the next iterate ``sum c_i (x_i + alpha r_i)``."""
        b = _grown(self.overlap, self.rs, r)
        self.xs.append(x)
        self.rs.append(r)
        if len(self.rs) > self.depth:
            self.xs.pop(0)
            self.rs.pop(0)
            b = b[1:, 1:]
        self.overlap = b
        c = _coefficients(b)
        out = np.zeros_like(x)
        for ci, xi, ri in zip(c, self.xs, self.rs):
            out += ci * (xi + alpha * ri)
        return out


class LeanAnderson:
    """Pulay/Anderson extrapolation that keeps only the residuals, in single precision, and restarts.

    Every iterate of a window is ``x_i = base + sum_j A[i, j] r_j`` with the
    window's first iterate as ``base`` and the residuals ``r_j`` of the
    window, so the extrapolation ``sum_i c_i (x_i + alpha r_i)`` (``sum c_i =
    1``, ``c`` minimising ``|sum c_i r_i|``) is again ``base`` plus a
    combination of the stored residuals: the iterates themselves are never
    stored. When ``depth`` residuals are held the window restarts from the
    current iterate. Memory: one iterate in full precision and ``depth``
    residuals in ``store`` precision (complex64: a quarter of the
    ``2 depth`` full-precision arrays of :class:`Pulay`). The residuals need
    no more than single precision: near convergence they are small, and the
    loop measures the true residual of every iterate in double precision.

    References
    ----------
    .. [1] D. G. Anderson, J. ACM 12, 547 (1965).
    .. [2] P. Pulay, Chem. Phys. Lett. 73, 393 (1980).
    """

    def __init__(self, depth: int, store=np.complex64):
        if int(depth) < 1:
            raise ValueError(f"history: got {depth}; expected at least 1")
        self.depth = int(depth)
        self.store = store
        self.reset()

    def reset(self) -> None:
        """Forget the window (the next step is a linear step from its iterate)."""
        self.base = None
        self.rs: list = []
        self.rows: list = []            # coefficients of each stored iterate over the stored residuals
        self.overlap = np.zeros((0, 0))
        self.pending = None             # coefficients of the iterate returned last

    @property
    def nbytes(self) -> int:
        """Bytes held by the window."""
        return (0 if self.base is None else self.base.nbytes) + sum(r.nbytes for r in self.rs)

    def step(self, x: np.ndarray, r: np.ndarray, alpha: float) -> np.ndarray:
        """Record the residual ``r`` of ``x`` (the iterate returned last, or a new one) and return the next."""
        if self.base is None or len(self.rs) >= self.depth:
            self.reset()
            self.base = np.array(x, copy=True)
            row = np.zeros(0)
        else:
            row = self.pending
        self.overlap = _grown(self.overlap, self.rs, r)
        self.rs.append(np.asarray(r, dtype=self.store))
        m = len(self.rs)
        self.rows = [np.pad(rw, (0, m - rw.size)) for rw in self.rows] + [np.pad(row, (0, m - row.size))]
        c = _coefficients(self.overlap)
        coefficients = np.asarray(self.rows).T @ c + alpha * c       # over the stored residuals
        out = np.array(self.base, copy=True)
        for cj, rj in zip(coefficients, self.rs):
            out += cj * rj
        self.pending = coefficients
        return out
