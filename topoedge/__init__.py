"""topoedge: bulk topology and edge modes of lattice quantum-Hall samples.

The package is organised by stages; each imports only from its own stage or
the ones below it (see DEVELOPERS.md):

0. :mod:`topoedge.util` -- threads, worker processes, progress, memory estimates, atomic files;
1. :mod:`topoedge.models` -- kwant builders of the lattices, edge profiles, the Hall bar,
   and the lattice registry;
2. :mod:`topoedge.scenario` -- TOML scenarios validated once, physical units, resolution
   to lattice units;
3. :mod:`topoedge.systems` -- numerical objects: ribbon and Bloch Hamiltonians, the
   magnetic cell as a ring;
4. :mod:`topoedge.solvers` -- spectrum, Chern numbers (dense and Landau-level), edge
   modes, Streda, transport, Hartree-Fock;
5. :mod:`topoedge.workflows` -- a scenario through the solvers: run, Hall-bar scans,
   interacting runs, the flux-energy spectrum, sweeps, benchmarks;
6. :mod:`topoedge.outputs`, :mod:`topoedge.plotting` -- files, reports, figures;
7. :mod:`topoedge.cli` -- the ``topoedge`` command.

The names below are the curated public entry points; they are imported on
first use, so ``import topoedge`` itself stays light (no kwant).
"""

from __future__ import annotations

import importlib

__version__ = "0.2.0"

#: Public name -> the module defining it.
_PUBLIC = {
    # scenarios
    "Scenario": "scenario", "ConfigError": "scenario", "load_scenario": "scenario",
    "parse_scenario": "scenario", "lattice_scenario": "scenario", "key_docs": "scenario",
    "resolve": "scenario", "Model": "scenario",
    # models
    "LATTICES": "models.lattices", "ribbon_builder": "models.square", "bulk_builder": "models.square",
    "model_params": "models.square", "honeycomb_ribbon_builder": "models.honeycomb",
    "honeycomb_bulk_builder": "models.honeycomb", "honeycomb_params": "models.honeycomb",
    "qwz_builder": "models.zero_field", "haldane_builder": "models.zero_field",
    "qwz_ribbon_builder": "models.zero_field", "haldane_ribbon_builder": "models.zero_field",
    "edge_potential": "models.profiles", "EDGE_PROFILES": "models.profiles",
    "hallbar_builder": "models.hallbar",
    # physical units
    "derive": "scenario.units", "VON_KLITZING": "scenario.units",
    # numerical systems
    "RibbonHamiltonian": "systems.ribbon", "BlochHamiltonian": "systems.bloch", "HarperCell": "systems.harper",
    # solvers
    "ribbon_spectrum": "solvers.spectrum", "RibbonSpectrum": "solvers.spectrum", "k_grid": "solvers.spectrum",
    "chern_numbers": "solvers.chern", "builder_chern": "solvers.chern", "subspace_chern": "solvers.chern",
    "ChernResult": "solvers.chern", "GapClosedError": "solvers.chern", "SubspaceChern": "solvers.chern",
    "landau_chern": "solvers.landau", "count_edge_modes": "solvers.edges", "find_crossings": "solvers.edges",
    "builder_edge_modes": "solvers.edges", "EdgeCount": "solvers.edges", "streda_slope": "solvers.streda",
    "hall_resistances": "solvers.transport", "disorder_average": "solvers.transport",
    "HartreeFockRibbon": "solvers.hartree_fock",
    # workflows
    "run_scenario": "workflows", "RunResult": "workflows", "RunSummary": "workflows",
    "UnconvergedSummary": "workflows", "bulk_chern": "workflows",
    "run_interacting": "workflows.interacting", "compute_butterfly": "workflows.butterfly",
    "load_sweep": "workflows.sweep", "run_sweep": "workflows.sweep",
    # results
    "format_summary": "outputs.report", "write_run": "outputs.results",
}

__all__ = ["__version__", *_PUBLIC]


def __getattr__(name: str):
    if name in _PUBLIC:
        value = getattr(importlib.import_module(f".{_PUBLIC[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'topoedge' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_PUBLIC))
