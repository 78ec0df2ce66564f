"""Physical units: a material and a field mapped onto the lattice model.

All constants come from :mod:`scipy.constants` (CODATA). A two-dimensional
electron gas of effective mass ``m* = m_eff m_e`` is discretised on a square
lattice of constant ``a``; the lattice model reproduces the continuum near
its band bottom when the hopping is

    t = hbar^2 / (2 m* a^2),

and a field ``B`` perpendicular to the plane threads the flux
``phi = B a^2 / (h/e)`` flux quanta through every plaquette. The lattice
needs a rational flux ``p/q``: the nearest fraction with ``q <= q_max`` is
taken and the field it corresponds to is reported with its relative error.

Derived scales (continuum, effective-mass):

- magnetic length ``l_B = sqrt(hbar / (e B))``;
- cyclotron energy ``hbar omega_c = hbar e B / m*``;
- Zeeman energy: ``H_Z = (1/2) g mu_B B sigma_z``; with the builders'
  convention (spin up shifted by ``-Delta/2``) ``Delta = -g mu_B B``, so a
  negative g (GaAs) puts spin up, along B, lower;
- Coulomb energy ``e^2 / (4 pi eps0 eps_r l_B)``;
- filling factor ``nu = n h / (e B)`` for a density ``n``.

References
----------
.. [1] E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA
   recommended values of the fundamental physical constants: 2018",
   Rev. Mod. Phys. 93, 025010 (2021).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import scipy.constants as const

__all__ = [
    "Derived", "UnitsError", "VON_KLITZING", "derive", "hopping_mev", "flux_quanta", "magnetic_length_nm",
    "cyclotron_mev", "zeeman_mev", "coulomb_mev", "filling_factor",
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


@dataclass(frozen=True)
class Derived:
    """A material and a field expressed in lattice units (energies in t).

    Attributes
    ----------
    hopping_mev : float
        t in meV.
    flux : Fraction
        Rational flux per plaquette used (sign of B).
    flux_exact : float
        ``B a^2 / (h/e)`` before rounding to ``flux``.
    b_used_tesla : float
        The field that ``flux`` corresponds to. The lattice model describes
        this field, so every scale below refers to it.
    b_relative_error : float
        ``(b_used - B) / B``.
    zeeman_t : float
        Zeeman splitting ``Delta = -g mu_B B`` in units of t (spin up at -Delta/2).
    magnetic_length_nm, magnetic_length_a : float
    cyclotron_mev, zeeman_mev, coulomb_mev : float
    fermi_t : float or None
        E_F on the lattice, ``-4 t + E_F / t`` for an energy measured from
        the band bottom, when one was given.
    filling : float or None
        ``nu = n h / (e B)`` when a density was given.
    warnings : tuple of str
    """

    hopping_mev: float
    flux: Fraction
    flux_exact: float
    b_used_tesla: float
    b_relative_error: float
    zeeman_t: float
    magnetic_length_nm: float
    magnetic_length_a: float
    cyclotron_mev: float
    zeeman_mev: float
    coulomb_mev: float
    fermi_t: float | None
    filling: float | None
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {
            "hopping_mev": self.hopping_mev,
            "flux": f"{self.flux.numerator}/{self.flux.denominator}",
            "flux_exact": self.flux_exact,
            "b_used_tesla": self.b_used_tesla,
            "b_relative_error": self.b_relative_error,
            "zeeman_t": self.zeeman_t,
            "zeeman_mev": self.zeeman_mev,
            "magnetic_length_nm": self.magnetic_length_nm,
            "magnetic_length_a": self.magnetic_length_a,
            "cyclotron_mev": self.cyclotron_mev,
            "cyclotron_t": self.cyclotron_mev / self.hopping_mev,
            "coulomb_mev": self.coulomb_mev,
            "fermi_t": self.fermi_t,
            "filling": self.filling,
            "warnings": list(self.warnings),
        }


def derive(
    *,
    effective_mass: float,
    g_factor: float,
    permittivity: float,
    lattice_constant_nm: float,
    b_tesla: float,
    fermi_mev: float | None = None,
    density_cm2: float | None = None,
    q_max: int = 200,
    onsite_t: float = 0.0,
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
    lattice_constant_nm : float
        Discretisation ``a`` in nm.
    b_tesla : float
        Perpendicular field in tesla; a negative B reverses the field.
    fermi_mev : float, optional
        Fermi energy in meV above the band bottom.
    density_cm2 : float, optional
        Electron density in cm^-2.
    q_max : int
        Largest denominator of the rational flux.
    onsite_t : float
        Uniform on-site energy of the lattice (t), added to E_F.

    Returns
    -------
    Derived

    Raises
    ------
    UnitsError
        For a zero field, a lattice constant not below the magnetic length, or
        a density that gives no electrons; each message names the key.
    """
    if b_tesla == 0:
        raise UnitsError("field.b_tesla: got 0; expected a non-zero field (flux, Landau levels and "
                         "the filling factor need one)")
    if density_cm2 is not None and density_cm2 <= 0:
        raise UnitsError(f"field.density_cm2: got {density_cm2!r}, which gives no electrons; "
                         "expected a density > 0 per cm^2")
    l_b = magnetic_length_nm(b_tesla)
    if lattice_constant_nm >= l_b:
        raise UnitsError(
            f"material.lattice_constant_nm: got {lattice_constant_nm!r}, not below the magnetic "
            f"length {l_b:.3f} nm at {b_tesla:g} T; expected a lattice constant below {l_b / 3:.3f} nm "
            "(three sites per magnetic length)")
    t = hopping_mev(effective_mass, lattice_constant_nm)
    exact = flux_quanta(b_tesla, lattice_constant_nm)
    flux = Fraction(exact).limit_denominator(q_max)
    if flux == 0:
        raise UnitsError(
            f"field.q_max: got {q_max}; the flux {exact:.3g} per plaquette rounds to 0 with "
            f"denominators up to {q_max}; expected a larger field.q_max or lattice constant")
    b_used = float(flux) * (const.h / const.e) / (lattice_constant_nm * 1e-9) ** 2
    warnings = []
    if lattice_constant_nm > l_b / 3:
        warnings.append(
            f"the magnetic length {l_b:.3f} nm is only {l_b / lattice_constant_nm:.2f} lattice "
            f"constants: Landau levels deviate from the continuum; use material.lattice_constant_nm "
            f"<= {l_b / 3:.3f}")
    # The lattice model describes the field b_used (the rational flux); every
    # derived scale refers to it, so that their ratios are those of the model.
    zeeman_t = -g_factor * const.physical_constants["Bohr magneton"][0] * b_used / _MEV / t
    return Derived(
        hopping_mev=t,
        flux=flux,
        flux_exact=exact,
        b_used_tesla=b_used,
        b_relative_error=(b_used - b_tesla) / b_tesla,
        zeeman_t=zeeman_t,
        magnetic_length_nm=magnetic_length_nm(b_used),
        magnetic_length_a=magnetic_length_nm(b_used) / lattice_constant_nm,
        cyclotron_mev=cyclotron_mev(effective_mass, b_used),
        zeeman_mev=zeeman_mev(g_factor, b_used),
        coulomb_mev=coulomb_mev(permittivity, b_used),
        fermi_t=None if fermi_mev is None else -4.0 + onsite_t + fermi_mev / t,
        filling=None if density_cm2 is None else filling_factor(density_cm2, b_used),
        warnings=tuple(warnings),
    )
