"""The summary of a run built from the solvers' results: the Hall routes, the bulk-edge check, the physical block.

The records it returns are in :mod:`topoedge.workflows.records` (workflow stage).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
from .. import __version__
from ..models.lattices import lattice
from ..scenario import Scenario
from ..scenario.schema import fraction_text
from ..scenario.units import Derived
from ..solvers.chern import ChernResult, Gap, SubspaceChern
from ..solvers.edges import EdgeCount
from ..solvers.spectrum import RibbonSpectrum
from ..solvers.streda import StredaResult
from .records import (BulkEdgeCheck, BulkInfo, FermiInfo, HallBarRoute, HallInfo, HallRoutes, ModelInfo, ModeUnits,
                      PhysicalInfo, RunSummary, SpectrumInfo, finite_or_none)

__all__ = ["hall_routes", "bulk_edge_check", "summarize", "physical_summary"]


def hall_routes(gap: Gap, edges: EdgeCount, streda: StredaResult | None,
                hallbar: HallBarRoute | None = None) -> HallRoutes:
    """The Hall conductance (e^2/h) by every route computed (see :class:`HallRoutes`).

    ``chern``: Chern sum below E_F (link variables); ``edge``: net chirality of
    the bottom edge (None when E_F is not in a gap of the ribbon); ``streda``:
    the measured slope ``d n_site / d phi`` with its deviation from the nearest
    integer; ``hallbar``: ``-1/R_xy`` of the six-terminal Hall bar (with
    ``hallbar.enabled``), with its deviation from the nearest integer.
    """
    sigma = hallbar.sigma_xy if hallbar is not None else None
    return HallRoutes(
        chern=gap.chern,
        edge=edges.bottom.net if edges.in_gap else None,
        streda=streda.slope if streda is not None else None,
        streda_deviation=streda.deviation if streda is not None else None,
        hallbar=sigma,
        hallbar_deviation=(sigma - round(sigma)) if sigma is not None else None,
    )


def bulk_edge_check(gap: Gap, edges: EdgeCount, routes: HallRoutes, *, width: int | None = None) -> BulkEdgeCheck:
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
    return BulkEdgeCheck(bulk_edge_agree=bool(agree), spin_resolved_agree=spin, reason=reason,
                         routes_agree=routes.agree)


def summarize(scenario: Scenario, spec: RibbonSpectrum, potential: np.ndarray, *, chern: ChernResult,
              refined: ChernResult | None, ef: float, gap: Gap, edges: EdgeCount, seconds: float,
              given: Scenario | None = None, units: Derived | None = None,
              streda: StredaResult | None = None, streda_error: str | None = None,
              hallbar: HallBarRoute | None = None, hallbar_error: str | None = None,
              subspace: SubspaceChern | None = None, solver_reason: str | None = None) -> RunSummary:
    """The summary of a run (``summary.json`` is its ``to_dict()``).

    ``scenario`` is in lattice units; ``given`` (default: the same) is the
    scenario as written, stored under ``config``; ``units`` holds what was
    derived from ``[material]`` and ``[field]`` (``units``, None without).
    ``subspace`` is the Chern sum of the occupied subspace as a whole at
    E_F (``bulk.subspace``; a warning when it differs from the band sum).

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
    warnings = list(units.warnings) if units is not None else []
    if entry.continuum_flux_max is not None and abs(lat.flux) > entry.continuum_flux_max:
        warnings.append(
            f"flux {lat.flux.numerator}/{lat.flux.denominator} is beyond the continuum limit (|flux| <= "
            f"{fraction_text(Fraction(entry.continuum_flux_max))}): the Landau levels of the lattice are "
            "Hofstadter bands there, and the continuum l_B and level spacing (the scales line, "
            "model.scales) do not "
            "describe them")
    bulk = BulkInfo(chern=chern, refined=refined, gap=gap, solver_reason=solver_reason, subspace=subspace)
    if bulk.subspace_agree is False:
        warnings.append(
            f"the Chern sum below E_F is {gap.chern} from the bands one by one on the "
            f"{chern.grid[0]}x{chern.grid[1]} grid but {subspace.chern} from the occupied subspace on "
            f"{subspace.grid[0]}x{subspace.grid[1]}: the grid does not resolve the bulk bands; "
            "use a finer chern.grid")
    valid = np.isfinite(spec.energy)
    energies = spec.energy[valid]
    routes = hall_routes(gap, edges, streda, hallbar)
    return RunSummary(
        topoedge_version=__version__, title=scenario.title, source=scenario.source, config=given or scenario,
        units=units, warnings=tuple(warnings),
        model=ModelInfo(
            lattice=lat.kind, flux=f"{lat.flux.numerator}/{lat.flux.denominator}", spin=scenario.spin.enabled,
            zeeman_t=scenario.spin.zeeman, rashba_t=scenario.spin.rashba,
            lattice_keys=entry.model_keys(lat, scenario.ribbon), scales=entry.scales(lat),
            ribbon_width_sites=scenario.ribbon.width, edge_profile=scenario.ribbon.edge.profile,
            edge_potential_max_t=float(np.max(potential))),
        spectrum=SpectrumInfo(
            k_points=int(spec.k.size), states=int(valid.sum()), solver=spec.solver,
            window=tuple(spec.window) if spec.window else None,
            energy_min=float(energies.min()) if energies.size else None,
            energy_max=float(energies.max()) if energies.size else None),
        bulk=bulk,
        fermi=FermiInfo(energy=ef, gap_below=gap.below,
                        gap_window=(finite_or_none(gap.energy_min), finite_or_none(gap.energy_max)),
                        from_gap=scenario.fermi.gap),
        edges=edges,
        hall=HallInfo(sigma_xy=gap.chern, routes=routes, streda=streda, streda_error=streda_error,
                      hallbar=hallbar, hallbar_error=hallbar_error),
        check=bulk_edge_check(gap, edges, routes, width=scenario.ribbon.width),
        seconds=round(seconds, 3),
        physical=physical_summary(scenario, units, ef=ef, gap=gap, edges=edges, potential=potential)
        if units is not None else None,
    )


def physical_summary(scenario: Scenario, units: Derived, *, ef: float, gap: Gap, edges: EdgeCount,
                     potential: np.ndarray) -> PhysicalInfo:
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

    def mode_extra(m, edge: str) -> ModeUnits:
        drift = None
        if len(potential) == scenario.ribbon.width > 1:                # one potential per row
            du = float(np.interp(m.y, y_rows, slope))                 # t per a
            if abs(du) > 1e-12:
                drift = du * t_joule / (a_nm * 1e-9) / (const.e * units.b_tesla)
        depth = m.y if edge == "bottom" else top_row - m.y
        return ModeUnits(y_nm=m.y * a_nm, depth_nm=depth * a_nm, depth_lb=depth * a_nm / units.magnetic_length_nm,
                         velocity_m_s=m.velocity * v_unit, drift_m_s=drift)

    return PhysicalInfo(
        b_tesla=units.b_tesla, b_lattice_tesla=units.b_lattice_tesla, b_relative_error=units.b_relative_error,
        lattice_constant_nm=a_nm, hopping_mev=t_mev, magnetic_length_nm=units.magnetic_length_nm,
        cyclotron_mev=units.cyclotron_mev, zeeman_mev=units.zeeman_mev, coulomb_mev=units.coulomb_mev,
        filling=units.filling, fermi_energy_mev=mev(ef), gap_mev=(mev(gap.energy_min), mev(gap.energy_max)),
        ribbon_width_nm=(scenario.ribbon.width - 1) * a_nm, sigma_xy_e2_h=gap.chern,
        edges={name: tuple(mode_extra(m, name) for m in getattr(edges, name).modes) for name in ("bottom", "top")},
    )
