"""Finished points of a long scan, kept one file each so that an interrupted scan resumes.

A scan (Hall-bar energies or fields, fluxes of the flux-energy spectrum)
stores every point the moment it is finished in a hidden folder beside its
results folder, ``<parent>/.<kind>-<identity>.points/``, where the identity
is a hash of everything the points depend on (the model, the command's
options; not the results folder's name, which holds the date and time). The
same command run again after Ctrl-C, a crash or ``kill -9`` finds the folder,
takes the finished points from it and computes only the rest; once the
results folder is written the points folder is removed.
"""

from __future__ import annotations

import hashlib
import json
import pickle
import shutil
from pathlib import Path
from typing import Any

from .atomic import remove_stale, write_atomic

__all__ = ["PointStore", "points_folder"]


def points_folder(out: Path, kind: str, identity: Any) -> Path:
    """The points folder of a scan whose results go to ``out``: ``<out.parent>/.<kind>-<hash>.points``.

    ``identity`` is anything JSON-able (``default=str``) that fixes the points' values.
    """
    text = json.dumps(identity, sort_keys=True, separators=(",", ":"), default=str)
    digest = hashlib.sha256(f"{kind}:{text}".encode()).hexdigest()[:16]
    return Path(out).parent / f".{kind}-{digest}.points"


class PointStore:
    """Points of one scan by name, each written atomically (a pickle of plain values).

    ``PointStore(None)`` stores nothing (a scan that is not resumable).
    """

    def __init__(self, folder: Path | None):
        self.folder = None if folder is None else Path(folder)
        self.reused = 0      # points found from an earlier run
        if self.folder is not None and self.folder.exists():
            remove_stale(self.folder)   # a point being written when the earlier run was killed

    def _path(self, name: str) -> Path:
        safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in name)
        return self.folder / f"{safe}.pkl"

    def load(self, name: str) -> Any | None:
        """The stored value of point ``name``, or None."""
        if self.folder is None:
            return None
        try:
            with open(self._path(name), "rb") as f:
                value = pickle.load(f)
        except (OSError, EOFError, pickle.UnpicklingError):
            return None
        self.reused += 1
        return value

    def save(self, name: str, value: Any) -> None:
        """Store point ``name`` (complete under its name or not at all)."""
        if self.folder is None:
            return
        self.folder.mkdir(parents=True, exist_ok=True)
        write_atomic(self._path(name), pickle.dumps(value, protocol=pickle.HIGHEST_PROTOCOL))

    def count(self) -> int:
        """Points stored so far."""
        if self.folder is None or not self.folder.exists():
            return 0
        return sum(1 for _ in self.folder.glob("*.pkl"))

    def clear(self) -> None:
        """Remove the folder (once the scan's results are written)."""
        if self.folder is not None:
            shutil.rmtree(self.folder, ignore_errors=True)
