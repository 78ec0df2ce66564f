"""The level ordering on the lattice: bulk Hartree-Fock of every filled-level candidate (workflow stage).

For a square-lattice scenario in a field with spin, every candidate set of
filled levels of the continuum ordering (:mod:`topoedge.solvers.landau_exchange`)
is solved self-consistently on the lattice (:class:`topoedge.solvers.bulk_hf.BulkHartreeFock`)
with the scenario's interaction (``U_C``, ``U_0``, gate), at the scenario's
``U_C`` and at ``levels.lattice_points`` interaction strengths from
``levels.coulomb_max / lattice_points`` to ``levels.coulomb_max`` (in
``E_C / hbar omega_c``). The Zeeman term shifts each spin's bands rigidly
and the occupations are fixed per spin, so it adds ``-(z/2)(N_up - N_down)``
per flux quantum to a candidate's energy without changing its orbitals: the
lattice diagram over (lambda, z) follows from the energies at z = 0. The
transitions along lambda at the scenario's z are refined by the secant method
on the energy difference of the two sets, each step a pair of
self-consistent solutions.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from ..scenario import ConfigError, Scenario
from ..solvers.bulk_hf import BulkHartreeFock, smallest_grid
from ..solvers.landau_exchange import lowest_set
from ..util.budget import require

__all__ = ["LatticeLevels", "lattice_levels", "check_lattice_grid", "lattice_supported", "GRID_LENGTHS", "bulk_answer",
           "default_lengths"]

#: Magnetic lengths the momentum torus must span in both directions (fewer are refused).
GRID_LENGTHS = 6.0


def default_lengths(filling: int) -> float:
    """Magnetic lengths of the default torus: 6 + nu/2 (a level n spreads over about sqrt(2n + 1) l_B;
    measured at flux 1/20: 6 l_B leaves 6e-4 E_C in the exchange energy of {0up, 1up}, 7 l_B 6e-5 and
    the lattice itself is 2 % from the continuum there)."""
    return 6.0 + filling / 2


@dataclass(frozen=True, eq=False)
class LatticeLevels:
    """The lattice's answer for the candidates of the level ordering (energies per flux quantum in hbar omega_c)."""

    flux: object
    grid: tuple
    coulomb_t: float                     # U_C of the scenario, t
    onsite_t: float
    lambdas: np.ndarray                  # (L,) E_C / hbar omega_c of the samples
    energies: np.ndarray                 # (S, L) at z = 0
    iterations: np.ndarray               # (S, L)
    converged: np.ndarray                # (S, L) bool
    point_energies: np.ndarray           # (S,) at the scenario's point (with its z)
    point_interaction: np.ndarray        # (S,) Hartree + exchange per flux quantum, E_C
    point_iterations: tuple
    point_converged: tuple
    point_found: tuple                   # the filled levels each candidate's solution holds, ((n, spin), ...)
    ground: int
    gap: float                           # activation gap of the ground state, hbar omega_c
    transitions: tuple                   # ((lambda, before, after), ...) at the scenario's z
    diagram: np.ndarray                  # (Z, L) ground-state index over the diagram's z axis and lambdas
    seconds: float
    free_starts: tuple = ()              # random starts with the spins free: what each found

    def to_dict(self, sets, cyclotron_mev: float | None) -> dict:
        return {
            "method": "bulk Hartree-Fock on the lattice: magnetic cell on a momentum torus, occupations fixed "
                      "per spin, same interaction as the ribbon",
            "flux": str(self.flux), "grid": list(self.grid), "coulomb_t": self.coulomb_t, "onsite_t": self.onsite_t,
            "ground_state": sets[self.ground].label,
            "filled_levels_found": ",".join(f"{n}{s}" for n, s in self.point_found[self.ground]),
            "gap": self.gap, "gap_mev": None if cyclotron_mev is None else self.gap * cyclotron_mev,
            "candidates": [{"levels": s.label, "energy": float(self.point_energies[i]),
                            "interaction_ec": float(self.point_interaction[i]),
                            "continuum_interaction_ec": float(s.exchange),
                            "levels_found": ",".join(f"{n}{spin}" for n, spin in self.point_found[i]),
                            "fills_its_levels": tuple(self.point_found[i]) == tuple((lv.n, lv.spin)
                                                                                   for lv in s.levels),
                            "iterations": int(self.point_iterations[i]), "converged": bool(self.point_converged[i])}
                           for i, s in enumerate(sets)],
            "transitions": [{"coulomb_ratio": float(w), "before": sets[i].label, "after": sets[j].label}
                            for w, i, j in self.transitions],
            "random_starts": list(self.free_starts),
            "samples": {"coulomb_ratio": [float(x) for x in self.lambdas],
                        "energies": {s.label: [float(e) for e in self.energies[i]] for i, s in enumerate(sets)},
                        "all_converged": bool(self.converged.all()),
                        "most_iterations": int(self.iterations.max()) if self.iterations.size else None},
            "seconds": self.seconds,
        }


def lattice_supported(s: Scenario) -> str | None:
    """None when the lattice part runs for this scenario, else why not."""
    from ..models.lattices import lattice

    if not s.levels.lattice:
        return "levels.lattice = false"
    if "landau" not in lattice(s.lattice.kind).supports:
        return f"no bulk Hartree-Fock for the {s.lattice.kind} lattice"
    if not s.spin.enabled:
        return "spin.enabled = false (the ordering is about the two spins)"
    return None


def check_lattice_grid(s: Scenario, filling: int) -> tuple[int, int]:
    """The momentum grid of the lattice part: ``levels.grid``, or the smallest spanning ``default_lengths`` l_B.

    Raises
    ------
    ConfigError
        For a grid too coarse for the magnetic length (with the smallest
        that works) or one that does not fit in memory.
    """
    flux = s.lattice.flux
    least = smallest_grid(flux, GRID_LENGTHS)
    grid = tuple(s.levels.grid) if s.levels.grid else smallest_grid(flux, default_lengths(filling))
    lb = math.sqrt(1 / (2 * math.pi * abs(float(flux))))
    if grid[0] < least[0] or grid[1] < least[1]:
        raise ConfigError(f"levels.grid: got {list(grid)} at l_B = {lb:.3g} a and flux {flux}: the torus spans "
                          f"{grid[0] / lb:.2g} x {grid[1] * flux.denominator / lb:.2g} magnetic lengths; expected "
                          f"at least {list(least)} ({GRID_LENGTHS:g} magnetic lengths both ways)")
    q = flux.denominator
    per_array = grid[0] * grid[1] * q * q * 16
    # the Hamiltonians of both spins, the interaction, projectors, Fock terms and 2 x 6 mixing iterates
    require([("the lattice level ordering", per_array * (2 + 1 + 2 + 2 + 2 * 2 * 6),
              "expected a larger flux (smaller q) or levels.lattice = false")])
    return grid


def lattice_levels(s: Scenario, units, point, sets, zeeman_axis, *, progress, samples: bool = True,
                   store=None) -> LatticeLevels:
    """Every candidate on the lattice at the scenario's point and (``samples``) along lambda (module notes).

    ``store`` (a :class:`~topoedge.util.points.PointStore`) keeps the point,
    every interaction strength, every transition and every random start the
    moment it is solved, so that the same command after an interruption
    solves only the rest.
    """
    from ..util.points import PointStore

    store = store if store is not None else PointStore(None)
    from fractions import Fraction

    from ..systems.harper import HarperCell
    from ..solvers.coulomb import Interaction
    from .interacting import interaction_of

    start = time.perf_counter()
    cfg = s.levels
    grid = check_lattice_grid(s, point.filling)
    flux = Fraction(s.lattice.flux)
    phi = abs(float(flux))
    # l_B / a and hbar omega_c of the field asked for (physical scenarios) or of the flux
    lb = units.magnetic_length_a if units is not None else math.sqrt(1 / (2 * math.pi * phi))
    cyclotron_t = units.cyclotron_t if units is not None else 4 * math.pi * phi
    base = interaction_of(s, units)
    ratio = base.onsite / base.coulomb
    cell = HarperCell(flux, onsite=s.lattice.onsite, zeeman=0.0, spin=True)
    bands = [{spin: n * abs(flux.numerator) for spin, n in c.per_spin.items()} for c in sets]
    zeeman_slope = np.array([c.zeeman for c in sets])           # per flux quantum, times z

    unit = BulkHartreeFock(cell, Interaction(1.0, ratio, base.gate_distance), grid)   # U_C = 1 t, scaled below
    warm: dict = {}

    def solve_all(lam: float):
        """Every candidate at E_C / hbar omega_c = lam, each from the nearest solution found so far."""
        u = lam * cyclotron_t * lb                                # U_C from E_C / hbar omega_c
        solver = unit.scaled(u)
        row = []
        for i, b in enumerate(bands):
            near = min(warm.get(i, {}), key=lambda x: abs(x - lam), default=None)
            result = solver.solve(b, start=warm[i][near] if near is not None else "levels")
            if not result.converged and near is not None:            # a warm start that fails: from scratch
                result = solver.solve(b)
            warm.setdefault(i, {})[lam] = result.projectors
            row.append(result)
        return row

    lambdas = (np.linspace(cfg.coulomb_max / cfg.lattice_points, cfg.coulomb_max, cfg.lattice_points) if samples
               else np.empty(0))
    energies = np.empty((len(sets), lambdas.size))
    iterations = np.empty((len(sets), lambdas.size), dtype=int)
    converged = np.empty((len(sets), lambdas.size), dtype=bool)
    def summary(row) -> dict:
        return {"energy": [r.energy_per_flux / cyclotron_t for r in row],
                "interaction": [r.interaction_per_flux for r in row],
                "iterations": [r.iterations for r in row], "converged": [r.converged for r in row],
                "found": [r.filled_levels() for r in row], "gap": [r.gap for r in row]}

    with progress.stage(f"lattice: {len(sets)} candidates x {lambdas.size} strengths, flux {flux}, grid "
                        f"{grid[0]} x {grid[1]}", lambdas.size + 1) as stage:
        at_point = store.load("point")
        if at_point is None:
            at_point = summary(solve_all(point.coulomb))
            store.save("point", at_point)
        stage.update(1)
        for j, lam in enumerate(lambdas):
            row = store.load(f"lambda-{lam!r}")
            if row is None:
                row = summary(solve_all(lam))
                store.save(f"lambda-{lam!r}", row)
            energies[:, j] = row["energy"]
            iterations[:, j] = row["iterations"]
            converged[:, j] = row["converged"]
            stage.update(1)
    point_energies = np.array(at_point["energy"]) + zeeman_slope * point.zeeman
    ec = point.coulomb * cyclotron_t                                 # E_C in t

    ground = int(lowest_set(sets, point_energies, decimals=9))
    diagram = lowest_set(sets, energies[:, None, :] + zeeman_slope[:, None, None] * zeeman_axis[None, :, None],
                         decimals=9)
    transitions = []
    along = energies + (zeeman_slope * point.zeeman)[:, None]
    best = lowest_set(sets, along, decimals=9)
    for j in np.nonzero(best[1:] != best[:-1])[0]:
        a, b = int(best[j]), int(best[j + 1])
        name = f"transition-{a}-{b}-{lambdas[j]!r}"
        where = store.load(name)
        if where is None:
            where = _secant(solve_all, bands_pair=(a, b), lo=lambdas[j], hi=lambdas[j + 1],
                            zeeman=point.zeeman * (zeeman_slope[b] - zeeman_slope[a]), cyclotron_t=cyclotron_t)
            store.save(name, where)
        transitions.append((where, a, b))
    # random starts with the spins free to share the bands (with the scenario's Zeeman splitting, which
    # then takes part in the aufbau): which state the loop finds by itself
    free = []
    if cfg.random_starts:
        zeeman_t = point.zeeman * cyclotron_t
        u = point.coulomb * cyclotron_t * lb
        solver = BulkHartreeFock(HarperCell(flux, onsite=s.lattice.onsite, zeeman=zeeman_t, spin=True),
                                 Interaction(u, ratio * u, base.gate_distance), grid)
        for seed in range(cfg.random_starts):
            found = store.load(f"free-{seed}")
            if found is None:
                r = solver.solve(point.filling * abs(flux.numerator), start="random", seed=seed)
                found = {"seed": seed, "converged": r.converged, "iterations": r.iterations,
                         "levels_found": ",".join(f"{n}{spin}" for n, spin in r.filled_levels()),
                         "bands_per_spin": {k: round(v, 6) for k, v in r.bands.items()},
                         "above_ground": float(r.energy_per_flux / cyclotron_t - point_energies[ground])}
                store.save(f"free-{seed}", found)
            free.append(found)
    return LatticeLevels(
        flux=flux, grid=grid, coulomb_t=point.coulomb * cyclotron_t * lb,
        onsite_t=ratio * point.coulomb * cyclotron_t * lb,
        lambdas=lambdas, energies=energies, iterations=iterations, converged=converged,
        point_energies=point_energies, point_interaction=np.array(at_point["interaction"]) / ec,
        point_iterations=tuple(at_point["iterations"]), point_converged=tuple(at_point["converged"]),
        point_found=tuple(tuple(map(tuple, f)) for f in at_point["found"]),
        ground=ground,
        gap=at_point["gap"][ground] / cyclotron_t,
        transitions=tuple(transitions), diagram=diagram, seconds=time.perf_counter() - start,
        free_starts=tuple(free))


def _secant(solve_all, *, bands_pair, lo: float, hi: float, zeeman: float, cyclotron_t: float,
            tol: float = 1e-6, steps: int = 12) -> float:
    """lambda where candidates ``a`` and ``b`` cost the same, between ``lo`` and ``hi`` (secant steps)."""
    a, b = bands_pair

    def difference(lam):
        row = solve_all(lam)
        return (row[b].energy_per_flux - row[a].energy_per_flux) / cyclotron_t + zeeman

    x0, x1 = lo, hi
    f0, f1 = difference(x0), difference(x1)
    for _ in range(steps):
        if f1 == f0:
            break
        x2 = x1 - f1 * (x1 - x0) / (f1 - f0)
        x0, f0, x1 = x1, f1, x2
        f1 = difference(x1)
        if abs(x1 - x0) < tol * max(1.0, abs(x1)):
            break
    return float(x1)


def bulk_answer(s: Scenario, interaction, centre: dict) -> dict:
    """The lattice bulk's ground state beside the state a self-consistent ribbon holds in its centre.

    ``centre`` is the filling of each spin at the ribbon's centre (Landau
    levels, ``{"up": nu_up, "down": nu_down}``). Every candidate of the same
    total filling is solved by bulk Hartree-Fock with the ribbon's flux,
    Zeeman splitting and interaction (:func:`default_lengths` torus); the
    lowest is the bulk's answer. ``agree`` says whether the ribbon's centre
    fills as many levels of each spin as the bulk's answer.
    """
    from fractions import Fraction

    from ..solvers.landau_exchange import candidate_sets, exchange_matrix
    from ..systems.harper import HarperCell

    flux = Fraction(s.lattice.flux)
    p = abs(flux.numerator)
    filling = round(centre["up"] + centre["down"])
    counts = {spin: round(centre[spin]) for spin in ("up", "down")}
    label = ",".join([f"{n}up" for n in range(counts["up"])] + [f"{n}down" for n in range(counts["down"])])
    if filling < 1 or abs(centre["up"] + centre["down"] - filling) > 0.05:
        return {"centre_filling": dict(centre), "skipped": "the centre is not at an integer filling"}
    sets = candidate_sets(filling, exchange_matrix(filling + 2))
    solver = BulkHartreeFock(HarperCell(flux, onsite=s.lattice.onsite, zeeman=s.spin.zeeman, spin=True),
                             interaction, smallest_grid(flux, default_lengths(filling)))
    results = [solver.solve({spin: n * p for spin, n in c.per_spin.items()}) for c in sets]
    best = sets[int(lowest_set(sets, [r.energy_per_flux for r in results], decimals=9))]
    return {"centre_filling": dict(centre), "centre_levels": label, "bulk_levels": best.label,
            "agree": best.per_spin == counts, "grid": list(solver.grid),
            "candidates": [{"levels": c.label, "energy_t_per_flux": r.energy_per_flux, "converged": r.converged}
                           for c, r in zip(sets, results)]}
