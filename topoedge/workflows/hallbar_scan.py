"""The six-terminal Hall bar of a scenario: one point in ``run``, scans over E_F or B (workflow stage).

The bar itself is built by :mod:`topoedge.solvers.transport`; here it gets
the scenario's model (flux, spin, Zeeman, on-site energy, edge profile), the
bulk prediction at every point, and the field scans their lattice models
(one per field, within ``field.tolerance``) with the bulk Chern numbers in
worker processes.
"""

from __future__ import annotations

import numpy as np
from ..scenario import Model, Scenario, resolve
from ..solvers.chern import ChernResult, chern_numbers
from ..solvers.landau import (bands_for, landau_chern)
from ..util.points import PointStore
from ..util.progress import ticks
from .build import build_bulk, harper_cell, params_of
from .bulk import bulk_chern, bulk_solver, fermi_level, replace_chern_refine
from .records import HallBarRoute


def hallbar_route(scenario: Scenario, ef: float) -> tuple[HallBarRoute | None, str | None]:
    """Hall and longitudinal resistance of the scenario's Hall bar at E_F, or why not.

    The bar has the scenario's flux, spin, Zeeman splitting, on-site energy and
    edge profile along all its boundaries. Returns the :class:`HallBarRoute`
    (``R_xy``, ``R_xx`` in h/e^2, means over the disorder seeds with standard
    errors of the mean, and the conductance ``sigma_xy = -1 / R_xy`` in e^2/h;
    see :mod:`topoedge.solvers.transport` for the sign) and None, or None and
    the reason the bar could not be solved.
    """
    from ..solvers.transport import disorder_average

    bar = scenario.hallbar
    try:
        fsyst, params = hallbar_system(scenario)
        result = disorder_average(fsyst, ef, params, seeds=range(bar.seeds))
    except ValueError as err:
        return None, str(err)
    return HallBarRoute(average=result, length=bar.length, width=bar.width, disorder=bar.disorder,
                        seeds=bar.seeds), None


def _layout(scenario: Scenario):
    """Probe width, probe positions and edge potential (or None) of a scenario's bar."""
    from ..models.bar_layout import probe_layout
    from ..models.profiles import EDGE_PROFILES

    bar, edge = scenario.hallbar, scenario.ribbon.edge
    potential = None
    if edge.profile != "none":
        shape = EDGE_PROFILES[edge.profile]

        def potential(d):
            return shape(np.asarray(d, dtype=float), width=edge.width, height=edge.height, table=edge.table)

    probe, positions = probe_layout(bar.length, bar.width, potential)
    return probe, positions, potential


def hallbar_aspect(scenario: Scenario) -> float:
    """Distance between the longitudinal probes over the bar's width: rho_xx = R_xx / aspect."""
    _, positions, _ = _layout(scenario)
    return (positions[1] - positions[0]) / scenario.hallbar.width


def hallbar_system(scenario: Scenario):
    """The finalized Hall bar of a scenario and its kwant params (without E_F)."""
    from ..models.hallbar import hallbar_builder

    bar = scenario.hallbar
    probe, positions, potential = _layout(scenario)
    builder = hallbar_builder(
        bar.length, bar.width, lead_width=bar.width, spin=scenario.spin.enabled, probe_width=probe,
        probe_positions=positions, potential=potential,
    )
    return builder.finalized(), dict(params_of(scenario), disorder=bar.disorder, seed=0)


_SCAN_KEYS = ("r_xy", "r_xx", "r_xy_sem", "r_xx_sem", "r_xy_up", "r_xx_up", "r_xy_down", "r_xx_down")


def _bulk_point(chern: ChernResult, energy: float, flux) -> dict:
    """Bulk prediction at ``energy``: Chern sum, spin Chern numbers, -1/C and the filling (None in a band).

    The filling factor of E_F in a gap above ``r`` bands at flux ``p/q`` is
    ``r / |p|`` (``r/q`` electrons per site, ``|p|/q`` flux quanta per site).
    """
    from ..solvers.chern import GapClosedError

    try:
        gap = chern.gap_at(energy)
        c, spin_c, below = gap.chern, gap.spin_chern, gap.below
    except GapClosedError:
        c, spin_c, below = None, None, None
    filling = below / abs(flux.numerator) if below is not None and flux.numerator else None
    return {"chern": c, "r_xy_bulk": -1.0 / c if c else None,
            "chern_up": spin_c.get("up") if spin_c else None,
            "chern_down": spin_c.get("down") if spin_c else None,
            "filling_bulk": filling}


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


def default_energies(scenario: Scenario | Model, points: int = 41) -> np.ndarray:
    """Fermi energies (t) of a scan when none are given: from the bottom of the bulk spectrum to
    2.5 times as far above it as the scenario's E_F (its gap and the next Landau levels)."""
    model = resolve(scenario).scenario
    chern, _, _ = bulk_chern(replace_chern_refine(model))
    ef, _ = fermi_level(model, chern)
    bottom = min(b.energy_min for b in chern.bands)
    return np.linspace(bottom, ef + 1.5 * (ef - bottom), points)


def hallbar_scan(scenario: Scenario | Model, energies, *, progress=False, store: PointStore | None = None) -> dict:
    """R_xy and R_xx of the scenario's Hall bar over a range of Fermi energies.

    Returns a JSON-able dict of lists: ``energy`` (t), ``r_xy``, ``r_xx``
    (h/e^2, NaN where some lead has no open channel), their standard errors
    ``r_xy_sem``, ``r_xx_sem``, per spin sector ``r_xy_up``, ``r_xx_up``,
    ``r_xy_down``, ``r_xx_down`` (each sector as a conductor of its own; NaN
    without spin or without an open channel of that spin in every lead), the
    bulk prediction ``chern`` (Chern sum below E, None inside a bulk band),
    ``chern_up``, ``chern_down`` (spin Chern numbers) and ``r_xy_bulk = -1/C``
    (None for C = 0 or in a band), the flux ``flux`` (``"p/q"``) and the
    filling factor ``filling_bulk`` of the bulk gap at E (``r/|p|`` above
    ``r`` bands, None in a band), and ``errors`` (energy, message) where the
    bar could not be solved. With a ``store``, every point is kept the moment
    it is solved and points found there are not solved again.
    """
    scenario = resolve(scenario).scenario
    store = store if store is not None else PointStore(None)
    chern, _, _ = bulk_chern(replace_chern_refine(scenario))
    fsyst, params = hallbar_system(scenario)
    flux = scenario.lattice.flux
    out: dict = {"energy": []}
    errors = []
    for energy in ticks(np.asarray(energies, dtype=float), progress, "Hall bars over E_F"):
        name = f"E{float(energy)!r}"
        found = store.load(name)
        if found is None:
            found = _hall_point(fsyst, params, float(energy), scenario.hallbar.seeds)
            store.save(name, found)
        values, error = found
        point = {**_bulk_point(chern, float(energy), flux), "flux": str(flux), **values}
        out["energy"].append(float(energy))
        for key, value in point.items():
            out.setdefault(key, []).append(value)
        if error:
            errors.append([float(energy), error])
    out["errors"] = errors
    return out


def _field_bulk_point(model: Scenario, fermi_t: float) -> dict:
    """:func:`_bulk_point` of a field-scan point at ``fermi_t`` (a process-pool task)."""
    return _bulk_point(_field_bulk(model, fermi_t), fermi_t, model.lattice.flux)


def _field_bulk(model: Scenario, fermi_t: float) -> ChernResult:
    """Chern numbers of a field-scan point's bulk up to a little above ``fermi_t``.

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


def _keep(store: PointStore, name: str, future) -> None:
    """Store a finished future's result (nothing for a cancelled or failed one)."""
    if not future.cancelled() and future.exception() is None:
        store.save(name, future.result())


def hallbar_field_scan(scenario: Scenario | Model, fields_tesla, *, jobs: int | None = None,
                       progress=False, store: PointStore | None = None) -> dict:
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
    scenario : Scenario or Model
        As written (physical units), or already resolved.
    fields_tesla : array_like
        Fields B in tesla (one sign, no zero).
    jobs : int, optional
        Worker processes for the bulk Chern numbers (default: all cores; 1
        computes them here).
    progress : bool or Progress
        True: a progress bar; a :class:`topoedge.util.progress.Progress`: one
        stage over the bars (a bar or log lines).
    store : PointStore, optional
        Keeps every bar and every bulk prediction the moment it is computed;
        what is found there is not computed again.

    Returns
    -------
    dict
        ``b_tesla`` (requested), ``b_lattice_tesla`` (the field of the lattice
        flux, within ``field.tolerance``), ``flux`` (``"p/q"``), ``filling`` (``n h / (e B)`` for a
        density, else None), ``filling_bulk`` (of the bulk gap at E_F: ``r/|p|`` above ``r``
        bands, None in a band), ``fermi_t`` and ``fermi_mev`` (fixed), and the
        lists of :func:`hallbar_scan` (without ``energy``), ``errors`` as
        ``[B, message]``.

    Raises
    ------
    ValueError
        If the scenario has no ``[field]`` section, or a field cannot be
        represented (the message names it).
    """
    import os
    from dataclasses import replace

    model = resolve(scenario)
    scenario, base, base_units = model.given, model.scenario, model.units
    if scenario.field.b_tesla is None:
        raise ValueError("a field scan needs a scenario in physical units: add [material] and [field] "
                         "(field.b_tesla and field.fermi_mev or field.density_cm2)")
    if base.fermi.energy is not None:
        fermi_t = float(base.fermi.energy)
    else:
        chern, _, _ = bulk_chern(replace_chern_refine(base))
        fermi_t, _ = fermi_level(base, chern)
    fields = [float(b) for b in np.asarray(fields_tesla, dtype=float)]
    models = []
    for b in fields:
        try:
            at_b = resolve(replace(scenario, field=replace(scenario.field, b_tesla=b)))   # another scenario
            models.append((at_b.scenario, at_b.units))
        except ValueError as err:
            raise ValueError(f"field scan at B = {b:g} T: {err}") from None
    store = store if store is not None else PointStore(None)
    fsyst, _ = hallbar_system(base)
    # One bulk computation per distinct lattice model (fields rounding to the
    # same flux share it), started first so that it runs beside the bars.
    distinct = {}
    for model, _ in models:
        distinct.setdefault((model.lattice.flux, model.spin.zeeman), model)

    def bulk_name(key) -> str:
        return f"bulk_{key[0].numerator}_{key[0].denominator}_{key[1]!r}"

    bulk: dict = {}
    for key in distinct:
        found = store.load(bulk_name(key))
        if found is not None:
            bulk[key] = found
    remaining = {key: model for key, model in distinct.items() if key not in bulk}
    workers = min(jobs or os.cpu_count() or 1, len(remaining))
    pool = None
    if workers > 1:
        from ..util.workers import process_pool

        pool = process_pool(workers)
    try:
        futures = {}
        for key, model in remaining.items() if pool else ():
            future = pool.submit(_field_bulk_point, model, fermi_t)
            # kept the moment it is done, even if the bars are interrupted later
            future.add_done_callback(lambda f, key=key: _keep(store, bulk_name(key), f))
            futures[key] = future
        bars = []
        for b, (model, _) in ticks(list(zip(fields, models)), progress, "Hall bars over B"):
            found = store.load(f"B{b!r}")
            if found is None:
                params = dict(params_of(model), disorder=model.hallbar.disorder, seed=0)
                found = _hall_point(fsyst, params, fermi_t, model.hallbar.seeds)
                store.save(f"B{b!r}", found)
            bars.append(found)
        for key, model in remaining.items():
            if pool:
                bulk[key] = futures[key].result()
            else:
                bulk[key] = _field_bulk_point(model, fermi_t)
                store.save(bulk_name(key), bulk[key])
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    out: dict = {"b_tesla": [], "b_lattice_tesla": [], "flux": [], "filling": [],
                 "fermi_t": fermi_t, "fermi_mev": (fermi_t + 4.0) * base_units.hopping_mev}
    errors = []
    for b, (model, units), (values, error) in zip(fields, models, bars):
        point = {**bulk[(model.lattice.flux, model.spin.zeeman)], **values}
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


