"""`topoedge butterfly`: the flux-energy spectrum with every gap labelled by its Chern number."""

from __future__ import annotations

import json
import time
from pathlib import Path
from ..scenario import DEFAULT_SCENARIO, ConfigError, load_scenario, resolve
from .common import Command, interrupted, open_points, require_support, say


def cmd_butterfly(args) -> int:
    """Flux-energy spectrum of the scenario's model (spin, Zeeman, on-site) into a results folder."""
    import math

    from ..workflows.butterfly import Q_MAX_LIMIT

    if not 1 <= args.q_max <= Q_MAX_LIMIT:
        raise ConfigError(f"butterfly --q-max: got {args.q_max}; expected an integer from 1 to {Q_MAX_LIMIT}")
    if not (args.min_gap > 0 and math.isfinite(args.min_gap)):
        raise ConfigError(f"butterfly --min-gap: got {args.min_gap:g}; expected a finite gap width > 0 (units of t)")
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"butterfly --jobs: got {args.jobs}; expected at least 1 worker process")
    scenario = load_scenario(args.config, args.overrides)
    require_support(scenario, "butterfly")
    if args.out is not None:
        out = args.out
    else:
        base = out = Path("results") / f"butterfly-{time.strftime('%Y%m%d-%H%M%S')}"
        n = 1
        while out.exists():
            n += 1
            out = base.with_name(f"{base.name}-{n}")
    from ..util.atomic import check_destination

    check_destination(out, force=args.force)
    import matplotlib

    matplotlib.use("Agg")      # the command writes files; no window
    from ..outputs.butterfly import butterfly_summary, format_butterfly, write_butterfly
    from ..workflows.butterfly import compute_butterfly

    # With [field], the Zeeman splitting (in t) is the one at the scenario's
    # field, kept the same at every flux of the spectrum.
    model = resolve(scenario).scenario
    options = dict(spin=model.spin.enabled, zeeman=model.spin.zeeman, onsite=model.lattice.onsite,
                   full_grid=args.full_grid)
    store = open_points(args, out, "butterfly", options, "fluxes")
    try:
        from ..util.progress import Progress, progress_mode

        result = compute_butterfly(args.q_max, jobs=args.jobs, progress=Progress(progress_mode(quiet=args.quiet)),
                                   store=store, **options)
    except KeyboardInterrupt:
        return interrupted(store, "fluxes")
    summary = butterfly_summary(result, min_gap=args.min_gap, scenario=scenario)
    write_butterfly(out, result, summary, force=args.force)
    store.clear()
    if args.json:
        print(json.dumps(summary, indent=2))
    say(args, format_butterfly(summary, out))
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge butterfly`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    parser.add_argument("config", nargs="?", default=None,
                        help="scenario TOML file for spin.enabled, spin.zeeman and lattice.onsite "
                             f"(default: {DEFAULT_SCENARIO.name}; lattice.flux is not used)")
    parser.add_argument("--q-max", type=int, default=40,
                        help="largest flux denominator q, 1 to 200 (default 40)")
    parser.add_argument("--min-gap", type=float, default=0.02,
                        help="label and draw only gaps wider than this, units of t (default 0.02, "
                             "about 2 pixels of the figure)")
    parser.add_argument("--jobs", type=int, default=None,
                        help="worker processes (default: all cores)")
    parser.add_argument("--full-grid", action="store_true",
                        help="Chern numbers on the 2q x 2q grid of the run command instead of 2q x 8 (slower)")
    parser.add_argument("--out", type=Path, default=None,
                        help="results folder (default: results/butterfly-<date-time>)")
    parser.add_argument("--force", action="store_true", help="replace an existing results folder")


#: ``topoedge butterfly`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="flux-energy spectrum with every gap labelled by its Chern number", add_arguments=add_arguments, run=cmd_butterfly)
