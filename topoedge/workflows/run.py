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
:mod:`topoedge.plotting.run` and the command line sit on top of it.

Bulk-edge convention: with the builders' conventions (counter-clockwise
plaquette phase ``+2 pi phi``, Bloch waves ``exp(i k x)``) and the Chern
convention of :mod:`topoedge.solvers.chern`, the net number of modes on the bottom
edge, counted with the sign of ``dE/dk``, equals the Chern sum ``C`` of the
bulk bands below E_F, and the top edge carries ``-C``. The Hall conductance is
``sigma_xy = C e^2/h`` and ``R_xy = h / (C e^2)``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from .. import __version__
from ..models.lattices import lattice
from ..models.profiles import edge_potential
from ..scenario import Scenario, lattice_scenario
from ..scenario.units import VON_KLITZING, Derived
from ..solvers.chern import ChernResult, Gap, GapClosedError, chern_numbers, default_grid, path_bands, subspace_chern
from ..solvers.edges import EdgeCount, count_edge_modes
from ..solvers.landau import (DEFAULT_K2_POINTS, LandauSolverError, bands_for, landau_chern, landau_path_bands,
                              landau_states_below, landau_subspace_chern)
from ..solvers.spectrum import RibbonSpectrum, k_grid, ribbon_spectrum
from ..solvers.streda import StredaResult, streda_slope
from ..systems.bloch import BlochHamiltonian
from ..systems.harper import HarperCell
from ..systems.ribbon import RibbonHamiltonian
from ..util.budget import KWANT_SITE_BYTES, require
from ..util.progress import as_progress, ticks

__all__ = [
    "RunResult", "VON_KLITZING", "build_bulk", "build_ribbon", "bulk_chern", "bulk_edge_check",
    "bulk_solver", "harper_cell", "LANDAU_MIN_Q",
    "fermi_level", "hallbar_field_scan", "hallbar_route", "hallbar_scan", "run_scenario", "scenario_potential", "summarize",
]



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
    summary: dict
    units: Derived | None = None
    streda: StredaResult | None = None
    #: The self-consistent solutions of a run with [interaction]
    #: (topoedge.workflows.interacting.InteractingRun), else None.
    interacting: object | None = None


def _params(scenario: Scenario) -> dict:
    """The kwant ``params`` of the scenario's lattice (lattice units)."""
    return lattice(scenario.lattice.kind).params(scenario.lattice, scenario.spin)


def scenario_potential(scenario: Scenario) -> np.ndarray:
    """Edge potential (units of t) of every row of the scenario's ribbon, without building it.

    For lattices with one site per row (the square lattice); the others
    evaluate the profile at every site (:func:`build_ribbon` returns it).
    """
    entry = lattice(scenario.lattice.kind)
    if entry.sites_per_width != 1 or entry.orbitals_per_site != 1:
        raise ValueError(f"scenario_potential gives rows of one site; lattice.kind is {entry.kind!r}: "
                         "use build_ribbon")
    edge = scenario.ribbon.edge
    return edge_potential(scenario.ribbon.width, edge.profile, ramp=edge.width, height=edge.height,
                          table=edge.table)


def build_ribbon(scenario: Scenario) -> tuple[RibbonHamiltonian, np.ndarray]:
    """The kwant ribbon of a scenario, finalized and reduced to its Bloch form.

    Returns the ribbon and its edge potential: one value per row on the
    square lattice, one per site position across the ribbon on the honeycomb
    lattice (the lattice registry builds both).
    """
    entry = lattice(scenario.lattice.kind)
    builder, potential = entry.ribbon(scenario.lattice, scenario.spin, scenario.ribbon)
    ham = RibbonHamiltonian.from_kwant(builder, params=_params(scenario), spin=scenario.spin.enabled)
    return ham, potential(ham.position)


def build_bulk(scenario: Scenario) -> BlochHamiltonian:
    """The bulk of a scenario: magnetic unit cell (or the zero-field cell), no edge potential."""
    builder = lattice(scenario.lattice.kind).bulk(scenario.lattice, scenario.spin)
    return BlochHamiltonian.from_kwant(builder, params=_params(scenario), spin=scenario.spin.enabled)


#: Smallest cell (bands per spin) for which ``chern.solver = "auto"`` takes the Landau-level solver.
LANDAU_MIN_Q = 60
# Largest fraction of a sector's bands the Landau-level solver computes under "auto"
# (above it the bands are no longer Landau levels; the dense solver is used).
_LANDAU_MAX_FRACTION = 1 / 3


def memory_estimate(scenario: Scenario, solver: str) -> list[tuple[str, float, str]]:
    """Upper bounds (bytes) of what each stage of a run holds at once, with the key that shrinks it.

    For :func:`topoedge.util.budget.require`, before anything is built.
    """
    from ..systems.ribbon import SPARSE_FROM

    complex_bytes, lat = 16, scenario.lattice
    entry = lattice(lat.kind)
    spin = scenario.spin.enabled
    orbitals_per_site = entry.orbitals_per_site * (2 if spin else 1)
    sites = scenario.ribbon.width * entry.sites_per_width
    n = sites * orbitals_per_site
    per_block = n // 2 if spin and scenario.spin.rashba == 0 else n
    parts = [("building the ribbon", sites * KWANT_SITE_BYTES, "expected a smaller ribbon.width")]
    matrices = 6 * n * n * complex_bytes if n <= SPARSE_FROM else 40 * n * complex_bytes
    parts.append(("the ribbon Hamiltonian", matrices, "expected a smaller ribbon.width"))
    k = scenario.spectrum.k_points
    window = scenario.spectrum.window
    everything = window is None and per_block <= AUTO_WINDOW_FROM
    # states per momentum in a window: the share of the bandwidth (8 t) it covers, twice over
    # (Landau levels and edge states); an automatic window holds the levels below E_F only
    kept = n if everything else min(n, 64 + (n // 50 if window is None else int(n * min(1.0, window / 2))))
    vectors = per_block * (per_block if everything else kept) * (8 if scenario.spectrum.solver != "dense" else
                                                                   complex_bytes)
    parts.append((f"the ribbon spectrum ({k} momenta x {kept} states)", 12 * k * kept * 8 + 3 * vectors,
                  "expected fewer spectrum.k_points, a spectrum.window or a smaller ribbon.width"))
    if solver == "landau":
        q = lat.flux.denominator
        n2 = scenario.chern.grid[1] if scenario.chern.grid else DEFAULT_K2_POINTS
        p = abs(lat.flux.numerator)
        # one group's eigenvectors on every base momentum (k1 refined up to 8 times)
        parts.append((f"the Landau-level bulk solver ({n2} momenta k2, {q} bands per spin)",
                      8 * 1.5 * n2 * q * (p + 2) * complex_bytes + 64 * 2**20,
                      "expected fewer chern.grid[1] momenta along k2"))
    if solver == "dense" and entry.in_field:
        q = lat.flux.denominator
        cells = q * entry.cell_sites_per_q
        m = cells * (2 if spin and scenario.spin.rashba != 0 else 1)
        total = cells * (2 if spin else 1)
        grid = scenario.chern.grid or (max(12, 2 * cells), max(12, 2 * cells))
        scale = 1.5 ** 2 if scenario.chern.refine else 1.0
        parts.append((f"the dense bulk solver ({grid[0]}x{grid[1]} grid, {m} bands per sector)",
                      max(18 * total * total * complex_bytes, 3 * scale * grid[0] * grid[1] * m * m * complex_bytes),
                      "expected chern.solver = 'auto' or 'landau' (square lattice), a coarser chern.grid or a "
                      "flux with a smaller denominator"))
    return parts


def harper_cell(scenario: Scenario) -> HarperCell:
    """The square-lattice magnetic cell of a scenario as a ring (S_z conserved, no Rashba term)."""
    lat, spin = scenario.lattice, scenario.spin
    return HarperCell(lat.flux, onsite=lat.onsite, zeeman=spin.zeeman, spin=spin.enabled)


def _landau_possible(scenario: Scenario) -> str | None:
    """Why the Landau-level solver cannot take the scenario, or None."""
    lat = scenario.lattice
    if "landau" not in lattice(lat.kind).supports:
        return f"the Landau-level solver is built for the square lattice, not {lat.kind!r}"
    if scenario.spin.rashba != 0:
        return "the Landau-level solver needs S_z conserved (no Rashba term)"
    if lat.flux == 0 or lat.flux.denominator < 3:
        return f"flux {lat.flux} has fewer than 3 bands per spin"
    return None


def _bands_needed(scenario: Scenario, cell: HarperCell) -> int:
    fermi = scenario.fermi
    if fermi.gap is not None:
        return bands_for(cell, below=fermi.gap)
    return bands_for(cell, energy=fermi.energy if fermi.energy is not None else 0.0)


def bulk_solver(scenario: Scenario) -> tuple[str, str]:
    """The bulk solver a scenario uses, ``"dense"`` or ``"landau"``, and why.

    ``chern.solver = "auto"`` takes the Landau-level solver
    (:mod:`topoedge.solvers.landau`) for the square lattice with S_z conserved when
    the cell has at least ``LANDAU_MIN_Q`` bands per spin and E_F lies in
    the lowest third of them; otherwise every band is diagonalised.

    Raises
    ------
    ValueError
        For ``chern.solver = "landau"`` on a scenario it cannot take.
    """
    choice = scenario.chern.solver
    if choice == "dense":
        return "dense", "chern.solver = 'dense'"
    why_not = _landau_possible(scenario)
    if choice == "landau":
        if why_not:
            raise ValueError(f"chern.solver = 'landau': {why_not}; expected 'dense' or 'auto'")
        return "landau", "chern.solver = 'landau'"
    if why_not:
        return "dense", why_not
    q = scenario.lattice.flux.denominator
    if q < LANDAU_MIN_Q:
        return "dense", f"{q} bands per spin (fewer than {LANDAU_MIN_Q}): every band is cheap"
    needed = _bands_needed(scenario, harper_cell(scenario))
    if needed > _LANDAU_MAX_FRACTION * q:
        return "dense", (f"E_F needs {needed} of {q} bands per spin: beyond the Landau-level regime "
                         "(more than a third of the bands)")
    return "landau", f"{needed} of {q} bands per spin needed: only those are computed"


def bulk_chern(scenario: Scenario, bloch: BlochHamiltonian | None = None, *, progress=None,
               solver: str | None = None) -> tuple[ChernResult, ChernResult | None, dict]:
    """Chern numbers of the bulk on the configured grid and, optionally, a finer one.

    Returns
    -------
    result : ChernResult
        ``result.solver`` says which solver was used (see :func:`bulk_solver`).
    refined : ChernResult or None
        The same on a grid 1.5 times finer in each direction (``chern.refine``;
        the Landau-level solver doubles ``k1`` and takes 1.5 times ``k2``).
    path : dict
        Bulk bands along Gamma-X-M-Gamma, for the figure.

    ``bloch`` is the scenario's bulk when the caller has built it already
    (dense solver). ``progress`` is a :class:`topoedge.util.progress.Progress`.
    """
    progress = as_progress(progress)
    cfg = scenario.chern
    solver = solver or bulk_solver(scenario)[0]
    if solver == "landau":
        cell = harper_cell(scenario)
        n2 = cfg.grid[1] if cfg.grid else DEFAULT_K2_POINTS
        bands = _bands_needed(scenario, cell)
        with progress.stage(f"bulk: Chern numbers of the lowest bands (Landau-level solver, q = {cell.q})") as st:
            result = landau_chern(cell, bands=bands, k2_points=n2, gap_min=cfg.gap_min, progress=st)
        refined = None
        if cfg.refine:
            with progress.stage("bulk: the same on a finer grid") as st:
                refined = landau_chern(cell, bands=bands, k2_points=int(math.ceil(1.5 * n2)),
                                       gap_min=cfg.gap_min, k1_factor=2, progress=st)
        per_sector = max(sum(1 for b in result.bands if b.spin == s) for s in result.sectors)
        return result, refined, landau_path_bands(cell, per_sector)
    with progress.stage("bulk: building the magnetic cell"):
        bloch = bloch if bloch is not None else build_bulk(scenario)
    grid = cfg.grid or default_grid(bloch)
    with progress.stage(f"bulk: Chern numbers on the {grid[0]}x{grid[1]} grid ({bloch.size} orbitals)"):
        result = chern_numbers(bloch, grid=grid, gap_min=cfg.gap_min)
    refined = None
    if cfg.refine:
        finer = tuple(int(math.ceil(1.5 * n)) for n in grid)
        with progress.stage(f"bulk: the same on the {finer[0]}x{finer[1]} grid"):
            refined = chern_numbers(bloch, grid=finer, gap_min=cfg.gap_min)
    return result, refined, path_bands(bloch)


def fermi_level(scenario: Scenario, chern: ChernResult) -> tuple[float, Gap]:
    """E_F of the scenario and the bulk gap containing it.

    Raises
    ------
    topoedge.solvers.chern.GapClosedError
        When E_F lies in a bulk band, or ``fermi.gap`` names a closed gap.
    """
    if scenario.fermi.gap is not None:
        gap = chern.gap_above(scenario.fermi.gap)
        return gap.middle, gap
    ef = scenario.fermi.energy if scenario.fermi.energy is not None else 0.0
    return ef, chern.gap_at(ef)


def run_scenario(scenario: Scenario, *, progress=False) -> RunResult:
    """Bulk Chern numbers, ribbon spectrum and edge modes of a scenario.

    ``progress``: False, True (a terminal bar) or a
    :class:`topoedge.util.progress.Progress`.

    Raises
    ------
    topoedge.solvers.chern.GapClosedError
        Before the ribbon is computed, when E_F is not in an open bulk gap.
    """
    if scenario.interaction.enabled:
        raise ValueError("the scenario has [interaction]: run it with topoedge.workflows.interacting.run_interacting")
    progress = as_progress(progress)
    start = time.perf_counter()
    given = scenario
    scenario, units = lattice_scenario(scenario)
    solver, solver_reason = bulk_solver(scenario)
    require(memory_estimate(scenario, solver))
    bulk = build_bulk(scenario) if solver == "dense" else None
    try:
        chern, refined, path = bulk_chern(scenario, bulk, progress=progress, solver=solver)
    except LandauSolverError as err:
        if scenario.chern.solver == "landau":
            raise
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
                if subspace["chern"] is None:
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


#: Orbitals per spin block from which the ribbon spectrum keeps only a window around E_F
#: when ``spectrum.window`` is unset (all states would cost ``O(W^2)`` per momentum).
AUTO_WINDOW_FROM = 1000


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


def streda_route(scenario: Scenario, ef: float, *, solver: str = "dense"
                 ) -> tuple[StredaResult | None, str | None]:
    """Hall conductance from the density response at fixed E_F, or why not.

    On the square lattice with S_z conserved the states below E_F at every
    flux are counted from band-matrix eigenvalues at the band-edge momenta
    (:func:`topoedge.solvers.landau.landau_states_below`, exact and ``O(q)``); the
    other lattices diagonalise their bulk on a grid.
    """
    from dataclasses import replace

    if not lattice(scenario.lattice.kind).in_field:
        return None, (f"no Streda route for the zero-field {scenario.lattice.kind} model "
                      "(it has no flux to vary)")
    if _landau_possible(scenario) is None:
        # The square lattice with S_z conserved: exact counts from band
        # eigenvalues at the band-edge momenta, whatever the bulk solver.
        def states(phi):
            return landau_states_below(replace(harper_cell(scenario), flux=phi), ef)

        try:
            return streda_slope(None, scenario.lattice.flux, ef, states=states), None
        except ValueError as err:
            return None, str(err)

    def bulk(phi):
        return build_bulk(replace(scenario, lattice=replace(scenario.lattice, flux=phi)))

    try:
        return streda_slope(bulk, scenario.lattice.flux, ef), None
    except ValueError as err:
        return None, str(err)


def hallbar_route(scenario: Scenario, ef: float) -> tuple[dict | None, str | None]:
    """Hall and longitudinal resistance of the scenario's Hall bar at E_F, or why not.

    The bar has the scenario's flux, spin, Zeeman splitting, on-site energy and
    edge profile along all its boundaries. Returns ``{"r_xy", "r_xx"}`` in h/e^2
    (means over the disorder seeds, with standard errors of the mean) and the conductance
    ``sigma_xy = -1 / R_xy`` in e^2/h (see :mod:`topoedge.solvers.transport` for the sign).
    """
    from ..solvers.transport import disorder_average

    bar = scenario.hallbar
    try:
        fsyst, params = _hallbar_system(scenario)
        result = disorder_average(fsyst, ef, params, seeds=range(bar.seeds))
    except ValueError as err:
        return None, str(err)
    by_spin = None
    if result.by_spin is not None:
        by_spin = {
            name: None if value is None else {
                **value, "sigma_xy": -1.0 / value["r_xy"] if value["r_xy"] else None}
            for name, value in result.by_spin.items()
        }
    return {
        "r_xy": result.r_xy, "r_xy_sem": result.r_xy_sem,
        "r_xx": result.r_xx, "r_xx_sem": result.r_xx_sem,
        "r_xy_ohm": result.r_xy_ohm, "r_xx_ohm": result.r_xx_ohm,
        "sigma_xy": -1.0 / result.r_xy if result.r_xy else None,
        "by_spin": by_spin,
        "length": bar.length, "width": bar.width, "disorder": bar.disorder, "seeds": bar.seeds,
    }, None


def _hallbar_system(scenario: Scenario):
    """The finalized Hall bar of a scenario and its kwant params (without E_F)."""
    from ..solvers.transport import hallbar_builder
    from ..models.profiles import EDGE_PROFILES

    bar, edge = scenario.hallbar, scenario.ribbon.edge
    shape = EDGE_PROFILES[edge.profile]

    def potential(d):
        return shape(np.asarray(d, dtype=float), width=edge.width, height=edge.height, table=edge.table)

    # Voltage probes: a quarter of the bar, at least 6 columns, and with a
    # flat middle of at least 12 columns between the edge potentials of their
    # two side walls (where it has decayed below a hundredth of its edge
    # value), so that the lowest Landau levels fit in them.
    probe = max(6, bar.width // 4)
    if edge.profile != "none":
        d = np.arange(bar.length, dtype=float)
        v = np.abs(potential(d))
        flat = np.nonzero(v <= 1e-2 * v[0])[0]
        if flat.size:
            probe = max(probe, 2 * int(flat[0]) + 12)
    builder = hallbar_builder(
        bar.length, bar.width, lead_width=bar.width, spin=scenario.spin.enabled, probe_width=probe,
        probe_positions=(bar.length // 4 - probe // 2, 3 * bar.length // 4 - probe // 2),
        potential=None if edge.profile == "none" else potential,
    )
    return builder.finalized(), dict(_params(scenario), disorder=bar.disorder, seed=0)


_SCAN_KEYS = ("r_xy", "r_xx", "r_xy_sem", "r_xx_sem", "r_xy_up", "r_xx_up", "r_xy_down", "r_xx_down")


def _bulk_point(chern: ChernResult, energy: float) -> dict:
    """Bulk prediction at ``energy``: Chern sum, spin Chern numbers and -1/C (None in a band)."""
    from ..solvers.chern import GapClosedError

    try:
        gap = chern.gap_at(energy)
        c, spin_c = gap.chern, gap.spin_chern
    except GapClosedError:
        c, spin_c = None, None
    return {"chern": c, "r_xy_bulk": -1.0 / c if c else None,
            "chern_up": spin_c.get("up") if spin_c else None,
            "chern_down": spin_c.get("down") if spin_c else None}


def _hall_point(fsyst, params: dict, energy: float, seeds: int) -> tuple[dict, str | None]:
    """Resistances of one scan point (h/e^2; NaN and the reason when the bar cannot be solved)."""
    from ..solvers.transport import disorder_average

    try:
        r = disorder_average(fsyst, energy, params, seeds=range(seeds))
    except ValueError as err:
        return {key: float("nan") for key in _SCAN_KEYS}, str(err)
    point = dict(r_xy=r.r_xy, r_xx=r.r_xx, r_xy_sem=r.r_xy_sem, r_xx_sem=r.r_xx_sem)
    for name in ("up", "down"):
        value = (r.by_spin or {}).get(name)
        point[f"r_xy_{name}"] = value["r_xy"] if value else float("nan")
        point[f"r_xx_{name}"] = value["r_xx"] if value else float("nan")
    return point, None


def hallbar_scan(scenario: Scenario, energies, *, progress=False) -> dict:
    """R_xy and R_xx of the scenario's Hall bar over a range of Fermi energies.

    Returns a JSON-able dict of lists: ``energy`` (t), ``r_xy``, ``r_xx``
    (h/e^2, NaN where some lead has no open channel), their standard errors
    ``r_xy_sem``, ``r_xx_sem``, per spin sector ``r_xy_up``, ``r_xx_up``,
    ``r_xy_down``, ``r_xx_down`` (each sector as a conductor of its own; NaN
    without spin or without an open channel of that spin in every lead), the
    bulk prediction ``chern`` (Chern sum below E, None inside a bulk band),
    ``chern_up``, ``chern_down`` (spin Chern numbers) and ``r_xy_bulk = -1/C``
    (None for C = 0 or in a band), and ``errors`` (energy, message) where the
    bar could not be solved.
    """
    scenario, _ = lattice_scenario(scenario)
    chern, _, _ = bulk_chern(replace_chern_refine(scenario))
    fsyst, params = _hallbar_system(scenario)
    out: dict = {"energy": []}
    errors = []
    for energy in ticks(np.asarray(energies, dtype=float), progress, "Hall bars over E_F"):
        values, error = _hall_point(fsyst, params, float(energy), scenario.hallbar.seeds)
        point = {**_bulk_point(chern, float(energy)), **values}
        out["energy"].append(float(energy))
        for key, value in point.items():
            out.setdefault(key, []).append(value)
        if error:
            errors.append([float(energy), error])
    out["errors"] = errors
    return out


def _field_bulk(model: Scenario, fermi_t: float) -> ChernResult:
    """Chern numbers of a field-scan point's bulk up to a little above ``fermi_t`` (a process-pool task).

    The Landau-level solver where :func:`bulk_solver` takes it, else every
    band on the butterfly's momentum grid.
    """
    from dataclasses import replace

    from .butterfly import butterfly_grid

    at_ef = replace(model, fermi=replace(model.fermi, gap=None, energy=fermi_t))
    if bulk_solver(at_ef)[0] == "landau":
        cell = harper_cell(at_ef)
        return landau_chern(cell, bands=bands_for(cell, energy=fermi_t), gap_min=model.chern.gap_min)
    return chern_numbers(build_bulk(model), grid=butterfly_grid(model.lattice.flux.denominator),
                         gap_min=model.chern.gap_min)


def hallbar_field_scan(scenario: Scenario, fields_tesla, *, jobs: int | None = None,
                       progress=False) -> dict:
    """R_xy and R_xx of the scenario's Hall bar over the magnetic field at fixed E_F.

    The scenario must be in physical units (``[material]`` and ``[field]``).
    At every field ``B`` the lattice model is derived anew (the flux ``p/q``
    within ``field.tolerance`` of ``B``, Zeeman splitting ``-g mu_B B``), while
    the Fermi energy is held fixed: ``field.fermi_mev`` above the band
    bottom, or, for a scenario given by its density, the E_F that the density
    gives at the scenario's own field (the middle of the gap above the
    nearest integer filling). The bar's geometry does not change. The bulk
    prediction at each field is the Chern sum below E_F (the Landau-level
    solver for large cells, else every band on the momentum grid of
    :func:`topoedge.workflows.butterfly.butterfly_grid`), computed once per distinct
    flux in ``jobs`` worker processes while this process solves the bars.

    Parameters
    ----------
    scenario : Scenario
    fields_tesla : array_like
        Fields B in tesla (one sign, no zero).
    jobs : int, optional
        Worker processes for the bulk Chern numbers (default: all cores; 1
        computes them here).
    progress : bool or Progress
        True: a progress bar; a :class:`topoedge.util.progress.Progress`: one
        stage over the bars (a bar or log lines).

    Returns
    -------
    dict
        ``b_tesla`` (requested), ``b_lattice_tesla`` (the field of the lattice
        flux, within ``field.tolerance``), ``flux`` (``"p/q"``), ``filling`` (``n h / (e B)`` for a
        density, else None), ``fermi_t`` and ``fermi_mev`` (fixed), and the
        lists of :func:`hallbar_scan` (without ``energy``), ``errors`` as
        ``[B, message]``.

    Raises
    ------
    ValueError
        If the scenario has no ``[field]`` section, or a field cannot be
        represented (the message names it).
    """
    import multiprocessing
    import os
    from concurrent.futures import ProcessPoolExecutor
    from dataclasses import replace


    if scenario.field.b_tesla is None:
        raise ValueError("a field scan needs a scenario in physical units: add [material] and [field] "
                         "(field.b_tesla and field.fermi_mev or field.density_cm2)")
    base, base_units = lattice_scenario(scenario)
    if base.fermi.energy is not None:
        fermi_t = float(base.fermi.energy)
    else:
        chern, _, _ = bulk_chern(replace_chern_refine(base))
        fermi_t, _ = fermi_level(base, chern)
    fields = [float(b) for b in np.asarray(fields_tesla, dtype=float)]
    models = []
    for b in fields:
        try:
            models.append(lattice_scenario(replace(scenario, field=replace(scenario.field, b_tesla=b))))
        except ValueError as err:
            raise ValueError(f"field scan at B = {b:g} T: {err}") from None
    fsyst, _ = _hallbar_system(base)
    # One bulk computation per distinct lattice model (fields rounding to the
    # same flux share it), started first so that it runs beside the bars.
    distinct = {}
    for model, _ in models:
        distinct.setdefault((model.lattice.flux, model.spin.zeeman), model)
    workers = min(jobs or os.cpu_count() or 1, len(distinct))
    pool = None
    if workers > 1:
        from ..util.workers import init_worker

        pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                   initializer=init_worker)
    try:
        bulk = {key: pool.submit(_field_bulk, model, fermi_t) if pool else None
                for key, model in distinct.items()}
        bars = []
        for b, (model, _) in ticks(list(zip(fields, models)), progress, "Hall bars over B"):
            params = dict(_params(model), disorder=model.hallbar.disorder, seed=0)
            bars.append(_hall_point(fsyst, params, fermi_t, model.hallbar.seeds))
        chern = {key: future.result() if pool else _field_bulk(distinct[key], fermi_t)
                 for key, future in bulk.items()}
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    out: dict = {"b_tesla": [], "b_lattice_tesla": [], "flux": [], "filling": [],
                 "fermi_t": fermi_t, "fermi_mev": (fermi_t + 4.0) * base_units.hopping_mev}
    errors = []
    for b, (model, units), (values, error) in zip(fields, models, bars):
        point = {**_bulk_point(chern[(model.lattice.flux, model.spin.zeeman)], fermi_t), **values}
        out["b_tesla"].append(b)
        out["b_lattice_tesla"].append(units.b_lattice_tesla)
        out["flux"].append(str(model.lattice.flux))
        out["filling"].append(units.filling)
        for key, value in point.items():
            out.setdefault(key, []).append(value)
        if error:
            errors.append([b, error])
    out["errors"] = errors
    return out


def replace_chern_refine(scenario: Scenario) -> Scenario:
    """The scenario without the finer-grid Chern check (not needed for a scan)."""
    from dataclasses import replace

    return replace(scenario, chern=replace(scenario.chern, refine=False))


def hall_routes(gap: Gap, edges: EdgeCount, streda: StredaResult | None, hallbar: dict | None = None) -> dict:
    """The Hall conductance (e^2/h) by every route computed, and their agreement.

    ``chern``: Chern sum below E_F (link variables); ``edge``: net chirality of
    the bottom edge (null when E_F is not in a gap of the ribbon); ``streda``:
    the measured slope ``d n_site / d phi`` with its deviation from the nearest
    integer; ``hallbar``: ``-1/R_xy`` of the six-terminal Hall bar (with
    ``hallbar.enabled``), with its deviation from the nearest integer.
    """
    routes = {
        "chern": gap.chern,
        "edge": edges.bottom.net if edges.in_gap else None,
        "streda": streda.slope if streda is not None else None,
        "streda_deviation": streda.deviation if streda is not None else None,
        "hallbar": hallbar["sigma_xy"] if hallbar else None,
        "hallbar_deviation": (hallbar["sigma_xy"] - round(hallbar["sigma_xy"]))
        if hallbar and hallbar["sigma_xy"] is not None else None,
    }
    values = [v for v in (routes["edge"], routes["streda"], routes["hallbar"]) if v is not None]
    routes_agree = all(abs(v - gap.chern) < 1e-6 for v in values) and routes["edge"] is not None
    return {"routes": routes, "routes_agree": routes_agree}


def bulk_edge_check(gap: Gap, edges: EdgeCount, *, width: int | None = None) -> dict:
    """Compare the Chern sum below E_F with the net chirality of each edge.

    The bottom edge must carry ``+C`` and the top edge ``-C`` (see the module
    notes), in total and, when S_z is conserved, per spin. When they disagree,
    ``reason`` says why if it can tell: E_F not in a gap of the ribbon, or edge
    states so wide (spread above a tenth of the ``width``) that the two edges
    overlap and the ribbon must be widened.
    """
    agree = edges.in_gap and edges.bottom.net == gap.chern and edges.top.net == -gap.chern
    reason = None
    if not edges.in_gap:
        reason = edges.message
    elif not agree:
        spread = max((m.spread for m in edges.bottom.modes + edges.top.modes), default=0.0)
        if width is not None and spread > width / 10:
            reason = (f"edge states spread over {spread:.1f} sites, more than a tenth of the ribbon "
                      f"width {width}: the two edges overlap; widen the ribbon (ribbon.width)")
        else:
            reason = (f"net chirality bottom {edges.bottom.net:+d} / top {edges.top.net:+d} "
                      f"differs from C = {gap.chern}")
    spin = None
    if gap.spin_chern is not None and edges.bottom.by_spin:
        spin = edges.in_gap and all(
            edges.bottom.by_spin[s]["net"] == c and edges.top.by_spin[s]["net"] == -c
            for s, c in gap.spin_chern.items()
        )
    return {
        "bulk_edge_agree": bool(agree),
        "spin_resolved_agree": spin,
        "reason": reason,
        "convention": "bottom-edge net chirality = +C and top edge = -C, C = Chern sum below E_F",
    }


def _finite(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def summarize(scenario: Scenario, spec: RibbonSpectrum, potential: np.ndarray, *, chern: ChernResult,
              refined: ChernResult | None, ef: float, gap: Gap, edges: EdgeCount, seconds: float,
              given: Scenario | None = None, units: Derived | None = None,
              streda: StredaResult | None = None, streda_error: str | None = None,
              hallbar: dict | None = None, hallbar_error: str | None = None,
              subspace: dict | None = None, solver_reason: str | None = None) -> dict:
    """JSON-able summary of a run.

    ``scenario`` is in lattice units; ``given`` (default: the same) is the
    scenario as written, stored under ``config``; ``units`` holds what was
    derived from ``[material]`` and ``[field]`` (``units`` key, null without).
    ``subspace`` is :func:`topoedge.solvers.chern.subspace_chern` of the gap at E_F
    (``bulk.subspace``; a warning when it differs from the band sum).

    Energies are in units of the hopping ``t``. Derived lattice scales use
    the effective-mass limit of the square lattice (``m* = hbar^2 / (2 t a^2)``):
    magnetic length ``l_B = a / sqrt(2 pi |phi|)`` and cyclotron energy
    ``hbar omega_c = 4 pi t |phi|``; on the honeycomb lattice the Dirac limit:
    ``l_B = sqrt(A_hex / (2 pi |phi|))`` (a_cc) and the first Landau level
    ``E_1 = sqrt(2) hbar v_F / l_B`` with ``hbar v_F = 3 t a_cc / 2``.

    Hall resistance: ``R_xy = -1/sigma_xy`` (``rho_xy`` for ``sigma_xx = 0``),
    one sign in every output; electrons in ``B || +z`` have ``C < 0`` and
    ``R_xy = +R_K/nu`` (see :mod:`topoedge.scenario.units`). With ``units`` the
    ``physical`` block repeats the results in the units of the scenario.
    """
    lat = scenario.lattice
    entry = lattice(lat.kind)
    scales = entry.scales(lat)
    warnings = list(units.warnings) if units is not None else []
    if subspace is not None:
        subspace = {**subspace, "agree": subspace["chern"] == gap.chern}
        if not subspace["agree"]:
            warnings.append(
                f"the Chern sum below E_F is {gap.chern} from the bands one by one on the "
                f"{chern.grid[0]}x{chern.grid[1]} grid but {subspace['chern']} from the occupied subspace on "
                f"{subspace['grid'][0]}x{subspace['grid'][1]}: the grid does not resolve the bulk bands; "
                "use a finer chern.grid")
    valid = np.isfinite(spec.energy)
    energies = spec.energy[valid]
    converged = None
    if refined is not None:
        converged = [(g.below, g.chern) for g in chern.gaps] == [(g.below, g.chern) for g in refined.gaps]
    c = gap.chern
    routes = hall_routes(gap, edges, streda, hallbar)
    summary = {
        "topoedge_version": __version__,
        "title": scenario.title,
        "source": scenario.source,
        "config": (given or scenario).to_dict(),
        "units": units.to_dict() if units is not None else None,
        "warnings": warnings,
        "model": {
            "lattice": lat.kind,
            "flux": f"{lat.flux.numerator}/{lat.flux.denominator}",
            "spin": scenario.spin.enabled,
            "zeeman_t": scenario.spin.zeeman,
            "rashba_t": scenario.spin.rashba,
            **entry.model_keys(lat, scenario.ribbon),
            **scales,
            "ribbon_width_sites": scenario.ribbon.width,
            "edge_profile": scenario.ribbon.edge.profile,
            "edge_potential_max_t": float(np.max(potential)),
        },
        "spectrum": {
            "k_points": int(spec.k.size),
            "states": int(valid.sum()),
            "solver": spec.solver,
            "window": list(spec.window) if spec.window else None,
            "energy_min": float(energies.min()) if energies.size else None,
            "energy_max": float(energies.max()) if energies.size else None,
        },
        "bulk": {
            "solver": chern.solver,
            "solver_reason": solver_reason,
            "bands_computed": len(chern.bands),
            "bands_total": chern.total_bands or len(chern.bands),
            "grid": list(chern.grid),
            "gap_min": chern.gap_min,
            "bands": [b.to_dict() for b in chern.bands],
            "gaps": [g.to_dict() for g in chern.gaps],
            "chern_below_fermi": c,
            "spin_chern_below_fermi": gap.spin_chern,
            "refined_grid": list(refined.grid) if refined is not None else None,
            "refined_gaps": [g.to_dict() for g in refined.gaps] if refined is not None else None,
            "converged": converged,
            "subspace": subspace,
        },
        "fermi": {
            "energy": ef,
            "gap_below": gap.below,
            "gap_window": [_finite(gap.energy_min), _finite(gap.energy_max)],
            "from_gap": scenario.fermi.gap,
        },
        "edges": {
            "bottom": edges.bottom.to_dict(),
            "top": edges.top.to_dict(),
            "bulk": [m.to_dict() for m in edges.bulk],
            "touching": [dict(t) for t in edges.touching],
            "in_gap": edges.in_gap,
            "message": edges.message,
        },
        "hall": {
            "sigma_xy": c,
            "sigma_xy_siemens": c / VON_KLITZING,
            "r_xy_ohm": -VON_KLITZING / c if c else None,
            "units": "sigma_xy in e^2/h; r_xy_ohm = -1/sigma_xy = -h/(C e^2) (rho_xy), null for C = 0",
            "routes": routes["routes"],
            "streda": streda.to_dict() if streda is not None else None,
            "streda_error": streda_error,
            "hallbar": hallbar,
            "hallbar_error": hallbar_error,
        },
        "check": {**bulk_edge_check(gap, edges, width=scenario.ribbon.width),
                  "routes_agree": routes["routes_agree"]},
        "seconds": round(seconds, 3),
    }
    if units is not None:
        summary["physical"] = physical_summary(scenario, units, ef=ef, gap=gap, edges=edges, potential=potential)
        for name in ("bottom", "top"):
            for mode, extra in zip(summary["edges"][name]["modes"], summary["physical"]["edges"][name]):
                mode.update(extra)
    return summary


def physical_summary(scenario: Scenario, units: Derived, *, ef: float, gap: Gap, edges: EdgeCount,
                     potential: np.ndarray) -> dict:
    """The run's results in the units of a physical scenario.

    Energies in meV above the band bottom of the lattice model (``-4 t +
    onsite``, the conduction-band edge of the discretised electron gas);
    lengths in nm and magnetic lengths ``l_B`` (of the field asked for);
    edge-mode velocities ``v = (1/hbar) dE/dk`` in m/s beside the drift
    velocity ``v_x = U'(y) / (e B_z)`` of the edge potential ``U`` at the
    mode (``E x B`` drift of a guiding centre; None where the potential is
    flat, e.g. a hard wall); Hall resistance ``R_xy = -1/sigma_xy`` in ohm.
    """
    import scipy.constants as const

    t_mev, a_nm = units.hopping_mev, units.lattice_constant_nm
    bottom = -4.0 + scenario.lattice.onsite

    def mev(e):
        return float((e - bottom) * t_mev) if np.isfinite(e) else None

    t_joule = t_mev * 1e-3 * const.e
    v_unit = t_joule * a_nm * 1e-9 / const.hbar               # m/s per t a (hbar = 1)
    y_rows = np.arange(len(potential), dtype=float)
    slope = np.gradient(np.asarray(potential, dtype=float)) if len(potential) > 1 else np.zeros(1)

    top_row = float(scenario.ribbon.width - 1)

    def mode_extra(m, edge: str) -> dict:
        drift = None
        if len(potential) == scenario.ribbon.width > 1:                # one potential per row
            du = float(np.interp(m.y, y_rows, slope))                 # t per a
            if abs(du) > 1e-12:
                drift = du * t_joule / (a_nm * 1e-9) / (const.e * units.b_tesla)
        depth = m.y if edge == "bottom" else top_row - m.y
        return {"y_nm": m.y * a_nm, "depth_nm": depth * a_nm, "depth_lb": depth * a_nm / units.magnetic_length_nm,
                "velocity_m_s": m.velocity * v_unit, "drift_m_s": drift}

    c = gap.chern
    return {
        "b_tesla": units.b_tesla,
        "b_lattice_tesla": units.b_lattice_tesla,
        "b_relative_error": units.b_relative_error,
        "field_direction": "+z" if units.b_tesla > 0 else "-z",
        "lattice_constant_nm": a_nm,
        "hopping_mev": t_mev,
        "magnetic_length_nm": units.magnetic_length_nm,
        "cyclotron_mev": units.cyclotron_mev,
        "zeeman_mev": units.zeeman_mev,
        "coulomb_mev": units.coulomb_mev,
        "filling": units.filling,
        "fermi_energy_mev": mev(ef),
        "gap_mev": [mev(gap.energy_min), mev(gap.energy_max)],
        "ribbon_width_nm": (scenario.ribbon.width - 1) * a_nm,
        "sigma_xy_e2_h": c,
        "r_xy_ohm": -VON_KLITZING / c if c else None,
        "edges": {name: [mode_extra(m, name) for m in getattr(edges, name).modes] for name in ("bottom", "top")},
        "units": "energies in meV above the band bottom; y_nm from the bottom row, depth_nm and depth_lb from "
                 "the mode's own edge; velocities in m/s (drift_m_s: U'(y)/(e B), null where U is flat); "
                 "R_xy = -1/sigma_xy in ohm",
    }
