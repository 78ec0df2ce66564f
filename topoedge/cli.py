"""The ``topoedge`` command line.

``topoedge run [CONFIG]``    ribbon spectrum of a scenario (self-consistent with [interaction]), results folder
``topoedge bench``           side-by-side timings against kwant
``topoedge butterfly``       flux-energy spectrum with gap Chern numbers, results folder
``topoedge sweep SWEEP``     a scenario over a grid of parameters (resumable; local or dask), table and maps

Bad input (configuration, overrides, an existing results folder) ends with
one line on standard error and exit status 2, before anything is written.
"""

from __future__ import annotations

import argparse
import io
import json
import sys
import time
import warnings
from pathlib import Path

from . import __version__
from .scenario import DEFAULT_SCENARIO, ConfigError, find_shipped, lattice_scenario, load_scenario

EXIT_BAD_INPUT = 2
#: A self-consistent run that wrote its results but did not converge everywhere.
EXIT_NOT_CONVERGED = 1


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, status 2, like every other bad input
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n")


def _parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="topoedge", description="Bulk topology and edge modes of lattice quantum-Hall ribbons.")
    parser.add_argument("--version", action="version", version=f"topoedge {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)

    common = _Parser(add_help=False)
    common.add_argument(
        "--set", dest="overrides", action="append", default=[], metavar="SECTION.KEY=VALUE",
        help="override one configuration key (repeatable), e.g. --set ribbon.edge.width=6",
    )
    common.add_argument("--json", action="store_true",
                        help="print the summary as JSON on stdout, and nothing else")
    common.add_argument("--quiet", action="store_true", help="print nothing but errors")

    run = sub.add_parser("run", parents=[common], help="compute a scenario and write a results folder")
    run.add_argument("config", nargs="?", default=None, help=f"scenario TOML file or the name of a shipped scenario (default: {DEFAULT_SCENARIO.stem})")
    run.add_argument("--out", type=Path, default=None,
                     help="results folder (default: results/<scenario>-<date-time>)")
    run.add_argument("--force", action="store_true", help="replace an existing results folder")
    run.add_argument("--checkpoint-every", type=float, default=20.0, metavar="SECONDS",
                     help="with [interaction]: store the self-consistent states in <out>.checkpoint.h5 at most "
                          "this often while iterating, and after every start (default 20)")
    run.add_argument("--restart", type=Path, default=None, metavar="FILE",
                     help="with [interaction]: continue from a restart.h5 of a results folder or the "
                          "<out>.checkpoint.h5 of an interrupted run")

    bench = sub.add_parser("bench", parents=[common],
                           help="side-by-side timings: ribbon spectrum vs kwant.physics.Bands, Chern numbers "
                                "vs bare diagonalisation, Hall bar with MUMPS vs SciPy")
    bench.add_argument("config", nargs="?", default=None, help="scenario TOML file (default: the shipped default)")
    bench.add_argument("--width", type=int, default=400, help="sites across the ribbon per spin (default 400)")
    bench.add_argument("--k-points", type=int, default=200, help="number of momenta (default 200)")
    bench.add_argument("--window", type=float, default=0.5,
                       help="half-width of the energy window around E_F, units of t (default 0.5)")
    bench.add_argument("--chern-q", type=int, default=50,
                       help="Chern benchmark at flux 1/q, spinless (default 50)")
    bench.add_argument("--parts", default="ribbon,chern,landau,gaas,hallbar,hf,sweep",
                       help="comma-separated benchmarks to run: ribbon, chern, landau, gaas, hallbar, hf, sweep "
                            "(default all)")
    bench.add_argument("--landau-q", default="200,1000,2000", metavar="Q,...",
                       help="landau part: fluxes 1/q of the Landau-level Chern benchmark (default 200,1000,2000); "
                            "the dense route runs at the smallest (at most 200), half and a quarter of it (at least 12)")
    bench.add_argument("--gaas", default=None, metavar="SCENARIO",
                       help="gaas part: the GaAs scenario run at 1 T and 10 T (default: the shipped gaas-1T)")
    bench.add_argument("--sweep", default=None, metavar="SWEEP",
                       help="sweep file of the sweep part, run with 1 and with 2 workers "
                            "(default: the shipped nu2-width-zeeman)")
    bench.add_argument("--hf-size", default="200x256", metavar="WxNK",
                       help="Hartree-Fock benchmark: rows per spin x momenta (default 200x256)")
    bench.add_argument("--bars", default=None, metavar="LxW,...",
                       help="Hall-bar sizes in sites for the hallbar part (default: the scenario's "
                            "bar and the bars 2x and 4x larger)")

    bar = sub.add_parser("hallbar", parents=[common],
                         help="Hall and longitudinal resistance of the scenario's Hall bar over a range of E_F")
    bar.add_argument("config", nargs="?", default=None, help="scenario TOML file (default: the shipped default)")
    bar.add_argument("--energies", default=None, metavar="LO:HI:N",
                     help="E_F from LO to HI (t) in N steps (default: from the band bottom to 1.5 (E_F - bottom) above it, 41 steps)")
    bar.add_argument("--fields", default=None, metavar="LO:HI:N",
                     help="instead of E_F, scan the field from LO to HI tesla in N steps at fixed E_F "
                          "(scenarios with [material] and [field])")
    bar.add_argument("--jobs", type=int, default=None,
                     help="with --fields: worker processes for the bulk Chern numbers (default: all cores)")
    bar.add_argument("--out", type=Path, default=None, help="results folder (default: results/hallbar-<date-time>)")
    bar.add_argument("--force", action="store_true", help="replace an existing results folder")

    sweep = sub.add_parser("sweep", parents=[common],
                           help="run a scenario over a grid of parameter values (resumable), with table and maps")
    sweep.add_argument("sweep_file", metavar="SWEEP", help="sweep TOML file (base scenario and axes)")
    sweep.add_argument("--out", type=Path, default=None,
                       help="sweep folder (default: sweeps/<sweep file stem>); running again continues it")
    sweep.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    sweep.add_argument("--executor", choices=("local", "dask"), default=None,
                       help="local: worker processes here (default); dask: a dask.distributed LocalCluster "
                            "(the default with --scheduler)")
    sweep.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="run on the dask.distributed scheduler at ADDRESS (e.g. tcp://10.0.0.5:8786)")
    sweep.add_argument("--retry-failed", action="store_true", help="run again the points recorded as failed")

    fly = sub.add_parser("butterfly", parents=[common],
                         help="flux-energy spectrum with every gap labelled by its Chern number")
    fly.add_argument("config", nargs="?", default=None,
                     help="scenario TOML file for spin.enabled, spin.zeeman and lattice.onsite "
                          f"(default: {DEFAULT_SCENARIO.name}; lattice.flux is not used)")
    fly.add_argument("--q-max", type=int, default=40,
                     help="largest flux denominator q, 1 to 200 (default 40)")
    fly.add_argument("--min-gap", type=float, default=0.02,
                     help="label and draw only gaps wider than this, units of t (default 0.02, "
                          "about 2 pixels of the figure)")
    fly.add_argument("--jobs", type=int, default=None,
                     help="worker processes (default: all cores)")
    fly.add_argument("--full-grid", action="store_true",
                     help="Chern numbers on the 2q x 2q grid of the run command instead of 2q x 8 (slower)")
    fly.add_argument("--out", type=Path, default=None,
                     help="results folder (default: results/butterfly-<date-time>)")
    fly.add_argument("--force", action="store_true", help="replace an existing results folder")
    return parser


def _say(args, text: str) -> None:
    """Human-readable output; --json keeps stdout for the JSON document alone."""
    if not (args.quiet or args.json):
        print(text, flush=True)


def _default_out(config_path: str | None) -> Path:
    stem = Path(config_path).stem if config_path else DEFAULT_SCENARIO.stem
    base = Path("results") / f"{stem}-{time.strftime('%Y%m%d-%H%M%S')}"
    out, n = base, 1
    while out.exists():
        n += 1
        out = base.with_name(f"{base.name}-{n}")
    return out


def _cmd_run(args) -> int:
    from .outputs.results import check_destination, format_summary, read_restart, write_run

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
    out = args.out if args.out is not None else _default_out(args.config)
    check_destination(out, force=args.force)
    from .util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    checkpoint_path = None
    if scenario.interaction.enabled:
        from .workflows.interacting import run_interacting  # imports kwant: only once the input is valid
        from .outputs.results import write_restart

        checkpoint_path = out.with_name(out.name + ".checkpoint.h5")
        continuing = args.restart is not None and checkpoint_path.exists() and checkpoint_path.samefile(args.restart)
        if checkpoint_path.exists() and not (args.force or continuing):
            raise ConfigError(f"checkpoint '{checkpoint_path}' of an earlier interrupted run exists; continue it "
                              f"with --restart {checkpoint_path}, or pass --force to replace it")
        checkpoint_path.parent.mkdir(parents=True, exist_ok=True)

        def checkpoint(states, model):
            write_restart(checkpoint_path, states, model)

        def again(restart_file):
            import shlex

            words = ["topoedge", "run", str(args.config or DEFAULT_SCENARIO)]
            words += [w for item in args.overrides for w in ("--set", item)]
            return shlex.join(words + ["--restart", str(restart_file)])

        try:
            result = run_interacting(scenario, restart=restart, restart_model=restart_model,
                                     checkpoint=checkpoint, checkpoint_every=args.checkpoint_every,
                                     progress=progress.bar)
        except KeyboardInterrupt:
            if checkpoint_path.exists():
                print(f"topoedge: interrupted; no results folder was written. Continue with: "
                      f"{again(checkpoint_path)}", file=sys.stderr)
            else:
                print("topoedge: interrupted before the first checkpoint; nothing was written", file=sys.stderr)
            return 130
        except ValueError as err:  # a restart file made for another model, of the wrong shape or charge
            raise ConfigError(str(err)) from None
    else:
        from .workflows.run import run_scenario  # imports kwant: only once the input is valid

        result = run_scenario(scenario, progress=progress)

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .plotting.run import RUN_FIGURES

    def saver(make):
        def save(path: Path) -> None:
            fig = make(result)
            try:
                fig.savefig(path, dpi=150)
            finally:
                plt.close(fig)

        return save

    figures = dict(RUN_FIGURES) if result.spectrum is not None else {}
    if result.interacting is not None:
        figures.update(_interacting_figures(result))
    write_run(out, result, {name: saver(make) for name, make in figures.items()}, force=args.force)
    if checkpoint_path is not None:
        checkpoint_path.unlink(missing_ok=True)  # its states are in the folder's restart.h5
    if args.json:
        print(json.dumps(result.summary, indent=2))
    _say(args, format_summary(result.summary))
    files = ["summary.json"] + (["spectrum.h5"] if result.spectrum is not None else [])
    if result.interacting is not None:
        files += ["hartree_fock.h5", "restart.h5"]
    _say(args, f"  results      {out}/ ({', '.join(files + list(figures))})")
    if result.interacting is not None:
        failed = [f"{sc.width:g}" for sc in (result.interacting.main, *result.interacting.scan) if sc.best is None]
        if failed:
            print(f"topoedge: not converged for background width(s) {', '.join(failed)} a; continue with: "
                  f"{again(out / 'restart.h5')} (and a larger interaction.max_iter if needed)", file=sys.stderr)
            return EXIT_NOT_CONVERGED
    return 0


def _interacting_figures(result) -> dict:
    """Figure makers of a self-consistent run: profiles and convergence, and the width scan."""
    from .plotting.run import edge_scan_figure, hartree_fock_figure

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
            return edge_scan_figure(result.summary["interaction"]["scan"], magnetic_length=run.magnetic_length,
                                    title=f"{result.scenario.title or 'scenario'}\nself-consistent bottom edge "
                                          f"against the background width (flux {result.scenario.lattice.flux}, "
                                          f"U_C = {run.interaction.coulomb:.3g} t)")

        figures["edge_scan.png"] = scan
    return figures


def _cmd_bench(args) -> int:
    from .workflows.bench import bench_chern, bench_ribbon

    parts = [p.strip() for p in args.parts.split(",") if p.strip()]
    unknown = sorted(set(parts) - {"ribbon", "chern", "landau", "gaas", "hallbar", "hf", "sweep"})
    if unknown or not parts:
        raise ConfigError(f"bench --parts: got {args.parts!r}; expected a comma-separated subset of "
                          "ribbon, chern, landau, gaas, hallbar, hf, sweep")
    try:
        landau_qs = [int(x) for x in args.landau_q.split(",")]
        assert landau_qs and all(24 <= q <= 20000 for q in landau_qs)
    except (ValueError, AssertionError):
        raise ConfigError(f"bench --landau-q: got {args.landau_q!r}; expected comma-separated integers "
                          "from 24 to 20000 (e.g. 200,1000,2000)") from None
    gaas_file = find_shipped(args.gaas or "gaas-1T")
    if "gaas" in parts:
        gaas_scenario = load_scenario(gaas_file)
        if gaas_scenario.field.b_tesla is None:
            raise ConfigError(f"bench --gaas: {gaas_file} has no [field] section; expected a scenario in "
                              "physical units (e.g. the shipped gaas-1T)")
    sweep_file = find_shipped(args.sweep or "nu2-width-zeeman", "sweeps")
    if "sweep" in parts:
        from .workflows.sweep import load_sweep

        load_sweep(sweep_file)  # a malformed sweep file is refused before anything runs
    try:
        hf_width, hf_nk = (int(n) for n in args.hf_size.lower().split("x"))
        assert hf_width >= 8 and hf_nk >= 8 and hf_nk % 4 == 0
    except (ValueError, AssertionError):
        raise ConfigError(f"bench --hf-size: got {args.hf_size!r}; expected WxNK with W >= 8 rows and "
                          "NK >= 8 momenta, a multiple of 4 (e.g. 200x256)") from None
    bars = None
    if args.bars is not None:
        try:
            bars = [tuple(int(n) for n in item.lower().split("x")) for item in args.bars.split(",")]
            assert bars and all(len(b) == 2 and b[0] >= 16 and b[1] >= 8 for b in bars)
        except (ValueError, AssertionError):
            raise ConfigError(f"bench --bars: got {args.bars!r}; expected comma-separated LENGTHxWIDTH "
                              "sizes in sites, length >= 16 and width >= 8 (e.g. 80x40,160x80)") from None
    if args.width < 2 or args.k_points < 2 or not args.window > 0 or args.chern_q < 2:
        raise ConfigError(
            f"bench: got --width {args.width}, --k-points {args.k_points}, --window {args.window}, "
            f"--chern-q {args.chern_q}; expected width >= 2, k-points >= 2, window > 0 and chern-q >= 2"
        )
    scenario = load_scenario(args.config, args.overrides)
    _require_support(scenario, "bench")
    report = {}
    if "ribbon" in parts:
        _say(args, f"ribbon benchmark: W = {args.width} sites per spin, {args.k_points} k points "
                   f"(kwant.physics.Bands and topoedge on the same finalized ribbon) ...")
        report["ribbon"] = bench_ribbon(scenario, width=args.width, k_points=args.k_points, window=args.window)
        r = report["ribbon"]
        _say(args, f"  solver: {r['solver']}; {r['orbitals']} orbitals; "
                   f"window {r['window_t'][0]:.4f} .. {r['window_t'][1]:.4f} t "
                   f"({r['states_in_window']} states over all k)")
        _say(args, f"  {'variant':44s} {'seconds':>9s}")
        for key, value in r["seconds"].items():
            _say(args, f"  {key:44s} {value:9.3f}")
        _say(args, f"  {'ratio (kwant / topoedge)':44s} {'x':>9s}")
        for key, value in r["ratios"].items():
            _say(args, f"  {key:44s} {value:9.1f}")
        d = r["max_energy_difference_t"]
        _say(args, f"  largest |E_topoedge - E_kwant|: all {d['all']:.2e} t, window {d['window']:.2e} t")
    if "chern" in parts:
        _say(args, f"Chern benchmark: flux 1/{args.chern_q}, spinless, whole computation against the "
                   "bare batched diagonalisation of the same grid ...")
        report["chern"] = c = bench_chern(args.chern_q)
        s = c["seconds"]
        _say(args, f"  {c['bands']} bands, {c['grid'][0]}x{c['grid'][1]} grid, {c['open_gaps']} open gaps; "
                   f"TKNN agree: {c['tknn_agree']}; finer grid agrees: {c['refined_agree']}")
        _say(args, f"  bare diagonalisation {s['bare_diagonalisation']:.3f} s, whole Chern computation "
                   f"{s['chern_whole']:.3f} s: ratio {c['ratio_whole_over_bare']:.2f}")
        _say(args, f"  (convergence check on the 1.5x finer grid: {s['chern_refined_grid']:.3f} s)")
    if "landau" in parts:
        from .workflows.bench import bench_landau

        _say(args, "Landau-level Chern benchmark: the lowest 4 levels at flux 1/q (spinless), the Landau-level "
                   "solver against the dense route on the same q x 8 grid ...")
        smallest = min(landau_qs)
        top = smallest if smallest <= 200 else 200      # the dense route beyond ~200 takes minutes
        report["landau"] = r = bench_landau(landau_qs, dense_qs=sorted({max(12, top // 4), max(16, top // 2), top}))
        _say(args, f"  {'q':>6s} {'grid':>10s} {'landau s':>9s} {'peak MB':>8s} {'dense s':>10s} "
                   f"{'':12s} {'ratio':>8s}  gaps (r, C), TKNN")
        for row in r["rows"]:
            _say(args, f"  {row['q']:6d} {row['grid'][0]:>5d}x{row['grid'][1]:<4d} {row['landau_seconds']:9.3f} "
                       f"{row['peak_rss_mb']:8.0f} {row['dense_seconds']:10.3g} {row['dense']:12s} "
                       f"{row['ratio_dense_over_landau']:8.0f}  {row['gaps']} {'yes' if row['tknn'] else 'NO'}"
                       + ("" if row["dense_gaps_equal"] is None else
                          f"; dense gaps equal: {'yes' if row['dense_gaps_equal'] else 'NO'}"))
        _say(args, f"  dense time grows as q^{r['dense_exponent']:.2f} (fitted to the measured points)")
    if "gaas" in parts:
        from .workflows.bench import bench_gaas

        _say(args, f"GaAs benchmark: whole `topoedge run {gaas_file}` processes at 1 T and 10 T ...")
        report["gaas"] = r = bench_gaas(gaas_file)
        for row in r["rows"]:
            _say(args, f"  {row['b_tesla']:5g} T, n = {row['density_cm2']:.1e} cm^-2 (nu = {row['filling']:.2f}): "
                       f"{row['seconds']:6.2f} s end to end ({row['compute_seconds']:.2f} s computing); flux "
                       f"{row['flux']}, a = {row['lattice_constant_nm']:.3g} nm = {row['a_over_lb']:.3f} l_B, field "
                       f"error {100 * row['b_relative_error']:+.3f} %, {row['solver']} solver; C = {row['chern']}, "
                       f"edges {row['edges']}, Streda {row['streda']:.6f}, agree: "
                       f"{'yes' if row['routes_agree'] and row['bulk_edge_agree'] else 'NO'}")
    if "hallbar" in parts:
        from .workflows.bench import bench_hallbar

        _say(args, "Hall-bar benchmark: S-matrix with kwant's MUMPS solver against SciPy's sparse solver "
                   "(same bar, same E_F) ...")
        try:
            report["hallbar"] = h = bench_hallbar(scenario, bars)
        except ValueError as err:
            raise ConfigError(f"bench hallbar: {err}") from None
        _say(args, f"  flux {h['flux']}, E_F = {h['fermi_energy_t']:.4f} t; kwant's default solver: "
                   f"{h['default_solver']}")
        if not h["mumps_available"]:
            _say(args, "  MUMPS: not in this kwant build (python3 tasks.py setup --mumps adds it); "
                       "SciPy's solver timed alone")
        _say(args, f"  {'bar (sites)':14s} {'orbitals':>8s}  solver                seconds  sum rule  max |dG - dG_scipy|")
        for row in h["sizes"]:
            for i, (name, sec) in enumerate(row["seconds"].items()):
                size = f"{row['length']:>5d} x {row['width']:<6d} {row['orbitals']:8d}" if i == 0 else " " * 23
                _say(args, f"  {size}  {name:20s} {sec:8.3f}  {row['sum_rule_violation'][name]:8.1e}  "
                           f"{row['max_conductance_difference'][name]:8.1e}")
            ratio = (f"; scipy / mumps_amd = {row['ratio_scipy_over_mumps_amd']:.2f}x"
                     if "ratio_scipy_over_mumps_amd" in row else "")
            _say(args, f"  {'':23s}  R_xy = {row['r_xy']:.8f} h/e^2{ratio}")
    if "hf" in parts:
        from .workflows.bench import bench_hf

        _say(args, f"Hartree-Fock benchmark: W = {hf_width} rows per spin, {hf_nk} k points, flux 1/40, "
                   "nu = 1, U_C = 0.4 t; DIIS against linear mixing ...")
        report["hf"] = r = bench_hf(width=hf_width, k_points=hf_nk)
        one = r["one_iteration_seconds"]
        _say(args, f"  one iteration: build H (Hartree + FFT exchange) {one['build_hamiltonian']:.3f} s, "
                   f"diagonalise + density matrix {one['diagonalise_and_density']:.3f} s")
        for name, run in r["runs"].items():
            _say(args, f"  {name:7s} {run['iterations']:4d} iterations, {run['seconds']:8.2f} s, "
                       f"converged: {run['converged']}, E = {run['energy_t']:.10f} t per cell")
        _say(args, f"  iterations linear / DIIS = {r['iteration_ratio_linear_over_diis']:.2f}; "
                   f"|E_linear - E_DIIS| = {r['energy_difference_t']:.1e} t")
        _say(args, "  exchange build time against N_k log N_k W^2:")
        for row in r["exchange_scaling"]:
            _say(args, f"    W = {row['width']:4d}, N_k = {row['k_points']:4d}: {row['build_seconds']:7.3f} s, "
                       f"time ratio {row['time_ratio']:5.2f}, model ratio {row['model_ratio']:5.2f}")
    if "sweep" in parts:
        from .workflows.bench import bench_sweep

        _say(args, f"sweep benchmark: {sweep_file} from nothing, 1 worker process against 2 ...")
        report["sweep"] = r = bench_sweep(sweep_file)
        _say(args, f"  {r['points']} points ({r['failed']} failed): 1 worker {r['seconds']['1']:.1f} s, "
                   f"2 workers {r['seconds']['2']:.1f} s: ratio {r['ratio']:.2f}; tables identical: "
                   f"{r['tables_identical']}")
    if args.json:
        print(json.dumps(report, indent=2))
    return 0


def _scan_range(text: str | None, option: str, unit: str) -> tuple[float, float, int] | None:
    if text is None:
        return None
    parts = text.split(":")
    try:
        lo, hi, n = float(parts[0]), float(parts[1]), int(parts[2])
        assert len(parts) == 3 and lo < hi and n >= 2
    except (ValueError, IndexError, AssertionError):
        raise ConfigError(f"hallbar {option}: got {text!r}; expected LO:HI:N with LO < HI ({unit}) and N >= 2 steps")
    return lo, hi, n


def _require_support(scenario, command: str) -> None:
    """Refuse what a command would silently drop: a lattice (or a Rashba term) it does not support."""
    from .models.lattices import lattice

    entry = lattice(scenario.lattice.kind)
    if command not in entry.supports:
        raise ConfigError(f"lattice.kind: got {scenario.lattice.kind!r}; `topoedge {command}` is built for the "
                          "square lattice only; expected 'square'")
    if scenario.spin.rashba != 0:
        raise ConfigError(f"spin.rashba: got {scenario.spin.rashba!r}; `topoedge {command}` has no Rashba term "
                          "yet; expected 0")


def _cmd_hallbar(args) -> int:
    """Scan of the Hall bar over E_F or B into a results folder (summary, HDF5, figure)."""
    import numpy as np

    if args.energies is not None and args.fields is not None:
        raise ConfigError("hallbar: got both --energies and --fields; expected one scan axis")
    window = _scan_range(args.energies, "--energies", "t")
    fields = _scan_range(args.fields, "--fields", "tesla")
    scenario = load_scenario(args.config, args.overrides)
    _require_support(scenario, "hallbar")
    if fields is not None:
        if scenario.field.b_tesla is None:
            raise ConfigError("hallbar --fields: the scenario has no [field] section; expected a scenario "
                              "in physical units ([material] and [field], e.g. the shipped gaas-5T)")
        if args.jobs is not None and args.jobs < 1:
            raise ConfigError(f"hallbar --jobs: got {args.jobs}; expected at least 1 worker")
        if fields[0] * fields[1] <= 0:
            raise ConfigError(f"hallbar --fields: got {args.fields!r}; expected a range of one sign without 0 T")
    out = args.out if args.out is not None else _default_out(f"hallbar-{Path(args.config or DEFAULT_SCENARIO).stem}")
    from .outputs.results import check_destination, write_folder, write_json

    check_destination(out, force=args.force)
    from .workflows.run import bulk_chern, fermi_level, hallbar_field_scan, hallbar_scan, replace_chern_refine

    model, _ = lattice_scenario(scenario)
    from .util.progress import Progress, progress_mode

    progress = Progress(progress_mode(quiet=args.quiet))
    if fields is not None:
        try:
            scan = hallbar_field_scan(scenario, np.linspace(*fields), jobs=args.jobs, progress=progress)
        except ValueError as err:
            raise ConfigError(f"hallbar --fields: {err}") from None
        axis, units = "b_tesla", ("B in tesla along +z for B > 0 (b_lattice_tesla: the field of the lattice flux, "
                                  "within field.tolerance); E_F fixed "
                                  "(fermi_t in t, fermi_mev above the band bottom)")
    else:
        if window is None:
            chern, _, _ = bulk_chern(replace_chern_refine(model))
            ef, _ = fermi_level(model, chern)
            bottom = min(b.energy_min for b in chern.bands)
            window = (bottom, ef + 1.5 * (ef - bottom), 41)
        scan = hallbar_scan(scenario, np.linspace(*window), progress=progress)
        axis, units = "energy", "E_F in t"
    from .scenario.units import VON_KLITZING

    for key in ("r_xy", "r_xx"):  # the same resistances in ohm (R_K = h/e^2, CODATA)
        scan[f"{key}_ohm"] = [None if v is None or v != v else v * VON_KLITZING for v in scan[key]]
    summary = {"title": scenario.title, "source": scenario.source, "config": scenario.to_dict(),
               "units": f"{units}; r_xy, r_xx in h/e^2 (per spin: r_xy_up, ...), r_xy_ohm, r_xx_ohm in ohm; "
                        "R_xy = -1/sigma_xy; r_xy_bulk = -1/C from the bulk Chern sum", **scan}
    summary = json.loads(json.dumps(summary).replace("NaN", "null"))

    import matplotlib

    matplotlib.use("Agg")
    import h5py
    import matplotlib.pyplot as plt

    from .plotting.run import hallbar_figure

    where = (f"flux {model.lattice.flux}" if fields is None
             else f"E_F = {scan['fermi_mev']:.3f} meV above the band bottom")

    def figure(path: Path) -> None:
        fig = hallbar_figure(scan, axis=axis, title=f"{scenario.title or 'Hall bar'}: {model.hallbar.length}x"
                             f"{model.hallbar.width} sites, {where}")
        try:
            fig.savefig(path, dpi=150)
        finally:
            plt.close(fig)

    def h5(path: Path) -> None:
        with h5py.File(path, "w") as f:
            for key, value in scan.items():
                if key == "errors" or not isinstance(value, list):
                    continue
                if key == "flux":
                    f.create_dataset(key, data=np.array(value, dtype="S"))
                else:
                    f.create_dataset(key, data=np.array([np.nan if v is None else v for v in value], dtype=float))
            for key in ("fermi_t", "fermi_mev"):
                if key in scan:
                    f.attrs[key] = scan[key]
            f.attrs["scenario_json"] = json.dumps(scenario.to_dict(), sort_keys=True)
            f.attrs["units"] = summary["units"]

    write_folder(out, {"summary.json": write_json(summary), "hallbar.h5": h5, "hallbar.png": figure}, force=args.force)
    if args.json:
        print(json.dumps(summary, indent=2))
    xs = scan[axis]
    ok = sum(1 for r in scan["r_xy"] if r == r)
    what = "Fermi energies" if fields is None else "fields"
    unit = "t" if fields is None else "T"
    _say(args, f"topoedge hallbar: {len(xs)} {what} from {xs[0]:.4f} to {xs[-1]:.4f} {unit}"
               + ("" if fields is None else f" at {where}")
               + f", {ok} solved, {len(scan['errors'])} without open channels in every lead")
    _say(args, f"  results      {out}/ (summary.json, hallbar.h5, hallbar.png)")
    return 0


def _cmd_sweep(args) -> int:
    """Run the points of a sweep file not run yet, then write the table and figures."""
    from .workflows.sweep import gather, load_sweep, run_sweep, sweep_figures, write_table

    if args.overrides:
        raise ConfigError("sweep: --set is not used by sweeps; expected the values in the sweep file "
                          "(its [scenario] or an [[axis]])")
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"sweep --jobs: got {args.jobs}; expected at least 1 worker")
    if args.scheduler is not None and args.executor == "local":
        raise ConfigError("sweep --scheduler: given with --executor local; expected --executor dask or no "
                          "--executor (a scheduler implies dask)")
    executor = "dask" if args.scheduler is not None else (args.executor or "local")
    sweep = load_sweep(args.sweep_file)
    out = args.out if args.out is not None else Path("sweeps") / Path(args.sweep_file).stem
    if out.exists() and not out.is_dir():
        raise ConfigError(f"sweep --out: '{out}' exists and is not a folder; expected a folder")
    npoints = len(sweep.points())
    _say(args, f"topoedge sweep: {sweep.title or args.sweep_file}: {npoints} points "
               f"({' x '.join(f'{a.key} [{len(a.values)}]' for a in sweep.axes)}, {sweep.mode}), "
               f"executor {executor}" + (f" at {args.scheduler}" if args.scheduler else ""))
    progress = sys.stderr.isatty() and not args.quiet
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

    from .workflows.sweep import _write_atomic

    names = []
    for name, fig in sweep_figures(sweep, rows).items():
        try:
            for ext in ("png", "pdf"):
                buffer = io.BytesIO()
                fig.savefig(buffer, format=ext, dpi=150)
                _write_atomic(out / f"{name}.{ext}", buffer.getvalue())
                names.append(f"{name}.{ext}")
        finally:
            plt.close(fig)
    failed = [r for r in rows if r["status"] == "failed"]
    report = {**stats, "out": str(out), "failed_points": [{k: r[k] for k in ("key", "error", *(
        a.key for a in sweep.axes))} for r in failed], "figures": names}
    if args.json:
        print(json.dumps(report, indent=2, default=str))
    _say(args, f"  points       {stats['total']}: {stats['skipped']} finished before, {stats['computed']} computed "
               f"now ({stats['failed']} failed) in {stats['seconds']:.1f} s")
    for r in failed[:5]:
        where = ", ".join(f"{a.key} = {r[a.key]}" for a in sweep.axes)
        _say(args, f"  failed       {where}: {r['error']}")
    if len(failed) > 5:
        _say(args, f"               ... {len(failed) - 5} more (column 'error' of table.csv)")
    _say(args, f"  results      {out}/ (points/, table.h5, table.csv{''.join(', ' + n for n in names)})")
    return 0


def _cmd_butterfly(args) -> int:
    """Flux-energy spectrum of the scenario's model (spin, Zeeman, on-site) into a results folder."""
    import math

    from .workflows.butterfly import Q_MAX_LIMIT

    if not 1 <= args.q_max <= Q_MAX_LIMIT:
        raise ConfigError(f"butterfly --q-max: got {args.q_max}; expected an integer from 1 to {Q_MAX_LIMIT}")
    if not (args.min_gap > 0 and math.isfinite(args.min_gap)):
        raise ConfigError(f"butterfly --min-gap: got {args.min_gap:g}; expected a finite gap width > 0 (units of t)")
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"butterfly --jobs: got {args.jobs}; expected at least 1 worker process")
    scenario = load_scenario(args.config, args.overrides)
    _require_support(scenario, "butterfly")
    if args.out is not None:
        out = args.out
    else:
        base = out = Path("results") / f"butterfly-{time.strftime('%Y%m%d-%H%M%S')}"
        n = 1
        while out.exists():
            n += 1
            out = base.with_name(f"{base.name}-{n}")
    from .outputs.results import check_destination

    check_destination(out, force=args.force)
    from .workflows.butterfly import butterfly_summary, compute_butterfly, format_butterfly, write_butterfly

    # With [field], the Zeeman splitting (in t) is the one at the scenario's
    # field, kept the same at every flux of the spectrum.
    model, _ = lattice_scenario(scenario)
    result = compute_butterfly(
        args.q_max, spin=model.spin.enabled, zeeman=model.spin.zeeman, onsite=model.lattice.onsite,
        jobs=args.jobs, full_grid=args.full_grid, progress=sys.stdout.isatty() and not args.quiet,
    )
    summary = butterfly_summary(result, min_gap=args.min_gap, scenario=scenario)
    write_butterfly(out, result, summary, force=args.force)
    if args.json:
        print(json.dumps(summary, indent=2))
    _say(args, format_butterfly(summary, out))
    return 0


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``topoedge`` command."""
    args = _parser().parse_args(argv)
    # kwant warns at import that its sparse solver falls back to SciPy; the
    # ribbon and bulk calculations do not use that solver.
    warnings.filterwarnings("ignore", message="MUMPS is not available")
    from .util.budget import MemoryBudgetError
    from .solvers.chern import GapClosedError
    from .solvers.landau import LandauSolverError
    from .outputs.results import RestartFileError, ResultsExistError

    try:
        commands = {"run": _cmd_run, "bench": _cmd_bench, "butterfly": _cmd_butterfly, "hallbar": _cmd_hallbar,
                    "sweep": _cmd_sweep}
        return commands[args.command](args)
    except (ConfigError, ResultsExistError, GapClosedError, RestartFileError, MemoryBudgetError,
            LandauSolverError) as err:
        print(f"topoedge: error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as err:  # e.g. an --out whose parent is a file or read-only
        where = f" '{err.filename}'" if err.filename else ""
        print(f"topoedge: error: cannot write results{where}: {err.strerror or err}; "
              "expected a writable --out folder", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("topoedge: interrupted; nothing was written", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
