"""TOML scenarios validated once into frozen dataclasses.

A scenario file has a top-level ``title`` and the sections ``[lattice]``,
``[spin]``, ``[ribbon]``, ``[ribbon.edge]``, ``[spectrum]``, ``[fermi]``,
``[chern]``, ``[edges]``, ``[material]``, ``[field]``, ``[hallbar]``,
``[interaction]`` and ``[interaction.background]``. With
``field.b_tesla`` the flux, the Zeeman splitting and (from ``fermi_mev`` or
``density_cm2``) the Fermi level are derived from the material
(:mod:`topoedge.scenario.units`) and must not be given in lattice units as well.
Every key is one row of the schema table ``KEYS`` (path, type, unit, meaning,
expectation, constraint); its default is the default of the matching
dataclass field. A new key is one row plus one dataclass field.

Units: every energy is in units of the nearest-neighbour hopping ``t``;
lengths are in lattice constants ``a``; flux is in flux quanta ``phi0`` per
plaquette.

Every problem raises `ConfigError` with a one-line message
``<key.path>: <what was wrong>; expected <what>`` plus a fix where one exists.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass
from fractions import Fraction
from collections.abc import Mapping
from typing import Any

from ..models.profiles import EDGE_PROFILES as _PROFILE_REGISTRY
from ..models.lattices import LATTICES as _REGISTRY
from ..models.lattices import zero_field_kinds
from .study_sections import (BACKGROUND_PROFILES, MIXINGS, START_STATES, BackgroundConfig, DisorderConfig,
                             InteractionConfig, LevelsConfig)

__all__ = ["ConfigError", "Scenario", "LatticeConfig", "SpinConfig", "EdgeConfig", "RibbonConfig", "SpectrumConfig", "FermiConfig", "ChernConfig", "EdgesConfig", "MaterialConfig", "FieldConfig", "HallbarConfig", "DisorderConfig", "LevelsConfig", "BackgroundConfig", "InteractionConfig", "SECTIONS", "EDGE_PROFILES", "SOLVERS", "LATTICES", "ZERO_FIELD", "ORIENTATIONS", "START_STATES", "MIXINGS", "BACKGROUND_PROFILES", "plain", "fraction_text", "lookup"]

# The edge profiles are registered where they are defined (one list, no drift).
EDGE_PROFILES = tuple(_PROFILE_REGISTRY)
SOLVERS = ("auto", "banded", "dense")
#: Every lattice kind, in the order of the lattice registry (topoedge.models.lattices).
LATTICES = tuple(_REGISTRY)
#: Lattice kinds without a magnetic field (spinless two-band Chern insulators).
ZERO_FIELD = zero_field_kinds()
ORIENTATIONS = tuple(dict.fromkeys(o for entry in _REGISTRY.values() for o in entry.orientations))


class ConfigError(ValueError):
    """Invalid scenario, override or scenario file; ``str(err)`` is one line."""

    def __init__(self, message: str) -> None:
        super().__init__(re.sub(r"\s*[\r\n]+\s*", " ", message))


@dataclass(frozen=True)
class LatticeConfig:
    """Square or honeycomb lattice with a uniform magnetic field.

    Attributes
    ----------
    kind : str
        "square" (lattice constant a) or "honeycomb" (carbon-carbon distance
        a_cc; see `topoedge.models.honeycomb`).
    flux : fractions.Fraction
        Flux p/q per plaquette (square) or per hexagon (honeycomb), in flux
        quanta phi0; a negative p reverses the field.
    onsite : float
        Uniform on-site energy, in t.
    staggered : float
        Sublattice potential M, in t: +M on A, -M on B (honeycomb and
        Haldane only).
    t2 : float
        Haldane model: magnitude of the next-nearest hopping t2 exp(i phi), in t.
    t2_phase : float
        Haldane model: its phase phi, in radians.
    mass : float
        Qi-Wu-Zhang model: the mass m, in t (C = 0, -1, +1, 0 for
        m < -2, -2 < m < 0, 0 < m < 2, m > 2).
    """

    kind: str = "square"
    flux: Fraction = Fraction(1, 40)
    onsite: float = 0.0
    staggered: float = 0.0
    t2: float = 0.0
    t2_phase: float = 0.0
    mass: float = 0.0


@dataclass(frozen=True)
class SpinConfig:
    """Spin-1/2 degree of freedom.

    Attributes
    ----------
    enabled : bool
        Two orbitals (spin up, spin down) per site when true.
    zeeman : float
        Zeeman splitting Delta, in t: spin up is shifted by -Delta/2 and
        spin down by +Delta/2. Must be 0 when ``enabled`` is false.
    rashba : float
        Rashba spin-orbit coupling lambda_R, in t (mixes the spins: S_z is
        then not conserved and only total Chern numbers exist).
    """

    enabled: bool = True
    zeeman: float = 0.0
    rashba: float = 0.0


@dataclass(frozen=True)
class EdgeConfig:
    """Confining potential near both edges of the ribbon.

    Attributes
    ----------
    profile : str
        One of `EDGE_PROFILES`: "none" (hard wall), "linear", "tanh", "erf"
        (ramps of width ``width``) or "table" (interpolated from ``table``).
    width : float
        Ramp width w, in lattice constants a (sites), 0 <= w <= W/2.
    height : float
        Potential V0 at the outermost row, in t.
    table : tuple of (float, float)
        Rows (distance from the edge in a, potential in t) with distances
        >= 0 and strictly increasing; only with profile "table".
    """

    profile: str = "none"
    width: float = 0.0
    height: float = 0.0
    table: tuple[tuple[float, float], ...] = ()


@dataclass(frozen=True)
class RibbonConfig:
    """Ribbon infinite along x and ``width`` sites across.

    Attributes
    ----------
    width : int
        Number of sites W across the ribbon (W >= 2), i.e. width in a; on
        the honeycomb lattice the number of zigzag chains or dimer lines.
    orientation : str or None
        Honeycomb edges: "zigzag" (the default) or "armchair".
    edge : EdgeConfig
        Edge potential applied at both edges.
    """

    width: int = 120
    orientation: str | None = None
    edge: EdgeConfig = EdgeConfig()


@dataclass(frozen=True)
class SpectrumConfig:
    """Sampling and solver of the ribbon spectrum.

    Attributes
    ----------
    k_points : int
        Number of momenta k in [-pi, pi), in units of 1/a (>= 2).
    window : float or None
        Half-width, in t, of the energy window kept around the Fermi
        energy; None keeps all states.
    solver : str
        One of `SOLVERS`.
    """

    k_points: int = 301
    window: float | None = None
    solver: str = "auto"


@dataclass(frozen=True)
class FermiConfig:
    """Fermi level.

    Attributes
    ----------
    energy : float or None
        Fermi energy E_F, in t.
    gap : int or None
        Place E_F in the middle of the bulk gap above the ``gap`` lowest bulk
        bands (spin bands included), instead of giving ``energy``. With
        neither key E_F = 0.
    """

    energy: float | None = None
    gap: int | None = None


@dataclass(frozen=True)
class ChernConfig:
    """Bulk Chern numbers by the link-variable method.

    Attributes
    ----------
    grid : (int, int) or None
        Momentum grid over the magnetic Brillouin zone; None chooses
        2 points per band in each direction (at least 12). The
        Landau-level solver uses ``q x n2`` with ``n2`` the second entry
        (default 8).
    gap_min : float
        Direct gaps below this (t) count as closed.
    refine : bool
        Repeat the count on a grid 1.5 times finer and report both (the
        Landau-level solver: twice as many ``k1`` and 1.5 times as many
        ``k2``).
    solver : str
        "auto", "dense" (every band of the magnetic cell at every grid
        point) or "landau" (only the bands up to a few Landau levels above
        E_F; square lattice with S_z conserved).
    """

    grid: tuple[int, int] | None = None
    gap_min: float = 1e-5
    refine: bool = True
    solver: str = "auto"


@dataclass(frozen=True)
class EdgesConfig:
    """Edge-mode count at the Fermi energy.

    Attributes
    ----------
    k_points : int
        Momenta of the scan for crossings of E_F (each is then refined).
    """

    k_points: int = 400


@dataclass(frozen=True)
class MaterialConfig:
    """A two-dimensional electron gas discretised on the lattice.

    Attributes
    ----------
    preset : str or None
        Name of a shipped preset (``topoedge/data/presets/<name>.toml``) whose
        ``[material]`` keys fill in the keys not given here.
    effective_mass : float or None
        ``m* / m_e``.
    g_factor : float or None
        Effective g factor (negative for GaAs).
    permittivity : float or None
        Relative permittivity ``eps_r``.
    lattice_constant_nm : float, "auto" or None
        Discretisation ``a`` in nm; "auto" chooses it so that the flux is
        exactly ``1/q`` at the field asked for (``a <= l_B/3``, see
        `topoedge.scenario.units`).
    """

    preset: str | None = None
    effective_mass: float | None = None
    g_factor: float | None = None
    permittivity: float | None = None
    lattice_constant_nm: float | str | None = None


@dataclass(frozen=True)
class FieldConfig:
    """Field and carriers in physical units; they set flux, Zeeman and E_F.

    Attributes
    ----------
    b_tesla : float or None
        Perpendicular field in T (negative reverses it).
    fermi_mev : float or None
        Fermi energy in meV above the band bottom.
    density_cm2 : float or None
        Electron density in cm^-2 (E_F then sits in the gap above the
        nearest integer filling).
    q_max : int
        Largest denominator of the rational flux per plaquette.
    tolerance : float
        Largest relative difference between the field of the lattice flux
        and ``b_tesla`` (at most 0.01).
    """

    b_tesla: float | None = None
    fermi_mev: float | None = None
    density_cm2: float | None = None
    q_max: int = 4000
    tolerance: float = 1e-3


@dataclass(frozen=True)
class HallbarConfig:
    """Six-terminal Hall bar of the same model (the transport route to sigma_xy).

    Attributes
    ----------
    enabled : bool
        Compute the Hall bar in ``run``.
    length, width : int
        Bar size in sites; source and drain span the full width, the four
        voltage probes are ``max(6, width // 4)`` columns wide at a quarter
        and three quarters of the length.
    disorder : float
        Anderson disorder ``W_dis`` in t (uniform in [-W/2, W/2) per site).
    seeds : int
        Number of disorder realisations averaged (seeds 0 .. seeds-1).
    """

    enabled: bool = False
    length: int = 80
    width: int = 40
    disorder: float = 0.0
    seeds: int = 1


@dataclass(frozen=True)
class Scenario:
    """A complete validated scenario; build it with `parse_scenario`.

    ``source`` (the file it was read from) is not a TOML key and does not
    take part in equality.
    """

    title: str = ""
    lattice: LatticeConfig = LatticeConfig()
    spin: SpinConfig = SpinConfig()
    ribbon: RibbonConfig = RibbonConfig()
    spectrum: SpectrumConfig = SpectrumConfig()
    fermi: FermiConfig = FermiConfig()
    chern: ChernConfig = ChernConfig()
    edges: EdgesConfig = EdgesConfig()
    material: MaterialConfig = MaterialConfig()
    field: FieldConfig = FieldConfig()
    hallbar: HallbarConfig = HallbarConfig()
    interaction: InteractionConfig = InteractionConfig()
    disorder: DisorderConfig = DisorderConfig()
    levels: LevelsConfig = LevelsConfig()
    source: str | None = dataclasses.field(default=None, compare=False)

    def to_dict(self) -> dict[str, Any]:
        """Return the scenario as a plain nested dict of TOML values.

        The flux becomes a string "p/q", the edge table a list of lists and
        an unset ``spectrum.window`` is left out, so that
        ``parse_scenario(s.to_dict()) == s``. With ``field.b_tesla`` the keys
        it derives (flux, Zeeman, Fermi level) are left out too.
        """
        derived = ({"lattice.flux", "spin.zeeman", "fermi.energy", "fermi.gap"}
                   if self.field.b_tesla is not None else set())
        if self.interaction == InteractionConfig():  # no interaction: leave the section out
            derived.add("interaction")
        if self.disorder == DisorderConfig():        # the defaults of topoedge disorder: left out too
            derived.add("disorder")
        if self.levels == LevelsConfig():            # the defaults of topoedge levels: left out too
            derived.add("levels")
        return _plain_fields(self, "", derived)


def _plain_fields(section: Any, prefix: str, derived: set[str]) -> dict[str, Any]:
    """The keys of a section in declaration order (the schema's order), values as TOML values."""
    out: dict[str, Any] = {}
    for f in dataclasses.fields(section):
        path = f"{prefix}.{f.name}" if prefix else f.name
        if f.name == "source" or path in derived:
            continue
        value = getattr(section, f.name)
        if dataclasses.is_dataclass(value):
            table = _plain_fields(value, path, derived)
            if table:
                out[f.name] = table
        elif value is not None:
            out[f.name] = plain(value)
    return out


def plain(value: Any) -> Any:
    """Copy with mappings as dicts and sequences as lists; flux as "p/q"."""
    if isinstance(value, Mapping):
        return {k: plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    return fraction_text(value) if isinstance(value, Fraction) else value


def fraction_text(value: Fraction) -> str:
    """A fraction as the string "p/q"."""
    return f"{value.numerator}/{value.denominator}"


def lookup(scenario: Scenario, path: str) -> Any:
    """The value at a dotted key path (``"ribbon.edge.width"``) of a scenario."""
    value: Any = scenario
    for name in path.split("."):
        value = getattr(value, name)
    return value


SECTIONS: dict[str, type] = {
    "": Scenario, "lattice": LatticeConfig, "spin": SpinConfig,
    "ribbon": RibbonConfig, "ribbon.edge": EdgeConfig,
    "spectrum": SpectrumConfig, "fermi": FermiConfig,
    "chern": ChernConfig, "edges": EdgesConfig,
    "material": MaterialConfig, "field": FieldConfig,
    "hallbar": HallbarConfig,
    "interaction": InteractionConfig, "interaction.background": BackgroundConfig,
    "disorder": DisorderConfig, "levels": LevelsConfig,
}


