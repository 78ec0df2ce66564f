"""The scenario in lattice units: what [material] and [field] derive, resolved once."""

from __future__ import annotations

from .units import Derived
from .checks import derive_units
from .sections import FermiConfig, Scenario

__all__ = ["lattice_scenario"]



def lattice_scenario(s: Scenario) -> tuple[Scenario, Derived | None]:
    """The scenario in lattice units, with what was derived from physical units.

    Without ``field.b_tesla`` the scenario is returned unchanged with None.
    Otherwise ``lattice.flux``, ``spin.zeeman`` (with spin) and the Fermi level
    are replaced by the values derived from ``[material]`` and ``[field]``:
    ``fermi.energy`` from ``field.fermi_mev``, or ``fermi.gap`` = the nearest
    integer filling from ``field.density_cm2`` (``nu`` Landau levels of
    ``p`` bands each at flux ``p/q``).
    """
    from dataclasses import replace

    if s.field.b_tesla is None:
        return s, None
    d = derive_units(s)
    fermi = s.fermi
    if d.fermi_t is not None:
        fermi = FermiConfig(energy=d.fermi_t)
    elif d.filling is not None:
        # A Landau level of the lattice at flux p/q is p bands (one per
        # sub-band), so the gap above nu levels lies above nu * p bands.
        fermi = FermiConfig(gap=max(1, round(d.filling)) * abs(d.flux.numerator))
    spin = replace(s.spin, zeeman=d.zeeman_t) if s.spin.enabled else s.spin
    return replace(s, lattice=replace(s.lattice, flux=d.flux), spin=spin, fermi=fermi), d


