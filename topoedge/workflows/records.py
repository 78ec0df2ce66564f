"""Typed, frozen results of a run (workflow stage).

A run's results are records with attributes; one ``to_dict()`` per record
gives the JSON-able form written as ``summary.json`` (the keys and their order
are documented on the output-formats page and checked by the tests). The
text report, the sweep tables and the figures read attributes, never keys.

Energies are in units of the hopping ``t`` unless a name says otherwise
(``*_mev``); lengths in lattice constants ``a`` (``*_nm``: nanometres,
``*_lb``: magnetic lengths); conductances in ``e^2/h``; resistances in
``h/e^2`` or ohm (``*_ohm``). Sign convention: ``R_xy = -1/sigma_xy``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from ..scenario import Scenario
from ..scenario.units import VON_KLITZING, Derived
from ..solvers.chern import ChernResult, Gap, SubspaceChern
from ..solvers.edges import EdgeCount
from ..solvers.streda import StredaResult
from ..solvers.transport import AveragedHall

__all__ = ["ModelInfo", "SpectrumInfo", "BulkInfo", "FermiInfo", "HallRoutes", "HallBarRoute", "HallInfo",
           "BulkEdgeCheck", "ModeUnits", "PhysicalInfo", "RunSummary", "UnconvergedSummary", "finite_or_none"]

#: How the bulk-edge check counts (repeated in every summary).
CONVENTION = "bottom-edge net chirality = +C and top edge = -C, C = Chern sum below E_F"
#: Units of the ``hall`` block.
HALL_UNITS = "sigma_xy in e^2/h; r_xy_ohm = -1/sigma_xy = -h/(C e^2) (rho_xy), null for C = 0"
#: Units of the ``physical`` block.
PHYSICAL_UNITS = ("energies in meV above the band bottom; y_nm from the bottom row, depth_nm and depth_lb from "
                  "the mode's own edge; velocities in m/s (drift_m_s: U'(y)/(e B), null where U is flat); "
                  "R_xy = -1/sigma_xy in ohm")


def finite_or_none(x: float) -> float | None:
    """``float(x)``, or None for an infinite or undefined value (JSON has no infinity)."""
    return float(x) if math.isfinite(x) else None


@dataclass(frozen=True)
class ModelInfo:
    """The model that was solved.

    Attributes
    ----------
    lattice : str
        ``lattice.kind``.
    flux : str
        Flux per plaquette (hexagon) as ``"p/q"``, in flux quanta ``h/e``.
    spin : bool
        Whether the electrons carry spin 1/2.
    zeeman_t, rashba_t : float
        Zeeman splitting and Rashba coupling in t.
    lattice_keys : mapping
        The lattice's own entries (the registry's ``model_keys``: orientation,
        staggered potential, Haldane parameters, mass), in lattice units.
    scales : mapping
        The lattice's derived scales (the registry's ``scales``):
        ``magnetic_length_a`` (a, or a_cc) and ``cyclotron_energy_t`` or
        ``landau_level_1_t`` (t), None without a field.
    ribbon_width_sites : int
        Ribbon width in sites (chains or dimer lines of a honeycomb ribbon).
    edge_profile : str
        The edge profile, or the background charge of a self-consistent run.
    edge_potential_max_t : float
        Largest edge (or Hartree) potential across the ribbon, in t.
    """

    lattice: str
    flux: str
    spin: bool
    zeeman_t: float
    rashba_t: float
    lattice_keys: Mapping[str, object]
    scales: Mapping[str, float | None]
    ribbon_width_sites: int
    edge_profile: str
    edge_potential_max_t: float

    @property
    def magnetic_length_a(self) -> float | None:
        """Magnetic length in lattice constants (a, a_cc on the honeycomb lattice); None without a field."""
        return self.scales.get("magnetic_length_a")

    def to_dict(self) -> dict:
        return {"lattice": self.lattice, "flux": self.flux, "spin": self.spin, "zeeman_t": self.zeeman_t,
                "rashba_t": self.rashba_t, **self.lattice_keys, **self.scales,
                "ribbon_width_sites": self.ribbon_width_sites, "edge_profile": self.edge_profile,
                "edge_potential_max_t": self.edge_potential_max_t}


@dataclass(frozen=True)
class SpectrumInfo:
    """The ribbon spectrum: momenta, states kept, solver, energy window and range (t)."""

    k_points: int
    states: int
    solver: str
    window: tuple[float, float] | None
    energy_min: float | None
    energy_max: float | None

    def to_dict(self) -> dict:
        return {"k_points": self.k_points, "states": self.states, "solver": self.solver,
                "window": list(self.window) if self.window else None,
                "energy_min": self.energy_min, "energy_max": self.energy_max}


@dataclass(frozen=True)
class BulkInfo:
    """The bulk bands, their gaps and Chern numbers, and the Chern sum below E_F.

    Attributes
    ----------
    chern : ChernResult
        Bands and gaps on the momentum grid.
    refined : ChernResult or None
        The same on the finer grid (``chern.refine``).
    gap : Gap
        The gap that holds E_F.
    solver_reason : str or None
        Why the solver was chosen (``chern.solver = "auto"``).
    subspace : SubspaceChern or None
        The Chern sum from the occupied subspace as a whole (the cross-check).
    """

    chern: ChernResult
    refined: ChernResult | None
    gap: Gap
    solver_reason: str | None
    subspace: SubspaceChern | None = None

    @property
    def chern_below_fermi(self) -> int:
        """Chern sum of the bands below E_F."""
        return self.gap.chern

    @property
    def spin_chern_below_fermi(self) -> dict | None:
        """``{"up": C_up, "down": C_down}`` when S_z is conserved, else None."""
        return self.gap.spin_chern

    @property
    def converged(self) -> bool | None:
        """Whether the finer grid gives the same gaps and Chern numbers (None without it)."""
        if self.refined is None:
            return None
        return [(g.below, g.chern) for g in self.chern.gaps] == [(g.below, g.chern) for g in self.refined.gaps]

    @property
    def subspace_agree(self) -> bool | None:
        """Whether the occupied subspace as a whole gives the band sum (None without the check)."""
        return None if self.subspace is None else self.subspace.chern == self.gap.chern

    def to_dict(self) -> dict:
        c, r = self.chern, self.refined
        return {
            "solver": c.solver,
            "solver_reason": self.solver_reason,
            "bands_computed": len(c.bands),
            "bands_total": c.total_bands or len(c.bands),
            "grid": list(c.grid),
            "gap_min": c.gap_min,
            "bands": [b.to_dict() for b in c.bands],
            "gaps": [g.to_dict() for g in c.gaps],
            "chern_below_fermi": self.chern_below_fermi,
            "spin_chern_below_fermi": self.spin_chern_below_fermi,
            "refined_grid": list(r.grid) if r is not None else None,
            "refined_gaps": [g.to_dict() for g in r.gaps] if r is not None else None,
            "converged": self.converged,
            "subspace": None if self.subspace is None else {**self.subspace.to_dict(),
                                                            "agree": self.subspace_agree},
        }


@dataclass(frozen=True)
class FermiInfo:
    """The Fermi energy (t), the gap it lies in and how it was chosen."""

    energy: float
    gap_below: int
    gap_window: tuple[float | None, float | None]
    from_gap: int | None
    #: Set for a self-consistent run (E_F between occupied and empty levels).
    note: str | None = None

    def to_dict(self) -> dict:
        out = {"energy": self.energy, "gap_below": self.gap_below, "gap_window": list(self.gap_window),
               "from_gap": self.from_gap}
        if self.note is not None:
            out["note"] = self.note
        return out


@dataclass(frozen=True)
class HallBarRoute:
    """Hall and longitudinal resistance of the six-terminal Hall bar at E_F.

    Resistances in ``h/e^2`` (means over the disorder seeds with standard
    errors of the mean) and ohm; ``sigma_xy = -1/R_xy`` in ``e^2/h``;
    ``by_spin`` per spin sector (``{"up": {"r_xy", "r_xx", "sigma_xy"} or
    None, ...}``) when S_z is conserved; the bar's size in sites, disorder
    strength in t and number of seeds.
    """

    average: AveragedHall
    length: int
    width: int
    disorder: float
    seeds: int

    r_xy = property(lambda self: self.average.r_xy, doc="Mean R_xy over the seeds (h/e^2).")
    r_xy_sem = property(lambda self: self.average.r_xy_sem, doc="Standard error of R_xy (h/e^2).")
    r_xx = property(lambda self: self.average.r_xx, doc="Mean R_xx over the seeds (h/e^2).")
    r_xx_sem = property(lambda self: self.average.r_xx_sem, doc="Standard error of R_xx (h/e^2).")
    r_xy_ohm = property(lambda self: self.average.r_xy_ohm, doc="Mean R_xy (ohm).")
    r_xx_ohm = property(lambda self: self.average.r_xx_ohm, doc="Mean R_xx (ohm).")

    @property
    def sigma_xy(self) -> float | None:
        """``-1/R_xy`` in e^2/h (None when R_xy vanishes)."""
        return -1.0 / self.r_xy if self.r_xy else None

    @property
    def by_spin(self) -> dict | None:
        """Per spin sector ``{"r_xy", "r_xx", "sigma_xy"}`` (h/e^2, e^2/h) or None; None without spin."""
        if self.average.by_spin is None:
            return None
        return {name: None if value is None else {**value, "sigma_xy": -1.0 / value["r_xy"] if value["r_xy"] else None}
                for name, value in self.average.by_spin.items()}

    def to_dict(self) -> dict:
        return {"r_xy": self.r_xy, "r_xy_sem": self.r_xy_sem, "r_xx": self.r_xx, "r_xx_sem": self.r_xx_sem,
                "r_xy_ohm": self.r_xy_ohm, "r_xx_ohm": self.r_xx_ohm, "sigma_xy": self.sigma_xy,
                "by_spin": self.by_spin, "length": self.length, "width": self.width,
                "disorder": self.disorder, "seeds": self.seeds}


@dataclass(frozen=True)
class HallRoutes:
    """The Hall conductance (e^2/h) by every route computed.

    ``chern``: Chern sum below E_F; ``edge``: net chirality of the bottom edge
    (None when E_F is not in a gap of the ribbon); ``streda``: the slope
    ``d n_site / d phi`` and its deviation from the nearest integer;
    ``hallbar``: ``-1/R_xy`` of the Hall bar and its deviation.
    """

    chern: int
    edge: int | None
    streda: float | None
    streda_deviation: float | None
    hallbar: float | None
    hallbar_deviation: float | None

    @property
    def agree(self) -> bool:
        """Every computed route equals the Chern sum (within 1e-6), and the edge route exists."""
        values = [v for v in (self.edge, self.streda, self.hallbar) if v is not None]
        return all(abs(v - self.chern) < 1e-6 for v in values) and self.edge is not None

    def to_dict(self) -> dict:
        return {"chern": self.chern, "edge": self.edge, "streda": self.streda,
                "streda_deviation": self.streda_deviation, "hallbar": self.hallbar,
                "hallbar_deviation": self.hallbar_deviation}


@dataclass(frozen=True)
class HallInfo:
    """The Hall response: ``sigma_xy = C e^2/h`` and the routes that measure it."""

    sigma_xy: int
    routes: HallRoutes
    streda: StredaResult | None = None
    streda_error: str | None = None
    hallbar: HallBarRoute | None = None
    hallbar_error: str | None = None

    @property
    def sigma_xy_siemens(self) -> float:
        return self.sigma_xy / VON_KLITZING

    @property
    def r_xy_ohm(self) -> float | None:
        """``R_xy = -1/sigma_xy`` in ohm; None for C = 0."""
        return -VON_KLITZING / self.sigma_xy if self.sigma_xy else None

    def to_dict(self) -> dict:
        return {"sigma_xy": self.sigma_xy, "sigma_xy_siemens": self.sigma_xy_siemens, "r_xy_ohm": self.r_xy_ohm,
                "units": HALL_UNITS, "routes": self.routes.to_dict(),
                "streda": self.streda.to_dict() if self.streda is not None else None,
                "streda_error": self.streda_error,
                "hallbar": self.hallbar.to_dict() if self.hallbar is not None else None,
                "hallbar_error": self.hallbar_error}


@dataclass(frozen=True)
class BulkEdgeCheck:
    """Bulk-edge correspondence and the agreement of the Hall routes.

    ``bulk_edge_agree``: bottom edge ``+C`` and top edge ``-C`` (see
    :data:`CONVENTION`); ``spin_resolved_agree``: the same per spin (None
    unless S_z is conserved); ``reason``: why not, when it can tell;
    ``routes_agree``: :attr:`HallRoutes.agree`.
    """

    bulk_edge_agree: bool
    spin_resolved_agree: bool | None
    reason: str | None
    routes_agree: bool
    convention: str = CONVENTION

    def to_dict(self) -> dict:
        return {"bulk_edge_agree": self.bulk_edge_agree, "spin_resolved_agree": self.spin_resolved_agree,
                "reason": self.reason, "convention": self.convention, "routes_agree": self.routes_agree}


@dataclass(frozen=True)
class ModeUnits:
    """One edge mode in physical units: position from the bottom row and depth from its own edge (nm and
    magnetic lengths), velocity ``dE/(hbar dk)`` and the ``E x B`` drift of the edge potential (m/s)."""

    y_nm: float
    depth_nm: float
    depth_lb: float
    velocity_m_s: float
    drift_m_s: float | None

    def to_dict(self) -> dict:
        return {"y_nm": self.y_nm, "depth_nm": self.depth_nm, "depth_lb": self.depth_lb,
                "velocity_m_s": self.velocity_m_s, "drift_m_s": self.drift_m_s}


@dataclass(frozen=True)
class PhysicalInfo:
    """The run's results in the units of a physical scenario (see :data:`PHYSICAL_UNITS`).

    Fields in tesla, lengths in nm, energies in meV above the band bottom
    of the lattice model, ``R_xy`` in ohm; ``edges`` maps ``"bottom"`` and
    ``"top"`` to the :class:`ModeUnits` of their modes, in the order of the
    edge summary.
    """

    b_tesla: float
    b_lattice_tesla: float
    b_relative_error: float
    lattice_constant_nm: float
    hopping_mev: float
    magnetic_length_nm: float
    cyclotron_mev: float
    zeeman_mev: float
    coulomb_mev: float
    filling: float | None
    fermi_energy_mev: float | None
    gap_mev: tuple[float | None, float | None]
    ribbon_width_nm: float
    sigma_xy_e2_h: int
    edges: Mapping[str, tuple[ModeUnits, ...]]

    @property
    def field_direction(self) -> str:
        """``"+z"`` for ``b_tesla > 0``, else ``"-z"``."""
        return "+z" if self.b_tesla > 0 else "-z"

    @property
    def r_xy_ohm(self) -> float | None:
        return -VON_KLITZING / self.sigma_xy_e2_h if self.sigma_xy_e2_h else None

    def to_dict(self) -> dict:
        return {
            "b_tesla": self.b_tesla, "b_lattice_tesla": self.b_lattice_tesla,
            "b_relative_error": self.b_relative_error, "field_direction": self.field_direction,
            "lattice_constant_nm": self.lattice_constant_nm, "hopping_mev": self.hopping_mev,
            "magnetic_length_nm": self.magnetic_length_nm, "cyclotron_mev": self.cyclotron_mev,
            "zeeman_mev": self.zeeman_mev, "coulomb_mev": self.coulomb_mev, "filling": self.filling,
            "fermi_energy_mev": self.fermi_energy_mev, "gap_mev": list(self.gap_mev),
            "ribbon_width_nm": self.ribbon_width_nm, "sigma_xy_e2_h": self.sigma_xy_e2_h,
            "r_xy_ohm": self.r_xy_ohm,
            "edges": {side: [m.to_dict() for m in modes] for side, modes in self.edges.items()},
            "units": PHYSICAL_UNITS,
        }


def _edges_dict(edges: EdgeCount, physical: PhysicalInfo | None) -> dict:
    out = edges.to_dict()
    del out["fermi_energy"]                    # the summary's "fermi" block holds it
    if physical is not None:                   # each mode with its physical units beside it
        for side in ("bottom", "top"):
            for mode, extra in zip(out[side]["modes"], physical.edges[side]):
                mode.update(extra.to_dict())
    return out


@dataclass(frozen=True)
class RunSummary:
    """Everything a run reports (``summary.json`` is its :meth:`to_dict`).

    Attributes
    ----------
    topoedge_version, title, source : str, str or None, str or None
        Program version, scenario title and the file it came from.
    config : Scenario
        The scenario as written (physical units where it gave them).
    units : Derived or None
        What ``[material]`` and ``[field]`` gave in lattice units.
    warnings : tuple of str
    model, spectrum, bulk, fermi : ModelInfo, SpectrumInfo, BulkInfo, FermiInfo
    edges : EdgeCount
        The edge modes at E_F.
    hall : HallInfo
    check : BulkEdgeCheck
    seconds : float
        Wall time of the run.
    physical : PhysicalInfo or None
        The results in physical units (with ``units``).
    interaction : InteractionInfo or None
        The self-consistent part (:mod:`topoedge.workflows.interacting_records`).
    """

    topoedge_version: str
    title: str | None
    source: str | None
    config: Scenario
    units: Derived | None
    warnings: tuple[str, ...]
    model: ModelInfo
    spectrum: SpectrumInfo
    bulk: BulkInfo
    fermi: FermiInfo
    edges: EdgeCount
    hall: HallInfo
    check: BulkEdgeCheck
    seconds: float
    physical: PhysicalInfo | None = None
    interaction: object | None = field(default=None)

    converged = True        # a run that has a model solved it

    def to_dict(self) -> dict:
        out = {
            "topoedge_version": self.topoedge_version, "title": self.title, "source": self.source,
            "config": self.config.to_dict(),
            "units": self.units.to_dict() if self.units is not None else None,
            "warnings": list(self.warnings),
            "model": self.model.to_dict(), "spectrum": self.spectrum.to_dict(), "bulk": self.bulk.to_dict(),
            "fermi": self.fermi.to_dict(), "edges": _edges_dict(self.edges, self.physical),
            "hall": self.hall.to_dict(), "check": self.check.to_dict(), "seconds": self.seconds,
        }
        if self.physical is not None:
            out["physical"] = self.physical.to_dict()
        if self.interaction is not None:
            out["interaction"] = self.interaction.to_dict()
        return out


@dataclass(frozen=True)
class UnconvergedSummary:
    """What a self-consistent run reports when no start converged (nothing to analyse yet).

    ``chern_below_fermi`` and ``spin_chern_below_fermi`` are those of the
    non-interacting bulk; ``interaction`` holds the starts and why they failed.
    """

    topoedge_version: str
    title: str | None
    source: str | None
    config: Scenario
    units: Derived | None
    warnings: tuple[str, ...]
    chern_below_fermi: int
    spin_chern_below_fermi: dict | None
    seconds: float
    interaction: object | None = None

    converged = False

    def to_dict(self) -> dict:
        out = {"topoedge_version": self.topoedge_version, "title": self.title, "source": self.source,
               "config": self.config.to_dict(),
               "units": self.units.to_dict() if self.units is not None else None,
               "warnings": list(self.warnings), "converged": False,
               "bulk": {"chern_below_fermi": self.chern_below_fermi,
                        "spin_chern_below_fermi": self.spin_chern_below_fermi},
               "seconds": self.seconds}
        if self.interaction is not None:
            out["interaction"] = self.interaction.to_dict()
        return out
