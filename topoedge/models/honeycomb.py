"""kwant builders for the honeycomb lattice in a magnetic field (model description).

Like :mod:`topoedge.models.square`, the functions return plain
:class:`kwant.Builder` objects whose physical parameters are passed at
evaluation time as kwant ``params`` (see :func:`honeycomb_params`):

``t``
    Nearest-neighbour hopping, the energy unit (``H_ij = -t`` without field).
``phi``
    Flux per hexagon in flux quanta ``h/e``.
``zeeman``
    Zeeman splitting ``Delta`` (units of ``t``): spin up at ``-Delta/2``,
    spin down at ``+Delta/2``.
``onsite``
    Uniform on-site energy (units of ``t``).
``staggered``
    Sublattice potential ``M`` (units of ``t``): ``+M`` on A, ``-M`` on B.
``rashba``
    Rashba coupling ``lambda_R`` (units of ``t``; only in builders made with
    ``rashba=True``): the nearest-neighbour hopping from ``j`` to ``i`` gains
    ``i lambda_R (sigma_x d_y - sigma_y d_x)`` with ``d`` the unit vector
    from ``j`` to ``i``. It mixes the spins, so ``S_z`` is no longer
    conserved.

Geometry
--------
Lengths are in units of the carbon-carbon distance ``a_cc = 1``; a hexagon
has the area ``3 sqrt(3) / 2``. Two orientations of the same lattice are
built, so that ribbons always run along ``x``:

``zigzag``
    Bonds at 90, 210 and 330 degrees (from A to B), primitive vectors
    ``(sqrt 3, 0)`` and ``(sqrt 3 / 2, 3 / 2)``; a ribbon along ``x`` (period
    ``sqrt 3``) has zigzag edges. Its width is the number ``N`` of zigzag
    chains (``2 N`` sites per period; A sites of the outermost chain at the
    top edge, B sites at the bottom edge).
``armchair``
    Bonds at 0, 120 and 240 degrees, primitive vectors ``(0, sqrt 3)`` and
    ``(3 / 2, sqrt 3 / 2)``; a ribbon along ``x`` (period 3) has armchair
    edges. Its width is the number ``N`` of dimer lines (``2 N`` sites per
    period).

Gauge
-----
Hopping from ``j`` to ``i`` has ``H[i, j] = -t exp(i theta_ij)``. Ribbons use
the Landau gauge ``A = (-B y, 0)`` of the square-lattice builders, integrated
along the straight bond::

    theta_ij = -2 pi (phi / A_hex) (y_i + y_j) / 2 (x_i - x_j)

which depends on ``y`` only and so keeps the translation symmetry along the
ribbon for every flux. The bulk needs a gauge periodic in both directions
with the smallest magnetic cell (``q`` hexagons, ``2 q`` sites for
``phi = p / q``): there the phase sits on one bond family only (the bond
from A at cell ``(m, n)`` to B at ``(m + 1, n - 1)``, at 330 degrees) and
equals ``-2 pi phi n``. In both gauges the phases around every hexagon,
traversed counter-clockwise, add up to ``+2 pi phi`` (tested), so both
describe the same field and the same conventions as the square lattice:
positive ``phi`` is the reference field direction.

With two orbitals per site the first is spin up, the second spin down.

Landau levels at small flux (the continuum limit near the Dirac points)::

    E_n = sign(n) sqrt(2 |n|) hbar v_F / l_B,   hbar v_F = 3 t a_cc / 2,
    l_B^2 = A_hex / (2 pi |phi|)

References
----------
.. [1] P. R. Wallace, "The band theory of graphite", Phys. Rev. 71, 622
   (1947).
.. [2] A. H. Castro Neto, F. Guinea, N. M. R. Peres, K. S. Novoselov and
   A. K. Geim, "The electronic properties of graphene", Rev. Mod. Phys. 81,
   109 (2009).
.. [3] Y. Hatsugai, T. Fukui and H. Aoki, "Topological analysis of the
   quantum Hall effect in graphene: Dirac-Fermi transition across Van Hove
   singularities and edge versus bulk quantum numbers", Phys. Rev. B 74,
   205414 (2006).
.. [4] C. L. Kane and E. J. Mele, "Z2 topological order and the quantum spin
   Hall effect", Phys. Rev. Lett. 95, 146802 (2005) (the Rashba term).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from fractions import Fraction

import kwant
import numpy as np

from .square import rashba_matrix

__all__ = [
    "HEXAGON_AREA", "ORIENTATIONS", "honeycomb_lattice", "honeycomb_params",
    "honeycomb_ribbon_builder", "honeycomb_bulk_builder",
    "dirac_landau_level", "honeycomb_magnetic_length", "honeycomb_hopping_landau", "honeycomb_onsite",
]

#: Area of one hexagon in units of a_cc^2.
HEXAGON_AREA = 3.0 * math.sqrt(3.0) / 2.0
#: Ribbon edge orientations.
ORIENTATIONS = ("zigzag", "armchair")

_S3 = math.sqrt(3.0)
_PAULI_Z = np.diag([1.0, -1.0])


def honeycomb_params(*, t: float = 1.0, phi: float | Fraction = 0.0, zeeman: float = 0.0,
                     onsite: float = 0.0, staggered: float = 0.0, rashba: float = 0.0) -> dict:
    """The kwant ``params`` of the builders in this module (energies in t, flux per hexagon)."""
    return dict(t=float(t), phi=float(phi), zeeman=float(zeeman), onsite=float(onsite),
                staggered=float(staggered), rashba=float(rashba))


def honeycomb_magnetic_length(phi: float) -> float:
    """``l_B = sqrt(A_hex / (2 pi |phi|))`` in a_cc for a flux ``phi`` per hexagon."""
    return math.sqrt(HEXAGON_AREA / (2 * math.pi * abs(float(phi))))


def dirac_landau_level(n: int, phi: float, *, t: float = 1.0) -> float:
    """Continuum Landau level ``E_n = sign(n) sqrt(2|n|) hbar v_F / l_B`` in units of ``t``.

    ``hbar v_F = 3 t a_cc / 2`` and ``l_B`` of :func:`honeycomb_magnetic_length`
    (Castro Neto et al., Rev. Mod. Phys. 81, 109 (2009)).
    """
    return math.copysign(math.sqrt(2 * abs(n)), n) * 1.5 * t / honeycomb_magnetic_length(phi)


def honeycomb_lattice(orientation: str = "zigzag", *, spin: bool = True) -> kwant.lattice.Polyatomic:
    """Honeycomb lattice (``a_cc = 1``) with sublattices A and B.

    Parameters
    ----------
    orientation : {"zigzag", "armchair"}
        Which edge a ribbon along ``x`` has (see the module notes).
    spin : bool
        Two orbitals per site (up, down) if True.
    """
    norbs = 2 if spin else 1
    if orientation == "zigzag":
        return kwant.lattice.general([(_S3, 0.0), (_S3 / 2, 1.5)], [(0.0, 0.0), (0.0, 1.0)],
                                     norbs=norbs, name=["A", "B"])
    if orientation == "armchair":
        return kwant.lattice.general([(0.0, _S3), (1.5, _S3 / 2)], [(0.0, 0.0), (1.0, 0.0)],
                                     norbs=norbs, name=["A", "B"])
    raise ValueError(f"orientation must be one of {ORIENTATIONS}, got {orientation!r}")


def _hopping(spin: bool, rashba: bool, phase: Callable):
    """Hopping value function ``-t exp(i theta) [+ Rashba]`` for a phase rule ``phase(site_i, site_j, phi)``."""
    if rashba and not spin:
        raise ValueError("the Rashba term mixes the spins; build with spin=True")
    unit = np.eye(2) if spin else 1.0
    if rashba:
        def hopping(site_i, site_j, t, phi, rashba):
            d = np.asarray(site_i.pos) - np.asarray(site_j.pos)
            d = d / np.linalg.norm(d)
            return np.exp(1j * phase(site_i, site_j, phi)) * (-t * unit + rashba * rashba_matrix(d))
        return hopping

    def hopping(site_i, site_j, t, phi):
        return -t * np.exp(1j * phase(site_i, site_j, phi)) * unit

    return hopping


def honeycomb_hopping_landau(spin: bool, rashba: bool = False):
    """Hopping value function in the position gauge of the ribbons (see the module notes)."""
    return _hopping(spin, rashba, _landau_phase)


def honeycomb_onsite(spin: bool, sublattice_a):
    """On-site value function (``onsite``, ``zeeman``, ``staggered``: +M on A, -M on B)."""
    return _onsite(spin, None, sublattice_a)


def _landau_phase(site_i, site_j, phi):
    (xi, yi), (xj, yj) = site_i.pos, site_j.pos
    return -2 * math.pi * phi / HEXAGON_AREA * 0.5 * (yi + yj) * (xi - xj)


def _onsite(spin: bool, potential: Callable | None, sublattice_a):
    def energy(site, onsite, zeeman, staggered):
        value = onsite + (staggered if site.family is sublattice_a else -staggered)
        if potential is not None:
            value = value + float(potential(site.pos))
        if spin:
            return value * np.eye(2) - 0.5 * zeeman * _PAULI_Z
        return value

    return energy


def _ribbon_sites(lat, orientation: str, width: int) -> tuple[list, tuple[float, float]]:
    """The sites of one period of a ribbon of ``width`` chains / dimer lines."""
    a, b = lat.sublattices
    if orientation == "zigzag":
        # Chain j (0 .. N-1) holds B(0, j) at y = 3j/2 + 1 and A(0, j + 1) at y = 3j/2 + 3/2.
        sites = [b(0, j) for j in range(width)] + [a(0, j + 1) for j in range(width)]
    else:
        # Dimer line j (0 .. N-1) at y = j sqrt(3)/2: tags (m, n) with 2 m + n = j, n in {0, 1}.
        sites = []
        for j in range(width):
            n = j % 2
            m = (j - n) // 2
            sites += [a(m, n), b(m, n)]
    ys = [s.pos[1] for s in sites]
    return sites, (min(ys), max(ys))


def honeycomb_ribbon_builder(
    width: int, *, orientation: str = "zigzag", spin: bool = True,
    potential: Callable[[np.ndarray], np.ndarray] | None = None, rashba: bool = False,
) -> kwant.Builder:
    """Honeycomb ribbon along ``x`` with zigzag or armchair edges.

    Parameters
    ----------
    width : int
        Number of zigzag chains (zigzag) or dimer lines (armchair), ``>= 2``.
    orientation : {"zigzag", "armchair"}
        Edge termination.
    spin : bool
        Two orbitals per site (up, down) if True.
    potential : callable, optional
        ``potential(d)``: edge potential in units of ``t`` of a site at the
        distance ``d`` (a_cc) from the nearer edge (``d = 0`` on the
        outermost sites); none if omitted.
    rashba : bool
        Include the Rashba term (the builder's hoppings then take the
        ``rashba`` parameter); needs ``spin``.

    Returns
    -------
    kwant.Builder
        With one translation symmetry along ``x`` (period ``sqrt 3`` or 3);
        value functions take the parameters of :func:`honeycomb_params`.

    Raises
    ------
    ValueError
        For ``width < 2``, an unknown orientation, or ``rashba`` without spin.
    """
    width = int(width)
    if width < 2:
        raise ValueError(f"a honeycomb ribbon needs at least 2 chains across, got {width}")
    lat = honeycomb_lattice(orientation, spin=spin)
    period = (_S3, 0.0) if orientation == "zigzag" else (3.0, 0.0)
    sites, (y_lo, y_hi) = _ribbon_sites(lat, orientation, width)

    site_potential = None
    if potential is not None:
        def site_potential(pos):
            d = min(pos[1] - y_lo, y_hi - pos[1])
            return potential(np.asarray([max(d, 0.0)]))[0]

    syst = kwant.Builder(kwant.TranslationalSymmetry(period))
    syst[sites] = _onsite(spin, site_potential, lat.sublattices[0])
    syst[lat.neighbors()] = _hopping(spin, rashba, _landau_phase)
    return syst


def honeycomb_bulk_builder(phi: Fraction, *, spin: bool = True, rashba: bool = False) -> kwant.Builder:
    """Infinite honeycomb plane over the magnetic cell of ``q`` hexagons (``2 q`` sites).

    Parameters
    ----------
    phi : Fraction
        Flux per hexagon ``p/q``: periods ``(sqrt 3, 0)`` and ``q (sqrt 3 / 2,
        3 / 2)``; the ``phi`` passed later in ``params`` must have a
        denominator dividing ``q``.
    spin : bool
        Two orbitals per site if True.
    rashba : bool
        Include the Rashba term (needs ``spin``).

    Returns
    -------
    kwant.Builder
        With two translation symmetries; the phase of the 330-degree bonds is
        the gauge of the module notes.
    """
    q = Fraction(phi).denominator
    lat = honeycomb_lattice("zigzag", spin=spin)
    a, b = lat.sublattices

    def string_phase(site_i, site_j, phi):
        # Only the bond A(m, n) -> B(m + 1, n - 1) carries a phase, -2 pi phi n
        # (n of the A site); its reverse carries the opposite one.
        if site_i.family is b and site_j.family is a and site_i.tag[0] - site_j.tag[0] == 1:
            return -2 * math.pi * phi * site_j.tag[1]
        if site_i.family is a and site_j.family is b and site_j.tag[0] - site_i.tag[0] == 1:
            return 2 * math.pi * phi * site_i.tag[1]
        return 0.0

    period2 = (q * _S3 / 2, 1.5 * q)
    syst = kwant.Builder(kwant.TranslationalSymmetry((_S3, 0.0), period2))
    syst[(s(0, n) for n in range(q) for s in (a, b))] = _onsite(spin, None, a)
    syst[lat.neighbors()] = _hopping(spin, rashba, string_phase)
    return syst
