"""Bulk Hartree-Fock on the lattice: the continuum limit of filled Landau levels, transitions, convergence."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from topoedge.solvers.bulk_hf import BulkHartreeFock, smallest_grid
from topoedge.solvers.coulomb import Interaction
from topoedge.solvers.landau_exchange import candidate_sets, exchange_matrix
from topoedge.systems.harper import HarperCell

ROOT = math.sqrt(math.pi / 2)
CELL_AVERAGE = 4 * math.log(1 + math.sqrt(2))          # on-site U_0 / U_C, 1/r averaged over a unit cell
FLUXES = (12, 20, 40)


def _solver(q: int, lam: float, *, zeeman: float = 0.0, grid=None) -> tuple[BulkHartreeFock, float]:
    """The solver at flux 1/q with E_C / hbar omega_c = lam (continuum scales of the flux); also E_C in t."""
    phi = Fraction(1, q)
    lb = math.sqrt(q / (2 * math.pi))
    hw = 4 * math.pi / q
    u = lam * hw * lb
    solver = BulkHartreeFock(HarperCell(phi, zeeman=zeeman), Interaction(u, CELL_AVERAGE * u),
                             grid or smallest_grid(phi))
    return solver, u / lb


def _bands(levels_set) -> dict:
    return dict(levels_set.per_spin)


@pytest.mark.parametrize("filling", [1, 2])
def test_lattice_exchange_energies_approach_the_continuum(filling):
    # Exchange energy per flux quantum of filled levels: -(1/2) sum X_nm E_C with the closed forms of
    # ../shared/REFERENCES.md section 15 (Giuliani and Vignale, CUP 2005); section 8 gives the
    # tolerance of lattice Hartree-Fock, 5 % for flux <= 1/20. The deviation must shrink with the flux.
    sets = candidate_sets(filling, exchange_matrix(filling + 2))
    for s in sets:
        deviations = []
        for q in FLUXES:
            solver, ec = _solver(q, 0.5)
            result = solver.solve(_bands(s))
            assert result.converged
            deviations.append(abs(result.interaction_per_flux / ec - s.exchange) / abs(s.exchange))
        assert deviations[0] > deviations[1] > deviations[2], (s.label, deviations)
        assert deviations[1] < 0.05 and deviations[2] < 0.03, (s.label, deviations)


def test_lattice_nu1_gap_approaches_zeeman_plus_the_exchange():
    # Delta_Z + sqrt(pi/2) E_C: Kallin and Halperin, PRB 30, 5655 (1984); at E_C / hbar omega_c = 0.4
    # the spin flip is the smallest gap. In units of the continuum hbar omega_c = 4 pi phi t.
    lam, z = 0.4, 0.05
    errors = []
    for q in FLUXES:
        hw = 4 * math.pi / q
        solver, _ = _solver(q, lam, zeeman=z * hw)
        result = solver.solve({"up": 1, "down": 0})
        errors.append(abs(result.gap / hw - (z + ROOT * lam)) / (z + ROOT * lam))
    assert errors[0] > errors[1] > errors[2] and errors[2] < 0.03, errors


def _lattice_transition(q: int, first: dict, second: dict) -> float:
    """E_C / hbar omega_c where the two fillings cost the same on the lattice at zero Zeeman (secant)."""
    def difference(lam):
        solver, _ = _solver(q, lam)
        return solver.solve(second).energy_per_flux - solver.solve(first).energy_per_flux

    x0, x1 = 1.0, 3.0
    f0, f1 = difference(x0), difference(x1)
    for _ in range(10):
        x0, x1, f0 = x1, x1 - f1 * (x1 - x0) / (f1 - f0), f1
        f1 = difference(x1)
        if abs(x1 - x0) < 1e-6:
            break
    return x1


@pytest.mark.parametrize("first, second, continuum", [
    # nu = 2: {0up, 0down} -> {0up, 1up} at 8 / (3 sqrt(pi/2)); nu = 3: {0up, 0down, 1up} -> {0up, 1up, 2up}
    # at 256 / (81 sqrt(pi/2)) (continuum Hartree-Fock of filled levels, G. F. Giuliani and J. J. Quinn,
    # PRB 31, 6228 (1985); the numbers worked out by hand from the closed forms of REFERENCES.md section 15)
    ({"up": 1, "down": 1}, {"up": 2, "down": 0}, 8 / (3 * ROOT)),
    ({"up": 2, "down": 1}, {"up": 3, "down": 0}, 256 / (81 * ROOT)),
])
def test_lattice_transitions_approach_the_continuum(first, second, continuum):
    # Fluxes 1/20, 1/30, 1/40: at 1/12 (a/l_B = 0.72) the partly polarised nu = 3 set has a second
    # self-consistent solution at strong interaction, another lattice state than the filled levels.
    deviations = [abs(_lattice_transition(q, first, second) - continuum) for q in (20, 30, 40)]
    assert deviations[0] > deviations[1] > deviations[2], deviations
    assert deviations[2] < 0.05 * continuum, deviations
    # at both ends of the secant's first step the solutions fill the levels of their candidate
    solver, _ = _solver(40, 3.0)
    for bands in (first, second):
        found = solver.solve(bands).filled_levels()
        assert sorted(s for _, s in found) == sorted(["up"] * bands["up"] + ["down"] * bands["down"])
        assert all(n < max(bands.values()) for n, _ in found)


def test_the_torus_converges_with_its_size():
    # The density matrix of a filled level decays like a Gaussian on l_B (common practice): the default
    # torus of 6 + nu/2 magnetic lengths gives the exchange energy of {0up, 1up} to 1e-4 E_C of a torus
    # of 20 (the lattice itself is 2 % from the continuum at this flux), and the error falls with the size.
    from topoedge.workflows.levels_lattice import default_lengths

    def energy(lengths):
        solver, ec = _solver(20, 1.0, grid=smallest_grid(Fraction(1, 20), lengths))
        return solver.solve({"up": 2, "down": 0}).interaction_per_flux / ec

    reference = energy(20.0)
    errors = [abs(energy(lengths) - reference) for lengths in (6.0, default_lengths(2), 14.0)]
    assert errors[0] > errors[1] > errors[2] and errors[1] < 1e-4, errors


def test_every_start_converges_to_the_same_state():
    solver, _ = _solver(20, 2.0)
    results = [solver.solve({"up": 2, "down": 1}, start="levels")] + [
        solver.solve({"up": 2, "down": 1}, start="random", seed=seed) for seed in range(3)]
    assert all(r.converged for r in results)
    energies = [r.energy for r in results]
    assert max(energies) - min(energies) < 1e-7
    assert results[0].filled_levels() == ((0, "up"), (0, "down"), (1, "up"))
    # a uniform density: the Hartree energy of a filled level set is negligible against the exchange
    assert abs(results[0].hartree) < 1e-4 * abs(results[0].exchange)


def test_bad_arguments():
    with pytest.raises(ValueError, match="needs both spins"):
        BulkHartreeFock(HarperCell(Fraction(1, 8), spin=False), Interaction(0.1, 0.3), (8, 1))
    solver, _ = _solver(8, 0.5)
    with pytest.raises(ValueError, match="bands per spin"):
        solver.solve({"up": 9, "down": 0})
    with pytest.raises(ValueError, match="start: got 'x'"):
        solver.solve({"up": 1, "down": 0}, start="x")


@pytest.mark.parametrize("lam", [0.5, 3.5])
def test_random_starts_with_free_spins_converge_and_never_beat_the_best_candidate(lam):
    # nu = 3 at flux 1/20 with a small Zeeman splitting: random starts whose spins share the bands freely
    # (the aufbau over both spins at every momentum) all converge (energy descent where DIIS stalls) and
    # settle in self-consistent states no lower than the lowest candidate of the level ordering; at
    # E_C / hbar omega_c = 3.5 they stay in partly polarised states above the fully polarised candidate,
    # which is why the candidates are enumerated rather than left to the loop.
    hw = 4 * math.pi / 20
    solver, _ = _solver(20, lam, zeeman=0.02 * hw)
    best = min(solver.solve(_bands(s)).energy_per_flux for s in candidate_sets(3, exchange_matrix(5)))
    for seed in range(3):
        result = solver.solve(3, start="random", seed=seed)
        assert result.converged, (seed, result.message)
        assert result.energy_per_flux >= best - 1e-9
        assert result.bands["up"] + result.bands["down"] == pytest.approx(3.0, abs=1e-9)
