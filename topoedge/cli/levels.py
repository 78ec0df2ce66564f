"""`topoedge levels`: which spin-split Landau levels the exchange fills, the diagram and the gaps."""

from __future__ import annotations


from ..scenario import load_scenario, resolve
from ..util.jsonio import dumps
from .common import Command, add_folder_arguments, figure_writer, folder_of, interrupted, open_points, say


def cmd_levels(args) -> int:
    """Level-ordering diagram, the scenario's ground state and gap, gaps against B into a results folder."""
    scenario = load_scenario(args.config, args.overrides)
    model = resolve(scenario)
    from ..workflows.levels import check_levels

    check_levels(model.scenario, model.units)          # filling, interaction, fields: before anything is written
    out = folder_of(args, "levels")
    from ..util.atomic import check_destination

    check_destination(out, force=args.force)
    from ..util.progress import Progress, progress_mode
    from ..workflows.levels import levels_run

    store = open_points(args, out, "levels", model.scenario.to_dict(), what="lattice solutions")
    try:
        result = levels_run(model, progress=Progress(progress_mode(quiet=args.quiet)), store=store)
    except KeyboardInterrupt:
        return interrupted(store, what="lattice solutions")
    import matplotlib

    matplotlib.use("Agg")
    from ..outputs.levels import format_levels, write_levels
    from ..plotting.levels import gaps_figure, level_order_figure

    figures = {"level_order.png": figure_writer(level_order_figure, result)}
    if result.fields is not None:
        figures["gaps.png"] = figure_writer(gaps_figure, result)
    write_levels(out, result, figures, force=args.force)
    store.clear()
    if args.json:
        print(dumps(result.to_dict(), indent=2))
    say(args, format_levels(result, out))
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge levels`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    add_folder_arguments(parser, "levels", "the [levels] section sets the filling and the extent of the diagram")

#: ``topoedge levels`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="interaction-driven level ordering of the bulk: which spin-split Landau levels the "
                       "exchange fills, the transitions and the exchange-enhanced gaps",
                  add_arguments=add_arguments, run=cmd_levels)
