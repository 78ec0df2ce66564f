"""A scenario's numerical systems, built from the lattice registry (workflow stage).

``params_of`` (kwant ``params``), ``build_ribbon`` (the finalized ribbon in
Bloch form and its edge potential), ``build_bulk`` (the Bloch Hamiltonian of
the magnetic cell), ``harper_cell`` (the square-lattice cell as a ring, for
the Landau-level solver) and ``memory_estimate`` (what each stage of a run
holds at once, checked before anything is built).
"""

from __future__ import annotations

import numpy as np
from ..models.lattices import lattice
from ..models.profiles import edge_potential
from ..scenario import Scenario
from ..solvers.landau import (DEFAULT_K2_POINTS)
from ..systems.bloch import BlochHamiltonian
from ..systems.harper import HarperCell
from ..systems.ribbon import RibbonHamiltonian
from ..util.budget import KWANT_SITE_BYTES


def params_of(scenario: Scenario) -> dict:
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
    ham = RibbonHamiltonian.from_kwant(builder, params=params_of(scenario), spin=scenario.spin.enabled)
    return ham, potential(ham.position)


def build_bulk(scenario: Scenario) -> BlochHamiltonian:
    """The bulk of a scenario: magnetic unit cell (or the zero-field cell), no edge potential."""
    builder = lattice(scenario.lattice.kind).bulk(scenario.lattice, scenario.spin)
    return BlochHamiltonian.from_kwant(builder, params=params_of(scenario), spin=scenario.spin.enabled)


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
    ke = scenario.edges.k_points
    parts.append((f"the edge scan ({ke} momenta x {per_block} states)", 4 * ke * per_block * 8,
                  "expected fewer edges.k_points or a smaller ribbon.width"))
    if scenario.hallbar.enabled:
        parts.append(hallbar_memory(scenario))
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
                      ("expected chern.solver = 'auto' or 'landau', " if "landau" in entry.supports else
                       "expected ") + "a coarser chern.grid or a flux with a smaller denominator"))
    return parts


def hallbar_memory(scenario: Scenario) -> tuple[str, float, str]:
    """Upper bound (bytes) of the Hall bar's build and solve, with the keys that shrink it.

    The sparse LU factorisation of a ``length x width`` strip fills in about
    ``width`` entries per unknown (nested or banded ordering of a 2D grid,
    common practice), so the solve holds ``~ 16 orb^2 length width^2`` bytes.
    """
    bar = scenario.hallbar
    orb = 2 if scenario.spin.enabled else 1
    sites = bar.length * bar.width
    margin = bar.width + 2   # the frame around the bar used for the edge distances
    build = sites * KWANT_SITE_BYTES + 5 * 8 * (bar.length + 2 * margin) * (bar.width + 2 * margin)
    solve = 4 * 16 * orb * orb * sites * min(bar.width, bar.length)
    return (f"the Hall bar ({bar.length} x {bar.width} sites)", max(build, solve),
            "expected a smaller hallbar.length or hallbar.width")


def harper_cell(scenario: Scenario) -> HarperCell:
    """The square-lattice magnetic cell of a scenario as a ring (S_z conserved, no Rashba term)."""
    lat, spin = scenario.lattice, scenario.spin
    return HarperCell(lat.flux, onsite=lat.onsite, zeeman=spin.zeeman, spin=spin.enabled)


#: Orbitals per spin block from which the ribbon spectrum keeps only a window around E_F
#: when ``spectrum.window`` is unset (all states would cost ``O(W^2)`` per momentum).
AUTO_WINDOW_FROM = 1000


