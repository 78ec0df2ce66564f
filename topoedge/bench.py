"""Side-by-side benchmarks (ratios measured in one run; no absolute goals).

``bench_ribbon``: the ribbon spectrum against ``kwant.physics.Bands`` on the
same finalized ribbon and momenta.

``bench_chern``: the whole Chern computation (Bloch Hamiltonian on the grid,
diagonalisation, gap search, link variables) against the bare batched
diagonalisation of the same grid.

Both sides of each comparison run in one process, one after the other; the
ratios are what matters, since the machines are shared and absolute times are
noisy.
"""

from __future__ import annotations

import time
import warnings
from dataclasses import replace

import numpy as np

from .config import Scenario, lattice_scenario
from .hamiltonian import RibbonHamiltonian
from .chern import chern_numbers
from .pipeline import build_bulk, fermi_level, scenario_potential
from .builders import model_params, ribbon_builder
from .spectrum import k_grid, ribbon_spectrum

__all__ = ["bench_ribbon", "bench_chern"]


def _timed(func):
    start = time.perf_counter()
    value = func()
    return time.perf_counter() - start, value


def bench_ribbon(scenario: Scenario, *, width: int = 400, k_points: int = 200, window: float = 0.5) -> dict:
    """Time the ribbon spectrum against ``kwant.physics.Bands``.

    Parameters
    ----------
    scenario : Scenario
        Model (flux, spin, Zeeman, edge profile, Fermi energy) to benchmark;
        its ribbon width is replaced by ``width``.
    width : int
        Sites across the ribbon (per spin).
    k_points : int
        Number of momenta.
    window : float
        Half-width (units of t) of the energy window around the Fermi energy.

    Returns
    -------
    dict
        Times in seconds of every variant, the ratios kwant/topoedge and the
        largest energy difference between the two (units of t).
    """
    import kwant

    scenario, _ = lattice_scenario(scenario)
    edge = scenario.ribbon.edge
    if edge.width > width / 2:
        edge = replace(edge, width=width / 2)
    scenario = replace(scenario, ribbon=replace(scenario.ribbon, width=width, edge=edge))
    potential = scenario_potential(scenario)
    lat = scenario.lattice
    params = model_params(phi=lat.flux, zeeman=scenario.spin.zeeman, onsite=lat.onsite)
    fsyst = ribbon_builder(width, spin=scenario.spin.enabled, potential=potential).finalized()
    k = k_grid(k_points)
    if scenario.fermi.gap is None:
        ef = scenario.fermi.energy if scenario.fermi.energy is not None else 0.0
    else:  # E_F from the bulk gap, as `run` places it
        ef = fermi_level(scenario, chern_numbers(build_bulk(scenario)))[0]
    win = (ef - window, ef + window)

    def kwant_energies():
        bands = kwant.physics.Bands(fsyst, params=params)
        return np.array([bands(x) for x in k])

    def kwant_velocities():
        bands = kwant.physics.Bands(fsyst, params=params)
        return [bands(x, derivative_order=1) for x in k]

    def ours(**kwargs):
        def run():
            ham = RibbonHamiltonian.from_kwant(fsyst, params=params, spin=scenario.spin.enabled)
            return ribbon_spectrum(ham, k, **kwargs)

        return run

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t_kwant, ref = _timed(kwant_energies)
        t_kwant_v, _ = _timed(kwant_velocities)
        t_all_e, spec_e = _timed(ours(observables=False))
        t_all, spec = _timed(ours())
        t_win_e, _ = _timed(ours(window=win, observables=False))
        t_win, spec_w = _timed(ours(window=win))

    in_window = (ref >= win[0]) & (ref <= win[1])
    window_diff = max(
        (np.abs(spec_w.energy[i, : spec_w.count[i]] - ref[i][in_window[i]]).max(initial=0.0)
         for i in range(len(k))),
        default=0.0,
    ) if np.array_equal(spec_w.count, in_window.sum(axis=1)) else float("inf")
    return {
        "width_per_spin": width,
        "orbitals": int(fsyst.cell_size * (2 if scenario.spin.enabled else 1)),
        "k_points": k_points,
        "window_t": list(win),
        "solver": spec.solver,
        "states_in_window": int(spec_w.count.sum()),
        "seconds": {
            "kwant_bands_energies": t_kwant,
            "kwant_bands_energies_velocities": t_kwant_v,
            "topoedge_all_energies": t_all_e,
            "topoedge_all_with_observables": t_all,
            "topoedge_window_energies": t_win_e,
            "topoedge_window_with_observables": t_win,
        },
        "ratios": {
            "all_energies": t_kwant / t_all_e,
            "all_with_observables_vs_bands_velocities": t_kwant_v / t_all,
            "all_with_observables_vs_bands_energies": t_kwant / t_all,
            "window_energies": t_kwant / t_win_e,
            "window_with_observables_vs_bands_velocities": t_kwant_v / t_win,
            "window_with_observables_vs_bands_energies": t_kwant / t_win,
        },
        "max_energy_difference_t": {
            "all": float(np.abs(spec_e.energy - ref).max()),
            "window": float(window_diff),
        },
    }


def bench_chern(q: int = 50, *, repeats: int = 2) -> dict:
    """Time the Chern computation at flux 1/q against its bare diagonalisation.

    Parameters
    ----------
    q : int
        Flux 1/q per plaquette, spinless: q bands.
    repeats : int
        Each side is timed this many times; the fastest run counts.

    Returns
    -------
    dict
        Grid, times (bare diagonalisation, whole Chern computation, and the
        convergence check on the 1.5 times finer grid), their ratio and
        whether the gap Chern numbers solve the TKNN equation (t_r = r below
        the centre, r - q above, for flux 1/q).
    """
    from fractions import Fraction

    from .bloch import BlochHamiltonian
    from .builders import bulk_builder
    from .chern import _batched_eigh, chern_numbers, default_grid

    phi = Fraction(1, q)
    bloch = BlochHamiltonian.from_kwant(bulk_builder(phi, spin=False), params=model_params(phi=phi))
    grid = default_grid(bloch)
    _, _, hk = bloch.grid(*grid)
    bare = min(_timed(lambda: _batched_eigh(hk))[0] for _ in range(repeats))
    del hk
    runs = [_timed(lambda: chern_numbers(bloch, grid=grid)) for _ in range(repeats)]
    whole, result = min(runs, key=lambda r: r[0])
    finer = tuple(int(np.ceil(1.5 * n)) for n in grid)
    t_refined, refined = _timed(lambda: chern_numbers(bloch, grid=finer))
    tknn = all(g.chern == (g.below if 2 * g.below < q else g.below - q) for g in result.gaps)
    return {
        "flux": f"1/{q}",
        "bands": bloch.size,
        "grid": list(grid),
        "open_gaps": len(result.gaps),
        "seconds": {"bare_diagonalisation": bare, "chern_whole": whole, "chern_refined_grid": t_refined},
        "ratio_whole_over_bare": whole / bare,
        "tknn_agree": bool(tknn),
        "refined_agree": [g.chern for g in result.gaps] == [g.chern for g in refined.gaps],
    }
