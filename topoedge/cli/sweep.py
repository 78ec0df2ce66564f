"""`topoedge sweep`: a scenario over a grid of parameters, resumable, with its table and maps."""

from __future__ import annotations

import io
import json
import sys
from pathlib import Path
from ..scenario import ConfigError
from .common import EXIT_POINTS_FAILED, Command, say


def cmd_sweep(args) -> int:
    """Run the points of a sweep file not run yet, then write the table and figures."""
    from ..outputs.tables import write_table
    from ..plotting.sweep import sweep_figures
    from ..workflows.sweep import gather, load_sweep, run_sweep
    from ..workflows.sweep_budget import check_memory

    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"sweep --jobs: got {args.jobs}; expected at least 1 worker")
    if args.scheduler is not None and args.executor == "local":
        raise ConfigError("sweep --scheduler: given with --executor local; expected --executor dask or no "
                          "--executor (a scheduler implies dask)")
    executor = "dask" if args.scheduler is not None else (args.executor or "local")
    sweep = load_sweep(args.sweep_file, args.overrides)
    check_memory(sweep)        # every point's estimate, before anything is written
    out = args.out if args.out is not None else Path("sweeps") / Path(args.sweep_file).stem
    if out.exists() and not out.is_dir():
        raise ConfigError(f"sweep --out: '{out}' exists and is not a folder; expected a folder")
    npoints = len(sweep.points())
    say(args, f"topoedge sweep: {sweep.title or args.sweep_file}: {npoints} points "
               f"({' x '.join(f'{a.key} [{len(a.values)}]' for a in sweep.axes)}, {sweep.mode}), "
               f"executor {executor}" + (f" at {args.scheduler}" if args.scheduler else ""))
    from ..util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    try:
        stats = run_sweep(sweep, out, executor=executor, jobs=args.jobs, scheduler=args.scheduler,
                          retry_failed=args.retry_failed, progress=progress)
    except KeyboardInterrupt:
        print(f"topoedge: interrupted; the finished points are kept in {out / 'points'}; run the same "
              "command again to compute the rest", file=sys.stderr)
        return 130
    except OSError as err:
        if executor == "dask":
            raise ConfigError(f"sweep --scheduler: cannot reach {args.scheduler}: {err}") from None
        raise
    rows = gather(sweep, out)
    write_table(sweep, rows, out)

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..util.atomic import write_atomic

    names = []
    for name, fig in sweep_figures(sweep, rows).items():
        try:
            for ext in ("png", "pdf"):
                buffer = io.BytesIO()
                fig.savefig(buffer, format=ext, dpi=150)
                write_atomic(out / f"{name}.{ext}", buffer.getvalue())
                names.append(f"{name}.{ext}")
        finally:
            plt.close(fig)
    failed = [r for r in rows if r["status"] == "failed"]
    report = {**stats, "out": str(out), "failed_points": [{k: r[k] for k in ("key", "error", *(
        a.key for a in sweep.axes))} for r in failed], "figures": names}
    if args.json:
        print(json.dumps(report, indent=2, default=str))
    say(args, f"  points       {stats['total']}: {stats['skipped']} finished before, {stats['computed']} computed "
               f"now ({stats['failed']} failed) in {stats['seconds']:.1f} s")
    for r in failed[:5]:
        where = ", ".join(f"{a.key} = {r[a.key]}" for a in sweep.axes)
        say(args, f"  failed       {where}: {r['error']}")
    if len(failed) > 5:
        say(args, f"               ... {len(failed) - 5} more (column 'error' of table.csv)")
    say(args, f"  results      {out}/ (points/, table.h5, table.csv{''.join(', ' + n for n in names)})")
    if failed:
        say(args, f"topoedge sweep: {len(failed)} of {stats['total']} points failed (exit status "
                   f"{EXIT_POINTS_FAILED}); the others are in the table")
        return EXIT_POINTS_FAILED
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge sweep`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    parser.add_argument("sweep_file", metavar="SWEEP", help="sweep TOML file (base scenario and axes)")
    parser.add_argument("--out", type=Path, default=None,
                        help="sweep folder (default: sweeps/<sweep file stem>); running again continues it")
    parser.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    parser.add_argument("--executor", choices=("local", "dask"), default=None,
                        help="local: worker processes here (default); dask: a dask.distributed LocalCluster "
                             "(the default with --scheduler)")
    parser.add_argument("--scheduler", default=None, metavar="ADDRESS",
                        help="run on the dask.distributed scheduler at ADDRESS (e.g. tcp://10.0.0.5:8786)")
    parser.add_argument("--retry-failed", action="store_true", help="run again the points recorded as failed")


#: ``topoedge sweep`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="run a scenario over a grid of parameter values (resumable), with table and maps", add_arguments=add_arguments, run=cmd_sweep)
