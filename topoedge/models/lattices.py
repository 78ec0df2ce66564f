"""The lattice registry: one entry per ``lattice.kind``, read by every later stage.

An entry says what a lattice is and what it supports, and builds its kwant
systems from the plain configuration values (duck-typed ``lattice``, ``spin``
and ``ribbon`` sections of a scenario, in lattice units):

- ``params(lattice, spin)``: the kwant ``params`` of its value functions;
- ``bulk(lattice, spin)``: the builder with two translation symmetries
  (the magnetic unit cell, or the zero-field unit cell);
- ``ribbon(lattice, spin, ribbon)``: the builder with one translation
  symmetry, with the edge potential of ``ribbon.edge``, and a function that
  gives the potential (t) of every row or site position across the ribbon
  from the finalized ribbon's positions;
- ``span(width, orientation)``: the distance between the outermost sites of
  the two edges, in ``length_unit``;
- ``scales(lattice)`` and ``model_keys(lattice, ribbon)``: what the summary
  reports about the model;
- ``supports``: the optional parts it has (``"physical_units"``,
  ``"hallbar"``, ``"interaction"``, ``"butterfly"``, ``"landau"``,
  ``"bench"``, ``"rashba"``).

The scenario checks, the workflows, the reports and the command line ask the
registry instead of testing the lattice kind. The builder modules (which
import kwant) are imported only when a builder is asked for. Adding a lattice is one entry
here (and its builders in a module of this package); see the contributor
guide.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from .profiles import EDGE_PROFILES, edge_potential

# The builder modules import kwant; they are imported when a builder is asked
# for, so that reading and checking a scenario stays light.

__all__ = ["Lattice", "LATTICES", "lattice", "zero_field_kinds"]


@dataclass(frozen=True)
class Lattice:
    """One lattice kind (see the module notes)."""

    kind: str
    title: str                          # for reports: "square", "honeycomb", "Haldane model", ...
    length_unit: str                    # "a" or "a_cc"
    cell: str                           # what the flux threads: "plaquette", "hexagon" ("" without field)
    in_field: bool                      # False: a zero-field model (no flux, no spin)
    orbitals_per_site: int              # without spin
    sites_per_width: int                # sites of one unit of ribbon.width (a zigzag chain: 2)
    cell_sites_per_q: int               # sites of the magnetic cell per flux denominator q
    orientations: tuple[str, ...]       # allowed ribbon.orientation values, the default first
    own_keys: tuple[str, ...]           # lattice.* keys that belong to it (0 elsewhere)
    supports: frozenset
    params: Callable
    bulk: Callable
    ribbon: Callable
    span: Callable
    scales: Callable
    model_keys: Callable
    periods: dict = field(default_factory=dict)     # ribbon period by orientation, for figure labels
    describe: Callable | None = None    # text-report line of the model (from the summary's "model")
    #: Largest |flux| at which the continuum scales of ``scales`` (l_B, hbar omega_c or the
    #: Dirac E_1) describe the lattice Landau levels; None without such scales.
    continuum_flux_max: float | None = None
    #: ``plane(lattice, spin)``: a plane whose values depend on positions only, from which
    #: finite flakes are cut (None: ``bulk`` is such a plane).
    plane: Callable | None = None
    #: Area per site in ``length_unit`` squared (the cell area over its sites).
    site_area: float = 1.0

    def flake_plane(self, lattice, spin):
        """The template of finite flakes of this lattice (:mod:`topoedge.models.flakes`)."""
        return (self.plane or self.bulk)(lattice, spin)


def _rashba(spin) -> bool:
    return spin.rashba != 0


def _profile(edge):
    """The edge profile ``V(d)`` (t) of an edge section, ``d`` from the nearer edge; None for no profile."""
    if edge.profile == "none":
        return None
    shape = EDGE_PROFILES[edge.profile]
    return lambda d: shape(np.asarray(d, dtype=float), width=float(edge.width), height=float(edge.height),
                           table=edge.table)


def _at_sites(profile):
    """The potential at every distinct position across a finalized ribbon (``positions``)."""
    def potential(positions) -> np.ndarray:
        y = np.unique(positions)
        d = np.minimum(y - y.min(), y.max() - y)
        return profile(d) if profile is not None else np.zeros_like(d)

    return potential


# ------------------------------------------------------------- square lattice


def _square_params(lattice, spin) -> dict:
    from .square import model_params

    return model_params(phi=lattice.flux, zeeman=spin.zeeman, onsite=lattice.onsite,
                        rashba=spin.rashba if _rashba(spin) else None)


def _square_ribbon(lattice, spin, ribbon):
    from .square import ribbon_builder

    edge = ribbon.edge
    rows = edge_potential(ribbon.width, edge.profile, ramp=edge.width, height=edge.height, table=edge.table)
    builder = ribbon_builder(ribbon.width, spin=spin.enabled, potential=rows, rashba=_rashba(spin))
    return builder, lambda positions: rows


def _square_scales(lattice) -> dict:
    phi = abs(float(lattice.flux))
    return {"magnetic_length_a": (1.0 / math.sqrt(2 * math.pi * phi)) if phi else None,
            "cyclotron_energy_t": 4 * math.pi * phi}


def _square_describe(m: dict) -> str:
    return f"square, flux {m['flux']} flux quanta per plaquette (energies in units of t)"


# ---------------------------------------------------------- honeycomb lattice


def _square_bulk(lattice, spin):
    from .square import bulk_builder

    return bulk_builder(lattice.flux, spin=spin.enabled, rashba=_rashba(spin))


def _honeycomb_params(lattice, spin) -> dict:
    from .honeycomb import honeycomb_params

    return honeycomb_params(phi=lattice.flux, zeeman=spin.zeeman, onsite=lattice.onsite,
                            staggered=lattice.staggered, rashba=spin.rashba)


def _honeycomb_ribbon(lattice, spin, ribbon):
    from .honeycomb import honeycomb_ribbon_builder

    profile = _profile(ribbon.edge)
    return honeycomb_ribbon_builder(ribbon.width, orientation=ribbon.orientation or "zigzag", spin=spin.enabled,
                                    potential=profile, rashba=_rashba(spin)), _at_sites(profile)


def _honeycomb_bulk(lattice, spin):
    from .honeycomb import honeycomb_bulk_builder

    return honeycomb_bulk_builder(lattice.flux, spin=spin.enabled, rashba=_rashba(spin))


def _honeycomb_plane(lattice, spin):
    from .flakes import honeycomb_plane

    return honeycomb_plane(spin=spin.enabled, rashba=_rashba(spin))


def _honeycomb_scales(lattice) -> dict:
    from .honeycomb import dirac_landau_level, honeycomb_magnetic_length

    phi = abs(float(lattice.flux))
    return {"magnetic_length_a": honeycomb_magnetic_length(phi) if phi else None, "cyclotron_energy_t": None,
            "landau_level_1_t": dirac_landau_level(1, phi) if phi else None}


def _honeycomb_span(width: int, orientation: str | None) -> float:
    """``N`` zigzag chains span ``3 N / 2 - 1`` a_cc, ``N`` dimer lines ``(N - 1) sqrt(3) / 2``."""
    if (orientation or "zigzag") == "zigzag":
        return 1.5 * width - 1.0
    return (width - 1) * math.sqrt(3.0) / 2


def _honeycomb_describe(m: dict) -> str:
    staggered = f", staggered potential {m['staggered_t']:g} t" if m.get("staggered_t") else ""
    return f"honeycomb (a_cc = 1), flux {m['flux']} flux quanta per hexagon{staggered} (energies in units of t)"


def _hexagonal_keys(lattice, ribbon) -> dict:
    return {"staggered_t": lattice.staggered, "orientation": ribbon.orientation or "zigzag"}


# ------------------------------------------------------------ zero-field models


def _haldane_bulk(lattice, spin):
    from .zero_field import haldane_builder

    return haldane_builder()


def _haldane_ribbon(lattice, spin, ribbon):
    from .zero_field import haldane_ribbon_builder

    profile = _profile(ribbon.edge)
    return haldane_ribbon_builder(ribbon.width, potential=profile), _at_sites(profile)


def _qwz_bulk(lattice, spin):
    from .zero_field import qwz_builder

    return qwz_builder()


def _qwz_ribbon(lattice, spin, ribbon):
    from .zero_field import qwz_ribbon_builder

    profile = _profile(ribbon.edge)
    return qwz_ribbon_builder(ribbon.width, potential=profile), _at_sites(profile)


def _no_scales(lattice) -> dict:
    return {"magnetic_length_a": None, "cyclotron_energy_t": None}


def _haldane_describe(m: dict) -> str:
    return (f"Haldane model (honeycomb, a_cc = 1, no field): t2 = {m['t2_t']:g} t, phase {m['t2_phase_rad']:g} rad, "
            f"sublattice mass M = {m['staggered_t']:g} t")


def _qwz_describe(m: dict) -> str:
    return f"Qi-Wu-Zhang model (square, no field): mass m = {m['mass_t']:g} t (two orbitals per site)"


_EVERYTHING = frozenset({"physical_units", "hallbar", "interaction", "butterfly", "landau", "bench", "rashba"})

#: Every lattice kind, by ``lattice.kind``.
LATTICES: dict[str, Lattice] = {entry.kind: entry for entry in (
    Lattice(
        kind="square", title="square lattice", length_unit="a", cell="plaquette", in_field=True,
        orbitals_per_site=1, sites_per_width=1, cell_sites_per_q=1, orientations=(), own_keys=(),
        supports=_EVERYTHING, params=_square_params,
        bulk=_square_bulk,
        ribbon=_square_ribbon, span=lambda width, orientation: float(width), scales=_square_scales,
        model_keys=lambda lattice, ribbon: {}, periods={None: "a"}, describe=_square_describe,
        # measured: the lowest Landau level at flux 1/20, 1/10, 1/8 is 0.48, 0.46,
        # 0.45 hbar omega_c above the band bottom instead of 0.5
        continuum_flux_max=1 / 8),
    Lattice(
        kind="honeycomb", title="honeycomb lattice", length_unit="a_cc", cell="hexagon", in_field=True,
        orbitals_per_site=1, sites_per_width=2, cell_sites_per_q=2, orientations=("zigzag", "armchair"),
        own_keys=("staggered",), supports=frozenset({"rashba"}), params=_honeycomb_params,
        bulk=_honeycomb_bulk,
        ribbon=_honeycomb_ribbon, span=_honeycomb_span, scales=_honeycomb_scales, model_keys=_hexagonal_keys,
        periods={"zigzag": "sqrt(3) a_cc", "armchair": "3 a_cc"}, describe=_honeycomb_describe,
        continuum_flux_max=1 / 8, plane=_honeycomb_plane, site_area=3 * math.sqrt(3) / 4),
    Lattice(
        kind="haldane", title="Haldane model", length_unit="a_cc", cell="", in_field=False,
        orbitals_per_site=1, sites_per_width=2, cell_sites_per_q=2, orientations=("zigzag",),
        own_keys=("staggered", "t2", "t2_phase"), supports=frozenset(),
        params=lambda lattice, spin: dict(t1=1.0, t2=lattice.t2, t2_phase=lattice.t2_phase, M=lattice.staggered),
        bulk=_haldane_bulk, ribbon=_haldane_ribbon,
        span=_honeycomb_span, scales=_no_scales,
        model_keys=lambda lattice, ribbon: {**_hexagonal_keys(lattice, ribbon), "t2_t": lattice.t2,
                                            "t2_phase_rad": lattice.t2_phase},
        periods={"zigzag": "sqrt(3) a_cc"}, describe=_haldane_describe, site_area=3 * math.sqrt(3) / 4),
    Lattice(
        kind="qwz", title="Qi-Wu-Zhang model", length_unit="a", cell="", in_field=False,
        orbitals_per_site=2, sites_per_width=1, cell_sites_per_q=1, orientations=(), own_keys=("mass",),
        supports=frozenset(), params=lambda lattice, spin: dict(m=lattice.mass),
        bulk=_qwz_bulk, ribbon=_qwz_ribbon,
        span=lambda width, orientation: float(width), scales=_no_scales,
        model_keys=lambda lattice, ribbon: {"mass_t": lattice.mass}, periods={None: "a"}, describe=_qwz_describe),
)}


def lattice(kind: str) -> Lattice:
    """The registry entry of ``kind``."""
    return LATTICES[kind]


def zero_field_kinds() -> tuple[str, ...]:
    """The kinds without a magnetic field (spinless two-band Chern insulators)."""
    return tuple(kind for kind, entry in LATTICES.items() if not entry.in_field)
