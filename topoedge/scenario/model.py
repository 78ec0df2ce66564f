"""A scenario resolved once: lattice units and the physical scales they were derived from.

Every workflow starts with :func:`resolve`, which turns the scenario as
written into a frozen :class:`Model` (the scenario in lattice units, the
scenario as written, and what ``[material]`` and ``[field]`` derived); the
stages after it receive the model and never convert units again. A field
scan resolves one model per field (each field is another scenario).
"""

from __future__ import annotations

from dataclasses import dataclass

from .checks import derive_units
from .sections import FermiConfig, Scenario
from .units import Derived

__all__ = ["Model", "resolve", "lattice_scenario"]


@dataclass(frozen=True, eq=False)
class Model:
    """A scenario resolved into lattice units, once.

    Attributes
    ----------
    given : Scenario
        The scenario as written (file and ``--set`` overrides).
    scenario : Scenario
        The same in lattice units: with ``field.b_tesla``, ``lattice.flux``,
        ``spin.zeeman`` and the Fermi level derived from the material and
        the field (otherwise ``given`` itself).
    units : Derived or None
        What the physical units derived (t in meV, the lattice field, l_B,
        hbar omega_c, filling, ...), None for a lattice-unit scenario.
    """

    given: Scenario
    scenario: Scenario
    units: Derived | None = None


def resolve(scenario: Scenario | Model) -> Model:
    """The :class:`Model` of a scenario (a model is returned as it is)."""
    if isinstance(scenario, Model):
        return scenario
    lattice, units = lattice_scenario(scenario)
    return Model(given=scenario, scenario=lattice, units=units)


def lattice_scenario(s: Scenario) -> tuple[Scenario, Derived | None]:
    """The scenario in lattice units, with what was derived from physical units.

    Without ``field.b_tesla`` the scenario is returned unchanged with None.
    Otherwise ``lattice.flux``, ``spin.zeeman`` (with spin) and the Fermi level
    are replaced by the values derived from ``[material]`` and ``[field]``:
    ``fermi.energy`` from ``field.fermi_mev``, or ``fermi.gap`` = the nearest
    integer filling from ``field.density_cm2`` (``nu`` Landau levels of
    ``p`` bands each at flux ``p/q``); disorder strengths given in meV
    (``disorder.unit = "meV"``) are converted to t.
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
    disorder = s.disorder
    if disorder.unit == "meV":
        disorder = replace(disorder, unit="t", strength=disorder.strength / d.hopping_mev,
                           strengths=tuple(w / d.hopping_mev for w in disorder.strengths))
    return replace(s, lattice=replace(s.lattice, flux=d.flux), spin=spin, fermi=fermi, disorder=disorder), d


