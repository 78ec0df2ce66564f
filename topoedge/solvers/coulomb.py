"""The Coulomb interaction of a ribbon: strengths, the Hartree line kernel, the exchange pair kernel, backgrounds.

Used by the self-consistent solver :mod:`topoedge.solvers.hartree_fock`;
see there for the physics and the references.
"""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np

__all__ = ["Interaction", "line_kernel", "pair_kernel", "background_density"]


@dataclass(frozen=True)
class Interaction:
    """Coulomb interaction on the lattice.

    Attributes
    ----------
    coulomb : float
        ``U_C = e^2 / (4 pi eps0 eps_r a)``, units of ``t`` (> 0).
    onsite : float
        ``V(0)``, units of ``t`` (>= 0).
    gate_distance : float or None
        Distance ``d`` of a metal gate, lattice constants (> 0), or None.
    """

    coulomb: float
    onsite: float
    gate_distance: float | None = None

    def __post_init__(self):
        if not np.isfinite(self.coulomb) or self.coulomb < 0:
            raise ValueError(f"interaction strength U_C: got {self.coulomb!r}; expected a finite value >= 0 (t)")
        if not np.isfinite(self.onsite) or self.onsite < 0:
            raise ValueError(f"on-site interaction U_0: got {self.onsite!r}; expected a finite value >= 0 (t)")
        if self.gate_distance is not None and not (np.isfinite(self.gate_distance) and self.gate_distance > 0):
            raise ValueError(f"gate distance: got {self.gate_distance!r}; expected a distance > 0 "
                             "(lattice constants), or no gate")

    def potential(self, dx, dy) -> np.ndarray:
        """``V`` at separations ``(dx, dy)`` (broadcast), units of ``t``."""
        r = np.hypot(dx, dy)
        with np.errstate(divide="ignore"):
            v = np.where(r > 0, self.coulomb / np.where(r > 0, r, 1.0), self.onsite)
        if self.gate_distance is not None:
            v = v - self.coulomb / np.sqrt(r**2 + 4.0 * self.gate_distance**2)
        return v


def _harmonic_tail(y: np.ndarray, terms: int = 4096) -> np.ndarray:
    """``S(y) = sum_{x >= 1} (1/sqrt(x^2 + y^2) - 1/x)`` for an array of ``y >= 0``.

    Summed exactly to ``terms`` and the rest by the Euler-Maclaurin formula
    with ``f(x) = 1/sqrt(x^2 + y^2) - 1/x``: ``int_M^inf f + f(M)/2 - f'(M)/12``.
    """
    y = np.asarray(y, dtype=float)
    flat = y.ravel()
    x = np.arange(1, terms + 1, dtype=float)
    head = np.concatenate([(1.0 / np.sqrt(x**2 + part[:, None] ** 2) - 1.0 / x).sum(axis=1)
                           for part in np.array_split(flat, max(1, flat.size // 64))]).reshape(y.shape)
    m = float(terms)
    integral = np.log(2 * m) - np.log(m + np.sqrt(m**2 + y**2))  # int_M^inf (1/sqrt(x^2+y^2) - 1/x)
    f_m = 1.0 / np.sqrt(m**2 + y**2) - 1.0 / m
    df_m = -m / (m**2 + y**2) ** 1.5 + 1.0 / m**2
    return head + integral - f_m / 2 - df_m / 12


def line_kernel(dy, interaction: Interaction) -> np.ndarray:
    """Potential of a uniform line of unit charges per site at distance ``dy``.

    ``K(dy) = sum_x V(x, dy)`` with the divergent constant ``2 U_C ln L`` of
    the bare Coulomb interaction removed (module notes); with a gate the sum
    converges and nothing is removed. Units of ``t``.

    Parameters
    ----------
    dy : array_like
        Separations across the ribbon, lattice constants.
    interaction : Interaction
    """
    dy = np.abs(np.asarray(dy, dtype=float))
    values, inverse = np.unique(dy, return_inverse=True)
    if values.size < dy.size:  # evaluate each distinct separation once
        return line_kernel(values, interaction)[inverse].reshape(dy.shape)
    gamma = np.euler_gamma
    u = interaction.coulomb
    k = interaction.potential(0.0, dy) + 2 * u * (gamma + _harmonic_tail(dy) - np.log(2))
    if interaction.gate_distance is not None:
        # The image charges: a line at distance rho = sqrt(dy^2 + 4 d^2).
        # interaction.potential already removed the x = 0 image term.
        rho = np.sqrt(dy**2 + 4 * interaction.gate_distance**2)
        k = k - 2 * u * (gamma + _harmonic_tail(rho) - np.log(2))
    return k


def pair_kernel(y: np.ndarray, k_points: int, interaction: Interaction) -> np.ndarray:
    """``V(D, y_i - y_j)`` for the nearest-image cell separations ``D``, shape ``(N_k, W, W)``.

    Row ``j`` of the first axis is ``D = j`` for ``j <= N_k/2`` and
    ``D = j - N_k`` otherwise (the FFT order).
    """
    y = np.asarray(y, dtype=float)
    d = np.arange(k_points, dtype=float)
    d = np.where(d <= k_points / 2, d, d - k_points)
    dy = y[:, None] - y[None, :]
    return interaction.potential(d[:, None, None], dy[None, :, :])


def background_density(width: int, density: float, ramp: float, *, profile: str = "linear",
                       setback: float = 0.0) -> np.ndarray:
    """Positive background charge per site on each row of a ribbon.

    Parameters
    ----------
    width : int
        Rows ``W``.
    density : float
        Bulk value, charges per site (``nu * phi`` at filling ``nu`` and flux
        ``phi``).
    ramp : float
        Width ``w`` (lattice constants) over which it falls from the bulk
        value to zero at each edge; ``0`` is a sharp edge.
    profile : {"linear", "erf"}
        Shape of the fall: linear, or an error function of the same width.
    setback : float
        Rows next to each boundary kept free of background (lattice constants).

    Returns
    -------
    (W,) ndarray
        ``n_b(y)``; for ``linear``, ``density * clip((d - setback + 1/2) / w, 0, 1)``
        with ``d`` the distance of the row to the nearest boundary row.
    """
    from scipy.special import erf

    if width < 2:
        raise ValueError(f"ribbon width: got {width}; expected at least 2 rows")
    if not density > 0:
        raise ValueError(f"background density: got {density!r}; expected > 0 charges per site")
    if ramp < 0 or setback < 0:
        raise ValueError(f"background ramp and setback: got {ramp!r}, {setback!r}; expected >= 0")
    y = np.arange(width, dtype=float)
    d = np.minimum(y, width - 1 - y) - setback + 0.5
    if ramp == 0:
        shape = (d > 0).astype(float)
    elif profile == "linear":
        shape = np.clip(d / ramp, 0.0, 1.0)
    elif profile == "erf":
        shape = 0.5 * (1 + erf(2 * (d - ramp / 2) / ramp))
    else:
        raise ValueError(f"background profile: got {profile!r}; expected 'linear' or 'erf'")
    return density * shape


