"""The bulk stage of a run: which solver, the Chern numbers, E_F, the Streda route (workflow stage).

``bulk_solver`` chooses between the dense solver (every band at every grid
point) and the Landau-level solver (:mod:`topoedge.solvers.landau`) and says
why; ``bulk_chern`` computes the Chern numbers (and their check on a finer
grid); ``fermi_level`` places E_F; ``streda_route`` measures the Hall
conductance from the density response.
"""

from __future__ import annotations

import math
from ..models.lattices import lattice
from ..scenario import Scenario
from ..solvers.chern import GapClosedError, ChernResult, Gap, chern_numbers, default_grid, path_bands
from ..solvers.landau import (DEFAULT_K2_POINTS, bands_for, landau_chern, landau_path_bands,
                              landau_states_below)
from ..solvers.streda import StredaResult, streda_slope
from ..systems.bloch import BlochHamiltonian
from ..systems.harper import HarperCell
from ..util.progress import as_progress
from .build import build_bulk, harper_cell


#: Smallest cell (bands per spin) for which ``chern.solver = "auto"`` takes the Landau-level solver.
LANDAU_MIN_Q = 60


# Largest fraction of a sector's bands the Landau-level solver computes under "auto"
# (above it the bands are no longer Landau levels; the dense solver is used).
_LANDAU_MAX_FRACTION = 1 / 3


def landau_possible(scenario: Scenario) -> str | None:
    """Why the Landau-level solver cannot take the scenario, or None."""
    lat = scenario.lattice
    if "landau" not in lattice(lat.kind).supports:
        return f"the Landau-level solver is built for the square lattice, not {lat.kind!r}"
    if scenario.spin.rashba != 0:
        return "the Landau-level solver needs S_z conserved (no Rashba term)"
    if lat.flux == 0 or lat.flux.denominator < 3:
        return f"flux {lat.flux} has fewer than 3 bands per spin"
    return None


def bands_needed(scenario: Scenario, cell: HarperCell) -> int:
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
    why_not = landau_possible(scenario)
    if choice == "landau":
        if why_not:
            raise ValueError(f"chern.solver = 'landau': {why_not}; expected 'dense' or 'auto'")
        return "landau", "chern.solver = 'landau'"
    if why_not:
        return "dense", why_not
    q = scenario.lattice.flux.denominator
    if q < LANDAU_MIN_Q:
        return "dense", f"{q} bands per spin (fewer than {LANDAU_MIN_Q}): every band is cheap"
    needed = bands_needed(scenario, harper_cell(scenario))
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
        bands = bands_needed(scenario, cell)
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
        try:
            gap = chern.gap_above(scenario.fermi.gap)
        except GapClosedError as err:     # the solver's words, with the key they came from
            raise GapClosedError(f"fermi.gap = {scenario.fermi.gap}: {err}", gap=err.gap) from None
        return gap.middle, gap
    ef = scenario.fermi.energy if scenario.fermi.energy is not None else 0.0
    return ef, chern.gap_at(ef)


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
    if landau_possible(scenario) is None:
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


def replace_chern_refine(scenario: Scenario) -> Scenario:
    """The scenario without the finer-grid Chern check (not needed for a scan)."""
    from dataclasses import replace

    return replace(scenario, chern=replace(scenario.chern, refine=False))


