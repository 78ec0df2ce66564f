"""kwant builders for the square-lattice Hofstadter model (model description).

The builders return ordinary :class:`kwant.Builder` objects, so they can be
plotted, modified or handed to any kwant routine. Physical parameters are not
baked in: they are passed at evaluation time as kwant's ``params`` dictionary
with the keys below (see :func:`model_params`).

``t``
    Nearest-neighbour hopping, the energy unit.
``phi``
    Flux per plaquette in flux quanta ``h/e``.
``zeeman``
    Zeeman splitting ``Delta`` (units of ``t``): spin up is shifted by
    ``-Delta/2``, spin down by ``+Delta/2``.
``onsite``
    Uniform on-site energy (units of ``t``).
``rashba``
    Rashba coupling ``lambda_R`` (units of ``t``), only for builders made
    with ``rashba=True``: the hopping from ``j`` to ``i`` gains
    ``i lambda_R (sigma_x d_y - sigma_y d_x) exp(i theta_ij)`` with ``d`` the
    unit vector from ``j`` to ``i``. It mixes the spins: ``S_z`` is no longer
    conserved.

Conventions
-----------
Sites sit at integer ``(x, y)`` with lattice constant ``a = 1``. Hopping from
site ``j`` to site ``i`` has the matrix element ``H[i, j] = -t exp(i theta_ij)``
with the Peierls phase of the Landau gauge ``A = (-B y, 0)``::

    theta = -2 pi phi y_j (x_i - x_j)

so hoppings along ``y`` are real and the phases depend on ``y`` only; the gauge
is therefore compatible with translations along ``x`` (the ribbon direction).
The phases around every plaquette traversed counter-clockwise add up to
``+2 pi phi``. Positive ``phi`` is the reference field direction; a negative
``phi`` reverses the field. With two orbitals per site the first is spin up
and the second spin down (``S_z = +1/2, -1/2``).

References
----------
.. [1] D. R. Hofstadter, "Energy levels and wave functions of Bloch electrons
   in rational and irrational magnetic fields", Phys. Rev. B 14, 2239 (1976).
.. [2] R. Peierls, "Zur Theorie des Diamagnetismus von Leitungselektronen",
   Z. Phys. 80, 763 (1933).
.. [3] Yu. A. Bychkov and E. I. Rashba, "Oscillatory effects and the magnetic
   susceptibility of carriers in inversion layers", J. Phys. C 17, 6039
   (1984) (the Rashba term).
"""

from __future__ import annotations

from fractions import Fraction

import kwant
import numpy as np

__all__ = [
    "square_lattice",
    "ribbon_builder",
    "bulk_builder",
    "model_params",
    "landau_hopping",
    "rashba_matrix",
]

_PAULI_Z = np.diag([1.0, -1.0])


def square_lattice(*, spin: bool = True) -> kwant.lattice.Monatomic:
    """Square lattice with lattice constant 1 and 2 orbitals (spin) or 1."""
    return kwant.lattice.square(a=1, norbs=2 if spin else 1, name="sq")


def model_params(
    *, t: float = 1.0, phi: float | Fraction = 0.0, zeeman: float = 0.0, onsite: float = 0.0,
    rashba: float | None = None,
) -> dict:
    """The kwant ``params`` dictionary of the builders in this module.

    Parameters
    ----------
    t : float
        Hopping, the energy unit.
    phi : float or Fraction
        Flux per plaquette in flux quanta.
    zeeman : float
        Zeeman splitting in units of ``t``.
    onsite : float
        Uniform on-site energy in units of ``t``.
    rashba : float, optional
        Rashba coupling in units of ``t``, for builders made with
        ``rashba=True`` (left out of the dictionary when None).
    """
    params = dict(t=float(t), phi=float(phi), zeeman=float(zeeman), onsite=float(onsite))
    if rashba is not None:
        params["rashba"] = float(rashba)
    return params


def rashba_matrix(d) -> np.ndarray:
    """``i (sigma_x d_y - sigma_y d_x)`` for the unit bond vector ``d`` (from site j to site i).

    The Rashba hopping is ``lambda_R`` times this matrix (times the Peierls
    factor); Kane and Mele, Phys. Rev. Lett. 95, 146802 (2005), Eq. (1).
    """
    dx, dy = d
    return 1j * np.array([[0, dy + 1j * dx], [dy - 1j * dx, 0]])


def landau_hopping(spin: bool, rashba: bool = False):
    """Hopping value function ``-t exp(-2 pi i phi y_j (x_i - x_j))`` (Landau gauge ``A = (-B y, 0)``).

    ``phi`` is the flux per plaquette in ``h/e``; with spin the value is
    ``t`` times the 2 x 2 identity. With ``rashba`` the function takes the
    parameter ``rashba`` and adds the Rashba term of the module notes.
    """
    unit = np.eye(2) if spin else 1.0
    if rashba:
        if not spin:
            raise ValueError("the Rashba term mixes the spins; build with spin=True")

        def rashba_hopping(site_i, site_j, t, phi, rashba):
            (xi, yi), (xj, yj) = site_i.pos, site_j.pos
            soc = rashba * rashba_matrix((xi - xj, yi - yj))  # unit bonds on the square lattice
            return np.exp(-2j * np.pi * phi * yj * (xi - xj)) * (-t * unit + soc)

        return rashba_hopping

    def hopping(site_i, site_j, t, phi):
        (xi, _), (xj, yj) = site_i.pos, site_j.pos
        return -t * np.exp(-2j * np.pi * phi * yj * (xi - xj)) * unit

    return hopping


def _onsite(spin: bool, potential: np.ndarray | None):
    def energy(site, onsite, zeeman):
        value = onsite
        if potential is not None:
            value = value + potential[int(round(site.pos[1]))]
        if spin:
            return value * np.eye(2) - 0.5 * zeeman * _PAULI_Z
        return value

    return energy


def ribbon_builder(
    width: int, *, spin: bool = True, potential: np.ndarray | None = None, rashba: bool = False
) -> kwant.Builder:
    """Ribbon of ``width`` rows, periodic along ``x`` with period 1.

    Parameters
    ----------
    width : int
        Number of rows ``W`` across the ribbon (``y = 0 .. W-1``).
    spin : bool
        Two orbitals per site (spin up, spin down) if True.
    potential : (width,) array_like, optional
        Edge potential of every row in units of ``t`` (see
        :func:`topoedge.models.profiles.edge_potential`); none if omitted.

    Returns
    -------
    kwant.Builder
        With ``TranslationalSymmetry((1, 0))``; its value functions take the
        parameters of :func:`model_params`.

    Raises
    ------
    ValueError
        If ``width < 1`` or ``potential`` has the wrong length.
    """
    width = int(width)
    if width < 1:
        raise ValueError(f"ribbon width must be at least 1 row, got {width}")
    if potential is not None:
        potential = np.asarray(potential, dtype=float)
        if potential.shape != (width,):
            raise ValueError(
                f"potential must have one value per row, shape ({width},); got {potential.shape}"
            )
    lat = square_lattice(spin=spin)
    syst = kwant.Builder(kwant.TranslationalSymmetry((1, 0)))
    syst[(lat(0, y) for y in range(width))] = _onsite(spin, potential)
    syst[lat.neighbors()] = landau_hopping(spin, rashba)
    return syst


def bulk_builder(phi: Fraction, *, spin: bool = True, rashba: bool = False) -> kwant.Builder:
    """Infinite plane with 2D translation symmetry over the magnetic unit cell.

    Parameters
    ----------
    phi : Fraction
        Flux per plaquette ``p/q``; the magnetic unit cell is ``1 x q`` sites
        (periods ``(1, 0)`` and ``(0, q)``), which the Landau gauge of this
        module leaves invariant. The value of ``phi`` passed later in
        ``params`` must have a denominator dividing ``q``.
    spin : bool
        Two orbitals per site if True.
    rashba : bool
        Include the Rashba term (needs ``spin``).

    Returns
    -------
    kwant.Builder
        With ``TranslationalSymmetry((1, 0), (0, q))``, ``q`` sites per cell.
    """
    q = Fraction(phi).denominator
    lat = square_lattice(spin=spin)
    syst = kwant.Builder(kwant.TranslationalSymmetry((1, 0), (0, q)))
    syst[(lat(0, y) for y in range(q))] = _onsite(spin, None)
    syst[lat.neighbors()] = landau_hopping(spin, rashba)
    return syst
