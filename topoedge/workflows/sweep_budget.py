"""The memory a sweep's points need, checked before any point runs."""

from __future__ import annotations

from ..scenario import ConfigError, parse_scenario, resolve
from .sweep import Sweep

__all__ = ["check_memory"]


def check_memory(sweep: Sweep) -> None:
    """Refuse a sweep one of whose points would not fit in memory, before any point runs.

    Each point's stages are estimated as ``topoedge run`` estimates them
    (:func:`topoedge.workflows.build.memory_estimate`, or the self-consistent
    loop's); a point whose scenario is invalid is left to fail on its own.

    Raises
    ------
    topoedge.util.budget.MemoryBudgetError
        Naming the first point that does not fit, its axis values and the fix.
    """
    from ..util.budget import MemoryBudgetError, require
    from .build import memory_estimate
    from .bulk import bulk_solver

    if sweep.command != "run":
        return      # disorder and levels points check their own sizes (check_disorder, check_levels) and fail alone
    for point in sweep.points():
        try:
            model = resolve(parse_scenario(point["config"])).scenario
        except (ConfigError, ValueError):
            continue
        if model.interaction.enabled:
            from .interacting import memory_estimate_interacting

            parts = [memory_estimate_interacting(model)]
        else:
            parts = memory_estimate(model, bulk_solver(model)[0])
        try:
            require(parts)
        except MemoryBudgetError as err:
            where = ", ".join(f"{key} = {value}" for key, value in point["axes"].items())
            raise MemoryBudgetError(f"sweep point {where}: {err}") from None
