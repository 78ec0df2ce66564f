"""Six-terminal Hall bar geometry as a kwant builder (model description; its resistances: :mod:`topoedge.solvers.transport`).

The Hall bar is a ``length x width`` rectangle of the square lattice (sites
``x = 0 .. length-1``, ``y = 0 .. width-1``, lattice constant ``a = 1``) with
six semi-infinite leads::

            1 (top left)    2 (top right)
             |  |            |  |
      0  ====+--+------------+--+====  3
   (source)  |                  |   (drain)
      ====  -+--+------------+--+-  ====
             |  |            |  |
            5 (bottom left) 4 (bottom right)

Lead numbering: 0 source (left, along ``-x``), 1 and 2 the top probes from
left to right (along ``+y``), 3 drain (right, along ``+x``), 4 and 5 the
bottom probes from right to left (along ``-y``); i.e. clockwise from the
source. The source and drain are ``lead_width`` rows wide, centred on the
bar; the probes are ``probe_width`` columns wide and start at the columns
``probe_positions``.

Magnetic field. The leads carry the same uniform field as the bar, with the
counter-clockwise plaquette phase ``+2 pi phi`` of :mod:`topoedge.models.square`
(``H[i, j] = -t exp(i theta_ij)``), in one of two gauges:

- ``gauge="columns"`` (default): the Landau gauge of the builders,
  ``theta_ij = -2 pi phi y_j (x_i - x_j)``, which is translation invariant
  along ``x`` (source and drain leads), transformed on the columns of the
  voltage probes (in the bar and in the probe leads) by
  ``psi -> exp(i lambda) psi`` with ``lambda(x, y) = 2 pi phi x y``. There the
  phases become ``0`` along ``x`` and ``2 pi phi x`` along ``+y``,
  translation invariant along ``y`` as the probe leads need. A gauge
  transformation changes no observable; the phases cost nothing to evaluate.
- ``gauge="kwant"``: the phases of :class:`kwant.physics.magnetic_gauge`,
  which finds a lead-compatible gauge for any geometry but whose set-up time
  grows quickly with the bar (11 s for 160 x 80 sites, 240 s for 320 x 160
  here). kwant's gauge gives a loop enclosing the field value ``B`` times
  its area the phase ``exp(i pi B area)`` with the opposite orientation to
  ours, so :func:`hallbar_params` passes ``B = -2 phi``. The tests use it as
  an outside check of the ``columns`` gauge (same conductance matrices).

Parameters of the value functions (kwant ``params``, see
:func:`hallbar_params`): ``t`` (hopping, the energy unit), ``phi`` (flux per
plaquette in ``h/e``), ``zeeman`` (splitting in units of ``t``; spin up is
shifted by ``-zeeman/2``), ``onsite`` (uniform energy, ``t``), ``disorder``
(Anderson disorder strength ``W_dis`` in ``t``: every site of the scattering
region, not the leads, gets ``W_dis * u`` with ``u`` uniform in
``[-1/2, 1/2)``, spin-independent) and ``seed`` (seed of the
:func:`numpy.random.default_rng` generator drawing ``u``).

References
----------
.. [1] M. Buttiker, "Four-terminal phase-coherent conductance", Phys. Rev.
   Lett. 57, 1761 (1986).
.. [2] M. Buttiker, "Absence of backscattering in the quantum Hall effect in
   multiprobe conductors", Phys. Rev. B 38, 9375 (1988).
.. [3] D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976).
.. [4] P. W. Anderson, "Absence of diffusion in certain random lattices",
   Phys. Rev. 109, 1492 (1958).

The transport (S-matrices, conductance matrices, resistances, disorder
averages) is :mod:`topoedge.solvers.transport`.
"""

from __future__ import annotations

import warnings
import weakref
from collections.abc import Callable, Sequence
from functools import lru_cache
import kwant
import numpy as np
from scipy.spatial import cKDTree
from .bar_layout import check_flat, validate_probes
from .square import landau_hopping, square_lattice

__all__ = ["LEAD_NAMES", "hallbar_builder", "hallbar_params"]


#: Lead index -> role, clockwise from the source.
LEAD_NAMES = ("source", "top left", "top right", "drain", "bottom right", "bottom left")


_PAULI_Z = np.diag([1.0, -1.0])




# --------------------------------------------------------------------- geometry
def _strips(length, width, lead_rows, probe_cols):
    """Membership test of the infinite shape: bar plus all lead strips."""
    y0, y1 = lead_rows

    def inside(x, y):
        bar = (x >= 0) & (x < length) & (y >= 0) & (y < width)
        ends = ((x < 0) | (x >= length)) & (y >= y0) & (y < y1)
        probes = np.zeros_like(bar)
        for c0, c1 in probe_cols:
            probes |= ((y < 0) | (y >= width)) & (x >= c0) & (x < c1)
        return bar | ends | probes

    return inside


def _bar_distances(length, width, lead_rows, probe_cols):
    """Distance of every bar site to the nearest boundary row, in ``a``.

    The boundary is the edge of the infinite shape (bar plus lead strips):
    the distance is the Euclidean distance to the nearest lattice point
    outside the shape minus one, so the outermost row has distance 0, as in
    :mod:`topoedge.models.profiles`. Lead interfaces are not boundaries.
    """
    inside = _strips(length, width, lead_rows, probe_cols)
    m = width + 2
    gx, gy = np.meshgrid(np.arange(-m, length + m), np.arange(-m, width + m), indexing="ij")
    walls = np.column_stack([gx[~inside(gx, gy)], gy[~inside(gx, gy)]])
    bx, by = np.meshgrid(np.arange(length), np.arange(width), indexing="ij")
    dist, _ = cKDTree(walls).query(np.column_stack([bx.ravel(), by.ravel()]))
    return (dist - 1.0).reshape(length, width)


# --------------------------------------------------------------------- builder
def hallbar_builder(
    length: int,
    width: int,
    *,
    lead_width: int,
    probe_positions: Sequence[int],
    spin: bool = True,
    potential: Callable[[np.ndarray], np.ndarray] | None = None,
    probe_width: int | None = None,
    gauge: str = "columns",
) -> kwant.Builder:
    """Six-terminal Hall bar of the Hofstadter model with its leads attached.

    Parameters
    ----------
    length, width : int
        Size of the rectangle in sites along ``x`` and ``y``.
    lead_width : int
        Rows of the source (lead 0) and drain (lead 3), centred on the bar;
        ``lead_width = width`` spans the full width.
    probe_positions : (2,) sequence of int
        First column ``x`` of the left and right voltage probe; the top
        (leads 1, 2) and bottom (leads 5, 4) probes sit at the same columns.
    spin : bool
        Two orbitals per site (spin up, spin down) if True.
    potential : callable, optional
        Edge potential ``f(d)`` in units of ``t`` of the distance ``d`` (in
        lattice constants, ``d = 0`` on the outermost row; an ndarray is
        passed) of a site to the nearest boundary of the bar and its leads,
        e.g. ``lambda d: topoedge.models.profiles.EDGE_PROFILES["linear"](d,
        width=3, height=1, table=())``. In the leads ``d`` is the distance to
        the lead's own side walls, so the leads are uniform along their axis.
    probe_width : int, optional
        Columns of each voltage probe; ``max(1, lead_width // 4)`` if omitted.
    gauge : {"columns", "kwant"}
        Vector potential of the field (module notes): the project's Landau
        gauge transformed on the probe columns (the probes must then leave
        the first and last column of the bar free), or
        :class:`kwant.physics.magnetic_gauge`.

    Returns
    -------
    kwant.Builder
        The scattering region with leads ``0 .. 5`` attached (numbering in the
        module docstring). Hoppings take the parameters ``t`` and ``phi``
        (with ``gauge="kwant"`` instead ``peierls`` and ``peierls_lead{i}``
        in lead ``i``, filled in by :func:`hallbar_params`); on-site terms
        take ``onsite``, ``zeeman``, ``disorder`` and ``seed``.

    Raises
    ------
    ValueError
        If a size is below 1, a lead or probe is wider than the bar, the
        probes overlap or leave the bar, or the bar or a lead is narrower
        than the edge potential.

    References
    ----------
    .. [1] M. Buttiker, Phys. Rev. Lett. 57, 1761 (1986) (multi-terminal
       Hall bar).
    """
    length, width, lead_width = int(length), int(width), int(lead_width)
    if length < 1 or width < 1 or lead_width < 1:
        raise ValueError(
            f"length, width and lead_width must be at least 1 site, got {length}, {width}, {lead_width}"
        )
    if lead_width > width:
        raise ValueError(
            f"lead_width = {lead_width} sites is wider than the bar (width = {width} sites); "
            f"use lead_width <= width"
        )
    pw = max(1, lead_width // 4) if probe_width is None else int(probe_width)
    if pw < 1:
        raise ValueError(f"probe_width must be at least 1 site, got {pw}")
    if len(probe_positions) != 2:
        raise ValueError(f"probe_positions needs two columns (left, right probe), got {probe_positions!r}")
    xa, xb = (int(x) for x in probe_positions)
    validate_probes(length, pw, (xa, xb), gauge=gauge)
    if potential is not None:
        check_flat(potential, width, "bar")
        check_flat(potential, lead_width, "source/drain lead")
        check_flat(potential, pw, "voltage probe")

    y0 = (width - lead_width) // 2
    lead_rows = (y0, y0 + lead_width)
    probe_cols = [(xa, xa + pw), (xb, xb + pw)]
    v_bar = None
    if potential is not None:
        dist = _bar_distances(length, width, lead_rows, probe_cols)
        v_bar = np.asarray(potential(dist), dtype=float).reshape(length, width)

    lat = square_lattice(spin=spin)
    unit = np.eye(2) if spin else 1.0

    @lru_cache(maxsize=8)
    def _draws(seed):
        return np.random.default_rng(seed).uniform(-0.5, 0.5, size=(length, width))

    def _spin_part(value, zeeman):
        if spin:
            return value * np.eye(2) - 0.5 * zeeman * _PAULI_Z
        return value

    def onsite_bar(site, onsite, zeeman, disorder, seed):
        x, y = (int(round(c)) for c in site.pos)
        value = onsite
        if 0 <= x < length and 0 <= y < width:
            if v_bar is not None:
                value = value + v_bar[x, y]
            if disorder:
                value = value + disorder * _draws(int(seed))[x, y]
        return _spin_part(value, zeeman)

    def hop_bar(site_a, site_b, t, peierls):
        return -t * peierls(site_a, site_b) * unit

    probe_columns = np.zeros(length, dtype=bool)
    probe_columns[xa:xa + pw] = probe_columns[xb:xb + pw] = True

    def _lambda(x, y, phi):
        """Gauge function: 2 pi phi x y on the probe columns, 0 elsewhere."""
        return 2 * np.pi * phi * x * y if 0 <= x < length and probe_columns[x] else 0.0

    hop_landau = landau_hopping(spin)  # the ribbon's gauge, x-independent

    def hop_columns(site_a, site_b, t, phi):
        (xa_, ya_), (xb_, yb_) = (np.rint(s.pos).astype(int) for s in (site_a, site_b))
        gauge = np.exp(1j * (_lambda(xa_, ya_, phi) - _lambda(xb_, yb_, phi)))
        return hop_landau(site_a, site_b, t, phi) * gauge

    # With spin, S_z is conserved: blocks 0 (spin up, -sigma_z = -1) and 1
    # (spin down) let the S-matrix be split per spin.
    law = -np.diag([1.0, -1.0]) if spin else None
    syst = kwant.Builder(conservation_law=law)
    syst[(lat(x, y) for x in range(length) for y in range(width))] = onsite_bar
    syst[lat.neighbors()] = hop_bar if gauge == "kwant" else hop_columns

    def lead(direction, sites, transverse, lo, span, index):
        """One lead; ``transverse(site)`` is the coordinate across it."""
        def onsite_lead(site, onsite, zeeman):
            value = onsite
            if potential is not None:
                d = transverse(site) - lo
                value = value + float(np.asarray(potential(np.array([min(d, span - 1 - d)], float)))[0])
            return _spin_part(value, zeeman)

        builder = kwant.Builder(kwant.TranslationalSymmetry(direction), conservation_law=law)
        builder[sites] = onsite_lead
        if gauge == "columns":
            # Source and drain: Landau gauge (x-independent); probes: the
            # column gauge (y-independent there).
            builder[lat.neighbors()] = hop_landau if direction[1] == 0 else hop_columns
            return builder
        builder[lat.neighbors()] = hop_bar
        # Every lead needs its own phase function: rename the parameter.
        return builder.substituted(peierls=f"peierls_lead{index}")

    rows = [lat(0, y) for y in range(*lead_rows)]

    def cols(c0):
        return [lat(x, 0) for x in range(c0, c0 + pw)]

    ty = lambda s: int(round(s.pos[1]))  # noqa: E731
    tx = lambda s: int(round(s.pos[0]))  # noqa: E731
    leads = [
        ((-1, 0), rows, ty, y0, lead_width),      # 0 source
        ((0, 1), cols(xa), tx, xa, pw),           # 1 top left
        ((0, 1), cols(xb), tx, xb, pw),           # 2 top right
        ((1, 0), rows, ty, y0, lead_width),       # 3 drain
        ((0, -1), cols(xb), tx, xb, pw),          # 4 bottom right
        ((0, -1), cols(xa), tx, xa, pw),          # 5 bottom left
    ]
    for index, (direction, sites, transverse, lo, span) in enumerate(leads):
        syst.attach_lead(lead(direction, sites, transverse, lo, span, index))
    return syst


# --------------------------------------------------------------------- params
_GAUGES: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def _gauge(fsyst):
    """The (cached) ``magnetic_gauge`` of a finalized Hall bar."""
    try:
        return _GAUGES[fsyst]
    except (KeyError, TypeError):
        pass
    gauge = kwant.physics.magnetic_gauge(fsyst)
    try:
        _GAUGES[fsyst] = gauge
    except TypeError:
        pass
    return gauge


def hallbar_params(fsyst, params: dict) -> dict:
    """Complete ``params`` for a finalized Hall bar with the Peierls phases.

    Parameters
    ----------
    fsyst : kwant.system.FiniteSystem
        ``hallbar_builder(...).finalized()``.
    params : dict
        ``phi`` (flux per plaquette in ``h/e``, required), ``t`` (default
        1), ``onsite``, ``zeeman``, ``disorder`` (units of ``t``, default 0)
        and ``seed`` (default 0).

    Returns
    -------
    dict
        ``params`` with the defaults filled in; for a bar built with
        ``gauge="kwant"`` also ``peierls`` and ``peierls_lead0 ..
        peierls_lead5`` from :class:`kwant.physics.magnetic_gauge` with the
        uniform field flux ``phi`` per plaquette (``h/e``) in the bar and
        every lead (``phi`` is then removed).

    Raises
    ------
    ValueError
        If ``phi`` is missing, or ``fsyst`` is not finalized.

    Notes
    -----
    kwant's gauge gives the hopping ``(a, b)`` (matrix element ``H[a, b]``)
    the factor ``peierls(a, b)``; the phases around a counter-clockwise
    plaquette sum to ``+2 pi phi``, the convention of
    :mod:`topoedge.models.square` (checked in the tests).

    References
    ----------
    .. [1] R. Peierls, Z. Phys. 80, 763 (1933).
    """
    if isinstance(fsyst, kwant.Builder):
        raise ValueError("hallbar_params needs a finalized system: call hallbar_builder(...).finalized() first")
    if "phi" not in params:
        raise ValueError("params must contain 'phi', the flux per plaquette in flux quanta h/e")
    full = dict(t=1.0, onsite=0.0, zeeman=0.0, disorder=0.0, seed=0)
    full.update(params)
    if "peierls" not in fsyst.parameters:  # the column gauge: phases from phi itself
        full["phi"] = float(full["phi"])
        return full
    phi = float(full.pop("phi"))
    # kwant's gauge gives a loop the phase exp(i pi Phi) for the field Phi in
    # its units, and the counter-clockwise loop of H[i, j] factors picks up
    # -pi Phi: the flux phi per plaquette (in h/e, phase +2 pi phi) is the
    # field -2 phi in kwant's units (checked in tests/test_hallbar.py).
    field = -2.0 * phi
    with warnings.catch_warnings():
        # kwant 1.5 calls np.cross on 2D vectors, deprecated in NumPy 2 (harmless here).
        warnings.filterwarnings("ignore", "Arrays of 2-dimensional vectors", DeprecationWarning)
        phases = _gauge(fsyst)(field, *([field] * len(fsyst.leads)))
    full["peierls"] = phases[0]
    for i, phase in enumerate(phases[1:]):
        full[f"peierls_lead{i}"] = phase
    return full


