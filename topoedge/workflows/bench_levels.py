"""Benchmarks of the interacting bulk and of the mixing memory: the lattice level-ordering diagram,
and the bytes the ribbon's self-consistent mixing holds (full iterates against residuals only)."""

from __future__ import annotations

import time

import numpy as np

from ..scenario import parse_scenario, resolve

__all__ = ["bench_levels", "bench_mixing"]


def bench_levels(*, flux: str = "1/20", filling: int = 3, points: int = 20) -> dict:
    """The level-ordering diagram of ``filling`` at ``flux`` on ``points x points`` (lambda, z) points.

    The lattice part solves every candidate at ``points`` interaction
    strengths (the Zeeman axis follows exactly from those energies); the
    continuum diagram is the exact envelope on the same axes. Returns the
    seconds of each, the candidates, the lattice transitions and the most
    iterations any solution took.
    """
    from .levels import levels_run

    q = int(flux.split("/")[1])
    scenario = parse_scenario({
        "lattice": {"flux": flux}, "spin": {"enabled": True, "zeeman": 0.0}, "fermi": {"gap": filling},
        "ribbon": {"edge": {"profile": "none"}},
        "interaction": {"coulomb": 1.0},
        "levels": {"filling": filling, "points": points, "lattice_points": points, "coulomb_max": 4.0,
                   "zeeman_max": 0.5}})
    model = resolve(scenario)
    start = time.perf_counter()
    result = levels_run(model)
    seconds = time.perf_counter() - start
    lat = result.lattice
    return {"flux": flux, "q": q, "filling": filling, "points": points, "candidates": len(result.sets),
            "grid": list(lat.grid), "seconds": seconds, "lattice_seconds": lat.seconds,
            "continuum_seconds": seconds - lat.seconds,
            "solutions": int(lat.iterations.size + len(result.sets)),
            "most_iterations": int(lat.iterations.max()), "all_converged": bool(lat.converged.all()),
            "lattice_transitions": [float(w) for w, _, _ in lat.transitions],
            "continuum_transitions": [float(end) for _, end, _ in result.along[:-1]]}


def bench_mixing(*, width: int = 200, k_points: int = 256, history: int = 8, steps: int | None = None) -> dict:
    """Bytes held by the two mixers for the ribbon's density matrix ``(2, N_k, W, W)``, side by side.

    :class:`~topoedge.solvers.mixing.Pulay` keeps ``history`` pairs of full
    iterates and residuals (the whole ``G(D)``, complex128);
    :class:`~topoedge.solvers.mixing.LeanAnderson` keeps one iterate of the
    independent half (``D = 0 .. N_k/2``) and ``history`` residuals of it in
    complex64. Both are stepped ``history + 1`` times on arrays of the real
    shapes; the bytes are what they then hold, and the seconds what their
    steps took.
    """
    from ..solvers.mixing import LeanAnderson, Pulay

    steps = history if steps is None else steps
    rng = np.random.default_rng(0)
    full = (2, k_points, width, width)
    half = (2, k_points // 2 + 1, width, width)
    out = {"width": width, "k_points": k_points, "history": history}
    for name, mixer, shape in (("full iterates (Pulay)", Pulay(history), full),
                               ("residuals only (lean)", LeanAnderson(history), half)):
        x = np.zeros(shape, dtype=complex)
        start = time.perf_counter()
        for _ in range(steps):
            r = (rng.standard_normal(shape) * 1e-3).astype(complex)
            x = mixer.step(x, r, 0.3)
        seconds = time.perf_counter() - start
        held = (sum(a.nbytes for a in mixer.xs) + sum(a.nbytes for a in mixer.rs) if isinstance(mixer, Pulay)
                else mixer.nbytes)
        out[name] = {"bytes": int(held), "seconds_per_step": seconds / steps}
        del mixer, x
    out["ratio_full_over_lean"] = out["full iterates (Pulay)"]["bytes"] / out["residuals only (lean)"]["bytes"]
    return out
