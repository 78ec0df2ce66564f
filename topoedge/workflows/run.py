"""From a validated scenario to computed results (no files, no printing).

``run_scenario`` chains the stages for one scenario:

1. bulk: magnetic unit cell -> Bloch Hamiltonian -> Chern numbers of every
   band and gap (optionally repeated on a finer grid);
2. Fermi energy: given, or the middle of the gap above the ``r`` lowest bands;
   refused when it lies in a bulk band or the gap is closed;
3. ribbon: builder -> ribbon Hamiltonian -> spectrum, and the edge modes at
   E_F (crossings, velocities, positions, spins);
4. the bulk-edge check and the Hall conductance by independent routes (Chern
   sum, edge chirality, the Streda slope of the density against the flux),
   condensed into a JSON-able summary.

The file and figure writers in :mod:`topoedge.outputs.results` and
:mod:`topoedge.plotting` and the command line sit on top of it.

Bulk-edge convention: with the builders' conventions (counter-clockwise
plaquette phase ``+2 pi phi``, Bloch waves ``exp(i k x)``) and the Chern
convention of :mod:`topoedge.solvers.chern`, the net number of modes on the bottom
edge, counted with the sign of ``dE/dk``, equals the Chern sum ``C`` of the
bulk bands below E_F, and the top edge carries ``-C``. The Hall conductance is
``sigma_xy = C e^2/h`` and ``R_xy = h / (C e^2)``.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..scenario import Model, Scenario, resolve
from ..scenario.units import VON_KLITZING, Derived
from ..solvers.chern import ChernResult, Gap, GapClosedError, subspace_chern
from ..solvers.edges import EdgeCount, count_edge_modes
from ..solvers.landau import LandauSolverError, landau_subspace_chern
from ..solvers.spectrum import RibbonSpectrum, k_grid, ribbon_spectrum
from ..solvers.streda import StredaResult
from ..systems.ribbon import RibbonHamiltonian
from ..util.budget import require
from ..util.progress import as_progress

__all__ = [
    "RunResult", "VON_KLITZING", "build_bulk", "build_ribbon", "bulk_chern", "bulk_edge_check",
    "bulk_solver", "harper_cell", "LANDAU_MIN_Q",
    "fermi_level", "hallbar_field_scan", "hallbar_route", "hallbar_scan", "run_scenario", "scenario_potential", "summarize",
]
from .build import AUTO_WINDOW_FROM, build_bulk, build_ribbon, harper_cell, memory_estimate
from .bulk import bulk_chern, bulk_solver, fermi_level, streda_route
from .hallbar_scan import hallbar_route
from .records import RunSummary, UnconvergedSummary
from .summary import summarize


@dataclass(frozen=True, eq=False)
class RunResult:
    """Everything one ``run`` computes."""

    scenario: Scenario
    potential: np.ndarray
    hamiltonian: RibbonHamiltonian
    spectrum: RibbonSpectrum
    chern: ChernResult
    chern_refined: ChernResult | None
    fermi_energy: float
    gap: Gap
    edges: EdgeCount
    bulk_path: dict
    summary: RunSummary | UnconvergedSummary
    units: Derived | None = None
    streda: StredaResult | None = None
    #: The self-consistent solutions of a run with [interaction]
    #: (topoedge.workflows.interacting.InteractingRun), else None.
    interacting: object | None = None


def run_scenario(scenario: Scenario | Model, *, progress=False) -> RunResult:
    """Bulk Chern numbers, ribbon spectrum and edge modes of a scenario.

    ``scenario`` as written (resolved here, once: :func:`topoedge.scenario.resolve`)
    or already resolved (a :class:`topoedge.scenario.Model`).

    ``progress``: False, True (a terminal bar) or a
    :class:`topoedge.util.progress.Progress`.

    Raises
    ------
    topoedge.solvers.chern.GapClosedError
        Before the ribbon is computed, when E_F is not in an open bulk gap.
    """
    model = resolve(scenario)
    if model.scenario.interaction.enabled:
        raise ValueError("the scenario has [interaction]: run it with topoedge.workflows.interacting.run_interacting")
    progress = as_progress(progress)
    start = time.perf_counter()
    given, scenario, units = model.given, model.scenario, model.units
    solver, solver_reason = bulk_solver(scenario)
    require(memory_estimate(scenario, solver))
    bulk = build_bulk(scenario) if solver == "dense" else None
    try:
        chern, refined, path = bulk_chern(scenario, bulk, progress=progress, solver=solver)
    except LandauSolverError as err:
        if scenario.chern.solver == "landau":
            raise LandauSolverError(f"chern.solver = 'landau': {err} (chern.solver = 'dense')") from None
        # "auto" chose the Landau-level solver but the bands are not narrow
        # against their gaps there: every band, if that fits.
        solver, solver_reason = "dense", f"the Landau-level solver could not resolve the bands ({err})"
        require(memory_estimate(scenario, solver))
        bulk = build_bulk(scenario)
        chern, refined, path = bulk_chern(scenario, bulk, progress=progress, solver=solver)
    ef, gap = fermi_level(scenario, chern)
    with progress.stage("ribbon: building the Hamiltonian"):
        ham, potential = build_ribbon(scenario)
    window = spectrum_window(scenario, ham, chern, ef)
    with progress.stage(f"ribbon: spectrum at {scenario.spectrum.k_points} momenta", scenario.spectrum.k_points) as st:
        spec = ribbon_spectrum(ham, k_grid(scenario.spectrum.k_points), window=window,
                               solver=scenario.spectrum.solver, progress=st)
    with progress.stage("ribbon: edge modes at E_F"):
        edges = count_edge_modes(ham, ef, k_points=scenario.edges.k_points, near_gap=near_gap_of(gap, ef))
    subspace = None
    if np.isfinite(gap.middle):
        with progress.stage("bulk: the occupied subspace as a whole (cross-check)"):
            if solver == "landau":
                subspace = landau_subspace_chern(harper_cell(scenario), gap, k2_points=chern.grid[1],
                                                 gap_min=scenario.chern.gap_min)
                if subspace.chern is None:
                    subspace = None
            else:
                # The occupied subspace as a whole needs far fewer points than the
                # bands one by one (that is what makes it a useful check): half the grid.
                grid = tuple(max(12, (n + 1) // 2) for n in chern.grid)
                subspace = subspace_chern(bulk, gap, grid=grid)
    with progress.stage("Streda route: states below E_F at nearby fluxes"):
        streda, streda_error = streda_route(scenario, ef, solver=solver)
    hallbar, hallbar_error = (None, None)
    if scenario.hallbar.enabled:
        with progress.stage("Hall bar: transport"):
            hallbar, hallbar_error = hallbar_route(scenario, ef)
    summary = summarize(scenario, spec, potential, chern=chern, refined=refined, ef=ef, gap=gap,
                        edges=edges, seconds=time.perf_counter() - start, given=given, units=units,
                        streda=streda, streda_error=streda_error, hallbar=hallbar,
                        hallbar_error=hallbar_error, subspace=subspace, solver_reason=solver_reason)
    return RunResult(scenario, potential, ham, spec, chern, refined, ef, gap, edges, path, summary, units,
                     streda)


def near_gap_of(gap: Gap, ef: float) -> float:
    """Distance (t) from E_F below which a band that does not cross it makes the edge count unreliable.

    1e-4 t, or a fifth of the distance from E_F to the nearer bulk band when
    that is smaller (a narrow Zeeman gap of a real material: 2.7e-4 t at
    0.5 T in GaAs with a = 3.5 nm).
    """
    room = min(ef - gap.energy_min, gap.energy_max - ef)
    return float(min(1e-4, max(0.2 * room, 1e-8))) if np.isfinite(room) else 1e-4


def spectrum_window(scenario: Scenario, ham: RibbonHamiltonian, chern: ChernResult,
                    ef: float) -> tuple[float, float] | None:
    """Energy window of the ribbon spectrum: ``E_F +- spectrum.window``, or chosen for wide ribbons.

    A ribbon with more than ``AUTO_WINDOW_FROM`` orbitals per spin block and
    no ``spectrum.window`` keeps the states within ``E_F +- h``, ``h`` 1.25
    times the distance from E_F to the bottom of the bulk spectrum (at least
    twice the width of E_F's gap): every Landau level below E_F and as many
    above.
    """
    if scenario.spectrum.window is not None:
        return (ef - scenario.spectrum.window, ef + scenario.spectrum.window)
    per_block = ham.size // (2 if ham.sz is not None and ham.spin_blocks() is not None else 1)
    if per_block <= AUTO_WINDOW_FROM or not chern.bands:
        return None
    bottom = min(b.energy_min for b in chern.bands)
    try:
        gap = chern.gap_at(ef)
        width = gap.energy_max - gap.energy_min if np.isfinite(gap.energy_max - gap.energy_min) else 0.0
    except GapClosedError:
        width = 0.0
    half = max(1.25 * (ef - bottom), 2.0 * width, 1e-3)
    return (ef - half, ef + half)


