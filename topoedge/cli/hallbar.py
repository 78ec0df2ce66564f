"""`topoedge hallbar`: the Hall bar of a scenario over E_F or over B, into a results folder."""

from __future__ import annotations

from pathlib import Path

from ..scenario import ConfigError, load_scenario, resolve
from ..scenario.checks import check_hallbar
from ..util.jsonio import dumps
from .common import (EXIT_POINTS_FAILED, Command, folder_of, interrupted, open_points, require_support, say,
                     scan_range)


def cmd_hallbar(args) -> int:
    """Scan of the Hall bar over E_F or B into a results folder (summary, HDF5, figure)."""
    import numpy as np

    if args.energies is not None and args.fields is not None:
        raise ConfigError("hallbar: got both --energies and --fields; expected one scan axis")
    window = scan_range(args.energies, "--energies", "t")
    fields = scan_range(args.fields, "--fields", "tesla")
    scenario = load_scenario(args.config, args.overrides)
    require_support(scenario, "hallbar")
    from ..util.budget import require
    from ..workflows.build import hallbar_memory

    require([hallbar_memory(scenario)])
    check_hallbar(scenario)
    if fields is not None:
        if scenario.field.b_tesla is None:
            raise ConfigError("hallbar --fields: the scenario has no [field] section; expected a scenario "
                              "in physical units ([material] and [field], e.g. the shipped gaas-5T)")
        if args.jobs is not None and args.jobs < 1:
            raise ConfigError(f"hallbar --jobs: got {args.jobs}; expected at least 1 worker")
        if fields[0] * fields[1] <= 0:
            raise ConfigError(f"hallbar --fields: got {args.fields!r}; expected a range of one sign without 0 T")
    out = folder_of(args, "hallbar")
    from ..util.atomic import check_destination

    check_destination(out, force=args.force)
    from ..workflows import default_energies, hallbar_field_scan, hallbar_scan

    resolved = resolve(scenario)            # once; the workflows receive the model
    model = resolved.scenario
    from ..util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    axis = "energy" if fields is None else "b_tesla"
    store = open_points(args, out, f"hallbar-{axis}", model.to_dict())
    try:
        if fields is not None:
            try:
                scan = hallbar_field_scan(resolved, np.linspace(*fields), jobs=args.jobs, progress=progress,
                                          store=store)
            except ValueError as err:
                raise ConfigError(f"hallbar --fields: {err}") from None
        else:
            energies = np.linspace(*window) if window is not None else default_energies(resolved)
            scan = hallbar_scan(resolved, energies, progress=progress, store=store)
    except KeyboardInterrupt:
        return interrupted(store)
    import matplotlib

    matplotlib.use("Agg")
    from ..outputs.hallbar import format_hallbar_table, hallbar_rows, hallbar_summary, write_hallbar

    summary = hallbar_summary(scenario, scan, axis)
    where = (f"flux {model.lattice.flux}" if fields is None
             else f"E_F = {scan['fermi_mev']:.3f} meV above the band bottom")
    write_hallbar(out, scenario, scan, summary, axis=axis, force=args.force,
                  title=f"{scenario.title or 'Hall bar'}: {model.hallbar.length}x{model.hallbar.width} sites, {where}")
    store.clear()
    if args.json:
        print(dumps(summary, indent=2))
    else:
        say(args, format_hallbar_table(hallbar_rows(scan, axis), axis))
    xs = scan[axis]
    ok = sum(1 for r in scan["r_xy"] if r == r)
    what = "Fermi energies" if fields is None else "fields"
    unit = "t" if fields is None else "T"
    n_err = len(scan["errors"])
    say(args, f"topoedge hallbar: {len(xs)} {what} from {xs[0]:.4f} to {xs[-1]:.4f} {unit}"
               + ("" if fields is None else f" at {where}")
               + f", {ok} solved" + ("" if not n_err else
                                     f", {n_err} with no open channel in some lead (E_F below its lowest level)"
                                     if all("channel" in e[1] for e in scan["errors"]) else
                                     f", {n_err} not solved (column status of hallbar.csv)"))
    say(args, f"  results      {out}/ (summary.json, hallbar.h5, hallbar.csv, hallbar.png)")
    if any("channel" not in e[1] for e in scan["errors"]):
        return EXIT_POINTS_FAILED     # a bar that could not be solved for another reason than E_F
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge hallbar`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    parser.add_argument("config", nargs="?", default=None, help="scenario TOML file (default: the shipped default)")
    parser.add_argument("--energies", default=None, metavar="LO:HI:N",
                        help="E_F from LO to HI (t) in N steps (default: from the band bottom to 1.5 (E_F - bottom) above it, 41 steps)")
    parser.add_argument("--fields", default=None, metavar="LO:HI:N",
                        help="instead of E_F, scan the field from LO to HI tesla in N steps at fixed E_F "
                             "(scenarios with [material] and [field])")
    parser.add_argument("--jobs", type=int, default=None,
                        help="with --fields: worker processes for the bulk Chern numbers (default: all cores)")
    parser.add_argument("--out", type=Path, default=None, help="results folder (default: results/hallbar-<date-time>)")
    parser.add_argument("--force", action="store_true", help="replace an existing results folder")


#: ``topoedge hallbar`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="Hall and longitudinal resistance of the scenario's Hall bar over a range of E_F", add_arguments=add_arguments, run=cmd_hallbar)
