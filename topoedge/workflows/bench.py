"""Side-by-side benchmarks (ratios measured in one run; no absolute goals).

``bench_ribbon``: the ribbon spectrum against ``kwant.physics.Bands`` on the
same finalized ribbon and momenta.

``bench_chern``: the whole Chern computation (Bloch Hamiltonian on the grid,
diagonalisation, gap search, link variables) against the bare batched
diagonalisation of the same grid.

``bench_hallbar``: the S-matrix of the scenario's Hall bar with kwant's MUMPS
solver (when kwant was built with it) against SciPy's sparse solver, at
several bar sizes.

``bench_hf``: one Hartree-Fock iteration and whole self-consistent runs with
DIIS and with linear mixing on the same ribbon, and the scaling of the
exchange term with N_k and W.

``bench_landau``: Chern numbers of the lowest Landau levels at flux 1/q by
the Landau-level solver against the dense route on the same grid (measured
at small q, extrapolated from its measured growth beyond), with the peak
memory of the Landau-level solver.

``bench_gaas``: whole ``topoedge run`` processes of a GaAs scenario at 1 T
and 10 T.

Both sides of each comparison run in one process, one after the other; the
ratios are what matters, since the machines are shared and absolute times are
noisy.
"""

from __future__ import annotations

import time
import warnings
from dataclasses import replace

import numpy as np

from ..scenario import Scenario, resolve
from ..systems.ribbon import RibbonHamiltonian
from ..solvers.chern import chern_numbers
from .build import build_bulk, scenario_potential
from .bulk import fermi_level
from ..models.square import model_params, ribbon_builder
from ..solvers.spectrum import k_grid, ribbon_spectrum

__all__ = ["bench_ribbon", "bench_chern", "bench_hallbar", "bench_hf", "bench_landau", "bench_gaas",
           "mumps_available"]


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

    scenario = resolve(scenario).scenario
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

    from ..systems.bloch import BlochHamiltonian
    from ..models.square import bulk_builder
    from ..solvers.chern import chern_numbers, default_grid
    from ..util.threads import eigh_stack

    phi = Fraction(1, q)
    bloch = BlochHamiltonian.from_kwant(bulk_builder(phi, spin=False), params=model_params(phi=phi))
    grid = default_grid(bloch)
    _, _, hk = bloch.grid(*grid)
    bare = min(_timed(lambda: eigh_stack(hk))[0] for _ in range(repeats))
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


def mumps_available() -> bool:
    """Whether this kwant build has its MUMPS solver (``kwant.solvers.mumps``)."""
    try:
        import kwant.solvers.mumps  # noqa: F401
    except ImportError:
        return False
    return True


def bench_hallbar(scenario: Scenario, sizes=None, *, repeats: int = 1) -> dict:
    """Time the Hall-bar S-matrix with kwant's MUMPS and SciPy sparse solvers.

    Parameters
    ----------
    scenario : Scenario
        Model and Fermi energy (the E_F of ``run``); its Hall bar
        (``hallbar.length``, ``hallbar.width``) is the first size.
    sizes : sequence of (int, int), optional
        Bars ``(length, width)`` in sites to time (default: the scenario's
        bar and the bars 2x and 4x larger in each direction).
    repeats : int
        Each solver is timed this many times per size; the fastest counts.

    Returns
    -------
    dict
        Per size: orbitals, seconds per solver (``scipy_sparse`` always;
        when this kwant build has MUMPS, ``mumps_amd`` as the Hall bar uses
        it and ``mumps_kwant_ordering`` with kwant's default ordering), the
        ratio scipy / mumps_amd, per solver the sum-rule violation of the
        conductance matrix and its largest difference from SciPy's (e^2/h),
        and R_xy (h/e^2) as :func:`topoedge.solvers.transport.hall_resistances`
        reports it; and whether MUMPS is available.
    """
    import kwant
    import kwant.solvers.sparse as sparse

    from ..models.hallbar import hallbar_params
    from ..solvers.transport import hall_resistances, sum_rule_violation
    from .bulk import bulk_chern, fermi_level, replace_chern_refine
    from .hallbar_scan import hallbar_system

    scenario = resolve(scenario).scenario
    if scenario.fermi.energy is not None:
        ef = float(scenario.fermi.energy)
    else:
        ef = fermi_level(scenario, bulk_chern(replace_chern_refine(scenario))[0])[0]
    bar = scenario.hallbar
    if sizes is None:
        sizes = [(bar.length * f, bar.width * f) for f in (1, 2, 4)]
    solvers = {"scipy_sparse": sparse.smatrix}
    have_mumps = mumps_available()
    if have_mumps:
        import kwant.solvers.mumps as mumps

        amd = mumps.Solver()
        amd.options(ordering="amd")
        solvers["mumps_amd"] = amd.smatrix
        solvers["mumps_kwant_ordering"] = mumps.smatrix
    rows = []
    for length, width in sizes:
        at = replace(scenario, hallbar=replace(bar, length=int(length), width=int(width)))
        fsyst, params = hallbar_system(at)
        full = hallbar_params(fsyst, params)
        row = {"length": int(length), "width": int(width),
               "orbitals": int(sum(s.family.norbs for s in fsyst.sites)), "seconds": {}}
        row["sum_rule_violation"] = {}
        row["max_conductance_difference"] = {}
        reference = None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for name, smatrix in solvers.items():
                times = []
                for _ in range(repeats):
                    dt, smat = _timed(lambda: smatrix(fsyst, ef, params=full))
                    times.append(dt)
                row["seconds"][name] = min(times)
                g = np.asarray(smat.conductance_matrix(), dtype=float)
                reference = g if reference is None else reference
                row["sum_rule_violation"][name] = sum_rule_violation(g)
                row["max_conductance_difference"][name] = float(np.abs(g - reference).max())
            row["r_xy"] = hall_resistances(fsyst, ef, params).r_xy
        if have_mumps:
            row["ratio_scipy_over_mumps_amd"] = row["seconds"]["scipy_sparse"] / row["seconds"]["mumps_amd"]
        rows.append(row)
    return {"fermi_energy_t": ef, "flux": str(scenario.lattice.flux), "mumps_available": have_mumps,
            "default_solver": type(kwant.solvers.default.smatrix.__self__).__module__, "sizes": rows}


def bench_hf(*, width: int = 200, k_points: int = 256, flux: str = "1/40", coulomb: float = 0.4,
             ramp: float = 10.0, tol: float = 1e-6, max_iter: int = 200) -> dict:
    """Time the self-consistent Hartree-Fock ribbon: one iteration, whole runs, DIIS against linear mixing.

    The model: square-lattice ribbon of ``width`` rows per spin at ``flux``,
    Zeeman 0.01 t, filling 1 (background ``phi`` per site falling linearly
    over ``ramp`` rows, 2 rows of setback), Coulomb ``U_C = coulomb`` t with
    the cell-averaged on-site value, ``k_points`` momenta, starting fully
    polarised.

    Returns
    -------
    dict
        Seconds of one iteration split into building ``H`` (Hartree and the
        FFT exchange) and diagonalising it (with the new density matrix);
        iterations and seconds of a whole converged run with DIIS and with
        linear mixing (alpha = 0.3), their ratio, and the time of building
        ``H`` at (N_k, W), (2 N_k, W)... for the scaling of the exchange.
    """
    from fractions import Fraction

    from ..solvers.coulomb import Interaction, background_density
    from ..solvers.hartree_fock import HartreeFockRibbon
    from ..systems.ribbon import RibbonHamiltonian

    phi = Fraction(flux)

    def problem(w, nk):
        ham = RibbonHamiltonian.from_kwant(ribbon_builder(w, spin=True),
                                           params=model_params(phi=phi, zeeman=0.01))
        up, down = (ham.block(i) for i in ham.spin_blocks())
        inter = Interaction(coulomb=coulomb, onsite=coulomb * 4 * np.log(1 + np.sqrt(2)))
        return HartreeFockRibbon(up, down, background_density(w, float(phi), ramp, setback=2), inter,
                                 k_points=nk)

    hf = problem(width, k_points)
    g = hf.initial("polarised")
    t_build, (h, _, _) = _timed(lambda: hf.hamiltonian(g))
    t_diag, _ = _timed(lambda: hf.solve_fixed(h))
    runs = {}
    for mixing in ("diis", "linear"):
        seconds, result = _timed(lambda: hf.solve("polarised", mixing=mixing, alpha=0.3, tol=tol,
                                                  max_iter=max_iter))
        runs[mixing] = {"seconds": seconds, "iterations": result.iterations, "converged": result.converged,
                        "energy_t": result.energy}
    del hf, g, h
    scaling = []
    for w, nk in ((width // 2, k_points // 2), (width // 2, k_points), (width, k_points // 2), (width, k_points)):
        small = problem(w, nk)
        gs = small.initial("polarised")
        seconds = min(_timed(lambda: small.hamiltonian(gs))[0] for _ in range(2))
        scaling.append({"width": w, "k_points": nk, "build_seconds": seconds,
                        "model_nk_log_nk_w2": nk * np.log2(nk) * w * w})
    base = scaling[0]
    for row in scaling:
        row["time_ratio"] = row["build_seconds"] / base["build_seconds"]
        row["model_ratio"] = row["model_nk_log_nk_w2"] / base["model_nk_log_nk_w2"]
    return {
        "width": width, "k_points": k_points, "flux": flux, "coulomb_t": coulomb,
        "one_iteration_seconds": {"build_hamiltonian": t_build, "diagonalise_and_density": t_diag},
        "runs": runs,
        "iteration_ratio_linear_over_diis": runs["linear"]["iterations"] / runs["diis"]["iterations"],
        "energy_difference_t": abs(runs["linear"]["energy_t"] - runs["diis"]["energy_t"]),
        "exchange_scaling": scaling,
    }


def bench_sweep(path, *, workers=(1, 2)) -> dict:
    """A whole sweep from nothing with 1 and with 2 worker processes, side by side.

    Each run computes every point into a fresh temporary folder (process
    start-up and the import of kwant in each worker included); the rows of
    the runs' tables (:func:`topoedge.workflows.sweep.gather`) must be identical.

    Returns
    -------
    dict
        ``points``, ``seconds`` per worker count, ``ratio`` (seconds with the
        fewest workers over seconds with the most), ``tables_identical``.
    """
    import tempfile
    from pathlib import Path

    import json

    from .sweep import gather, load_sweep, run_sweep

    sweep = load_sweep(path)
    seconds, tables = {}, []
    for n in workers:
        with tempfile.TemporaryDirectory(prefix="topoedge-bench-sweep-") as tmp:
            out = Path(tmp) / "sweep"
            start = time.perf_counter()
            stats = run_sweep(sweep, out, jobs=n)
            seconds[n] = time.perf_counter() - start
            tables.append(json.dumps(gather(sweep, out), sort_keys=True, default=str))
    return {"sweep": str(path), "points": stats["total"], "failed": stats["failed"],
            "seconds": {str(n): s for n, s in seconds.items()},
            "ratio": seconds[min(workers)] / seconds[max(workers)],
            "tables_identical": all(t == tables[0] for t in tables)}


_LANDAU_CHILD = """
import json, sys, time
from fractions import Fraction
from topoedge.systems.harper import HarperCell
from topoedge.solvers.landau import landau_chern
q, levels = int(sys.argv[1]), int(sys.argv[2])
start = time.perf_counter()
result = landau_chern(HarperCell(Fraction(1, q), spin=False), bands=levels)
seconds = time.perf_counter() - start
# VmHWM: the peak resident memory of this process image (ru_maxrss would carry the parent's over)
peak = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM:"))
print(json.dumps({"seconds": seconds, "grid": list(result.grid),
                  "gaps": [[g.below, g.chern] for g in result.gaps if g.below <= levels],
                  "peak_rss_mb": peak / 1024}))
"""


def _landau_child(q: int, levels: int) -> dict:
    """The Landau-level solver at flux 1/q in a fresh process: time, gaps and peak resident memory."""
    import json
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-c", _LANDAU_CHILD, str(q), str(levels)], capture_output=True,
                          text=True, check=True)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def bench_landau(qs=(200, 1000, 2000), *, levels: int = 4, dense_qs=(50, 100, 200), k2_points: int = 8) -> dict:
    """Chern numbers of the lowest Landau levels: the Landau-level solver against the dense route.

    At flux ``1/q`` (spinless) the Chern numbers of the ``levels`` lowest
    bands are computed by :func:`topoedge.solvers.landau.landau_chern` on the ``q x
    k2_points`` grid, each ``q`` in a fresh process (its peak resident memory
    is measured there, interpreter and libraries included), and by the dense
    route (:func:`topoedge.solvers.chern.chern_numbers`: every band at every point
    of the same grid) for ``dense_qs``. The dense time grows as a power of
    ``q``, fitted to the measured points; at larger ``q`` it is extrapolated
    from that fit (marked ``extrapolated``: a dense run there would take hours
    and ``16 q^2 n`` bytes per grid row).

    Returns
    -------
    dict
        Per ``q``: Landau-level seconds, gap Chern numbers (TKNN: ``r`` below
        gap ``r``), peak memory, dense seconds (measured or extrapolated)
        and their ratio; the fitted exponent.
    """
    from fractions import Fraction

    from ..systems.bloch import BlochHamiltonian
    from ..models.square import bulk_builder

    dense = {}
    for q in dense_qs:
        phi = Fraction(1, q)
        bloch = BlochHamiltonian.from_kwant(bulk_builder(phi, spin=False), params=model_params(phi=phi))
        t, result = _timed(lambda: chern_numbers(bloch, grid=(q, k2_points)))
        dense[q] = (t, [[g.below, g.chern] for g in result.gaps if g.below <= levels])
    xs = np.log(np.array(sorted(dense), dtype=float))
    ys = np.log(np.array([dense[q][0] for q in sorted(dense)]))
    exponent, intercept = np.polyfit(xs, ys, 1)
    rows = []
    for q in sorted(set(qs) | set(dense_qs)):
        child = _landau_child(q, levels)
        measured = q in dense
        dense_seconds = dense[q][0] if measured else float(np.exp(intercept + exponent * np.log(q)))
        rows.append({
            "q": q, "grid": child["grid"], "landau_seconds": child["seconds"], "peak_rss_mb": child["peak_rss_mb"],
            "gaps": child["gaps"], "tknn": all(c == r for r, c in child["gaps"]) and len(child["gaps"]) == levels,
            "dense_seconds": dense_seconds, "dense": "measured" if measured else "extrapolated",
            "dense_gaps_equal": (dense[q][1] == child["gaps"]) if measured else None,
            "ratio_dense_over_landau": dense_seconds / child["seconds"],
        })
    return {"levels": levels, "k2_points": k2_points, "dense_exponent": float(exponent), "rows": rows}


def bench_gaas(config, runs=((1.0, 1e11), (10.0, 5e11))) -> dict:
    """Whole ``topoedge run`` commands of a GaAs scenario at several fields, timed as processes.

    Each ``(B in T, n in cm^-2)`` is one ``topoedge run CONFIG --set
    field.b_tesla=B --set field.density_cm2=n`` in a fresh process, from the
    start of the interpreter to the last file written (bulk Chern numbers
    with their finer-grid check, the subspace check, ribbon spectrum, edge
    count, Streda route, figures, HDF5), into a temporary folder.
    """
    import json
    import subprocess
    import sys
    import tempfile
    from pathlib import Path

    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for i, (b, n) in enumerate(runs):
            out = Path(tmp) / f"run{i}"
            cmd = [sys.executable, "-m", "topoedge", "run", str(config), "--set", f"field.b_tesla={b}",
                   "--set", f"field.density_cm2={n}", "--out", str(out), "--quiet"]
            start = time.perf_counter()
            proc = subprocess.run(cmd, capture_output=True, text=True)
            seconds = time.perf_counter() - start
            if proc.returncode != 0:
                raise RuntimeError(f"topoedge run at {b} T failed: {proc.stderr.strip()}")
            s = json.loads((out / "summary.json").read_text())
            u = s["units"]
            rows.append({
                "b_tesla": b, "density_cm2": n, "seconds": seconds, "compute_seconds": s["seconds"],
                "flux": u["flux"], "lattice_constant_nm": u["lattice_constant_nm"],
                "b_relative_error": u["b_relative_error"], "filling": u["filling"],
                "a_over_lb": u["lattice_constant_nm"] / u["magnetic_length_nm"],
                "solver": s["bulk"]["solver"], "chern": s["bulk"]["chern_below_fermi"],
                "edges": [s["edges"]["bottom"]["net"], s["edges"]["top"]["net"]],
                "streda": s["hall"]["routes"]["streda"], "routes_agree": s["check"]["routes_agree"],
                "bulk_edge_agree": s["check"]["bulk_edge_agree"], "ribbon_width": s["model"]["ribbon_width_sites"],
            })
    return {"config": str(config), "rows": rows}
