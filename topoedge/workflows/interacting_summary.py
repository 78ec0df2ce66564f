"""The ``interaction`` block of a self-consistent run's summary: starts, neutrality, edge order, width scan."""

from __future__ import annotations

import math
import numpy as np
from ..scenario import Scenario
from ..solvers.edges import EdgeCount
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from .interacting import InteractingRun, SelfConsistent

__all__ = ["edge_order", "interaction_summary", "failed_summary"]


def bulk_density(scenario: Scenario) -> float:
    """Electrons per site of the filled bulk: ``fermi.gap / q`` (lattice-unit scenario)."""
    return scenario.fermi.gap / scenario.lattice.flux.denominator


def edge_order(edges: EdgeCount, top_row: float, magnetic_length: float) -> dict:
    """Modes of each edge from its boundary inwards: distance (a and l_B), spin, direction."""
    out = {}
    for side in ("bottom", "top"):
        rows = []
        for m in getattr(edges, side).modes:
            d = m.y if side == "bottom" else top_row - m.y
            rows.append({"distance_a": float(d), "distance_lB": float(d / magnetic_length),
                         "spin": m.spin, "direction": "+x" if m.velocity > 0 else "-x"})
        out[side] = rows
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


def _width_summary(sc: SelfConsistent, top_row: float, lb: float) -> dict:
    """JSON-able description of one width's solution."""
    out = {
        "width_a": sc.width, "width_lB": sc.width / lb, "k_points": sc.k_points,
        "background_per_cell": float(sc.background.sum()),
        "background_half_a": _half_point(sc.background, float(sc.background.max())),
        "starts": [{"start": r.start, "converged": r.converged, "iterations": r.iterations,
                    "energy_t": r.energy, "restarted": r.start in sc.restarted, "message": r.message}
                   for r in sc.runs],
        "best_start": sc.best.start if sc.best is not None else None,
        "converged": sc.best is not None,
    }
    if sc.best is None:
        out["message"] = "no start converged; continue from the restart file (--restart)"
        return out
    e = sc.edges
    order = edge_order(e, top_row, lb)
    out.update({
        "energy_t": sc.best.energy, "fermi_energy": sc.fermi_energy,
        "electrons_per_cell": sc.best.electrons,
        "in_gap": e.in_gap, "edges_message": e.message,
        "bottom": {"net": e.bottom.net, "counter_pairs": e.bottom.counter_pairs,
                   "by_spin": {s: dict(v) for s, v in e.bottom.by_spin.items()}, "order": order["bottom"]},
        "top": {"net": e.top.net, "counter_pairs": e.top.counter_pairs,
                "by_spin": {s: dict(v) for s, v in e.top.by_spin.items()}, "order": order["top"]},
        "outermost_spin": {side: (order[side][0]["spin"] if order[side] else None) for side in order},
    })
    return out


def _reconstruction(scan: list[dict]) -> dict | None:
    """Smallest scanned width with a counter-propagating pair and the largest narrower one without."""
    solved = sorted((s for s in scan if s["converged"] and s["in_gap"]), key=lambda s: s["width_a"])
    if not solved:
        return None
    with_pair = [s for s in solved if s["bottom"]["counter_pairs"] or s["top"]["counter_pairs"]]
    if not with_pair:
        return {"found": False, "widest_without_a": solved[-1]["width_a"],
                "widest_without_lB": solved[-1]["width_lB"]}
    first = with_pair[0]
    below = [s for s in solved if s["width_a"] < first["width_a"]
             and not (s["bottom"]["counter_pairs"] or s["top"]["counter_pairs"])]
    return {"found": True, "first_with_pair_a": first["width_a"], "first_with_pair_lB": first["width_lB"],
            "widest_without_a": below[-1]["width_a"] if below else None,
            "widest_without_lB": below[-1]["width_lB"] if below else None}


def failed_summary(scenario, given, units, gap, seconds) -> dict:
    """Summary of a run in which no start converged (nothing to analyse yet)."""
    from .. import __version__

    return {
        "topoedge_version": __version__, "title": scenario.title, "source": scenario.source,
        "config": given.to_dict(), "units": units.to_dict() if units is not None else None,
        "warnings": list(units.warnings) if units is not None else [],
        "converged": False, "bulk": {"chern_below_fermi": gap.chern, "spin_chern_below_fermi": gap.spin_chern},
        "seconds": round(seconds, 3),
    }


def interaction_summary(scenario: Scenario, run: InteractingRun, gap) -> dict:
    inter, lb = run.interaction, run.magnetic_length
    phi = abs(float(scenario.lattice.flux))
    e_c = inter.coulomb / lb
    cyclotron = 4 * math.pi * phi
    top_row = scenario.ribbon.width - 1
    main = _width_summary(run.main, top_row, lb)
    out = {
        "coulomb_t": inter.coulomb, "onsite_t": inter.onsite, "gate_distance_a": inter.gate_distance,
        "coulomb_energy_t": e_c, "coulomb_over_cyclotron": e_c / cyclotron,
        "units": "energies in t; E_C = U_C / l_B; distances from each boundary in a and in l_B",
        "filling": bulk_density(scenario) / phi,
        "background": {"profile": scenario.interaction.background.profile,
                       "width_a": run.main.width, "width_lB": run.main.width / lb,
                       "setback_a": scenario.interaction.background.setback,
                       "density_per_site": bulk_density(scenario)},
        "magnetic_length_a": lb,
        "temperature_t": scenario.interaction.temperature, "mixing": scenario.interaction.mixing,
        "tol": scenario.interaction.tol,
        **main,
    }
    best = run.main.best
    if best is not None:
        centre = scenario.ribbon.width // 2
        out["neutrality_error"] = best.electrons - float(run.main.background.sum())
        out["hartree_centre_t"] = float(best.hartree[centre])
        out["hartree_centre_over_coulomb_energy"] = float(best.hartree[centre] / e_c) if e_c else None
        out["filling_centre"] = {s: float(best.density[i, centre] / phi) for i, s in enumerate(("up", "down"))}
        out["half_filling_distance_a"] = {
            s: _half_point(best.density[i], float(best.density[i, centre]))
            for i, s in enumerate(("up", "down"))}
        out["half_filling_distance_a"]["background"] = _half_point(run.main.background,
                                                                   float(run.main.background[centre]))
        out["chirality_equals_chern"] = bool(run.main.edges.in_gap and run.main.edges.bottom.net == gap.chern
                                             and run.main.edges.top.net == -gap.chern)
    if run.scan:
        out["scan"] = [_width_summary(sc, top_row, lb) for sc in run.scan]
        out["reconstruction"] = _reconstruction(out["scan"])
    return out


