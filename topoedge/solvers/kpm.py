"""The Fermi projector applied to vectors by a Chebyshev (kernel polynomial) expansion.

For a sparse Hamiltonian ``H`` with spectrum inside ``[b - a, b + a]`` the
projector on the states below E_F is expanded in Chebyshev polynomials of
``H~ = (H - b)/a``::

    P = theta(E_F - H) ~ sum_{n < M} g_n mu_n T_n(H~)

with the coefficients of the step function at ``x_F = (E_F - b)/a``
(``theta_F = arccos x_F``): ``mu_0 = 1 - theta_F/pi``, ``mu_n = -2 sin(n
theta_F) / (n pi)``, damped by the Jackson kernel ``g_n`` so that the
expansion converges uniformly, with an energy resolution of about
``pi a / M`` [1]_. Applying ``P`` to a block of vectors costs ``M`` sparse
products with the block: linear in the number of sites, and nothing of size
N x N is formed. The expansion is accurate where E_F lies in a gap much
wider than that resolution; :func:`moments_for_gap` chooses ``M`` from the
gap.

References
----------
.. [1] A. Weisse, G. Wellein, A. Alvermann and H. Fehske, "The kernel
   polynomial method", Rev. Mod. Phys. 78, 275 (2006), sections II.B-C.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

__all__ = ["spectral_bounds", "jackson_kernel", "step_coefficients", "apply_fermi_projector", "moments_for_gap"]


def spectral_bounds(h: sp.spmatrix) -> tuple[float, float]:
    """An interval (t) that holds the whole spectrum: Gershgorin discs of the rows."""
    h = sp.csr_matrix(h)
    diag = h.diagonal().real
    radius = np.asarray(abs(h).sum(axis=1)).ravel() - np.abs(diag)
    return float((diag - radius).min()), float((diag + radius).max())


def jackson_kernel(moments: int) -> np.ndarray:
    """The Jackson damping factors ``g_n``, n = 0 .. M-1 (Weisse et al. 2006, Eq. 71)."""
    m = int(moments)
    n = np.arange(m)
    q = math.pi / (m + 1)
    return ((m - n + 1) * np.cos(q * n) + np.sin(q * n) / math.tan(q)) / (m + 1)


def step_coefficients(moments: int, x_fermi: float) -> np.ndarray:
    """Chebyshev coefficients of ``theta(x_F - x)`` on [-1, 1], damped by the Jackson kernel."""
    theta = math.acos(min(max(x_fermi, -1.0), 1.0))
    n = np.arange(1, int(moments))
    mu = np.concatenate([[1.0 - theta / math.pi], -2.0 * np.sin(n * theta) / (n * math.pi)])
    return jackson_kernel(moments) * mu


def moments_for_gap(gap: float, bandwidth: float, *, digits: float = 3.0) -> int:
    """Moments for a projector accurate to about ``10**-digits`` with E_F mid-way in a gap of width ``gap`` (t).

    The Jackson-damped step has a smearing of about ``pi a / M`` (``a`` half
    the bandwidth); taking it ``digits`` times smaller than half the gap
    keeps the states on both sides of the gap within the plateau of the
    expansion.
    """
    if not gap > 0:
        raise ValueError(f"the gap must be > 0 t, got {gap!r}")
    return int(math.ceil(2 * digits * math.pi * (bandwidth / 2) / gap))


def apply_fermi_projector(h: sp.spmatrix, vectors: np.ndarray, fermi_energy: float, moments: int,
                          *, bounds: tuple[float, float] | None = None) -> np.ndarray:
    """``P vectors`` for the projector on the states of ``h`` below ``fermi_energy`` (t).

    Parameters
    ----------
    h : sparse matrix (N x N), Hermitian, t
    vectors : ndarray (N,) or (N, k)
    fermi_energy : float
    moments : int
        Chebyshev moments M (>= 2).
    bounds : (float, float), optional
        An interval holding the spectrum (default :func:`spectral_bounds`).
    """
    if int(moments) < 2:
        raise ValueError(f"moments must be >= 2, got {moments!r}")
    lo, hi = spectral_bounds(h) if bounds is None else bounds
    a = (hi - lo) / 2 * 1.01 + 1e-12       # a little room: the rescaled spectrum strictly inside (-1, 1)
    b = (hi + lo) / 2
    ht = (sp.csr_matrix(h) - b * sp.identity(h.shape[0], format="csr")) / a
    coeff = step_coefficients(moments, (fermi_energy - b) / a)
    t_prev = np.array(vectors, dtype=complex)
    t_curr = ht @ t_prev
    out = coeff[0] * t_prev + coeff[1] * t_curr
    for c in coeff[2:]:
        t_prev, t_curr = t_curr, 2 * (ht @ t_curr) - t_prev
        out += c * t_curr
    return out
