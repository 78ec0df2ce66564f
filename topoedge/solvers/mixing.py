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

__all__ = ["Pulay"]


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
        new = np.array([np.real(np.vdot(ri, r)) for ri in self.rs] + [np.real(np.vdot(r, r))])
        m = len(self.rs) + 1
        b = np.zeros((m, m))
        b[:m - 1, :m - 1] = self.overlap
        b[m - 1, :] = b[:, m - 1] = new
        self.xs.append(x)
        self.rs.append(r)
        if m > self.depth:
            self.xs.pop(0)
            self.rs.pop(0)
            b = b[1:, 1:]
            m -= 1
        self.overlap = b
        a = np.zeros((m + 1, m + 1))
        scale = np.abs(np.diag(b)).max()
        a[:m, :m] = b / (scale if scale > 0 else 1.0)
        a[m, :m] = a[:m, m] = -1.0
        rhs = np.zeros(m + 1)
        rhs[m] = -1.0
        try:
            c = np.linalg.lstsq(a, rhs, rcond=1e-12)[0][:m]
        except np.linalg.LinAlgError:
            c = np.zeros(m)
            c[-1] = 1.0
        out = np.zeros_like(x)
        for ci, xi, ri in zip(c, self.xs, self.rs):
            out += ci * (xi + alpha * ri)
        return out
