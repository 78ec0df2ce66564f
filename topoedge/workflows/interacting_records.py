"""The results of a self-consistent run: the solutions per background width, and the ``interaction`` block.

:class:`SelfConsistent` and :class:`InteractingRun` hold the solutions (density
matrices, Hamiltonians, edge modes); the typed, frozen records below them (as
:mod:`topoedge.workflows.records`) describe them, and their ``to_dict()``
gives the ``interaction`` block of ``summary.json``. Energies in t,
distances in lattice constants ``a`` (``*_a``) and magnetic lengths
(``*_lB``), each edge's distances from its own boundary.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from .. import __version__
from ..scenario import Scenario
from ..solvers.chern import Gap
from ..solvers.edges import EdgeCount
from ..solvers.coulomb import Interaction
from ..solvers.hartree_fock import HFResult
from ..systems.ribbon import RibbonHamiltonian
from .records import UnconvergedSummary

__all__ = ["SelfConsistent", "InteractingRun", "state_key", "kept_states", "StartRecord", "OrderedMode", "EdgeOrder", "WidthSolution", "Reconstruction", "BackgroundInfo",
           "InteractionInfo", "edge_order", "interaction_summary", "failed_summary"]

def state_key(width: float, start: str) -> str:
    """Name of the self-consistent state of background width ``width`` from ``start``."""
    return f"w={width:g}/{start}"


@dataclass(frozen=True, eq=False)
class SelfConsistent:
    """The self-consistent solution for one background width.

    Attributes
    ----------
    width : float
        Background width w, lattice constants.
    k_points : int
    background : (W,) ndarray
    best : HFResult or None
        Lowest converged Hartree-Fock energy (None when no start converged).
    runs : tuple of HFResult
        Every start, in the order of ``interaction.starts``.
    restarted : tuple of str
        Starts that continued from a restart state.
    hamiltonian : RibbonHamiltonian or None
        The self-consistent Hamiltonian of ``best`` (spin-up block first).
    fermi_energy : float or None
        Between the highest occupied and the lowest empty level (zero
        temperature, whole number of electrons), else the chemical potential; t.
    edges : EdgeCount or None
        Edge modes of ``hamiltonian`` at ``fermi_energy``.
    """

    width: float
    k_points: int
    background: np.ndarray
    best: HFResult | None
    runs: tuple[HFResult, ...]
    restarted: tuple[str, ...]
    hamiltonian: RibbonHamiltonian | None
    fermi_energy: float | None
    edges: EdgeCount | None


@dataclass(frozen=True, eq=False)
class InteractingRun:
    """The self-consistent part of a run: the main width and the scan."""

    interaction: Interaction
    magnetic_length: float
    main: SelfConsistent
    scan: tuple[SelfConsistent, ...]
    model: dict
    warnings: tuple[str, ...]

    def states(self) -> dict:
        """The states to continue from, by :func:`state_key` (see :func:`kept_states`)."""
        out = {}
        for sc in (self.main, *self.scan):
            out.update(kept_states(sc))
        return out


def kept_states(sc: SelfConsistent) -> dict:
    """The lowest-energy converged state and every unconverged one of a width.

    Converged starts that lost to another start are left out: continuing from
    them would only reproduce them, and each state is ``2 N_k W^2`` complex
    numbers.
    """
    return {state_key(sc.width, run.start): {"density_matrix": run.density_matrix, "converged": run.converged,
                                             "iterations": run.iterations}
            for run in sc.runs if run is sc.best or not run.converged}


#: Units of the ``interaction`` block.
INTERACTION_UNITS = "energies in t; E_C = U_C / l_B; distances from each boundary in a and in l_B"


@dataclass(frozen=True)
class StartRecord:
    """One Hartree-Fock start: its name, whether and after how many iterations it converged, its energy
    (t per cell), whether it continued from a restart state, and the solver's message."""

    start: str
    converged: bool
    iterations: int
    energy_t: float
    restarted: bool
    message: str | None

    def to_dict(self) -> dict:
        return {"start": self.start, "converged": self.converged, "iterations": self.iterations,
                "energy_t": self.energy_t, "restarted": self.restarted, "message": self.message}


@dataclass(frozen=True)
class OrderedMode:
    """An edge mode by its distance from its own boundary (a and l_B), spin and direction (``"+x"``/``"-x"``)."""

    distance_a: float
    distance_lB: float
    spin: str | None
    direction: str

    def to_dict(self) -> dict:
        return {"distance_a": self.distance_a, "distance_lB": self.distance_lB, "spin": self.spin,
                "direction": self.direction}


@dataclass(frozen=True)
class EdgeOrder:
    """One edge of a self-consistent solution: net chirality, counter-propagating pairs (in total and per
    spin) and the modes from the boundary inwards."""

    net: int
    counter_pairs: int
    by_spin: Mapping[str, Mapping[str, int]]
    order: tuple[OrderedMode, ...]

    def to_dict(self) -> dict:
        return {"net": self.net, "counter_pairs": self.counter_pairs,
                "by_spin": {s: dict(v) for s, v in self.by_spin.items()},
                "order": [m.to_dict() for m in self.order]}


@dataclass(frozen=True)
class WidthSolution:
    """The self-consistent solution for one background width.

    ``width_a``/``width_lB``: the background width; ``background_per_cell``
    and ``background_half_a`` (where the background reaches half its maximum);
    every start; ``best_start`` (lowest converged energy) and ``converged``.
    With a converged start: its energy ``energy_t`` (t per cell), E_F, the
    electrons per cell, whether E_F is in a gap of the ribbon and both edges;
    without: ``message``.
    """

    width_a: float
    width_lB: float
    k_points: int
    background_per_cell: float
    background_half_a: float | None
    starts: tuple[StartRecord, ...]
    best_start: str | None
    message: str | None = None
    energy_t: float | None = None
    fermi_energy: float | None = None
    electrons_per_cell: float | None = None
    in_gap: bool | None = None
    edges_message: str | None = None
    bottom: EdgeOrder | None = None
    top: EdgeOrder | None = None

    @property
    def converged(self) -> bool:
        return self.best_start is not None

    @property
    def counter_pairs(self) -> bool:
        """Whether either edge has a counter-propagating pair."""
        return bool(self.bottom.counter_pairs or self.top.counter_pairs)

    @property
    def outermost_spin(self) -> dict:
        """The spin of the outermost mode of each edge (None for an edge without modes)."""
        return {side: (e.order[0].spin if e.order else None) for side, e in (("bottom", self.bottom),
                                                                             ("top", self.top))}

    def to_dict(self) -> dict:
        out = {"width_a": self.width_a, "width_lB": self.width_lB, "k_points": self.k_points,
               "background_per_cell": self.background_per_cell, "background_half_a": self.background_half_a,
               "starts": [s.to_dict() for s in self.starts], "best_start": self.best_start,
               "converged": self.converged}
        if not self.converged:
            out["message"] = self.message
            return out
        out.update({"energy_t": self.energy_t, "fermi_energy": self.fermi_energy,
                    "electrons_per_cell": self.electrons_per_cell, "in_gap": self.in_gap,
                    "edges_message": self.edges_message, "bottom": self.bottom.to_dict(),
                    "top": self.top.to_dict(), "outermost_spin": self.outermost_spin})
        return out


@dataclass(frozen=True)
class Reconstruction:
    """The narrowest scanned background width with a counter-propagating pair (``found``) and the widest
    narrower one without (a and l_B; None where there is none)."""

    found: bool
    widest_without_a: float | None
    widest_without_lB: float | None
    first_with_pair_a: float | None = None
    first_with_pair_lB: float | None = None

    def to_dict(self) -> dict:
        if not self.found:
            return {"found": False, "widest_without_a": self.widest_without_a,
                    "widest_without_lB": self.widest_without_lB}
        return {"found": True, "first_with_pair_a": self.first_with_pair_a,
                "first_with_pair_lB": self.first_with_pair_lB, "widest_without_a": self.widest_without_a,
                "widest_without_lB": self.widest_without_lB}


@dataclass(frozen=True)
class BackgroundInfo:
    """The positive background: profile, width (a and l_B), setback (a) and bulk density (per site)."""

    profile: str
    width_a: float
    width_lB: float
    setback_a: float
    density_per_site: float

    def to_dict(self) -> dict:
        return {"profile": self.profile, "width_a": self.width_a, "width_lB": self.width_lB,
                "setback_a": self.setback_a, "density_per_site": self.density_per_site}


@dataclass(frozen=True)
class InteractionInfo:
    """The self-consistent part of a run (see :data:`INTERACTION_UNITS`).

    Attributes
    ----------
    coulomb_t, onsite_t : float
        Coulomb strength ``U_C`` (t a) and on-site repulsion (t).
    gate_distance_a : float or None
        Distance of the screening gate (a), None without one.
    coulomb_energy_t, coulomb_over_cyclotron : float
        ``E_C = U_C / l_B`` in t and over ``hbar omega_c``.
    filling : float
        Bulk filling factor of the background.
    background : BackgroundInfo
    magnetic_length_a : float
    temperature_t, mixing, tol : float, str, float
        Solver settings.
    main : WidthSolution
        The solution at ``interaction.background.width``.
    neutrality_error, hartree_centre_t, hartree_centre_over_coulomb_energy : float
        Electrons minus background per cell, the Hartree potential in the
        middle of the ribbon (t and over ``E_C``); None without a converged start.
    filling_centre : dict or None
        Filling of each spin in the middle.
    half_filling_distance_a : dict or None
        Where each spin's density (and the background) first reaches half of
        its central value, from the bottom boundary (a).
    chirality_equals_chern : bool or None
        Whether the self-consistent edges carry ``+C`` and ``-C``.
    scan : tuple of WidthSolution
        The background-width scan (``interaction.scan_widths``).
    reconstruction : Reconstruction or None
    bulk_link : dict or None
        The state in the ribbon's centre beside the lattice bulk's answer
        (:func:`topoedge.workflows.levels_lattice.bulk_answer`).
        What the scan says about edge reconstruction.
    """

    coulomb_t: float
    onsite_t: float
    gate_distance_a: float | None
    coulomb_energy_t: float
    coulomb_over_cyclotron: float
    filling: float
    background: BackgroundInfo
    magnetic_length_a: float
    temperature_t: float
    mixing: str
    tol: float
    main: WidthSolution
    neutrality_error: float | None = None
    hartree_centre_t: float | None = None
    hartree_centre_over_coulomb_energy: float | None = None
    filling_centre: Mapping[str, float] | None = None
    half_filling_distance_a: Mapping[str, float | None] | None = None
    chirality_equals_chern: bool | None = None
    scan: tuple[WidthSolution, ...] = ()
    reconstruction: Reconstruction | None = None
    bulk_link: Mapping | None = None

    @property
    def converged(self) -> bool:
        return self.main.converged

    def to_dict(self) -> dict:
        out = {"coulomb_t": self.coulomb_t, "onsite_t": self.onsite_t, "gate_distance_a": self.gate_distance_a,
               "coulomb_energy_t": self.coulomb_energy_t, "coulomb_over_cyclotron": self.coulomb_over_cyclotron,
               "units": INTERACTION_UNITS, "filling": self.filling, "background": self.background.to_dict(),
               "magnetic_length_a": self.magnetic_length_a, "temperature_t": self.temperature_t,
               "mixing": self.mixing, "tol": self.tol, **self.main.to_dict()}
        if self.main.converged:
            out.update({"neutrality_error": self.neutrality_error, "hartree_centre_t": self.hartree_centre_t,
                        "hartree_centre_over_coulomb_energy": self.hartree_centre_over_coulomb_energy,
                        "filling_centre": dict(self.filling_centre),
                        "half_filling_distance_a": dict(self.half_filling_distance_a),
                        "chirality_equals_chern": self.chirality_equals_chern,
                        "bulk_link": None if self.bulk_link is None else dict(self.bulk_link)})
        if self.scan:
            out["scan"] = [s.to_dict() for s in self.scan]
            out["reconstruction"] = self.reconstruction.to_dict() if self.reconstruction is not None else None
        return out


def bulk_density(scenario: Scenario) -> float:
    """Electrons per site of the filled bulk: ``fermi.gap / q`` (lattice-unit scenario)."""
    return scenario.fermi.gap / scenario.lattice.flux.denominator


def edge_order(edges: EdgeCount, top_row: float, magnetic_length: float) -> dict[str, tuple[OrderedMode, ...]]:
    """Modes of each edge from its boundary inwards: distance (a and l_B), spin, direction."""
    out = {}
    for side in ("bottom", "top"):
        rows = []
        for m in getattr(edges, side).modes:
            d = m.y if side == "bottom" else top_row - m.y
            rows.append(OrderedMode(distance_a=float(d), distance_lB=float(d / magnetic_length), spin=m.spin,
                                    direction="+x" if m.velocity > 0 else "-x"))
        out[side] = tuple(rows)
    return out


def _half_point(profile: np.ndarray, bulk: float) -> float | None:
    """Distance (rows from the bottom boundary) where ``profile`` first reaches half of ``bulk``."""
    if bulk <= 0:
        return None
    above = np.nonzero(profile >= 0.5 * bulk)[0]
    if not above.size:
        return None
    i = int(above[0])
    if i == 0:
        return 0.0
    a, b = profile[i - 1], profile[i]
    return float(i - 1 + (0.5 * bulk - a) / (b - a))


def _width_summary(sc: SelfConsistent, top_row: float, lb: float) -> WidthSolution:
    """The record of one width's solution."""
    common = dict(
        width_a=sc.width, width_lB=sc.width / lb, k_points=sc.k_points,
        background_per_cell=float(sc.background.sum()),
        background_half_a=_half_point(sc.background, float(sc.background.max())),
        starts=tuple(StartRecord(start=r.start, converged=r.converged, iterations=r.iterations, energy_t=r.energy,
                                 restarted=r.start in sc.restarted, message=r.message) for r in sc.runs),
        best_start=sc.best.start if sc.best is not None else None,
    )
    if sc.best is None:
        return WidthSolution(**common, message="no start converged; continue from the restart file (--restart)")
    e = sc.edges
    order = edge_order(e, top_row, lb)
    return WidthSolution(
        **common, energy_t=sc.best.energy, fermi_energy=sc.fermi_energy, electrons_per_cell=sc.best.electrons,
        in_gap=e.in_gap, edges_message=e.message,
        bottom=EdgeOrder(net=e.bottom.net, counter_pairs=e.bottom.counter_pairs, by_spin=e.bottom.by_spin,
                         order=order["bottom"]),
        top=EdgeOrder(net=e.top.net, counter_pairs=e.top.counter_pairs, by_spin=e.top.by_spin, order=order["top"]),
    )


def _reconstruction(scan: tuple[WidthSolution, ...]) -> Reconstruction | None:
    """Smallest scanned width with a counter-propagating pair and the largest narrower one without."""
    solved = sorted((s for s in scan if s.converged and s.in_gap), key=lambda s: s.width_a)
    if not solved:
        return None
    with_pair = [s for s in solved if s.counter_pairs]
    if not with_pair:
        return Reconstruction(found=False, widest_without_a=solved[-1].width_a,
                              widest_without_lB=solved[-1].width_lB)
    first = with_pair[0]
    below = [s for s in solved if s.width_a < first.width_a and not s.counter_pairs]
    return Reconstruction(found=True, first_with_pair_a=first.width_a, first_with_pair_lB=first.width_lB,
                          widest_without_a=below[-1].width_a if below else None,
                          widest_without_lB=below[-1].width_lB if below else None)


def failed_summary(scenario: Scenario, given: Scenario, units, gap: Gap, seconds: float) -> UnconvergedSummary:
    """Summary of a run in which no start converged (nothing to analyse yet)."""
    return UnconvergedSummary(
        topoedge_version=__version__, title=scenario.title, source=scenario.source, config=given, units=units,
        warnings=tuple(units.warnings) if units is not None else (), chern_below_fermi=gap.chern,
        spin_chern_below_fermi=gap.spin_chern, seconds=round(seconds, 3))


def interaction_summary(scenario: Scenario, run: InteractingRun, gap: Gap) -> InteractionInfo:
    """The record of the self-consistent part of a run."""
    inter, lb = run.interaction, run.magnetic_length
    phi = abs(float(scenario.lattice.flux))
    e_c = inter.coulomb / lb
    cyclotron = 4 * math.pi * phi
    top_row = scenario.ribbon.width - 1
    background = scenario.interaction.background
    extra = {}
    best = run.main.best
    if best is not None:
        centre = scenario.ribbon.width // 2
        half = {s: _half_point(best.density[i], float(best.density[i, centre])) for i, s in enumerate(("up", "down"))}
        half["background"] = _half_point(run.main.background, float(run.main.background[centre]))
        extra = dict(
            neutrality_error=best.electrons - float(run.main.background.sum()),
            hartree_centre_t=float(best.hartree[centre]),
            hartree_centre_over_coulomb_energy=float(best.hartree[centre] / e_c) if e_c else None,
            filling_centre={s: float(best.density[i, centre] / phi) for i, s in enumerate(("up", "down"))},
            half_filling_distance_a=half,
            chirality_equals_chern=bool(run.main.edges.in_gap and run.main.edges.bottom.net == gap.chern
                                        and run.main.edges.top.net == -gap.chern),
        )
    scan = tuple(_width_summary(sc, top_row, lb) for sc in run.scan)
    return InteractionInfo(
        coulomb_t=inter.coulomb, onsite_t=inter.onsite, gate_distance_a=inter.gate_distance,
        coulomb_energy_t=e_c, coulomb_over_cyclotron=e_c / cyclotron, filling=bulk_density(scenario) / phi,
        background=BackgroundInfo(profile=background.profile, width_a=run.main.width, width_lB=run.main.width / lb,
                                  setback_a=background.setback, density_per_site=bulk_density(scenario)),
        magnetic_length_a=lb, temperature_t=scenario.interaction.temperature, mixing=scenario.interaction.mixing,
        tol=scenario.interaction.tol, main=_width_summary(run.main, top_row, lb), **extra,
        scan=scan, reconstruction=_reconstruction(scan) if scan else None,
    )
