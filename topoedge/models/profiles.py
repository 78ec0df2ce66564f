"""Edge-potential profiles across a ribbon (model description).

Every profile is a function of the distance ``d`` of a lattice row from the
outermost row of its edge (``d = 0`` on the outermost row, in lattice
constants) and returns the confining potential in units of the hopping ``t``.
The ribbon's potential is the profile applied at both edges: every row takes
the profile's value at its distance from the nearer edge (the configuration
layer forbids a ramp wider than half the ribbon). Negative heights (an
attractive edge) are kept as they are.

Profiles (``EDGE_PROFILES`` maps the names to functions):

``none``
    No potential: a hard wall, the lattice simply ends.
``linear``
    ``V(d) = V0 * (1 - d / w)`` for ``d < w`` and 0 beyond: flat in the bulk,
    rising linearly over ``w`` sites to ``V0`` at the outermost row. ``w = 0``
    is the hard wall.
``tanh``
    ``V(d) = V0 * (1 - tanh(2 d / w))``: a smooth ramp with the same height
    and a decay length ``w / 2``.
``erf``
    ``V(d) = V0 * erfc(2 d / w)``: a smooth ramp with Gaussian tails.
``table``
    A user table of ``(d, V)`` pairs, interpolated linearly; beyond the last
    distance the last potential is kept.

To add a profile, write a function ``f(distance, *, width, height, table)``
returning an array like ``distance`` and register it in ``EDGE_PROFILES``;
the configuration layer reads the allowed names from there.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
from scipy.special import erfc

__all__ = ["EDGE_PROFILES", "edge_potential", "distance_from_edge"]


def _none(distance, *, width, height, table):
    return np.zeros_like(distance, dtype=float)


def _linear(distance, *, width, height, table):
    if width <= 0:
        return np.zeros_like(distance, dtype=float)
    return height * np.clip(1.0 - distance / width, 0.0, None)


def _tanh(distance, *, width, height, table):
    if width <= 0:
        return np.zeros_like(distance, dtype=float)
    return height * (1.0 - np.tanh(2.0 * distance / width))


def _erf(distance, *, width, height, table):
    if width <= 0:
        return np.zeros_like(distance, dtype=float)
    return height * erfc(2.0 * distance / width)


def _table(distance, *, width, height, table):
    points = np.asarray(table, dtype=float).reshape(-1, 2)
    return np.interp(distance, points[:, 0], points[:, 1])


#: Every edge profile, by ``ribbon.edge.profile``: ``f(distance, *, width, height, table)`` gives the
#: potential in t at distances from the outermost row in lattice constants.
EDGE_PROFILES: dict[str, Callable[..., np.ndarray]] = {
    "none": _none,
    "linear": _linear,
    "tanh": _tanh,
    "erf": _erf,
    "table": _table,
}


def distance_from_edge(width: int) -> tuple[np.ndarray, np.ndarray]:
    """Distances of the rows ``0 .. width-1`` from the bottom and top edges.

    Parameters
    ----------
    width : int
        Number of rows across the ribbon.

    Returns
    -------
    bottom, top : (width,) ndarray
        ``bottom[y] = y`` and ``top[y] = width - 1 - y``, in lattice constants.
    """
    rows = np.arange(width, dtype=float)
    return rows, (width - 1) - rows


def edge_potential(
    width: int,
    profile: str = "none",
    *,
    ramp: float = 0.0,
    height: float = 0.0,
    table: Sequence[Sequence[float]] = (),
) -> np.ndarray:
    """Confining potential of every row of a ribbon, applied at both edges.

    Parameters
    ----------
    width : int
        Number of rows ``W`` across the ribbon.
    profile : str
        A key of ``EDGE_PROFILES``.
    ramp : float
        Ramp width ``w`` in lattice constants.
    height : float
        Potential ``V0`` at the outermost row, in units of ``t``.
    table : sequence of (distance, potential) pairs
        For ``profile="table"``: distances in lattice constants, potentials in
        units of ``t``.

    Returns
    -------
    potential : (width,) ndarray
        Potential of row ``y`` in units of ``t``.

    Raises
    ------
    ValueError
        If ``profile`` is not a registered profile.
    """
    try:
        shape = EDGE_PROFILES[profile]
    except KeyError:
        raise ValueError(
            f"edge profile {profile!r} is unknown; expected one of {sorted(EDGE_PROFILES)}"
        ) from None
    bottom, top = distance_from_edge(width)
    return shape(np.minimum(bottom, top), width=float(ramp), height=float(height), table=table)
