"""TOML scenarios validated once into frozen dataclasses.

A scenario file has a top-level ``title`` and the sections ``[lattice]``,
``[spin]``, ``[ribbon]``, ``[ribbon.edge]``, ``[spectrum]``, ``[fermi]``,
``[chern]``, ``[edges]``, ``[material]``, ``[field]``, ``[hallbar]``,
``[interaction]`` and ``[interaction.background]``. With
``field.b_tesla`` the flux, the Zeeman splitting and (from ``fermi_mev`` or
``density_cm2``) the Fermi level are derived from the material
(:mod:`topoedge.units`) and must not be given in lattice units as well.
Every key is one row of the schema table ``_KEYS`` (path, type, unit, meaning,
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
import difflib
import json
import math
import numbers
import os
import re
import tomllib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from fractions import Fraction
from pathlib import Path
from typing import Any

from .profiles import EDGE_PROFILES as _PROFILE_REGISTRY
from .units import Derived, UnitsError, derive

__all__ = [
    "DEFAULT_SCENARIO", "EDGE_PROFILES", "PRESETS_DIR", "SOLVERS", "ConfigError",
    "derive_units", "lattice_scenario",
    "EdgeConfig", "FermiConfig", "LatticeConfig", "RibbonConfig", "Scenario",
    "SpectrumConfig", "SpinConfig", "InteractionConfig", "BackgroundConfig", "START_STATES", "apply_overrides", "key_docs",
    "load_scenario", "parse_scenario", "key_paths", "convert_key",
]

DEFAULT_SCENARIO = Path(__file__).resolve().parent.parent / "configs" / "default.toml"
# The edge profiles are registered where they are defined (one list, no drift).
EDGE_PROFILES = tuple(_PROFILE_REGISTRY)
SOLVERS = ("auto", "banded", "dense")
LATTICES = ("square", "honeycomb", "haldane", "qwz")
#: Lattice kinds without a magnetic field (spinless two-band Chern insulators).
ZERO_FIELD = ("haldane", "qwz")
ORIENTATIONS = ("zigzag", "armchair")


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
        a_cc; see `topoedge.honeycomb`).
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
        Name of a preset file ``configs/presets/<name>.toml`` whose
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
        `topoedge.units`).
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


#: Starting states of the self-consistent loop (the names of
#: topoedge.hartree_fock.START_STATES; repeated here so that reading a
#: scenario does not import the solvers).
START_STATES = ("unpolarised", "polarised", "edge", "random")
MIXINGS = ("diis", "linear")
BACKGROUND_PROFILES = ("linear", "erf")


@dataclass(frozen=True)
class BackgroundConfig:
    """Positive background charge that neutralises the electrons and makes the edge.

    Attributes
    ----------
    profile : str
        One of `BACKGROUND_PROFILES`: the fall from the bulk value to zero.
    width : float
        Width w of the fall at each edge, in lattice constants a (0: sharp).
    setback : float
        Rows next to each boundary kept free of background, in a.
    """

    profile: str = "linear"
    width: float = 0.0
    setback: float = 0.0


@dataclass(frozen=True)
class InteractionConfig:
    """Coulomb interaction; with it, ``run`` is self-consistent Hartree-Fock.

    Attributes
    ----------
    enabled : bool
        Self-consistent run; true when the ``[interaction]`` section is
        present unless it says otherwise.
    coulomb : float or None
        ``U_C = e^2 / (4 pi eps0 eps_r a)``, in t; unset: from
        ``[material]`` and ``[field]``.
    onsite : float or None
        ``V(0)``, in t; unset: ``4 ln(1 + sqrt 2) U_C`` (1/r averaged over
        the unit cell).
    gate_distance : float or None
        Metal gate at this distance, in a (image charge); unset: no gate.
    background : BackgroundConfig
    k_points : int or None
        Momenta ``N_k`` of the self-consistent loop (even); unset: the
        smallest even number >= max(32, 12 l_B / a) that holds a whole
        number of electrons.
    temperature : float
        Smearing ``k_B T``, in t (0: zero temperature).
    mixing : str
        "diis" (Pulay/Anderson) or "linear".
    alpha : float
        Mixing weight of the new residual.
    history : int
        DIIS depth.
    tol : float
        Converged when the density matrix changes by less than this.
    max_iter : int
        Iterations per start before a run is reported as not converged.
    starts : tuple of str
        Starting states; the lowest converged energy is kept.
    scan_widths : tuple of float
        Background widths w (a) of the edge-structure scan reported beside
        the main run (empty: no scan).
    """

    enabled: bool = False
    coulomb: float | None = None
    onsite: float | None = None
    gate_distance: float | None = None
    background: BackgroundConfig = BackgroundConfig()
    k_points: int | None = None
    temperature: float = 0.0
    mixing: str = "diis"
    alpha: float = 0.3
    history: int = 8
    tol: float = 1e-7
    max_iter: int = 300
    starts: tuple[str, ...] = ("polarised", "edge", "unpolarised")
    scan_widths: tuple[float, ...] = ()


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
            derived |= {path for path in _KEYS if path.startswith("interaction.")}
        out: dict[str, Any] = {}
        for path in _KEYS:
            value = _plain(_lookup(self, path))
            if value is not None and path not in derived:
                *sections, name = path.split(".")
                table = out
                for section in sections:
                    table = table.setdefault(section, {})
                table[name] = value
        return out


_SECTIONS: dict[str, type] = {
    "": Scenario, "lattice": LatticeConfig, "spin": SpinConfig,
    "ribbon": RibbonConfig, "ribbon.edge": EdgeConfig,
    "spectrum": SpectrumConfig, "fermi": FermiConfig,
    "chern": ChernConfig, "edges": EdgesConfig,
    "material": MaterialConfig, "field": FieldConfig,
    "hallbar": HallbarConfig,
    "interaction": InteractionConfig, "interaction.background": BackgroundConfig,
}


@dataclass(frozen=True)
class _Key:
    path: str
    kind: str              # a key of _CONVERTERS
    unit: str
    doc: str
    expect: str            # completes "expected ..." in error messages
    check: Callable[[Any], bool] | None = None
    choices: tuple[str, ...] = ()
    optional: bool = False  # None (absent) is allowed


def _positive(x):
    return x > 0


_KEYS: dict[str, _Key] = {key.path: key for key in (
    _Key("title", "string", "-", "Free-text title of the scenario.", "a string"),
    _Key("lattice.kind", "choice", "-",
         "Lattice: square (constant a), honeycomb (bond length a_cc), or the zero-field Haldane "
         "(honeycomb) and Qi-Wu-Zhang (square) models.",
         "one of " + ", ".join(map(repr, LATTICES)), choices=LATTICES),
    _Key("lattice.flux", "flux", "phi0 per plaquette",
         "Flux per plaquette (per hexagon on the honeycomb lattice) as a fraction p/q; "
         "negative p reverses the field.",
         "a string 'p/q' such as '1/40'"),
    _Key("lattice.onsite", "float", "t", "Uniform on-site energy.", "a finite energy in t"),
    _Key("lattice.staggered", "float", "t", "Sublattice potential M: +M on A, -M on B (honeycomb, haldane).",
         "a finite energy in t"),
    _Key("lattice.t2", "float", "t", "Haldane model: next-nearest hopping magnitude t2.",
         "a finite energy in t"),
    _Key("lattice.t2_phase", "float", "rad", "Haldane model: phase phi of the next-nearest hopping t2 exp(i phi).",
         "a finite phase in radians"),
    _Key("lattice.mass", "float", "t", "Qi-Wu-Zhang model: mass m (gap closed at m = 0, +-2).",
         "a finite energy in t"),
    _Key("spin.enabled", "boolean", "-", "Spin-1/2: two orbitals per site.", "true or false"),
    _Key("spin.zeeman", "float", "t",
         "Zeeman splitting Delta: spin up at -Delta/2, spin down at +Delta/2.",
         "a finite energy in t"),
    _Key("spin.rashba", "float", "t",
         "Rashba coupling lambda_R (mixes the spins: total Chern numbers only).",
         "a finite energy in t"),
    _Key("ribbon.width", "integer", "sites (a)", "Number of sites W across the ribbon.",
         "an integer number of sites >= 2", lambda n: n >= 2),
    _Key("ribbon.orientation", "choice", "-",
         "Edges of a honeycomb ribbon (unset: zigzag); not for the square lattice.",
         "one of " + ", ".join(map(repr, ORIENTATIONS)), choices=ORIENTATIONS, optional=True),
    _Key("ribbon.edge.profile", "choice", "-", "Shape of the edge potential.",
         "one of " + ", ".join(map(repr, EDGE_PROFILES)), choices=EDGE_PROFILES),
    _Key("ribbon.edge.width", "float", "a", "Ramp width w of the edge potential (0 = no ramp).",
         "a width >= 0 in lattice constants", lambda w: w >= 0),
    _Key("ribbon.edge.height", "float", "t", "Edge potential V0 at the outermost row.",
         "a finite potential in t"),
    _Key("ribbon.edge.table", "pairs", "a, t",
         "Rows [distance from the edge, potential] for profile 'table'.",
         "an array of [distance, potential] pairs of finite numbers"),
    _Key("spectrum.k_points", "integer", "-", "Number of momenta k in [-pi, pi) (k in 1/a).",
         "an integer number of k points >= 2", lambda n: n >= 2),
    _Key("spectrum.window", "float", "t",
         "Half-width of the energy window around E_F; unset keeps all states.",
         "a half-width > 0 in t (leave the key out to keep all states)", _positive,
         optional=True),
    _Key("spectrum.solver", "choice", "-", "Eigenvalue solver of the ribbon spectrum.",
         "one of " + ", ".join(map(repr, SOLVERS)), choices=SOLVERS),
    _Key("fermi.energy", "float", "t", "Fermi energy E_F (unset with fermi.gap; 0 when both are unset).",
         "a finite energy in t", optional=True),
    _Key("fermi.gap", "integer", "-",
         "Put E_F mid-gap above the r lowest bulk bands (spin bands included).",
         "an integer number of bands >= 1", lambda r: r >= 1, optional=True),
    _Key("chern.grid", "grid", "-",
         "Momentum grid [n1, n2] of the link-variable method; unset: a multiple of 2 points per band, at least 12 "
         "(Landau-level solver: q x n2, n2 = 8 unset).",
         "an array of two integers >= 3", optional=True),
    _Key("chern.gap_min", "float", "t", "Direct gaps below this count as closed.",
         "a gap > 0 in t", _positive),
    _Key("chern.refine", "boolean", "-", "Repeat the Chern count on a 1.5 times finer grid.",
         "true or false"),
    _Key("chern.solver", "choice", "-",
         "Bulk solver: every band (dense), the lowest Landau levels only (landau), or chosen by size (auto).",
         "one of 'auto', 'dense', 'landau'", choices=("auto", "dense", "landau")),
    _Key("edges.k_points", "integer", "-", "Momenta of the scan for crossings of E_F.",
         "an integer number of k points >= 8", lambda n: n >= 8),
    _Key("material.preset", "string", "-",
         "Preset file configs/presets/<name>.toml filling in the material keys not given.",
         "the name of a preset", optional=True),
    _Key("material.effective_mass", "float", "m_e", "Effective mass m*.",
         "a mass > 0 in electron masses", _positive, optional=True),
    _Key("material.g_factor", "float", "-", "Effective g factor (negative: spin along B lower).",
         "a finite g factor", optional=True),
    _Key("material.permittivity", "float", "-", "Relative permittivity eps_r.",
         "a permittivity > 0", _positive, optional=True),
    _Key("material.lattice_constant_nm", "length_or_auto", "nm",
         "Lattice constant a of the discretisation; \"auto\": flux exactly 1/q at the field, a <= l_B/3.",
         "a length > 0 in nm or \"auto\"", lambda a: a == "auto" or a > 0, optional=True),
    _Key("field.b_tesla", "float", "T",
         "Perpendicular field; sets lattice.flux and spin.zeeman from the material.",
         "a finite field in tesla", optional=True),
    _Key("field.fermi_mev", "float", "meV", "Fermi energy above the band bottom; sets fermi.energy.",
         "a finite energy in meV", optional=True),
    _Key("field.density_cm2", "float", "cm^-2",
         "Electron density; E_F goes in the gap above the nearest integer filling.",
         "a density in cm^-2", optional=True),
    _Key("field.q_max", "integer", "-", "Largest denominator of the rational flux per plaquette.",
         "an integer >= 1", lambda n: n >= 1),
    _Key("field.tolerance", "float", "-",
         "Largest relative difference between the lattice field and field.b_tesla.",
         "a relative tolerance > 0 and <= 0.01", lambda x: 0 < x <= 0.01),
    _Key("hallbar.enabled", "boolean", "-", "Compute the six-terminal Hall bar route in run.",
         "true or false"),
    _Key("hallbar.length", "integer", "sites (a)", "Length of the Hall bar.",
         "an integer number of sites >= 16", lambda n: n >= 16),
    _Key("hallbar.width", "integer", "sites (a)", "Width of the Hall bar (source and drain span it).",
         "an integer number of sites >= 8", lambda n: n >= 8),
    _Key("hallbar.disorder", "float", "t", "Anderson disorder strength W_dis.",
         "a strength >= 0 in t", lambda w: w >= 0),
    _Key("hallbar.seeds", "integer", "-", "Number of disorder realisations averaged.",
         "an integer >= 1", lambda n: n >= 1),
    _Key("interaction.enabled", "boolean", "-",
         "Self-consistent Hartree-Fock run (true when the [interaction] section is present).",
         "true or false"),
    _Key("interaction.coulomb", "float", "t",
         "U_C = e^2/(4 pi eps0 eps_r a); unset: from [material] and [field].",
         "a strength >= 0 in t", lambda u: u >= 0, optional=True),
    _Key("interaction.onsite", "float", "t",
         "On-site interaction V(0); unset: 4 ln(1+sqrt 2) U_C (1/r averaged over the cell).",
         "an energy >= 0 in t", lambda u: u >= 0, optional=True),
    _Key("interaction.gate_distance", "float", "a",
         "Distance of a metal gate (image-charge screening); unset: no gate.",
         "a distance > 0 in lattice constants (leave the key out for no gate)", _positive,
         optional=True),
    _Key("interaction.background.profile", "choice", "-",
         "Fall of the neutralising background charge at each edge.",
         "one of " + ", ".join(map(repr, BACKGROUND_PROFILES)), choices=BACKGROUND_PROFILES),
    _Key("interaction.background.width", "float", "a",
         "Width w of the fall of the background (0 = sharp edge).",
         "a width >= 0 in lattice constants", lambda w: w >= 0),
    _Key("interaction.background.setback", "float", "a",
         "Rows next to each boundary kept free of background.",
         "a distance >= 0 in lattice constants", lambda w: w >= 0),
    _Key("interaction.k_points", "integer", "-",
         "Momenta N_k of the self-consistent loop; unset: smallest even N_k >= max(32, 12 l_B) "
         "holding a whole number of electrons.",
         "an even integer >= 4", lambda n: n >= 4 and n % 2 == 0, optional=True),
    _Key("interaction.temperature", "float", "t", "Smearing temperature k_B T (0: zero temperature).",
         "a temperature >= 0 in t", lambda x: x >= 0),
    _Key("interaction.mixing", "choice", "-", "Pulay/Anderson (DIIS) or plain linear mixing.",
         "one of " + ", ".join(map(repr, MIXINGS)), choices=MIXINGS),
    _Key("interaction.alpha", "float", "-", "Mixing weight of the new residual.",
         "a weight with 0 < alpha <= 1", lambda a: 0 < a <= 1),
    _Key("interaction.history", "integer", "-", "Iterates kept by DIIS.",
         "an integer >= 1", lambda n: n >= 1),
    _Key("interaction.tol", "float", "-",
         "Converged when no element of the density matrix changes by more than this.",
         "a tolerance > 0", _positive),
    _Key("interaction.max_iter", "integer", "-", "Iterations per start before giving up (restartable).",
         "an integer >= 1", lambda n: n >= 1),
    _Key("interaction.starts", "starts", "-",
         "Starting states; the lowest converged Hartree-Fock energy is kept.",
         "a non-empty array of distinct names from " + ", ".join(map(repr, START_STATES))),
    _Key("interaction.scan_widths", "widths", "a",
         "Background widths w of an edge-structure scan beside the main run (empty: none).",
         "an array of distinct widths >= 0 in lattice constants"),
)}

_TOML_TYPES = {bool: "boolean", int: "integer", float: "float", str: "string",
               list: "array", tuple: "array", dict: "table"}


def _show(value: Any) -> str:
    """Quote a value for a message: repr-like, TOML booleans, at most 60 chars."""
    text = str(value).lower() if isinstance(value, bool) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _type_error(key: _Key, value: Any, hint: str = "") -> ConfigError:
    kind = _TOML_TYPES.get(type(value), type(value).__name__)
    return ConfigError(f"{key.path}: got {_show(value)} ({kind}); expected {key.expect}{hint}")


def _is_real(value: Any) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _to_float(key: _Key, value: Any) -> float:
    if not _is_real(value):
        raise _type_error(key, value)
    try:
        number = float(value)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number):
        raise ConfigError(f"{key.path}: got {_show(value)} (not finite); expected {key.expect}")
    return number


def _to_int(key: _Key, value: Any) -> int:
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        return int(value)
    whole = isinstance(value, float) and value.is_integer()
    hint = f" (write {int(value)} without a decimal point)" if whole else ""
    raise _type_error(key, value, hint)


def _to_bool(key: _Key, value: Any) -> bool:
    if not isinstance(value, bool):
        raise _type_error(key, value)
    return value


def _to_str(key: _Key, value: Any) -> str:
    if not isinstance(value, str):
        raise _type_error(key, value)
    return value


def _to_choice(key: _Key, value: Any) -> str:
    if _to_str(key, value) not in key.choices:
        close = difflib.get_close_matches(value, key.choices, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise ConfigError(f"{key.path}: got {_show(value)}; expected {key.expect}{hint}")
    return value


_FLUX = re.compile(r"\s*([+-]?[0-9]+)\s*(?:/\s*([+-]?[0-9]+)\s*)?")


def _to_length_or_auto(key: _Key, value: Any) -> float | str:
    if isinstance(value, str):
        if value == "auto":
            return value
        raise ConfigError(f"{key.path}: got {_show(value)}; expected {key.expect}")
    return _to_float(key, value)


def _to_flux(key: _Key, value: Any) -> Fraction:
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        return Fraction(int(value))
    if isinstance(value, float) and math.isfinite(value):
        near = Fraction(value).limit_denominator(1000)
        raise _type_error(key, value, f"; write it as a string: flux = \"{_fraction(near)}\"")
    match = _FLUX.fullmatch(_to_str(key, value))
    if match is None:
        raise ConfigError(f"{key.path}: got {_show(value)}; expected {key.expect}")
    p, q = int(match[1]), int(match[2] or 1)
    if q < 1:
        hint = f" (put the sign on p: '{-p}/{-q}')" if q < 0 else ""
        raise ConfigError(f"{key.path}: got {_show(value)}; expected q >= 1{hint}")
    if math.gcd(p, q) != 1:
        raise ConfigError(f"{key.path}: got {_show(value)}; p and q must be coprime "
                          f"(use '{_fraction(Fraction(p, q))}')")
    return Fraction(p, q)


def _to_pairs(key: _Key, value: Any) -> tuple[tuple[float, float], ...]:
    if not isinstance(value, (list, tuple)):
        raise _type_error(key, value)
    rows = []
    for i, row in enumerate(value):
        where = f"{key.path}[{i}]"
        if not (isinstance(row, (list, tuple)) and len(row) == 2
                and all(_is_real(x) and math.isfinite(x) for x in row)):
            raise ConfigError(f"{where}: got {_show(row)}; expected a [distance, potential] "
                              "pair of finite numbers (distance in a, potential in t)")
        distance, potential = float(row[0]), float(row[1])
        if distance < 0:
            raise ConfigError(f"{where}: got distance {distance!r}; expected a distance "
                              ">= 0 from the edge in lattice constants")
        if rows and distance <= rows[-1][0]:
            raise ConfigError(f"{where}: got distance {distance!r} after {rows[-1][0]!r}; "
                              "expected strictly increasing distances")
        rows.append((distance, potential))
    return tuple(rows)


def _to_grid(key: _Key, value: Any) -> tuple[int, int]:
    if not (isinstance(value, (list, tuple)) and len(value) == 2
            and all(isinstance(n, numbers.Integral) and not isinstance(n, bool) for n in value)):
        raise _type_error(key, value)
    if min(value) < 3:
        raise ConfigError(f"{key.path}: got {_show(list(value))}; expected {key.expect}")
    return int(value[0]), int(value[1])


def _to_starts(key: _Key, value: Any) -> tuple[str, ...]:
    if not isinstance(value, (list, tuple)) or not value:
        raise _type_error(key, value)
    for item in value:
        if item not in START_STATES:
            close = difflib.get_close_matches(str(item), START_STATES, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise ConfigError(f"{key.path}: got {_show(item)}; expected {key.expect}{hint}")
    if len(set(value)) < len(value):
        raise ConfigError(f"{key.path}: got {_show(list(value))} with a repeated name; expected {key.expect}")
    return tuple(value)


def _to_widths(key: _Key, value: Any) -> tuple[float, ...]:
    if not isinstance(value, (list, tuple)):
        raise _type_error(key, value)
    for item in value:
        if not (_is_real(item) and math.isfinite(item) and item >= 0):
            raise ConfigError(f"{key.path}: got {_show(item)} in the array; expected {key.expect}")
    if len(set(value)) < len(value):
        raise ConfigError(f"{key.path}: got {_show(list(value))} with a repeated width; expected {key.expect}")
    return tuple(float(x) for x in value)


_CONVERTERS: dict[str, Callable[[_Key, Any], Any]] = {
    "string": _to_str, "float": _to_float, "integer": _to_int, "boolean": _to_bool,
    "choice": _to_choice, "flux": _to_flux, "pairs": _to_pairs, "grid": _to_grid,
    "starts": _to_starts, "widths": _to_widths, "length_or_auto": _to_length_or_auto,
}


def _convert(key: _Key, value: Any) -> Any:
    if value is None and key.optional:
        return None
    value = _CONVERTERS[key.kind](key, value)
    if key.check is not None and not key.check(value):
        raise ConfigError(f"{key.path}: got {_show(value)}; expected {key.expect}")
    return value


def key_paths() -> tuple[str, ...]:
    """Every scenario key path, in schema order."""
    return tuple(_KEYS)


def convert_key(path: str, value: Any, *, ranges: bool = True) -> Any:
    """Check and convert one value for the scenario key ``path``.

    Parameters
    ----------
    path : str
        A key path such as ``"ribbon.edge.width"``.
    value : Any
        A TOML value.
    ranges : bool
        Also apply the key's range check (``False``: the type only).

    Raises
    ------
    ConfigError
        For an unknown path (with the nearest valid one), or a value of the
        wrong type or out of range, in one line naming the key.
    """
    if path not in _KEYS:
        raise _unknown(path)
    key = _KEYS[path]
    if not ranges:
        key = dataclasses.replace(key, check=None)
    return _convert(key, value)


def _join(prefix: str, name: str) -> str:
    return f"{prefix}.{name}" if prefix else name


def _children(prefix: str) -> list[str]:
    """Names of the keys and sections directly inside section ``prefix``."""
    return [f.name for f in fields(_SECTIONS[prefix])
            if _join(prefix, f.name) in _KEYS or _join(prefix, f.name) in _SECTIONS]


def _unknown(path: str) -> ConfigError:
    """Error for an unknown key, suggesting a sibling or a misplaced key."""
    prefix, _, name = path.rpartition(".")
    everywhere = [p for p in [*_KEYS, *_SECTIONS] if p]
    misplaced = [p for p in everywhere if p.rpartition(".")[2] == name]
    if misplaced:  # the right name in the wrong section beats a near sibling
        return ConfigError(f"{path}: unknown key; did you mean {' or '.join(map(repr, misplaced))}?")
    close = difflib.get_close_matches(name, _children(prefix), n=1)
    if close:
        return ConfigError(f"{path}: unknown key; did you mean {_join(prefix, close[0])!r}?")
    names = {p.rpartition(".")[2] for p in everywhere}
    close = difflib.get_close_matches(name, names, n=1)
    if close:
        matches = " or ".join(repr(p) for p in everywhere if p.rpartition(".")[2] == close[0])
        return ConfigError(f"{path}: unknown key; did you mean {matches}?")
    where = f"the keys of [{prefix}]" if prefix else "the top-level keys"
    valid = ", ".join(map(repr, _children(prefix)))
    return ConfigError(f"{path}: unknown key; expected one of {where}: {valid}")


def _collect(table: Any, prefix: str, out: dict[str, Any]) -> None:
    """Validate the section ``prefix`` and store its converted keys in ``out``."""
    if not isinstance(table, Mapping):
        kind = _TOML_TYPES.get(type(table), type(table).__name__)
        raise ConfigError(f"{prefix or 'scenario'}: got {_show(table)} ({kind}); expected a "
                          f"table with keys {', '.join(map(repr, _children(prefix)))}")
    for name, value in table.items():
        path = _join(prefix, str(name))
        if path in _SECTIONS:
            _collect(value, path, out)
        elif path in _KEYS:
            out[path] = _convert(_KEYS[path], value)
        else:
            raise _unknown(path)


def _build(prefix: str, values: Mapping[str, Any], **extra: Any) -> Any:
    """Construct the dataclass of section ``prefix``; missing keys keep defaults."""
    kwargs = dict(extra)
    for f in fields(_SECTIONS[prefix]):
        path = _join(prefix, f.name)
        if path in _SECTIONS:
            kwargs[f.name] = _build(path, values)
        elif path in values:
            kwargs[f.name] = values[path]
    return _SECTIONS[prefix](**kwargs)


def _check_combinations(s: Scenario) -> None:
    """Constraints that involve more than one key."""
    edge, width = s.ribbon.edge, s.ribbon.width
    span = ribbon_span(s)
    if edge.width > span / 2:
        across = f", {span:g} a_cc across" if s.lattice.kind in ("honeycomb", "haldane") else ""
        raise ConfigError(f"ribbon.edge.width: got {edge.width!r}, wider than half the ribbon "
                          f"(ribbon.width = {width}{across}); expected at most {span / 2:g}")
    if edge.profile == "table" and not edge.table:
        raise ConfigError("ribbon.edge.table: empty, but ribbon.edge.profile = 'table' needs it; "
                          "expected at least one [distance, potential] row")
    if edge.table and edge.profile != "table":
        raise ConfigError(f"ribbon.edge.table: given with ribbon.edge.profile = "
                          f"{edge.profile!r}; expected no table for that profile "
                          "(set ribbon.edge.profile = 'table' to use it)")
    _check_units(s)
    bar = s.hallbar
    if bar.enabled and bar.width <= 2 * edge.width:
        raise ConfigError(f"hallbar.width: got {bar.width}, not wider than the two edge ramps "
                          f"(2 x ribbon.edge.width = {2 * edge.width:g}); expected a wider bar")
    if s.fermi.energy is not None and s.fermi.gap is not None:
        raise ConfigError(f"fermi.gap: got {s.fermi.gap} together with fermi.energy = "
                          f"{s.fermi.energy!r}; expected only one of them")
    if s.interaction.enabled:
        _check_interaction(s)
    _check_lattice(s)
    if s.spin.zeeman != 0 and not s.spin.enabled:
        raise ConfigError(f"spin.zeeman: got {s.spin.zeeman!r} with spin.enabled = false; "
                          f"expected 0 without spin (spin.zeeman = {s.spin.zeeman!r} needs "
                          "spin.enabled = true)")


def ribbon_span(s: Scenario) -> float:
    """Distance between the outermost sites of the two edges (a, or a_cc on the honeycomb lattice).

    Square: ``W`` rows span ``W - 1``. Honeycomb (``a_cc = 1``): ``N`` zigzag
    chains span ``3 N / 2 - 1``, ``N`` dimer lines ``(N - 1) sqrt(3) / 2``
    (the geometry of `topoedge.honeycomb`).
    """
    width = s.ribbon.width
    if s.lattice.kind in ("square", "qwz"):
        return float(width)
    if (s.ribbon.orientation or "zigzag") == "zigzag":
        return 1.5 * width - 1.0
    return (width - 1) * math.sqrt(3.0) / 2


def _check_lattice(s: Scenario) -> None:
    """Keys that belong to one lattice, and what the honeycomb lattice does not have yet."""
    lat = s.lattice
    if s.spin.rashba != 0 and not s.spin.enabled:
        raise ConfigError(f"spin.rashba: got {s.spin.rashba!r} with spin.enabled = false; expected 0 "
                          "without spin (the Rashba term couples the two spins)")
    for enabled, key, what in ((s.interaction.enabled, "interaction.enabled", "[interaction]"),
                               (s.hallbar.enabled, "hallbar.enabled", "the Hall bar")):
        if enabled and s.spin.rashba != 0:
            raise ConfigError(f"spin.rashba: got {s.spin.rashba!r} with {what}, which needs S_z conserved "
                              f"(no Rashba term); expected 0 or {key} = false")
    for key, value, kinds in (("lattice.staggered", lat.staggered, ("honeycomb", "haldane")),
                              ("lattice.t2", lat.t2, ("haldane",)), ("lattice.t2_phase", lat.t2_phase, ("haldane",)),
                              ("lattice.mass", lat.mass, ("qwz",))):
        if value != 0 and lat.kind not in kinds:
            raise ConfigError(f"{key}: got {value!r} with lattice.kind = {lat.kind!r}; expected 0 (it belongs "
                              f"to lattice.kind = {' or '.join(map(repr, kinds))})")
    if s.chern.solver == "landau" and (lat.kind != "square" or s.spin.rashba != 0
                                       or (s.field.b_tesla is None and lat.flux.denominator < 3)
                                       or (s.field.b_tesla is None and lat.flux == 0)):
        why = (f"lattice.kind = {lat.kind!r}" if lat.kind != "square" else
               f"spin.rashba = {s.spin.rashba!r} (S_z not conserved)" if s.spin.rashba != 0 else
               f"lattice.flux = {_fraction(lat.flux)} (fewer than 3 bands per spin)")
        raise ConfigError(f"chern.solver: got 'landau' with {why}; expected 'auto' or 'dense' (the "
                          "Landau-level solver is built for the square lattice with S_z conserved)")
    allowed = {"honeycomb": ORIENTATIONS, "haldane": ("zigzag",)}.get(lat.kind, ())
    if s.ribbon.orientation is not None and s.ribbon.orientation not in allowed:
        where = "on the square lattice" if lat.kind == "square" else f"with lattice.kind = {lat.kind!r}"
        hint = (" (zigzag and armchair edges need lattice.kind = 'honeycomb')" if lat.kind == "square" else "")
        raise ConfigError(f"ribbon.orientation: got {s.ribbon.orientation!r} {where}; expected no orientation"
                          + "".join(f" or {o!r}" for o in allowed) + hint)
    if lat.kind == "square":
        return
    for enabled, key, what in (
        (s.field.b_tesla is not None, "field.b_tesla", "[material] and [field]"),
        (s.interaction.enabled, "interaction.enabled", "[interaction]"),
        (s.hallbar.enabled, "hallbar.enabled", "the Hall bar"),
    ):
        if enabled:
            raise ConfigError(f"{key}: {what} with lattice.kind = {lat.kind!r}; expected the square lattice "
                              f"({what} is built for the square lattice only)")


def _check_interaction(s: Scenario) -> None:
    """A self-consistent scenario: spinful, filling given, edge from the background only."""
    inter, width = s.interaction, s.ribbon.width
    physical = s.field.b_tesla is not None
    if not s.spin.enabled:
        raise ConfigError("spin.enabled: false with [interaction]; expected true (the self-consistent "
                          "run has both spins)")
    if s.ribbon.edge.profile != "none":
        raise ConfigError(f"ribbon.edge.profile: got {s.ribbon.edge.profile!r} with [interaction], where the "
                          "edge is the potential of the background charge (interaction.background.*); "
                          "expected 'none'")
    if s.hallbar.enabled:
        raise ConfigError("hallbar.enabled: true with [interaction]; expected false (the Hall bar is "
                          "not interacting)")
    if s.fermi.energy is not None or s.field.fermi_mev is not None:
        key = "field.fermi_mev" if physical else "fermi.energy"
        raise ConfigError(f"{key}: given with [interaction], where the electron number equals the "
                          "background charge; expected fermi.gap (bands filled in the bulk) or "
                          "field.density_cm2 instead")
    if s.fermi.gap is None and s.field.density_cm2 is None:
        raise ConfigError("fermi.gap: missing with [interaction]; expected the number of bulk bands "
                          "filled (e.g. fermi.gap = 1 for nu = 1 at flux 1/q), or field.density_cm2")
    if inter.coulomb is None and not physical:
        raise ConfigError("interaction.coulomb: missing; expected U_C in t, or [material] and [field] "
                          "to derive it from the permittivity")
    if inter.coulomb is not None and physical:
        raise ConfigError("interaction.coulomb: given together with [material] and [field], which set it "
                          "(e^2/(4 pi eps0 eps_r a)); expected only one of them")
    for w in (inter.background.width, *inter.scan_widths):
        key = "interaction.background.width" if w == inter.background.width else "interaction.scan_widths"
        if w > width / 2:
            raise ConfigError(f"{key}: got {w!r}, wider than half the ribbon (ribbon.width = {width}); "
                              f"expected at most {width / 2:g}")
    if inter.background.setback >= width / 2:
        raise ConfigError(f"interaction.background.setback: got {inter.background.setback!r}, which leaves "
                          f"no background in a ribbon of {width} rows, so nothing can neutralise the "
                          f"electrons; expected less than {width / 2:g}")


_MATERIAL_KEYS = ("effective_mass", "g_factor", "permittivity", "lattice_constant_nm")
PRESETS_DIR = DEFAULT_SCENARIO.parent / "presets"


def _check_units(s: Scenario) -> None:
    """The [material] and [field] sections: complete, consistent, usable."""
    fld, mat = s.field, s.material
    if fld.b_tesla is None:
        for name in ("fermi_mev", "density_cm2"):
            if getattr(fld, name) is not None:
                raise ConfigError(f"field.{name}: given without field.b_tesla; expected a field in tesla")
        return
    if fld.fermi_mev is not None and fld.density_cm2 is not None:
        raise ConfigError(f"field.density_cm2: got {fld.density_cm2!r} together with field.fermi_mev = "
                          f"{fld.fermi_mev!r}; expected only one of them")
    missing = [name for name in _MATERIAL_KEYS if getattr(mat, name) is None]
    if missing:
        raise ConfigError(f"material.{missing[0]}: missing, but field.b_tesla needs it; expected a value "
                          "or material.preset (e.g. 'gaas')")
    derived = derive_units(s)
    if fld.density_cm2 is not None and derived.filling < 0.5:
        raise ConfigError(f"field.density_cm2: got {fld.density_cm2!r}, filling factor {derived.filling:.3f} "
                          "at this field: no filled Landau level; expected a density giving filling >= 0.5")


def derive_units(s: Scenario) -> Derived:
    """Lattice parameters of the scenario's material and field (``field.b_tesla`` set)."""
    mat, fld = s.material, s.field
    try:
        a = None if mat.lattice_constant_nm == "auto" else mat.lattice_constant_nm
        return derive(effective_mass=mat.effective_mass, g_factor=mat.g_factor,
                      permittivity=mat.permittivity, lattice_constant_nm=a,
                      b_tesla=fld.b_tesla, fermi_mev=fld.fermi_mev, density_cm2=fld.density_cm2,
                      q_max=fld.q_max, tolerance=fld.tolerance, onsite_t=s.lattice.onsite,
                      spin=s.spin.enabled)
    except UnitsError as err:
        raise ConfigError(str(err)) from None


def _apply_preset(data: Mapping[str, Any]) -> Mapping[str, Any]:
    """Fill the [material] keys not given from the preset file it names."""
    material = data.get("material")
    if not isinstance(material, Mapping) or material.get("preset") is None:
        return data
    name = material["preset"]
    available = sorted(p.stem for p in PRESETS_DIR.glob("*.toml"))
    if not isinstance(name, str) or name not in available:
        close = difflib.get_close_matches(str(name), available, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise ConfigError(f"material.preset: got {_show(name)}; expected one of "
                          f"{', '.join(map(repr, available)) or 'no presets found'}{hint}")
    path = PRESETS_DIR / f"{name}.toml"
    try:
        preset = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as err:
        raise ConfigError(f"material.preset: cannot read {path}: {err}".replace("\n", " ")) from None
    extra = set(preset) - {"material"} or set(preset.get("material", {})) - set(_MATERIAL_KEYS)
    if extra:
        raise ConfigError(f"material.preset: {path} has {sorted(extra)}; expected only [material] "
                          f"keys {', '.join(_MATERIAL_KEYS)}")
    merged = dict(data)
    merged["material"] = {**preset.get("material", {}), **material}
    return merged


def parse_scenario(data: Mapping[str, Any], *, source: str | None = None) -> Scenario:
    """Validate a nested mapping of TOML values into a `Scenario`.

    Parameters
    ----------
    data : Mapping
        Top-level ``title`` and the section tables; absent keys take their
        defaults. Ints are accepted for float keys; bools, strings and floats
        are never taken for numbers, integers or flux respectively.
    source : str, optional
        File the data came from, kept in `Scenario.source`.

    Returns
    -------
    Scenario

    Raises
    ------
    ConfigError
        At the first unknown key, wrong type, out-of-range value or
        inconsistent combination, naming the key path.
    """
    values: dict[str, Any] = {}
    _collect(_apply_preset(data), "", values)
    if values.get("field.b_tesla") is not None:  # these keys are derived from the field
        for path, by in (("lattice.flux", "field.b_tesla"), ("spin.zeeman", "field.b_tesla"),
                         ("fermi.energy", "field.fermi_mev or field.density_cm2"),
                         ("fermi.gap", "field.fermi_mev or field.density_cm2")):
            if path in values and values[path] is not None and (
                    path.startswith(("lattice", "spin")) or values.get("field.fermi_mev") is not None
                    or values.get("field.density_cm2") is not None):
                raise ConfigError(f"{path}: given together with {by}, which sets it; expected only one "
                                  "of them (remove the lattice-unit key)")
    if values.get("lattice.kind") in ZERO_FIELD:
        # A zero-field two-band model: no flux and no spin unless asked for (refused).
        kind = values["lattice.kind"]
        if values.get("lattice.flux"):
            raise ConfigError(f"lattice.flux: got '{values['lattice.flux']}' with lattice.kind = {kind!r}, a "
                              "zero-field model; expected no flux (leave the key out)")
        if values.get("spin.enabled"):
            raise ConfigError(f"spin.enabled: true with lattice.kind = {kind!r}, a spinless two-band model; "
                              "expected false (leave the key out)")
        values["lattice.flux"] = Fraction(0)
        values["spin.enabled"] = False
    if isinstance(data.get("interaction"), Mapping) and "interaction.enabled" not in values:
        values["interaction.enabled"] = True  # the section turns the interaction on
    scenario = _build("", values, source=source)
    _check_combinations(scenario)
    return scenario


def _parse_value(text: str) -> Any:
    """A TOML value, or the text itself when it is not one (``1/30``, ``linear``)."""
    try:
        parsed = tomllib.loads(f"v = {text}")
    except tomllib.TOMLDecodeError:
        return text
    return parsed["v"] if parsed.keys() == {"v"} else text


def _plain(value: Any) -> Any:
    """Copy with mappings as dicts and sequences as lists; flux as "p/q"."""
    if isinstance(value, Mapping):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return _fraction(value) if isinstance(value, Fraction) else value


def apply_overrides(data: Mapping[str, Any], overrides: Sequence[str]) -> dict[str, Any]:
    """Return a copy of ``data`` with ``section.key=value`` overrides set.

    Parameters
    ----------
    data : Mapping
        Nested scenario tables, as read from TOML; not modified.
    overrides : sequence of str
        Items ``path=value`` with a dotted key path of any depth, e.g.
        ``ribbon.edge.width=4``. The value is read as a TOML value, or kept
        as a bare string if it is not one (``lattice.flux=1/30``). Setting
        ``fermi.gap`` removes ``fermi.energy`` and the other way round.

    Returns
    -------
    dict
        The merged tables, to be validated by `parse_scenario` (which also
        reports unknown key paths).

    Raises
    ------
    ConfigError
        For an item without ``=`` or with an empty key, or one whose path
        descends into a value that is not a table.
    """
    if isinstance(overrides, str):
        raise TypeError(f"overrides: got the string {_show(overrides)}; expected a sequence "
                        "of 'section.key=value' strings (wrap it in a list)")
    merged = _plain(data)
    for item in overrides:
        path, eq, text = item.partition("=")
        names = [name.strip() for name in path.split(".")]
        if not eq or not all(names):
            raise ConfigError(f"--set {_show(item)}: expected section.key=value "
                              "(for example --set ribbon.width=80)")
        table = merged
        for depth, name in enumerate(names[:-1]):
            table = table.setdefault(name, {})
            if not isinstance(table, dict):
                inner = ".".join(names[:depth + 1])
                raise ConfigError(f"--set {_show(item)}: {inner} holds a value, not a table; "
                                  f"expected a key path ending at a key (e.g. {inner}=...)")
        table[names[-1]] = _parse_value(text.strip())
        for group in _ALTERNATIVES:  # setting one alternative replaces the others
            if ".".join(names) in group and table is merged.get(names[0]):
                for other in group - {".".join(names)}:
                    table.pop(other.rpartition(".")[2], None)
    return merged


#: Keys that exclude each other; an override of one removes the others.
_ALTERNATIVES = ({"fermi.energy", "fermi.gap"},)


def load_scenario(path: str | os.PathLike[str] | None = None,
                  overrides: Sequence[str] = ()) -> Scenario:
    """Read a TOML scenario file, apply overrides and validate it.

    Parameters
    ----------
    path : str or os.PathLike, optional
        Scenario file; `DEFAULT_SCENARIO` when None.
    overrides : sequence of str
        ``section.key=value`` items, applied as by `apply_overrides`.

    Returns
    -------
    Scenario
        With ``source`` set to ``str(path)``.

    Raises
    ------
    ConfigError
        If the file is missing or unreadable, is not valid TOML, or the
        scenario is invalid.
    """
    path = DEFAULT_SCENARIO if path is None else Path(path)
    try:
        with open(path, "rb") as file:
            data = tomllib.load(file)
    except FileNotFoundError:
        raise ConfigError(f"scenario file {str(path)!r} not found; "
                          "expected an existing TOML file (check the path)") from None
    except OSError as err:
        raise ConfigError(f"scenario file {str(path)!r}: cannot read it "
                          f"({err.strerror})") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        raise ConfigError(f"scenario file {str(path)!r}: invalid TOML: {err}; "
                          "expected a valid UTF-8 TOML document") from None
    return parse_scenario(apply_overrides(data, overrides), source=str(path))


def _fraction(value: Fraction) -> str:
    return f"{value.numerator}/{value.denominator}"


def _lookup(scenario: Scenario, path: str) -> Any:
    value: Any = scenario
    for name in path.split("."):
        value = getattr(value, name)
    return value


def key_docs() -> list[tuple[str, str, str, str, str]]:
    """Describe every scenario key, in schema order.

    Returns
    -------
    list of (str, str, str, str, str)
        ``(key path, type, unit, default, meaning)``; the default is written
        as a TOML literal ("unset" for an optional key without default).
    """
    defaults = Scenario()
    rows = []
    for path, key in _KEYS.items():
        kind = {"choice": "string: " + " | ".join(f'"{c}"' for c in key.choices),
                "flux": 'string "p/q"', "pairs": "array of [float, float]",
                "grid": "array of two integers", "starts": "array of strings",
                "widths": "array of floats", "length_or_auto": 'float or "auto"'}.get(key.kind, key.kind)
        default = _plain(_lookup(defaults, path))
        rows.append((path, kind, key.unit, "unset" if default is None else json.dumps(default),
                     key.doc))
    return rows


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
