"""From a validated scenario to computed results (no files, no printing).

``run_scenario`` chains the stages: builders -> ribbon Hamiltonian ->
spectrum, and condenses the outcome into a JSON-able summary. The file and
figure writers in :mod:`topoedge.results` and :mod:`topoedge.plotting` and the
command line sit on top of it.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from . import __version__
from .builders import model_params, ribbon_builder
from .config import Scenario
from .hamiltonian import RibbonHamiltonian
from .profiles import edge_potential
from .spectrum import RibbonSpectrum, k_grid, ribbon_spectrum

__all__ = ["RunResult", "build_ribbon", "run_scenario", "scenario_potential", "summarize"]


@dataclass(frozen=True, eq=False)
class RunResult:
    """Everything one ``run`` computes."""

    scenario: Scenario
    potential: np.ndarray
    hamiltonian: RibbonHamiltonian
    spectrum: RibbonSpectrum
    summary: dict


def scenario_potential(scenario: Scenario) -> np.ndarray:
    """Edge potential of every row (units of t) described by a scenario."""
    edge = scenario.ribbon.edge
    return edge_potential(
        scenario.ribbon.width, edge.profile, ramp=edge.width, height=edge.height, table=edge.table
    )


def build_ribbon(scenario: Scenario) -> tuple[RibbonHamiltonian, np.ndarray]:
    """The kwant ribbon of a scenario, finalized and reduced to its Bloch form."""
    potential = scenario_potential(scenario)
    builder = ribbon_builder(scenario.ribbon.width, spin=scenario.spin.enabled, potential=potential)
    lat = scenario.lattice
    params = model_params(phi=lat.flux, zeeman=scenario.spin.zeeman, onsite=lat.onsite)
    return RibbonHamiltonian.from_kwant(builder, params=params, spin=scenario.spin.enabled), potential


def run_scenario(scenario: Scenario, *, progress: bool = False) -> RunResult:
    """Compute the ribbon spectrum of a scenario and summarise it."""
    start = time.perf_counter()
    ham, potential = build_ribbon(scenario)
    window = None
    if scenario.spectrum.window is not None:
        ef = scenario.fermi.energy
        window = (ef - scenario.spectrum.window, ef + scenario.spectrum.window)
    spec = ribbon_spectrum(
        ham,
        k_grid(scenario.spectrum.k_points),
        window=window,
        solver=scenario.spectrum.solver,
        progress=progress,
    )
    summary = summarize(scenario, spec, potential, seconds=time.perf_counter() - start)
    return RunResult(scenario, potential, ham, spec, summary)


def summarize(scenario: Scenario, spec: RibbonSpectrum, potential: np.ndarray, *, seconds: float) -> dict:
    """JSON-able summary of a ribbon run.

    Energies are in units of the hopping ``t``. Derived lattice scales use the effective-mass limit of the square lattice
    (``m* = hbar^2 / (2 t a^2)``): magnetic length ``l_B = a / sqrt(2 pi |phi|)``
    and cyclotron energy ``hbar omega_c = 4 pi t |phi|``.
    """
    lat = scenario.lattice
    phi = abs(float(lat.flux))
    valid = np.isfinite(spec.energy)
    energies = spec.energy[valid]
    ef = scenario.fermi.energy
    return {
        "topoedge_version": __version__,
        "title": scenario.title,
        "source": scenario.source,
        "config": scenario.to_dict(),
        "model": {
            "lattice": "square",
            "flux": f"{lat.flux.numerator}/{lat.flux.denominator}",
            "spin": scenario.spin.enabled,
            "zeeman_t": scenario.spin.zeeman,
            "magnetic_length_a": (1.0 / math.sqrt(2 * math.pi * phi)) if phi else None,
            "cyclotron_energy_t": 4 * math.pi * phi,
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
        "fermi": {"energy": ef},
        "seconds": round(seconds, 3),
    }
