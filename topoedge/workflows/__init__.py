"""Workflows: a scenario through the stages below, results out; no files, no printing (stage 5).

- :mod:`.build` -- the scenario's ribbon and bulk from the lattice registry, memory estimates;
- :mod:`.bulk` -- the bulk solver, Chern numbers, E_F, the Streda route;
- :mod:`.run` -- ``run_scenario``: bulk, E_F, ribbon, edges, checks and the summary;
- :mod:`.records` -- the typed, frozen results of a run (``summary.json`` is their ``to_dict()``);
- :mod:`.summary` -- the records built from the solvers' results: Hall routes, bulk-edge check, physical units;
- :mod:`.interacting_records` -- the records of the self-consistent part;
- :mod:`.hallbar_scan` -- the Hall-bar route and scans over E_F or B;
- :mod:`.interacting` -- self-consistent runs (``[interaction]``);
- :mod:`.butterfly` -- the flux-energy spectrum;
- :mod:`.sweep` -- parameter sweeps on local processes or dask.distributed;
- :mod:`.bench` -- side-by-side benchmarks.
"""

from .build import build_bulk, build_ribbon, harper_cell, memory_estimate, params_of, scenario_potential
from .bulk import LANDAU_MIN_Q, bulk_chern, bulk_solver, fermi_level, replace_chern_refine, streda_route
from .hallbar_scan import default_energies, hallbar_field_scan, hallbar_route, hallbar_scan, hallbar_system
from .run import RunResult, run_scenario
from .records import RunSummary, UnconvergedSummary
from .summary import bulk_edge_check, hall_routes, physical_summary, summarize

__all__ = [
    "RunResult", "RunSummary", "UnconvergedSummary", "run_scenario", "build_bulk", "build_ribbon", "harper_cell", "memory_estimate", "params_of",
    "scenario_potential", "LANDAU_MIN_Q", "bulk_chern", "bulk_solver", "fermi_level", "replace_chern_refine",
    "streda_route", "default_energies", "hallbar_field_scan", "hallbar_route", "hallbar_scan", "hallbar_system",
    "bulk_edge_check", "hall_routes", "physical_summary", "summarize",
]
