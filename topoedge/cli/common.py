"""What every command shares: exit statuses, the results-folder name, range arguments, messages."""

from __future__ import annotations

import argparse
import math
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from ..scenario import DEFAULT_SCENARIO, ConfigError


EXIT_BAD_INPUT = 2


#: A self-consistent run that wrote its results but did not converge everywhere.
EXIT_NOT_CONVERGED = 1

#: A sweep or scan that wrote its results, with some points that failed (named in
#: its table and summary).
EXIT_POINTS_FAILED = 3


#: Longest error message printed (characters); longer ones are cut with their length said.
MESSAGE_LIMIT = 600


def one_line(message: str, limit: int = MESSAGE_LIMIT) -> str:
    """An error message on one readable line: line breaks joined, and cut after ``limit`` characters."""
    text = " ".join(part.strip() for part in message.splitlines() if part.strip())
    if len(text) <= limit:
        return text
    return f"{text[:limit].rstrip()} ... ({len(text) - limit} more characters)"


@dataclass(frozen=True)
class Command:
    """One subcommand: its one-line help, what adds its arguments to its parser, and what runs it.

    ``run(args)`` returns the exit status; bad input raises
    :class:`topoedge.scenario.ConfigError` (or another error :func:`topoedge.cli.main`
    turns into one line and status 2) before anything heavy is allocated.
    """

    help: str
    add_arguments: Callable[[argparse.ArgumentParser], None]
    run: Callable[[argparse.Namespace], int]


class Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, status 2, like every other bad input
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n")


def say(args, text: str) -> None:
    """Human-readable output; --json keeps stdout for the JSON document alone."""
    if not (args.quiet or args.json):
        print(text, flush=True)


def default_out(config_path: str | None) -> Path:
    stem = Path(config_path).stem if config_path else DEFAULT_SCENARIO.stem
    base = Path("results") / f"{stem}-{time.strftime('%Y%m%d-%H%M%S')}"
    out, n = base, 1
    while out.exists():
        n += 1
        out = base.with_name(f"{base.name}-{n}")
    return out


def folder_of(args, kind: str) -> Path:
    """``--out``, or ``results/<kind>-<scenario>-<date-time>``."""
    return args.out if args.out is not None else default_out(f"{kind}-{Path(args.config or DEFAULT_SCENARIO).stem}")


def scan_range(text: str | None, option: str, unit: str) -> tuple[float, float, int] | None:
    if text is None:
        return None
    parts = text.split(":")
    try:
        lo, hi, n = float(parts[0]), float(parts[1]), int(parts[2])
        assert len(parts) == 3 and math.isfinite(lo) and math.isfinite(hi) and lo < hi and 2 <= n <= MAX_SCAN_POINTS
    except (ValueError, IndexError, AssertionError):
        raise ConfigError(f"hallbar {option}: got {text!r}; expected LO:HI:N with finite LO < HI ({unit}) and "
                          f"2 <= N <= {MAX_SCAN_POINTS} steps (e.g. {option}=-3.95:-3.3:14)") from None
    return lo, hi, n


#: Most points of one ``hallbar`` scan (each point is a Hall-bar solve).
MAX_SCAN_POINTS = 10000


def require_support(scenario, command: str) -> None:
    """Refuse what a command would silently drop: a lattice (or a Rashba term) it does not support."""
    from ..models.lattices import lattice

    entry = lattice(scenario.lattice.kind)
    if command not in entry.supports:
        raise ConfigError(f"lattice.kind: got {scenario.lattice.kind!r}; `topoedge {command}` is built for the "
                          "square lattice only; expected 'square'")
    if scenario.spin.rashba != 0:
        raise ConfigError(f"spin.rashba: got {scenario.spin.rashba!r}; `topoedge {command}` has no Rashba term "
                          "yet; expected 0")


def figure_writer(make, result, *, dpi: int = 150):
    """A file writer for :func:`topoedge.util.atomic.write_folder`: ``make(result)`` saved and closed."""
    import matplotlib.pyplot as plt

    def save(path: Path) -> None:
        fig = make(result)
        try:
            fig.savefig(path, dpi=dpi)
        finally:
            plt.close(fig)

    return save


def open_points(args, out: Path, kind: str, identity, what: str = "points"):
    """The :class:`~topoedge.util.points.PointStore` of a resumable command, saying when it continues."""
    from ..util.points import PointStore, points_folder

    store = PointStore(points_folder(out, kind, identity))
    earlier = store.count()
    if earlier:
        say(args, f"topoedge {args.command}: continuing an interrupted run: {earlier} {what} from {store.folder}")
    return store


def add_folder_arguments(parser, kind: str, section: str) -> None:
    """The scenario, ``--out`` and ``--force`` of a command that writes one results folder of ``kind``."""
    parser.add_argument("config", nargs="?", default=None,
                        help="scenario TOML file or the name of a shipped scenario (default: default); " + section)
    parser.add_argument("--out", type=Path, default=None,
                        help=f"results folder (default: results/{kind}-<scenario>-<date-time>)")
    parser.add_argument("--force", action="store_true", help="replace an existing results folder")


def interrupted(store, what: str = "points") -> int:
    """Say where the finished points of an interrupted command are kept; the exit status of Ctrl-C."""
    import sys

    print(f"topoedge: interrupted; {store.count()} finished {what} are kept in {store.folder}; run the same "
          "command again to compute the rest", file=sys.stderr)
    return 130

