"""Physical units: a material and a field mapped onto the lattice model.

All constants come from :mod:`scipy.constants` (CODATA). A two-dimensional
electron gas of effective mass ``m* = m_eff m_e`` is discretised on a square
lattice of constant ``a``; the lattice model reproduces the continuum near
its band bottom when the hopping is

    t = hbar^2 / (2 m* a^2),

and a field ``B`` perpendicular to the plane threads ``|phi| = |B| a^2 / (h/e)``
flux quanta through every plaquette.

The field asked for is the field computed
---------------------------------------
The lattice needs a rational flux ``p/q``. Either the lattice constant is
given and the flux is the fraction with the smallest denominator whose field
lies within the relative ``tolerance`` of ``B`` (at most 1 %; refused when no
denominator up to ``q_max`` reaches it), or the lattice constant is chosen
(``lattice_constant_nm=None``, "auto") so that the flux is exactly ``1/q``:
``a = sqrt((h/e) / (q |B|))`` with the smallest ``q >= 57`` (``a <= l_B/3``)
for which the first lattice Landau level above E_F lies within 1 % of its
continuum energy ``hbar omega_c (n + 1/2)`` (leading lattice correction
``(pi^2 t phi^2 / 2)(2 n^2 + 2 n + 1)``). Every scale below (magnetic
length, cyclotron, Zeeman and Coulomb energies, filling factor) is that of
the field asked for; the field of the lattice flux is reported beside it.

Field direction
---------------
One convention for every term: ``B > 0`` points along ``+z``, the carriers
are electrons (charge ``-e``). The Peierls phase of a hop ``j -> i`` is
``-(e/hbar) int_j^i A.dl``; in the Landau gauge ``A = (-B y, 0)`` a hop
``x -> x + 1`` on row ``y`` gains ``+2 pi (B a^2 / (h/e)) y``, so the
counter-clockwise phase of every plaquette is ``-2 pi B a^2 / (h/e)``. The
builders' flux ``phi`` is the counter-clockwise phase over ``2 pi``, hence::

    phi = -B a^2 / (h/e)        (lattice.flux < 0 for B along +z)

The Zeeman term ``H_Z = (1/2) g mu_B B sigma_z`` uses the same ``B``: with
the builders' convention (spin up shifted by ``-Delta/2``)
``Delta = -g mu_B B``, so for ``g < 0`` (GaAs) the spin along ``+z`` (along
B) is the lower one. Electrons in ``B || +z`` then have Chern sums ``C < 0``
(``sigma_xy = C e^2/h = -nu e^2/h``), their bottom-edge modes drift along
``-x`` (``E x B``), and ``R_xy = -1/sigma_xy = +R_K/nu``.

Derived scales (continuum, effective-mass):

- magnetic length ``l_B = sqrt(hbar / (e |B|))``;
- cyclotron energy ``hbar omega_c = hbar e |B| / m*``;
- Zeeman splitting ``|g| mu_B |B|``;
- Coulomb energy ``e^2 / (4 pi eps0 eps_r l_B)``;
- filling factor ``nu = n h / (e |B|)`` for a density ``n``.

References
----------
.. [1] E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA
   recommended values of the fundamental physical constants: 2018",
   Rev. Mod. Phys. 93, 025010 (2021).
.. [2] R. Peierls, Z. Phys. 80, 763 (1933) (the phase of the hopping).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import scipy.constants as const

__all__ = [
    "Derived", "UnitsError", "VON_KLITZING", "derive", "hopping_mev", "flux_quanta", "magnetic_length_nm",
    "cyclotron_mev", "zeeman_mev", "coulomb_mev", "filling_factor", "simplest_fraction",
    "lattice_level_error", "auto_denominator", "MAX_TOLERANCE", "AUTO_MIN_Q",
]

_MEV = 1e-3 * const.e  # joule per meV

#: Von Klitzing constant h/e^2 in ohm (exact in the SI since 2019; CODATA).
VON_KLITZING = const.h / const.e**2


class UnitsError(ValueError):
    """Physical inputs that do not describe a usable lattice model."""


def hopping_mev(effective_mass: float, lattice_constant_nm: float) -> float:
    """Hopping ``t = hbar^2 / (2 m* a^2)`` in meV (``m*`` in electron masses, ``a`` in nm)."""
    a = lattice_constant_nm * 1e-9
    return const.hbar**2 / (2 * effective_mass * const.m_e * a**2) / _MEV


def flux_quanta(b_tesla: float, lattice_constant_nm: float) -> float:
    """Flux per plaquette ``B a^2 / (h/e)`` in flux quanta."""
    return b_tesla * (lattice_constant_nm * 1e-9) ** 2 / (const.h / const.e)


def magnetic_length_nm(b_tesla: float) -> float:
    """Magnetic length ``sqrt(hbar / (e B))`` in nm."""
    return math.sqrt(const.hbar / (const.e * abs(b_tesla))) * 1e9


def cyclotron_mev(effective_mass: float, b_tesla: float) -> float:
    """Cyclotron energy ``hbar e B / m*`` in meV."""
    return const.hbar * const.e * abs(b_tesla) / (effective_mass * const.m_e) / _MEV


def zeeman_mev(g_factor: float, b_tesla: float) -> float:
    """Zeeman splitting ``|g| mu_B B`` in meV."""
    return abs(g_factor) * const.physical_constants["Bohr magneton"][0] * abs(b_tesla) / _MEV


def coulomb_mev(permittivity: float, b_tesla: float) -> float:
    """Coulomb energy ``e^2 / (4 pi eps0 eps_r l_B)`` in meV."""
    l_b = magnetic_length_nm(b_tesla) * 1e-9
    return const.e**2 / (4 * math.pi * const.epsilon_0 * permittivity * l_b) / _MEV


def filling_factor(density_cm2: float, b_tesla: float) -> float:
    """Filling factor ``nu = n h / (e B)`` for a density in cm^-2."""
    return density_cm2 * 1e4 * const.h / (const.e * abs(b_tesla))


#: Largest relative field tolerance accepted (``field.tolerance``).
MAX_TOLERANCE = 0.01
#: Smallest denominator of the automatic flux 1/q: a <= l_B / 3 needs q >= 18 pi.
AUTO_MIN_Q = math.ceil(18 * math.pi)
#: Relative accuracy of the first Landau level above E_F asked of the automatic lattice constant.
AUTO_LEVEL_ACCURACY = 0.01


def simplest_fraction(lo: Fraction, hi: Fraction) -> Fraction:
    """The fraction with the smallest denominator in ``[lo, hi]`` (``0 < lo <= hi``).

    Continued fractions (the Stern-Brocot tree): the integer part is common
    to both ends until an integer falls inside the interval.
    """
    lo, hi = Fraction(lo), Fraction(hi)
    n = math.floor(lo)
    if n == lo:
        return Fraction(n)
    if n + 1 <= hi:
        return Fraction(n + 1)
    return n + 1 / simplest_fraction(1 / (hi - n), 1 / (lo - n))


def lattice_level_error(n: int, flux: float) -> float:
    """Relative lattice shift of Landau level ``n`` at flux ``|phi|`` (leading order).

    ``(pi^2 t phi^2 / 2)(2 n^2 + 2 n + 1)`` against ``hbar omega_c (n + 1/2) =
    4 pi t phi (n + 1/2)``; the expansion of the square-lattice levels in the
    flux (small-flux limit of the Harper equation).
    """
    return math.pi * abs(flux) * (2 * n * n + 2 * n + 1) / (8 * (n + 0.5))


def auto_denominator(level: int) -> int:
    """Smallest ``q >= AUTO_MIN_Q`` with :func:`lattice_level_error` of ``level`` at ``1/q`` within 1 %."""
    n = max(0, int(level))
    need = math.pi * (2 * n * n + 2 * n + 1) / (8 * (n + 0.5) * AUTO_LEVEL_ACCURACY)
    return max(AUTO_MIN_Q, math.ceil(need))


@dataclass(frozen=True)
class Derived:
    """A material and a field expressed in lattice units (energies in t).

    Every physical scale refers to the field asked for (``b_tesla``); the
    field of the rational lattice flux is ``b_lattice_tesla`` beside it.

    Attributes
    ----------
    hopping_mev : float
        t in meV.
    lattice_constant_nm : float
        ``a`` in nm (given, or chosen when ``lattice_constant_auto``).
    lattice_constant_auto : bool
        True when ``a`` was chosen so that the flux is exactly ``1/q``.
    flux : Fraction
        Rational flux per plaquette of the builders (counter-clockwise phase
        over 2 pi): ``-B a^2 / (h/e)`` rounded, negative for ``B > 0``.
    flux_exact : float
        ``-B a^2 / (h/e)`` before rounding.
    b_tesla : float
        The field asked for (``+z`` for ``B > 0``).
    b_lattice_tesla : float
        The field that ``flux`` corresponds to.
    b_relative_error : float
        ``(b_lattice - B) / B``; within ``tolerance``.
    tolerance : float
        The relative field tolerance that was asked for.
    zeeman_t : float
        Zeeman splitting ``Delta = -g mu_B B`` in units of t (spin up at -Delta/2).
    magnetic_length_nm, magnetic_length_a : float
    cyclotron_mev, zeeman_mev, coulomb_mev : float
    fermi_t : float or None
        E_F on the lattice, ``-4 t + onsite + E_F / t`` for an energy measured
        from the band bottom, when one was given.
    filling : float or None
        ``nu = n h / (e |B|)`` when a density was given.
    warnings : tuple of str
    """

    hopping_mev: float
    lattice_constant_nm: float
    lattice_constant_auto: bool
    flux: Fraction
    flux_exact: float
    b_tesla: float
    b_lattice_tesla: float
    b_relative_error: float
    tolerance: float
    zeeman_t: float
    magnetic_length_nm: float
    magnetic_length_a: float
    cyclotron_mev: float
    zeeman_mev: float
    coulomb_mev: float
    fermi_t: float | None
    filling: float | None
    warnings: tuple[str, ...] = ()

    @property
    def cyclotron_t(self) -> float:
        return self.cyclotron_mev / self.hopping_mev

    @property
    def field_direction(self) -> str:
        """``"+z"`` for ``b_tesla > 0`` (the field along +z), else ``"-z"``."""
        return "+z" if self.b_tesla > 0 else "-z"

    def to_dict(self) -> dict:
        return {
            "hopping_mev": self.hopping_mev,
            "lattice_constant_nm": self.lattice_constant_nm,
            "lattice_constant_auto": self.lattice_constant_auto,
            "flux": f"{self.flux.numerator}/{self.flux.denominator}",
            "flux_exact": self.flux_exact,
            "b_tesla": self.b_tesla,
            "b_lattice_tesla": self.b_lattice_tesla,
            "b_relative_error": self.b_relative_error,
            "tolerance": self.tolerance,
            "field_direction": self.field_direction,
            "zeeman_t": self.zeeman_t,
            "zeeman_mev": self.zeeman_mev,
            "magnetic_length_nm": self.magnetic_length_nm,
            "magnetic_length_a": self.magnetic_length_a,
            "cyclotron_mev": self.cyclotron_mev,
            "cyclotron_t": self.cyclotron_t,
            "coulomb_mev": self.coulomb_mev,
            "fermi_t": self.fermi_t,
            "filling": self.filling,
            "warnings": list(self.warnings),
        }


def _level_above(effective_mass: float, b_tesla: float, fermi_mev: float | None, density_cm2: float | None,
                 spin: bool) -> int:
    """Orbital index of the first Landau level (partly) above E_F."""
    if fermi_mev is not None:
        return max(0, math.floor(fermi_mev / cyclotron_mev(effective_mass, b_tesla) - 0.5) + 1)
    if density_cm2 is not None:
        nu = max(1, round(filling_factor(density_cm2, b_tesla)))
        return nu // 2 if spin else nu
    return 1


def derive(
    *,
    effective_mass: float,
    g_factor: float,
    permittivity: float,
    lattice_constant_nm: float | None,
    b_tesla: float,
    fermi_mev: float | None = None,
    density_cm2: float | None = None,
    q_max: int = 4000,
    tolerance: float = 1e-3,
    onsite_t: float = 0.0,
    spin: bool = True,
) -> Derived:
    """Lattice parameters of a material in a field.

    Parameters
    ----------
    effective_mass : float
        ``m* / m_e``.
    g_factor : float
        Effective g factor (sign matters: see the module notes).
    permittivity : float
        Relative permittivity ``eps_r``.
    lattice_constant_nm : float or None
        Discretisation ``a`` in nm; None chooses it (flux exactly ``1/q``,
        see the module notes).
    b_tesla : float
        Perpendicular field in tesla, ``+z`` for ``B > 0``.
    fermi_mev : float, optional
        Fermi energy in meV above the band bottom.
    density_cm2 : float, optional
        Electron density in cm^-2.
    q_max : int
        Largest denominator of the rational flux.
    tolerance : float
        Largest relative difference between the field of the lattice flux
        and ``b_tesla`` (at most :data:`MAX_TOLERANCE`).
    onsite_t : float
        Uniform on-site energy of the lattice (t), added to E_F.
    spin : bool
        Whether the model has both spins (one Landau level per spin then
        holds half the filling factor): only used to choose ``a``.

    Returns
    -------
    Derived

    Raises
    ------
    UnitsError
        For a zero field, a lattice constant not below the magnetic length,
        a density that gives no electrons, a tolerance out of range or one
        that no denominator up to ``q_max`` meets; each message names the key.
    """
    if b_tesla == 0:
        raise UnitsError("field.b_tesla: got 0; expected a non-zero field (flux, Landau levels and "
                         "the filling factor need one)")
    if density_cm2 is not None and density_cm2 <= 0:
        raise UnitsError(f"field.density_cm2: got {density_cm2!r}, which gives no electrons; "
                         "expected a density > 0 per cm^2")
    if not 0 < tolerance <= MAX_TOLERANCE:
        raise UnitsError(f"field.tolerance: got {tolerance!r}; expected a relative field tolerance "
                         f"> 0 and <= {MAX_TOLERANCE:g}")
    l_b = magnetic_length_nm(b_tesla)
    flux_quantum = const.h / const.e
    warnings = []
    sign = 1 if b_tesla > 0 else -1
    if lattice_constant_nm is None:
        q = auto_denominator(_level_above(effective_mass, b_tesla, fermi_mev, density_cm2, spin))
        if q > q_max:
            raise UnitsError(f"field.q_max: got {q_max}; material.lattice_constant_nm = 'auto' needs the flux "
                             f"1/{q} at {b_tesla:g} T; expected field.q_max >= {q}")
        lattice_constant_nm = math.sqrt(flux_quantum / (q * abs(b_tesla))) * 1e9
        magnitude = Fraction(1, q)
        auto = True
    else:
        auto = False
        if lattice_constant_nm >= l_b:
            raise UnitsError(
                f"material.lattice_constant_nm: got {lattice_constant_nm!r}, not below the magnetic "
                f"length {l_b:.3f} nm at {b_tesla:g} T; expected a lattice constant below {l_b / 3:.3f} nm "
                "(three sites per magnetic length), or 'auto'")
        exact = Fraction(flux_quanta(abs(b_tesla), lattice_constant_nm))
        tol = Fraction(tolerance)
        magnitude = simplest_fraction(exact * (1 - tol), exact * (1 + tol))
        if magnitude.denominator > q_max:
            raise UnitsError(
                f"field.tolerance: the field {b_tesla:g} T is not reached within {tolerance:g} (relative) by "
                f"any flux p/q with q <= field.q_max = {q_max} at a = {lattice_constant_nm:g} nm (the "
                f"simplest flux within it is {magnitude}); expected field.q_max >= "
                f"{magnitude.denominator}, a larger field.tolerance (at most {MAX_TOLERANCE:g}) or "
                "material.lattice_constant_nm = 'auto'")
        if lattice_constant_nm > l_b / 3:
            warnings.append(
                f"the magnetic length {l_b:.3f} nm is only {l_b / lattice_constant_nm:.2f} lattice "
                f"constants: Landau levels deviate from the continuum; use material.lattice_constant_nm "
                f"<= {l_b / 3:.3f} or 'auto'")
    t = hopping_mev(effective_mass, lattice_constant_nm)
    flux = -sign * magnitude
    b_lattice = sign * float(magnitude) * flux_quantum / (lattice_constant_nm * 1e-9) ** 2
    # Every scale is that of the field asked for; the lattice flux differs from
    # it by at most the tolerance (reported).
    zeeman_t = -g_factor * const.physical_constants["Bohr magneton"][0] * b_tesla / _MEV / t
    return Derived(
        hopping_mev=t,
        lattice_constant_nm=float(lattice_constant_nm),
        lattice_constant_auto=auto,
        flux=flux,
        flux_exact=-sign * flux_quanta(abs(b_tesla), lattice_constant_nm),
        b_tesla=float(b_tesla),
        b_lattice_tesla=b_lattice,
        b_relative_error=(b_lattice - b_tesla) / b_tesla,
        tolerance=float(tolerance),
        zeeman_t=zeeman_t,
        magnetic_length_nm=l_b,
        magnetic_length_a=l_b / lattice_constant_nm,
        cyclotron_mev=cyclotron_mev(effective_mass, b_tesla),
        zeeman_mev=zeeman_mev(g_factor, b_tesla),
        coulomb_mev=coulomb_mev(permittivity, b_tesla),
        fermi_t=None if fermi_mev is None else -4.0 + onsite_t + fermi_mev / t,
        filling=None if density_cm2 is None else filling_factor(density_cm2, b_tesla),
        warnings=tuple(warnings),
    )
