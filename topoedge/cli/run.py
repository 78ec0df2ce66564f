"""`topoedge run`: one scenario (self-consistent with [interaction]) into a results folder."""

from __future__ import annotations

import sys
from pathlib import Path

from ..scenario import DEFAULT_SCENARIO, ConfigError, load_scenario
from ..util.jsonio import dumps
from .common import EXIT_NOT_CONVERGED, Command, default_out, figure_writer, say


#: Default of ``--checkpoint-every`` (seconds).
CHECKPOINT_EVERY = 20.0


def _interrupted_out(config, scenario) -> Path | None:
    """The results folder of an interrupted self-consistent run of this scenario (default names only).

    A run without ``--out`` writes ``results/<stem>-<date-time>``; when it is
    killed, its checkpoint ``<that>.checkpoint.h5`` stays. The same command
    run again finds the newest such checkpoint made for the same model and
    continues into that folder.
    """
    from ..outputs.results import RestartFileError, read_restart
    from ..workflows.interacting import restart_matches

    stem = Path(config).stem if config else DEFAULT_SCENARIO.stem
    suffix = ".checkpoint.h5"
    for path in sorted(Path("results").glob(f"{stem}-*{suffix}"), key=lambda p: p.stat().st_mtime, reverse=True):
        folder = path.with_name(path.name[:-len(suffix)])
        if folder.exists():
            continue
        try:
            _, model = read_restart(path)
            if restart_matches(scenario, model):
                return folder
        except (RestartFileError, ValueError):
            continue
    return None


def cmd_run(args) -> int:
    from ..outputs.report import format_summary
    from ..outputs.results import read_restart, write_run
    from ..util.atomic import check_destination

    if not (args.checkpoint_every >= 0 and args.checkpoint_every < float("inf")):
        raise ConfigError(f"run --checkpoint-every: got {args.checkpoint_every:g}; expected a finite number of "
                          "seconds >= 0")
    scenario = load_scenario(args.config, args.overrides)
    restart = restart_model = None
    if args.restart is not None:
        if not scenario.interaction.enabled:
            raise ConfigError("--restart: the scenario has no [interaction] section; expected a "
                              "self-consistent scenario (a restart file continues a Hartree-Fock run)")
        restart, restart_model = read_restart(args.restart)
    out = args.out
    if out is None and scenario.interaction.enabled and restart is None and not args.force:
        out = _interrupted_out(args.config, scenario)     # the same command after a kill continues there
    if out is None:
        out = default_out(args.config)
    check_destination(out, force=args.force)
    from ..util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    checkpoint_path = None
    if scenario.interaction.enabled:
        from ..workflows.interacting import run_interacting  # imports kwant: only once the input is valid
        from ..outputs.results import write_restart

        checkpoint_path = out.with_name(out.name + ".checkpoint.h5")
        continuing = args.restart is not None and checkpoint_path.exists() and checkpoint_path.samefile(args.restart)
        if checkpoint_path.exists() and args.restart is None and not args.force:
            # the same command again after an interruption: continue from the checkpoint
            restart, restart_model = read_restart(checkpoint_path)
            continuing = True
            say(args, f"topoedge: continuing the interrupted run from {checkpoint_path} (--force starts over)")
        if checkpoint_path.exists() and not (args.force or continuing):
            raise ConfigError(f"checkpoint '{checkpoint_path}' of an earlier interrupted run exists; continue it "
                              f"with --restart {checkpoint_path}, or pass --force to replace it")
        def checkpoint(states, model):
            checkpoint_path.parent.mkdir(parents=True, exist_ok=True)   # only once there is something to keep
            write_restart(checkpoint_path, states, model)

        def again(restart_file=None, where=out):
            """The command line that continues this run (into ``where``)."""
            import shlex

            words = ["topoedge", "run", str(args.config or DEFAULT_SCENARIO)]
            words += [w for item in args.overrides for w in ("--set", item)]
            words += ["--out", str(where)]
            if args.checkpoint_every != CHECKPOINT_EVERY:
                words += ["--checkpoint-every", f"{args.checkpoint_every:g}"]
            if args.quiet:
                words.append("--quiet")
            if args.json:
                words.append("--json")
            return shlex.join(words + (["--restart", str(restart_file)] if restart_file else []))

        try:
            result = run_interacting(scenario, restart=restart, restart_model=restart_model,
                                     checkpoint=checkpoint, checkpoint_every=args.checkpoint_every,
                                     progress=progress)
        except KeyboardInterrupt:
            if checkpoint_path.exists():
                print(f"topoedge: interrupted; no results folder was written; the states so far are in "
                      f"{checkpoint_path}. Continue with: {again()}", file=sys.stderr)
            else:
                print("topoedge: interrupted before the first checkpoint; nothing was written", file=sys.stderr)
            return 130
        except ValueError as err:  # a restart file made for another model, of the wrong shape or charge
            if continuing and args.restart is None:
                raise ConfigError(f"{err} (the checkpoint {checkpoint_path} of an interrupted run; pass --force "
                                  "to start over)") from None
            raise ConfigError(str(err)) from None
    else:
        from ..workflows import run_scenario  # imports kwant: only once the input is valid

        result = run_scenario(scenario, progress=progress)

    import matplotlib

    matplotlib.use("Agg")
    from ..plotting import RUN_FIGURES

    def saver(make):
        return figure_writer(make, result)

    figures = dict(RUN_FIGURES) if result.spectrum is not None else {}
    if result.interacting is not None:
        figures.update(interacting_figures(result))
    write_run(out, result, {name: saver(make) for name, make in figures.items()}, force=args.force)
    if checkpoint_path is not None:
        checkpoint_path.unlink(missing_ok=True)  # its states are in the folder's restart.h5
    if args.json:
        print(dumps(result.summary, indent=2))
    say(args, format_summary(result.summary))
    files = ["summary.json"] + (["spectrum.h5"] if result.spectrum is not None else [])
    if result.interacting is not None:
        files += ["hartree_fock.h5", "restart.h5"]
    tables = sorted(p.name for p in out.glob("*.csv"))
    say(args, f"  results      {out}/ ({', '.join(files + list(figures))}; tables {', '.join(tables)})")
    if result.interacting is not None:
        failed = [f"{sc.width:g}" for sc in (result.interacting.main, *result.interacting.scan) if sc.best is None]
        if failed:
            print(f"topoedge: not converged for background width(s) {', '.join(failed)} a; continue with: "
                  f"{again(out / 'restart.h5', out.with_name(out.name + '-continued'))} (and a larger "
                  "interaction.max_iter if needed)", file=sys.stderr)
            return EXIT_NOT_CONVERGED
    return 0


def interacting_figures(result) -> dict:
    """Figure makers of a self-consistent run: profiles and convergence, and the width scan."""
    from ..plotting import edge_scan_figure, hartree_fock_figure

    run = result.interacting
    title = (f"{result.scenario.title or 'scenario'}: flux {result.scenario.lattice.flux}, "
             f"U_C = {run.interaction.coulomb:.3g} t, background w = {run.main.width:g} a")
    figures = {}
    main = run.main
    best = main.best or min(main.runs, key=lambda r: r.history["residual"][-1])

    def profiles(_):
        return hartree_fock_figure(best, flux=abs(float(result.scenario.lattice.flux)), spectrum=result.spectrum,
                                   edges=result.edges, fermi_energy=main.fermi_energy, title=title,
                                   runs=main.runs)

    figures["hartree_fock.png"] = profiles
    if run.scan:
        def scan(_):
            return edge_scan_figure(result.summary.interaction.scan, magnetic_length=run.magnetic_length,
                                    title=f"{result.scenario.title or 'scenario'}\nself-consistent bottom edge "
                                          f"against the background width (flux {result.scenario.lattice.flux}, "
                                          f"U_C = {run.interaction.coulomb:.3g} t)")

        figures["edge_scan.png"] = scan
    return figures


def add_arguments(parser) -> None:
    """The arguments of ``topoedge run`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    parser.add_argument("config", nargs="?", default=None, help=f"scenario TOML file or the name of a shipped scenario (default: {DEFAULT_SCENARIO.stem})")
    parser.add_argument("--out", type=Path, default=None,
                        help="results folder (default: results/<scenario>-<date-time>)")
    parser.add_argument("--force", action="store_true", help="replace an existing results folder")
    parser.add_argument("--checkpoint-every", type=float, default=CHECKPOINT_EVERY, metavar="SECONDS",
                        help="with [interaction]: store the self-consistent states in <out>.checkpoint.h5 at most "
                             "this often while iterating, and after every start (default 20)")
    parser.add_argument("--restart", type=Path, default=None, metavar="FILE",
                        help="with [interaction]: continue from a restart.h5 of a results folder or the "
                             "<out>.checkpoint.h5 of an interrupted run")


#: ``topoedge run`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="compute a scenario and write a results folder", add_arguments=add_arguments, run=cmd_run)
