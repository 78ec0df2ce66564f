"""Worker processes shared by the commands that run in parallel (stage 0).

``default_jobs`` counts the cores this process may use; ``init_worker`` is
the start-up of every worker process (one BLAS thread, Ctrl-C left to the
parent, and the worker ends itself when its parent is gone); ``stop_pool``
ends a process pool at once.
"""

from __future__ import annotations

import os
import time
import warnings

__all__ = ["default_jobs", "init_worker", "stop_pool", "process_pool"]


def default_jobs() -> int:
    """Number of cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


_WORKER_LIMIT = None


def init_worker() -> None:
    """Worker start-up: one BLAS thread, kwant's import notice silenced, Ctrl-C left to the parent.

    A worker also ends itself when its parent is gone (killed without the
    chance to stop the pool): the task queue would otherwise keep it waiting
    for ever.
    """
    import signal
    import threading

    global _WORKER_LIMIT
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    parent = os.getppid()

    def watch_parent() -> None:
        while True:
            time.sleep(1.0)
            if os.getppid() != parent:
                os._exit(1)

    threading.Thread(target=watch_parent, name="topoedge-parent-watch", daemon=True).start()
    warnings.filterwarnings("ignore", message="MUMPS is not available")
    from .threads import blas_controller

    # Kept referenced for the life of the worker: the limit stays in force.
    _WORKER_LIMIT = blas_controller().limit(limits=1, user_api="blas")


def stop_pool(pool) -> None:
    """End the worker processes of ``pool`` now (on an error or Ctrl-C)."""
    terminate = getattr(pool, "terminate_workers", None)  # Python >= 3.14
    if terminate is not None:
        terminate()
        return
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        if process.is_alive():
            process.terminate()
    for process in processes:
        process.join(timeout=10)


def process_pool(workers: int):
    """A pool of ``workers`` spawned processes started by :func:`init_worker` (the one pool of the project).

    Spawned, not forked: a worker starts clean (no copied BLAS threads or
    locks of the parent). End it with ``pool.shutdown()`` when every task is
    done, or with :func:`stop_pool` on an error or Ctrl-C.
    """
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    return ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                               initializer=init_worker)
