"""`topoedge disorder`: local Chern marker and Kubo-Bastin sigma_xy of a finite disordered flake."""

from __future__ import annotations


from ..scenario import ConfigError, load_scenario, resolve
from ..util.jsonio import dumps
from .common import Command, add_folder_arguments, figure_writer, folder_of, interrupted, open_points, say


def cmd_disorder(args) -> int:
    """Marker map, sigma_xy curves and the robustness of the plateau into a results folder."""
    scenario = load_scenario(args.config, args.overrides)
    if scenario.interaction.enabled:
        raise ConfigError("interaction.enabled: true; `topoedge disorder` is non-interacting; expected a scenario "
                          "without [interaction]")
    model = resolve(scenario)
    from ..workflows.disorder import check_disorder

    check_disorder(model.scenario)          # flake against l_B and size, before anything is built
    out = folder_of(args, "disorder")
    from ..util.atomic import check_destination

    check_destination(out, force=args.force)
    from ..util.progress import Progress, progress_mode
    from ..workflows.disorder import disorder_run

    store = open_points(args, out, "disorder", model.scenario.to_dict())
    try:
        result = disorder_run(model, progress=Progress(progress_mode(quiet=args.quiet)), store=store)
    except KeyboardInterrupt:
        return interrupted(store)
    import matplotlib

    matplotlib.use("Agg")
    from ..outputs.disorder import format_disorder, write_disorder
    from ..plotting.disorder import marker_map_figure, robustness_figure, sigma_curves_figure

    figures = {name: figure_writer(make, result) for name, make in (
        ("marker_map.png", marker_map_figure), ("sigma_xy.png", sigma_curves_figure),
        ("robustness.png", robustness_figure))}
    write_disorder(out, result, figures, force=args.force)
    store.clear()
    if args.json:
        print(dumps(result.to_dict(), indent=2))
    say(args, format_disorder(result, out))
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge disorder`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    add_folder_arguments(parser, "disorder", "the [disorder] section sets the flake, the strengths and the expansions")

#: ``topoedge disorder`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="local Chern marker and Kubo-Bastin sigma_xy of a finite disordered flake: marker map, "
                       "sigma_xy curves, plateau robustness", add_arguments=add_arguments, run=cmd_disorder)
