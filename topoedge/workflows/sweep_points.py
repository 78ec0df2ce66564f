"""What a sweep's workers run: one point (``run``, ``disorder`` or ``levels``), and the executors that run them.

Each command a sweep point can run is one entry of :data:`POINT_RUNNERS`
(a function of the parsed scenario that returns the point's quantities and
summary); the sweep file's ``command`` names it.
"""

from __future__ import annotations

import time
from dataclasses import replace

from ..scenario import parse_scenario
from ..util.jsonio import plain_json

__all__ = ["run_point", "submitter", "POINT_RUNNERS"]


def run_point(config: dict, command: str = "run") -> dict:
    """Run one point (in a worker): the :data:`POINT_RUNNERS` entry of ``command``, no files.

    Returns ``{"status": "ok", "quantities", "summary", "seconds"}`` or
    ``{"status": "failed", "error": one line, "seconds"}``: a point that
    fails never raises.
    """
    import warnings

    from ..util.threads import one_blas_thread

    warnings.filterwarnings("ignore", message="MUMPS is not available")
    start, cpu = time.perf_counter(), time.process_time()
    try:
        scenario = parse_scenario(config)
        with one_blas_thread():
            quantities, summary = POINT_RUNNERS[command](scenario)
        return {"status": "ok", "quantities": plain_json(quantities), "summary": plain_json(summary),
                "seconds": time.perf_counter() - start, "cpu_seconds": time.process_time() - cpu}
    except Exception as err:  # a failed point is recorded, never stops the sweep
        message = " ".join(str(err).split()) or type(err).__name__
        return {"status": "failed", "error": f"{type(err).__name__}: {message}",
                "seconds": time.perf_counter() - start}


def submitter(executor: str, jobs: int, scheduler: str | None, command: str = "run"):
    """(submit(config) -> future, iterate-as-completed(futures), close) for an executor."""
    if executor == "local":
        from concurrent.futures import as_completed

        from ..util.workers import process_pool, stop_pool

        pool = process_pool(jobs)

        def close_pool(graceful: bool = False) -> None:
            # Every point done: let the workers exit and the pool release its
            # queues (no leaked semaphores); otherwise end the workers now.
            if graceful:
                pool.shutdown(wait=True)
            else:
                stop_pool(pool)

        return (lambda config: pool.submit(run_point, config, command)), as_completed, close_pool
    from dask.distributed import Client, LocalCluster, as_completed

    if scheduler is not None:
        client = Client(scheduler, timeout="30s")
        cluster = None
    else:
        cluster = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True, dashboard_address=None,
                               host="127.0.0.1")
        client = Client(cluster)

    def close(graceful: bool = False):
        client.close()
        if cluster is not None:
            cluster.close()

    # pure=False: a point is computed even if an equal task ran before on the cluster.
    return (lambda config: client.submit(run_point, config, command, pure=False)), as_completed, close


def _run_point(scenario) -> tuple[dict, dict]:
    """``topoedge run`` (self-consistent with [interaction])."""
    from .sweep import quantities_of

    if scenario.interaction.enabled:
        from .interacting import run_interacting

        result = run_interacting(scenario)
    else:
        from .run import run_scenario

        result = run_scenario(scenario)
    return quantities_of(result.summary), result.summary


def _disorder_point(scenario) -> tuple[dict, dict]:
    """``topoedge disorder`` at the one strength ``disorder.strength``: marker, sigma_xy and Hall bar at E_F."""
    from .disorder import disorder_run
    from .sweep import QUANTITIES

    cfg = scenario.disorder
    one = replace(scenario, disorder=replace(cfg, strengths=(cfg.strength,)))
    result = disorder_run(one)
    quantities = {name: None for name in QUANTITIES}
    quantities.update(chern=result.chern, fermi_energy=result.fermi_energy,
                      disorder_marker=float(result.marker.mean()), disorder_marker_spread=float(result.marker.std()),
                      disorder_sigma_xy=float(result.sigma_fermi.mean()),
                      disorder_sigma_xy_spread=float(result.sigma_fermi.std()))
    if result.hallbar_r_xy is not None:
        bar = result.to_dict()["hallbar"]
        quantities.update(disorder_hallbar_sigma_xy=bar["sigma_xy"][0], disorder_r_xx=bar["r_xx_mean"][0])
    return quantities, result.to_dict()


def _levels_point(scenario) -> tuple[dict, dict]:
    """``topoedge levels`` at the point alone (no diagram, no samples along the interaction, no field scan)."""
    from .levels import levels_run
    from .sweep import QUANTITIES

    result = levels_run(scenario, diagram=False)
    d = result.to_dict()
    quantities = {name: None for name in QUANTITIES}
    quantities.update(levels_ground=d["ground_state"]["levels"], levels_polarisation=d["ground_state"]["polarisation"],
                      levels_gap=d["gap"]["value"], levels_coulomb_ratio=d["coulomb_ratio"],
                      levels_zeeman_ratio=d["zeeman_ratio"])
    if result.lattice is not None:
        lat = d["lattice"]
        quantities.update(levels_lattice_ground=lat["ground_state"], levels_lattice_gap=lat["gap"],
                          levels_agree=lat["ground_state"] == d["ground_state"]["levels"],
                          levels_lattice_converged=all(c["converged"] for c in lat["candidates"]))
    return quantities, d


#: The commands a sweep point can run: name -> function(scenario) -> (quantities, summary).
POINT_RUNNERS = {"run": _run_point, "disorder": _disorder_point, "levels": _levels_point}
