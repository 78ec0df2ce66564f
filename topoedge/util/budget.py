"""Memory estimates checked before anything large is allocated.

A computation that would not fit in the machine's memory is refused up
front, in one line naming the part, the estimate and what is available, with
the key to change: never a ``MemoryError`` traceback half-way through a run.
The estimates are upper bounds of the arrays a stage holds at once (the
constants are measured: a kwant site with its hoppings takes about 1.6 KB
from building to the finalized ribbon).
"""

from __future__ import annotations

import os

__all__ = ["MemoryBudgetError", "available_bytes", "human", "require", "KWANT_SITE_BYTES"]

#: Bytes per site of a kwant ribbon builder until its Hamiltonian is extracted (measured).
KWANT_SITE_BYTES = 2048
# Share of the available memory one run may plan to use.
_SHARE = 0.8


class MemoryBudgetError(ValueError):
    """A computation would need more memory than the machine has available."""


def available_bytes() -> int:
    """Memory available to a new allocation: ``MemAvailable`` of /proc/meminfo, else the physical memory."""
    try:
        with open("/proc/meminfo", encoding="ascii") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        return 8 * 1024**3


def human(nbytes: float) -> str:
    """``"3.2 GB"``-style size (powers of 1024)."""
    value = float(nbytes)
    for unit in ("B", "KB", "MB", "GB", "TB", "PB"):
        if value < 1024 or unit == "PB":
            return f"{value:.3g} {unit}" if unit != "B" else f"{int(value)} B"
        value /= 1024
    return f"{value:.3g} PB"


def require(parts: list[tuple[str, float, str]], *, available: int | None = None) -> None:
    """Refuse when the largest of ``parts`` does not fit.

    Parameters
    ----------
    parts : list of (what, bytes, fix)
        Each stage's estimate and the change that would shrink it (the key to
        set); the stages run one after the other, so the largest counts.
    available : int, optional
        Bytes available (default :func:`available_bytes`).

    Raises
    ------
    MemoryBudgetError
        Naming the largest part, its estimate, the memory available and the fix.
    """
    if not parts:
        return
    what, need, fix = max(parts, key=lambda p: p[1])
    have = available_bytes() if available is None else available
    if need > _SHARE * have:
        raise MemoryBudgetError(f"{what} needs about {human(need)}, more than the {human(have)} of memory "
                                f"available here; {fix}")
