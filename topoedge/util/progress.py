"""Progress of long stages: a bar on a terminal, periodic one-line updates in a log.

The solvers and workflows never print: they receive a :class:`Progress` (or
None) and open one :meth:`Progress.stage` per stage, advancing it with
``update()``. The command line decides how it is shown:

``"bar"``
    a tqdm progress bar on standard error (a terminal);
``"log"``
    one line when a stage ends after at least ``min_seconds`` (1 s), with its
    duration, and while a stage runs
    longer than ``every`` seconds a line every ``every`` seconds (done /
    total, elapsed time, an estimate of the time left; written by a timer
    thread, so also for stages that cannot count their steps); for standard
    error going to a file or a pipe (batch jobs, CI);
None
    nothing (``--quiet``, ``--json`` runs still log to standard error).

Log lines start with ``"topoedge | "`` so that they are told apart from
messages and errors (``"topoedge: ..."``) by eye and by a filter.
"""

from __future__ import annotations

import sys
import threading
import time

__all__ = ["Progress", "Stage", "progress_mode", "as_progress", "ticks"]


def progress_mode(quiet: bool = False, stream=None) -> str | None:
    """``"bar"`` when ``stream`` (standard error) is a terminal, ``"log"`` otherwise, None when quiet."""
    if quiet:
        return None
    stream = sys.stderr if stream is None else stream
    try:
        return "bar" if stream.isatty() else "log"
    except (AttributeError, ValueError):
        return "log"


class Stage:
    """One stage: ``update(n)``, ``set_total(n)``, closed by the ``with`` block."""

    def __init__(self, owner: "Progress", name: str, total: int | None):
        self.owner = owner
        self.name = name
        self.total = total
        self.done = 0
        self.start = time.monotonic()
        self._bar = None
        self._stop = None
        if owner.mode == "bar":
            from tqdm.auto import tqdm

            self._bar = tqdm(total=total, desc=name, leave=False, file=owner.stream)
        elif owner.mode == "log":
            self._stop = threading.Event()
            thread = threading.Thread(target=self._tick, name=f"progress: {name}", daemon=True)
            thread.start()

    def _tick(self) -> None:
        while not self._stop.wait(self.owner.every):
            elapsed = time.monotonic() - self.start
            if self.total and self.done:
                left = elapsed / self.done * max(self.total - self.done, 0)
                self.owner.write(f"{self.name}: {self.done}/{self.total} ({100 * self.done / self.total:.0f} %), "
                                 f"{elapsed:.0f} s elapsed, about {left:.0f} s left")
            elif self.total:
                self.owner.write(f"{self.name}: 0/{self.total}, {elapsed:.0f} s elapsed")
            else:
                self.owner.write(f"{self.name}: running, {elapsed:.0f} s elapsed")

    def set_total(self, total: int) -> None:
        self.total = int(total)
        if self._bar is not None:
            self._bar.total = self.total
            self._bar.refresh()

    def update(self, n: int = 1) -> None:
        self.done += n
        if self._bar is not None:
            self._bar.update(n)

    def close(self, failed: bool = False) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None
        elif self._stop is not None and not self._stop.is_set():
            self._stop.set()
            elapsed = time.monotonic() - self.start
            if failed or elapsed >= self.owner.min_seconds:
                how = "stopped after" if failed else "done in"
                self.owner.write(f"{self.name}: {how} {elapsed:.1f} s")

    def __enter__(self) -> "Stage":
        return self

    def __exit__(self, exc_type, *exc) -> None:
        self.close(failed=exc_type is not None)


class Progress:
    """How progress is shown (see the module notes); ``stage(name, total)`` opens a stage."""

    def __init__(self, mode: str | None = None, *, stream=None, every: float = 10.0, min_seconds: float = 1.0,
                 prefix: str = "topoedge |"):
        if mode not in (None, "bar", "log"):
            raise ValueError(f"progress mode must be 'bar', 'log' or None, got {mode!r}")
        self.mode = mode
        self.stream = sys.stderr if stream is None else stream
        self.every = float(every)
        self.min_seconds = float(min_seconds)
        self.prefix = prefix

    def write(self, text: str) -> None:
        print(f"{self.prefix} {text}", file=self.stream, flush=True)

    def stage(self, name: str, total: int | None = None) -> Stage:
        return Stage(self, name, total)

    @property
    def bar(self) -> bool:
        """True for a terminal bar (the old ``progress=True``)."""
        return self.mode == "bar"


def as_progress(progress) -> Progress:
    """A :class:`Progress` from None, a bool (True: a bar) or a Progress."""
    if isinstance(progress, Progress):
        return progress
    return Progress("bar" if progress else None)


def ticks(items, progress, desc: str):
    """Iterate ``items``, advancing ``progress`` once per item.

    ``progress`` is a :class:`Stage` (``update()``), a :class:`Progress`
    (a stage named ``desc`` is opened for the loop), True (a tqdm bar) or
    False/None (nothing).
    """
    if isinstance(progress, Progress):
        items = list(items)
        with progress.stage(desc, len(items)) as stage:
            for item in items:
                yield item
                stage.update()
        return
    if hasattr(progress, "update"):
        for item in items:
            yield item
            progress.update()
        return
    if progress:
        from tqdm.auto import tqdm

        yield from tqdm(items, desc=desc, leave=False)
        return
    yield from items
