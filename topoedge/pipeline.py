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

The file and figure writers in :mod:`topoedge.results` and
:mod:`topoedge.plotting` and the command line sit on top of it.

Bulk-edge convention: with the builders' conventions (counter-clockwise
plaquette phase ``+2 pi phi``, Bloch waves ``exp(i k x)``) and the Chern
convention of :mod:`topoedge.chern`, the net number of modes on the bottom
edge, counted with the sign of ``dE/dk``, equals the Chern sum ``C`` of the
bulk bands below E_F, and the top edge carries ``-C``. The Hall conductance is
``sigma_xy = C e^2/h`` and ``R_xy = h / (C e^2)``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from . import __version__
from .bloch import BlochHamiltonian
from .builders import bulk_builder, model_params, ribbon_builder
from .chern import ChernResult, Gap, chern_numbers, default_grid, path_bands, subspace_chern
from .models import haldane_builder, haldane_ribbon_builder, qwz_builder, qwz_ribbon_builder
from .honeycomb import (dirac_landau_level, honeycomb_bulk_builder, honeycomb_magnetic_length,
                        honeycomb_params, honeycomb_ribbon_builder)
from .config import ZERO_FIELD, Scenario, lattice_scenario
from .units import VON_KLITZING, Derived
from .edges import EdgeCount, count_edge_modes
from .hamiltonian import RibbonHamiltonian
from .profiles import edge_potential
from .spectrum import RibbonSpectrum, k_grid, ribbon_spectrum
from .streda import StredaResult, streda_slope

__all__ = [
    "RunResult", "VON_KLITZING", "build_bulk", "build_ribbon", "bulk_chern", "bulk_edge_check",
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
    #: (topoedge.interacting.InteractingRun), else None.
    interacting: object | None = None


def _rashba(scenario: Scenario) -> bool:
    return scenario.spin.rashba != 0


def _params(scenario: Scenario) -> dict:
    lat, spin = scenario.lattice, scenario.spin
    if lat.kind == "qwz":
        return dict(m=lat.mass)
    if lat.kind == "haldane":
        return dict(t1=1.0, t2=lat.t2, phi=lat.t2_phase, M=lat.staggered)
    if lat.kind == "honeycomb":
        return honeycomb_params(phi=lat.flux, zeeman=spin.zeeman, onsite=lat.onsite,
                                staggered=lat.staggered, rashba=spin.rashba)
    return model_params(phi=lat.flux, zeeman=spin.zeeman, onsite=lat.onsite,
                        rashba=spin.rashba if _rashba(scenario) else None)


def _profile(scenario: Scenario):
    """The edge profile ``V(d)`` (t) of a scenario, ``d`` from the nearer edge."""
    from .profiles import EDGE_PROFILES

    edge = scenario.ribbon.edge
    shape = EDGE_PROFILES[edge.profile]
    return lambda d: shape(np.asarray(d, dtype=float), width=float(edge.width),
                           height=float(edge.height), table=edge.table)


def scenario_potential(scenario: Scenario) -> np.ndarray:
    """Edge potential (units of t) of every row of a square-lattice scenario's ribbon.

    The other lattices evaluate the profile at every site (:func:`build_ribbon`
    returns it with the ribbon).
    """
    edge = scenario.ribbon.edge
    if scenario.lattice.kind != "square":
        raise ValueError(f"scenario_potential gives rows of the square lattice; lattice.kind is "
                         f"{scenario.lattice.kind!r}: use build_ribbon")
    return edge_potential(
        scenario.ribbon.width, edge.profile, ramp=edge.width, height=edge.height, table=edge.table
    )


def build_ribbon(scenario: Scenario) -> tuple[RibbonHamiltonian, np.ndarray]:
    """The kwant ribbon of a scenario, finalized and reduced to its Bloch form.

    Returns the ribbon and its edge potential: one value per row on the
    square lattice, one per site of the cell (sorted across the ribbon) on
    the honeycomb lattice.
    """
    spin = scenario.spin.enabled
    kind = scenario.lattice.kind
    if kind != "square":
        profile = _profile(scenario) if scenario.ribbon.edge.profile != "none" else None
        width = scenario.ribbon.width
        if kind == "qwz":
            builder = qwz_ribbon_builder(width, potential=profile)
        elif kind == "haldane":
            builder = haldane_ribbon_builder(width, potential=profile)
        else:
            builder = honeycomb_ribbon_builder(width, orientation=scenario.ribbon.orientation or "zigzag",
                                               spin=spin, potential=profile, rashba=_rashba(scenario))
        ham = RibbonHamiltonian.from_kwant(builder, params=_params(scenario), spin=spin)
        y = np.unique(ham.position)
        d = np.minimum(y - y.min(), y.max() - y)
        potential = profile(d) if profile is not None else np.zeros_like(d)
        return ham, potential
    potential = scenario_potential(scenario)
    builder = ribbon_builder(scenario.ribbon.width, spin=spin, potential=potential, rashba=_rashba(scenario))
    ham = RibbonHamiltonian.from_kwant(builder, params=_params(scenario), spin=spin)
    return ham, potential


def build_bulk(scenario: Scenario) -> BlochHamiltonian:
    """The bulk of a scenario: magnetic unit cell, no edge potential."""
    spin = scenario.spin.enabled
    if scenario.lattice.kind == "qwz":
        return BlochHamiltonian.from_kwant(qwz_builder(), params=_params(scenario), spin=False)
    if scenario.lattice.kind == "haldane":
        return BlochHamiltonian.from_kwant(haldane_builder(), params=_params(scenario), spin=False)
    if scenario.lattice.kind == "honeycomb":
        builder = honeycomb_bulk_builder(scenario.lattice.flux, spin=spin, rashba=_rashba(scenario))
    else:
        builder = bulk_builder(scenario.lattice.flux, spin=spin, rashba=_rashba(scenario))
    return BlochHamiltonian.from_kwant(builder, params=_params(scenario), spin=spin)


def bulk_chern(scenario: Scenario, bloch: BlochHamiltonian | None = None
               ) -> tuple[ChernResult, ChernResult | None, dict]:
    """Chern numbers of the bulk on the configured grid and, optionally, a finer one.

    Returns
    -------
    result : ChernResult
    refined : ChernResult or None
        The same on a grid 1.5 times finer in each direction (``chern.refine``).
    path : dict
        Bulk bands along Gamma-X-M-Gamma, for the figure.

    ``bloch`` is the scenario's bulk when the caller has built it already.
    """
    cfg = scenario.chern
    bloch = bloch if bloch is not None else build_bulk(scenario)
    grid = cfg.grid or default_grid(bloch)
    result = chern_numbers(bloch, grid=grid, gap_min=cfg.gap_min)
    refined = None
    if cfg.refine:
        finer = tuple(int(math.ceil(1.5 * n)) for n in grid)
        refined = chern_numbers(bloch, grid=finer, gap_min=cfg.gap_min)
    return result, refined, path_bands(bloch)


def fermi_level(scenario: Scenario, chern: ChernResult) -> tuple[float, Gap]:
    """E_F of the scenario and the bulk gap containing it.

    Raises
    ------
    topoedge.chern.GapClosedError
        When E_F lies in a bulk band, or ``fermi.gap`` names a closed gap.
    """
    if scenario.fermi.gap is not None:
        gap = chern.gap_above(scenario.fermi.gap)
        return gap.middle, gap
    ef = scenario.fermi.energy if scenario.fermi.energy is not None else 0.0
    return ef, chern.gap_at(ef)


def run_scenario(scenario: Scenario, *, progress: bool = False) -> RunResult:
    """Bulk Chern numbers, ribbon spectrum and edge modes of a scenario.

    Raises
    ------
    topoedge.chern.GapClosedError
        Before the ribbon is computed, when E_F is not in an open bulk gap.
    """
    if scenario.interaction.enabled:
        raise ValueError("the scenario has [interaction]: run it with topoedge.interacting.run_interacting")
    start = time.perf_counter()
    given = scenario
    scenario, units = lattice_scenario(scenario)
    bulk = build_bulk(scenario)
    chern, refined, path = bulk_chern(scenario, bulk)
    ef, gap = fermi_level(scenario, chern)
    ham, potential = build_ribbon(scenario)
    window = None
    if scenario.spectrum.window is not None:
        window = (ef - scenario.spectrum.window, ef + scenario.spectrum.window)
    spec = ribbon_spectrum(
        ham,
        k_grid(scenario.spectrum.k_points),
        window=window,
        solver=scenario.spectrum.solver,
        progress=progress,
    )
    edges = count_edge_modes(ham, ef, k_points=scenario.edges.k_points)
    subspace = None
    if np.isfinite(gap.middle):
        # The occupied subspace as a whole needs far fewer points than the
        # bands one by one (that is what makes it a useful check): half the grid.
        grid = tuple(max(12, (n + 1) // 2) for n in chern.grid)
        subspace = subspace_chern(bulk, gap, grid=grid)
    streda, streda_error = streda_route(scenario, ef)
    hallbar, hallbar_error = hallbar_route(scenario, ef) if scenario.hallbar.enabled else (None, None)
    summary = summarize(scenario, spec, potential, chern=chern, refined=refined, ef=ef, gap=gap,
                        edges=edges, seconds=time.perf_counter() - start, given=given, units=units,
                        streda=streda, streda_error=streda_error, hallbar=hallbar,
                        hallbar_error=hallbar_error, subspace=subspace)
    return RunResult(scenario, potential, ham, spec, chern, refined, ef, gap, edges, path, summary, units,
                     streda)


def streda_route(scenario: Scenario, ef: float) -> tuple[StredaResult | None, str | None]:
    """Hall conductance from the density response at fixed E_F, or why not."""
    from dataclasses import replace

    if scenario.lattice.kind in ZERO_FIELD:
        return None, (f"no Streda route for the zero-field {scenario.lattice.kind} model "
                      "(it has no flux to vary)")
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
    ``sigma_xy = -1 / R_xy`` in e^2/h (see :mod:`topoedge.hallbar` for the sign).
    """
    from .hallbar import disorder_average

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
    from .hallbar import hallbar_builder
    from .profiles import EDGE_PROFILES

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
    from .chern import GapClosedError

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
    from .hallbar import disorder_average

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


def hallbar_scan(scenario: Scenario, energies, *, progress: bool = False) -> dict:
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
    from tqdm.auto import tqdm

    scenario, _ = lattice_scenario(scenario)
    chern, _, _ = bulk_chern(replace_chern_refine(scenario))
    fsyst, params = _hallbar_system(scenario)
    out: dict = {"energy": []}
    errors = []
    for energy in tqdm(np.asarray(energies, dtype=float), disable=not progress, desc="Hall bar", leave=False):
        values, error = _hall_point(fsyst, params, float(energy), scenario.hallbar.seeds)
        point = {**_bulk_point(chern, float(energy)), **values}
        out["energy"].append(float(energy))
        for key, value in point.items():
            out.setdefault(key, []).append(value)
        if error:
            errors.append([float(energy), error])
    out["errors"] = errors
    return out


def _field_bulk(model: Scenario) -> ChernResult:
    """Chern numbers of a field-scan point's bulk (a process-pool task)."""
    from .butterfly import butterfly_grid

    return chern_numbers(build_bulk(model), grid=butterfly_grid(model.lattice.flux.denominator),
                         gap_min=model.chern.gap_min)


def hallbar_field_scan(scenario: Scenario, fields_tesla, *, jobs: int | None = None,
                       progress: bool = False) -> dict:
    """R_xy and R_xx of the scenario's Hall bar over the magnetic field at fixed E_F.

    The scenario must be in physical units (``[material]`` and ``[field]``).
    At every field ``B`` the lattice model is derived anew (flux rounded to
    ``p/q`` with ``q <= field.q_max``, Zeeman splitting ``-g mu_B B``), while
    the Fermi energy is held fixed: ``field.fermi_mev`` above the band
    bottom, or, for a scenario given by its density, the E_F that the density
    gives at the scenario's own field (the middle of the gap above the
    nearest integer filling). The bar's geometry does not change. The bulk
    prediction at each field is the Chern sum below E_F on the momentum grid
    of :func:`topoedge.butterfly.butterfly_grid`, computed once per distinct
    flux in ``jobs`` worker processes while this process solves the bars.

    Parameters
    ----------
    scenario : Scenario
    fields_tesla : array_like
        Fields B in tesla (one sign, no zero).
    jobs : int, optional
        Worker processes for the bulk Chern numbers (default: all cores; 1
        computes them here).
    progress : bool
        Show a progress bar.

    Returns
    -------
    dict
        ``b_tesla`` (requested), ``b_used_tesla`` (the field of the rounded
        flux), ``flux`` (``"p/q"``), ``filling`` (``n h / (e B)`` for a
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

    from tqdm.auto import tqdm

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
        from ._workers import init_worker

        pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                   initializer=init_worker)
    try:
        bulk = {key: pool.submit(_field_bulk, model) if pool else None for key, model in distinct.items()}
        bars = []
        for b, (model, _) in tqdm(list(zip(fields, models)), disable=not progress, desc="Hall bars",
                                  leave=False):
            params = dict(_params(model), disorder=model.hallbar.disorder, seed=0)
            bars.append(_hall_point(fsyst, params, fermi_t, model.hallbar.seeds))
        chern = {key: future.result() if pool else _field_bulk(distinct[key]) for key, future in bulk.items()}
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    out: dict = {"b_tesla": [], "b_used_tesla": [], "flux": [], "filling": [],
                 "fermi_t": fermi_t, "fermi_mev": (fermi_t + 4.0) * base_units.hopping_mev}
    errors = []
    for b, (model, units), (values, error) in zip(fields, models, bars):
        point = {**_bulk_point(chern[(model.lattice.flux, model.spin.zeeman)], fermi_t), **values}
        out["b_tesla"].append(b)
        out["b_used_tesla"].append(units.b_used_tesla)
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
              subspace: dict | None = None) -> dict:
    """JSON-able summary of a run.

    ``scenario`` is in lattice units; ``given`` (default: the same) is the
    scenario as written, stored under ``config``; ``units`` holds what was
    derived from ``[material]`` and ``[field]`` (``units`` key, null without).
    ``subspace`` is :func:`topoedge.chern.subspace_chern` of the gap at E_F
    (``bulk.subspace``; a warning when it differs from the band sum).

    Energies are in units of the hopping ``t``. Derived lattice scales use
    the effective-mass limit of the square lattice (``m* = hbar^2 / (2 t a^2)``):
    magnetic length ``l_B = a / sqrt(2 pi |phi|)`` and cyclotron energy
    ``hbar omega_c = 4 pi t |phi|``; on the honeycomb lattice the Dirac limit:
    ``l_B = sqrt(A_hex / (2 pi |phi|))`` (a_cc) and the first Landau level
    ``E_1 = sqrt(2) hbar v_F / l_B`` with ``hbar v_F = 3 t a_cc / 2``.
    """
    lat = scenario.lattice
    phi = abs(float(lat.flux))
    honeycomb = lat.kind == "honeycomb"
    if lat.kind in ZERO_FIELD:
        scales = {"magnetic_length_a": None, "cyclotron_energy_t": None}
    elif honeycomb:
        lb = honeycomb_magnetic_length(phi) if phi else None
        scales = {"magnetic_length_a": lb, "cyclotron_energy_t": None,
                  "landau_level_1_t": dirac_landau_level(1, phi) if phi else None}
    else:
        scales = {"magnetic_length_a": (1.0 / math.sqrt(2 * math.pi * phi)) if phi else None,
                  "cyclotron_energy_t": 4 * math.pi * phi}
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
    return {
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
            **({"staggered_t": lat.staggered, "orientation": scenario.ribbon.orientation or "zigzag"}
               if lat.kind in ("honeycomb", "haldane") else {}),
            **({"t2_t": lat.t2, "t2_phase_rad": lat.t2_phase} if lat.kind == "haldane" else {}),
            **({"mass_t": lat.mass} if lat.kind == "qwz" else {}),
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
            "r_xy_ohm": VON_KLITZING / c if c else None,
            "units": "sigma_xy in e^2/h; r_xy_ohm = h/(C e^2), null for C = 0",
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
