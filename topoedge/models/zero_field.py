"""Zero-field Chern insulators as kwant builders (model description).

Like :mod:`topoedge.models.square`, these return plain :class:`kwant.Builder`
objects with two translation symmetries whose parameters are passed at
evaluation time as kwant ``params``; :func:`topoedge.solvers.chern.builder_chern`
(or :class:`topoedge.systems.bloch.BlochHamiltonian` and
:func:`topoedge.solvers.chern.chern_numbers`) computes their Chern numbers, exactly
as for a user's own builder.

``qwz_builder`` (square lattice, two orbitals per site; params ``m``)::

    H(k) = sin kx sigma_x + sin ky sigma_y + (m + cos kx + cos ky) sigma_z

``haldane_builder`` (honeycomb lattice, sublattices A and B; params ``t1``,
``t2``, ``t2_phase`` = phi, ``M``; ``phi`` is not a flux here)::

    H(k) = 2 t2 cos(phi) sum_i cos(k.b_i)
           + t1 sum_i [cos(k.a_i) sigma_x + sin(k.a_i) sigma_y]
           + [M - 2 t2 sin(phi) sum_i sin(k.b_i)] sigma_z

with ``a_i`` the three vectors from an A site to its B neighbours (at 90,
210 and 330 degrees, length 1) and ``b_1 = a_2 - a_3``, ``b_2 = a_3 - a_1``,
``b_3 = a_1 - a_2``; the next-nearest hopping is ``t2 exp(+i phi)`` from an
A site to the A site at ``+b_i`` (and ``t2 exp(-i phi)`` for B), the
staggered mass is ``+M`` on A and ``-M`` on B.

Bloch convention: :class:`topoedge.systems.bloch.BlochHamiltonian` (that of
``kwant.wraparound``) sums ``<a, 0| H |b, R> exp(+i k.R)``; the formulas above
are written with the opposite Fourier sign, so the builders' ``H(k)`` has the
spectrum of the formula at ``-k`` (checked pointwise in the tests). The map
``k -> -k`` keeps the orientation of the 2D Brillouin zone, so every Chern
number is the formula's.

References
----------
.. [1] X.-L. Qi, Y.-S. Wu and S.-C. Zhang, "Topological quantization of the
   spin Hall effect in two-dimensional paramagnetic semiconductors",
   Phys. Rev. B 74, 085308 (2006).
.. [2] F. D. M. Haldane, "Model for a quantum Hall effect without Landau
   levels: condensed-matter realization of the 'parity anomaly'",
   Phys. Rev. Lett. 61, 2015 (1988).
"""

from __future__ import annotations

import cmath

import kwant
import numpy as np

__all__ = ["qwz_builder", "haldane_builder", "honeycomb_vectors", "qwz_ribbon_builder",
           "haldane_ribbon_builder"]

_SX = np.array([[0, 1], [1, 0]], dtype=complex)
_SY = np.array([[0, -1j], [1j, 0]])
_SZ = np.diag([1.0, -1.0]).astype(complex)


def qwz_builder() -> kwant.Builder:
    """Two-band Qi-Wu-Zhang model on the square lattice (``a = 1``), params ``m``.

    Hoppings ``(sigma_z - i sigma_x) / 2`` along +x and ``(sigma_z - i
    sigma_y) / 2`` along +y, on-site ``m sigma_z``: the Bloch Hamiltonian of
    the module notes. The gap closes at ``m = 0, +-2``.
    """
    lat = kwant.lattice.square(1, norbs=2)
    syst = kwant.Builder(kwant.TranslationalSymmetry((1, 0), (0, 1)))

    def onsite(site, m):
        return m * _SZ

    syst[lat(0, 0)] = onsite
    # <x + 1| H |x> = (sigma_z - i sigma_x) / 2 gives cos k sigma_z + sin k sigma_x.
    syst[kwant.builder.HoppingKind((1, 0), lat, lat)] = (_SZ - 1j * _SX) / 2
    syst[kwant.builder.HoppingKind((0, 1), lat, lat)] = (_SZ - 1j * _SY) / 2
    return syst


def honeycomb_vectors() -> tuple[np.ndarray, np.ndarray]:
    """``(a, b)``: the A -> B neighbour vectors (3, 2) and the next-nearest ``b_i`` (3, 2)."""
    angles = np.deg2rad([90.0, 210.0, 330.0])
    a = np.stack([np.cos(angles), np.sin(angles)], axis=1)
    b = np.stack([a[1] - a[2], a[2] - a[0], a[0] - a[1]])
    return a, b


def haldane_builder() -> kwant.Builder:
    """Haldane model on the honeycomb lattice (nearest-neighbour distance 1).

    Params ``t1`` (nearest-neighbour hopping), ``t2`` and ``t2_phase`` (phi of the
    complex next-nearest hopping ``t2 exp(i phi)``), ``M`` (staggered mass):
    the Bloch Hamiltonian of the module notes, up to the choice of unit cell.
    Chern number of the lower band +-1 for ``|M| < 3 sqrt(3) |t2 sin(phi)|``,
    0 outside.
    """
    a, b = honeycomb_vectors()
    # Primitive vectors b_1, b_2 (length sqrt 3); A at the origin, B at a_1.
    lat = kwant.lattice.general([tuple(b[0]), tuple(b[1])], [(0.0, 0.0), tuple(a[0])], norbs=1)
    sub_a, sub_b = lat.sublattices
    syst = kwant.Builder(kwant.TranslationalSymmetry(tuple(b[0]), tuple(b[1])))

    def mass_a(site, M):
        return M

    def mass_b(site, M):
        return -M

    syst[sub_a(0, 0)] = mass_a
    syst[sub_b(0, 0)] = mass_b

    def nearest(site1, site2, t1):
        return t1

    for vec in a:
        # B at r_A + a_i, in lattice coordinates of sub_b relative to sub_a(0, 0).
        tag = np.linalg.solve(np.array([b[0], b[1]]).T, vec - a[0])
        syst[kwant.builder.HoppingKind(tuple(int(round(x)) for x in tag), sub_b, sub_a)] = nearest

    def forward(site1, site2, t2, t2_phase):  # <r + b_i| H |r> on A
        return t2 * cmath.exp(1j * t2_phase)

    def backward(site1, site2, t2, t2_phase):  # <r + b_i| H |r> on B
        return t2 * cmath.exp(-1j * t2_phase)

    for vec in b:
        tag = tuple(int(round(x)) for x in np.linalg.solve(np.array([b[0], b[1]]).T, vec))
        syst[kwant.builder.HoppingKind(tag, sub_a, sub_a)] = forward
        syst[kwant.builder.HoppingKind(tag, sub_b, sub_b)] = backward
    return syst


def _with_potential(ribbon: kwant.Builder, onsite_of, potential) -> kwant.Builder:
    """Replace every on-site value by ``onsite_of(site, V)``, ``V = potential(d)``.

    ``onsite_of(site, v)`` returns the model's on-site value function of that
    site with ``v`` added; ``d`` is the distance (units of the model's length)
    of the site from the nearer edge along ``y``.
    """
    if potential is None:
        return ribbon
    ys = [s.pos[1] for s in ribbon.sites()]
    lo, hi = min(ys), max(ys)
    for site in list(ribbon.sites()):
        d = min(site.pos[1] - lo, hi - site.pos[1])
        v = float(potential(np.asarray([max(d, 0.0)]))[0])
        ribbon[site] = onsite_of(site, v)
    return ribbon


def qwz_ribbon_builder(width: int, *, potential=None) -> kwant.Builder:
    """Qi-Wu-Zhang ribbon of ``width`` rows along ``x`` (period 1), params ``m``.

    Parameters
    ----------
    width : int
        Rows ``y = 0 .. width - 1`` (``>= 2``).
    potential : callable, optional
        ``potential(d)``: edge potential (energy unit of the model) of a row
        at the distance ``d`` from the nearer edge, added to both orbitals.
    """
    if int(width) < 2:
        raise ValueError(f"a ribbon needs at least 2 rows, got {width}")
    ribbon = kwant.Builder(kwant.TranslationalSymmetry((1, 0)))
    ribbon.fill(qwz_builder(), lambda site: 0 <= site.pos[1] < int(width), (0, 0))

    def onsite_of(site, v):
        def onsite(site, m):
            return m * _SZ + v * np.eye(2)
        return onsite

    return _with_potential(ribbon, onsite_of, potential)


def haldane_ribbon_builder(width: int, *, potential=None) -> kwant.Builder:
    """Haldane ribbon with zigzag edges, ``width`` zigzag chains, params ``t1``, ``t2``, ``t2_phase``, ``M``.

    The period is ``-b_1 = (sqrt 3, 0)``, so positions across the ribbon are
    ``y`` as for every other ribbon of the project. The chains hold B at ``y = 3 j / 2 + 1`` and A at ``y = 3 j / 2 + 3 / 2``
    (``j = 0 .. width - 1``), the zigzag termination of
    :func:`topoedge.models.honeycomb.honeycomb_ribbon_builder`.

    Parameters
    ----------
    width : int
        Zigzag chains (``>= 2``).
    potential : callable, optional
        ``potential(d)``: edge potential (energy unit of the model) of a site
        at the distance ``d`` from the nearer edge.
    """
    width = int(width)
    if width < 2:
        raise ValueError(f"a ribbon needs at least 2 zigzag chains, got {width}")
    _, b = honeycomb_vectors()
    ribbon = kwant.Builder(kwant.TranslationalSymmetry(tuple(-b[0])))
    ribbon.fill(haldane_builder(), lambda site: 0.75 < site.pos[1] < 1.5 * width + 0.25, (0.0, 1.0))

    def onsite_of(site, v):
        y = site.pos[1] / 1.5  # A sites at y = 3 n / 2, B sites at 3 n / 2 + 1
        sign = 1.0 if abs(y - round(y)) < 1e-9 else -1.0

        def onsite(site, M):
            return sign * M + v
        return onsite

    return _with_potential(ribbon, onsite_of, potential)
