"""`topoedge bench`: side-by-side benchmarks (timings measured in one run)."""

from __future__ import annotations

import json
from ..scenario import ConfigError, find_shipped, load_scenario
from .common import Command, require_support, say


def cmd_bench(args) -> int:
    from ..workflows.bench import bench_chern, bench_ribbon

    parts = [p.strip() for p in args.parts.split(",") if p.strip()]
    known = ("ribbon", "chern", "landau", "gaas", "hallbar", "hf", "sweep", "marker", "levels")
    unknown = sorted(set(parts) - set(known))
    if unknown or not parts:
        raise ConfigError(f"bench --parts: got {args.parts!r}; expected a comma-separated subset of "
                          + ", ".join(known))
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
        from ..workflows.sweep import load_sweep

        load_sweep(sweep_file)  # a malformed sweep file is refused before anything runs
    try:
        hf_width, hf_nk = (int(n) for n in args.hf_size.lower().split("x"))
        assert hf_width >= 8 and hf_nk >= 8 and hf_nk % 4 == 0
    except (ValueError, AssertionError):
        raise ConfigError(f"bench --hf-size: got {args.hf_size!r}; expected WxNK with W >= 8 rows and "
                          "NK >= 8 momenta, a multiple of 4 (e.g. 200x256)") from None
    try:
        dense_text, _, sizes_text = args.marker_flakes.partition(":")
        marker_dense, marker_sizes = int(dense_text), tuple(int(n) for n in sizes_text.split(","))
        assert 12 <= marker_dense <= 80 and marker_sizes and all(12 <= n <= 400 for n in marker_sizes)
    except (ValueError, AssertionError):
        raise ConfigError(f"bench --marker-flakes: got {args.marker_flakes!r}; expected DENSE:SIZE,SIZE,... flake "
                          "sides, the dense one from 12 to 80, the others from 12 to 400 (e.g. 60:50,100,200)") from None
    bars = None
    if args.bars is not None:
        try:
            bars = [tuple(int(n) for n in item.lower().split("x")) for item in args.bars.split(",")]
            assert bars and all(len(b) == 2 and b[0] >= 16 and b[1] >= 8 for b in bars)
        except (ValueError, AssertionError):
            raise ConfigError(f"bench --bars: got {args.bars!r}; expected comma-separated LENGTHxWIDTH "
                              "sizes in sites, length >= 16 and width >= 8 (e.g. 80x40,160x80)") from None
    # The benchmarks run the dense references beside topoedge's solvers: kwant.physics.Bands holds
    # every W x W (both spins: 2W x 2W) Bloch matrix, the bare Chern diagonalisation q x q matrices on a
    # 2q x 2q grid; the upper limits keep those within a few GB.
    if not (2 <= args.width <= 5000 and 2 <= args.k_points <= 100000 and 0 < args.window < 1e6
            and 2 <= args.chern_q <= 100):
        raise ConfigError(
            f"bench: got --width {args.width}, --k-points {args.k_points}, --window {args.window}, "
            f"--chern-q {args.chern_q}; expected 2 <= width <= 5000, 2 <= k-points <= 100000, window > 0 "
            "and 2 <= chern-q <= 100 (the dense references of the benchmark must fit in memory)"
        )
    scenario = load_scenario(args.config, args.overrides)
    require_support(scenario, "bench")
    report = {}
    if "ribbon" in parts:
        say(args, f"ribbon benchmark: W = {args.width} sites per spin, {args.k_points} k points "
                   f"(kwant.physics.Bands and topoedge on the same finalized ribbon) ...")
        report["ribbon"] = bench_ribbon(scenario, width=args.width, k_points=args.k_points, window=args.window)
        r = report["ribbon"]
        say(args, f"  solver: {r['solver']}; {r['orbitals']} orbitals; "
                   f"window {r['window_t'][0]:.4f} .. {r['window_t'][1]:.4f} t "
                   f"({r['states_in_window']} states over all k)")
        say(args, f"  {'variant':44s} {'seconds':>9s}")
        for key, value in r["seconds"].items():
            say(args, f"  {key:44s} {value:9.3f}")
        say(args, f"  {'ratio (kwant / topoedge)':44s} {'x':>9s}")
        for key, value in r["ratios"].items():
            say(args, f"  {key:44s} {value:9.1f}")
        d = r["max_energy_difference_t"]
        say(args, f"  largest |E_topoedge - E_kwant|: all {d['all']:.2e} t, window {d['window']:.2e} t")
    if "chern" in parts:
        say(args, f"Chern benchmark: flux 1/{args.chern_q}, spinless, whole computation against the "
                   "bare batched diagonalisation of the same grid ...")
        report["chern"] = c = bench_chern(args.chern_q)
        s = c["seconds"]
        say(args, f"  {c['bands']} bands, {c['grid'][0]}x{c['grid'][1]} grid, {c['open_gaps']} open gaps; "
                   f"TKNN agree: {c['tknn_agree']}; finer grid agrees: {c['refined_agree']}")
        say(args, f"  bare diagonalisation {s['bare_diagonalisation']:.3f} s, whole Chern computation "
                   f"{s['chern_whole']:.3f} s: ratio {c['ratio_whole_over_bare']:.2f}")
        say(args, f"  (convergence check on the 1.5x finer grid: {s['chern_refined_grid']:.3f} s)")
    if "landau" in parts:
        from ..workflows.bench import bench_landau

        say(args, "Landau-level Chern benchmark: the lowest 4 levels at flux 1/q (spinless), the Landau-level "
                   "solver against the dense route on the same q x 8 grid ...")
        smallest = min(landau_qs)
        top = smallest if smallest <= 200 else 200      # the dense route beyond ~200 takes minutes
        report["landau"] = r = bench_landau(landau_qs, dense_qs=sorted({max(12, top // 4), max(16, top // 2), top}))
        say(args, f"  {'q':>6s} {'grid':>10s} {'landau s':>9s} {'peak MB':>8s} {'dense s':>10s} "
                   f"{'':12s} {'ratio':>8s}  gaps (r, C), TKNN")
        for row in r["rows"]:
            say(args, f"  {row['q']:6d} {row['grid'][0]:>5d}x{row['grid'][1]:<4d} {row['landau_seconds']:9.3f} "
                       f"{row['peak_rss_mb']:8.0f} {row['dense_seconds']:10.3g} {row['dense']:12s} "
                       f"{row['ratio_dense_over_landau']:8.0f}  {row['gaps']} {'yes' if row['tknn'] else 'NO'}"
                       + ("" if row["dense_gaps_equal"] is None else
                          f"; dense gaps equal: {'yes' if row['dense_gaps_equal'] else 'NO'}"))
        say(args, f"  dense time grows as q^{r['dense_exponent']:.2f} (fitted to the measured points)")
    if "gaas" in parts:
        from ..workflows.bench import bench_gaas

        say(args, f"GaAs benchmark: whole `topoedge run {gaas_file}` processes at 1 T and 10 T ...")
        report["gaas"] = r = bench_gaas(gaas_file)
        for row in r["rows"]:
            say(args, f"  {row['b_tesla']:5g} T, n = {row['density_cm2']:.1e} cm^-2 (nu = {row['filling']:.2f}): "
                       f"{row['seconds']:6.2f} s end to end ({row['compute_seconds']:.2f} s computing); flux "
                       f"{row['flux']}, a = {row['lattice_constant_nm']:.3g} nm = {row['a_over_lb']:.3f} l_B, field "
                       f"error {100 * row['b_relative_error']:+.3f} %, {row['solver']} solver; C = {row['chern']}, "
                       f"edges {row['edges']}, Streda {row['streda']:.6f}, agree: "
                       f"{'yes' if row['routes_agree'] and row['bulk_edge_agree'] else 'NO'}")
    if "hallbar" in parts:
        from ..workflows.bench import bench_hallbar

        say(args, "Hall-bar benchmark: S-matrix with kwant's MUMPS solver against SciPy's sparse solver "
                   "(same bar, same E_F) ...")
        try:
            report["hallbar"] = h = bench_hallbar(scenario, bars)
        except ValueError as err:
            raise ConfigError(f"bench hallbar: {err}") from None
        say(args, f"  flux {h['flux']}, E_F = {h['fermi_energy_t']:.4f} t; kwant's default solver: "
                   f"{h['default_solver']}")
        if not h["mumps_available"]:
            say(args, "  MUMPS: not in this kwant build (python3 tasks.py setup --mumps adds it); "
                       "SciPy's solver timed alone")
        say(args, f"  {'bar (sites)':14s} {'orbitals':>8s}  solver                seconds  sum rule  max |dG - dG_scipy|")
        for row in h["sizes"]:
            for i, (name, sec) in enumerate(row["seconds"].items()):
                size = f"{row['length']:>5d} x {row['width']:<6d} {row['orbitals']:8d}" if i == 0 else " " * 23
                say(args, f"  {size}  {name:20s} {sec:8.3f}  {row['sum_rule_violation'][name]:8.1e}  "
                           f"{row['max_conductance_difference'][name]:8.1e}")
            ratio = (f"; scipy / mumps_amd = {row['ratio_scipy_over_mumps_amd']:.2f}x"
                     if "ratio_scipy_over_mumps_amd" in row else "")
            say(args, f"  {'':23s}  R_xy = {row['r_xy']:.8f} h/e^2{ratio}")
    if "marker" in parts:
        from ..workflows.bench_disorder import bench_marker

        say(args, "local Chern marker benchmark: flux 1/20, spinless, E_F above the lowest Landau level; the "
                   "central 10 x 10 sites by kernel polynomials against the dense projector, then KPM alone at "
                   f"{len(marker_sizes)} sizes ...")
        report["marker"] = r = bench_marker(sizes=marker_sizes, dense_size=marker_dense)
        d = r["dense"]
        say(args, f"  {d['size']} x {d['size']} ({d['orbitals']} orbitals), {r['moments']} moments: dense "
                   f"{d['dense_seconds']:.2f} s, KPM {d['kpm_seconds']:.2f} s, ratio {d['ratio_dense_over_kpm']:.1f}, "
                   f"largest difference {d['largest_difference']:.1e}")
        for row in r["sizes"]:
            say(args, f"  KPM {row['size']:4d} x {row['size']:<4d} {row['orbitals']:7d} orbitals: {row['seconds']:7.2f} s, "
                       f"{1e6 * row['seconds_per_orbital']:.1f} us per orbital, central mean {row['central_mean']:.4f}")
    if "hf" in parts:
        from ..workflows.bench import bench_hf

        say(args, f"Hartree-Fock benchmark: W = {hf_width} rows per spin, {hf_nk} k points, flux 1/40, "
                   "nu = 1, U_C = 0.4 t; DIIS against linear mixing ...")
        report["hf"] = r = bench_hf(width=hf_width, k_points=hf_nk)
        one = r["one_iteration_seconds"]
        say(args, f"  one iteration: build H (Hartree + FFT exchange) {one['build_hamiltonian']:.3f} s, "
                   f"diagonalise + density matrix {one['diagonalise_and_density']:.3f} s")
        for name, run in r["runs"].items():
            say(args, f"  {name:7s} {run['iterations']:4d} iterations, {run['seconds']:8.2f} s, "
                       f"converged: {run['converged']}, E = {run['energy_t']:.10f} t per cell")
        say(args, f"  iterations linear / DIIS = {r['iteration_ratio_linear_over_diis']:.2f}; "
                   f"|E_linear - E_DIIS| = {r['energy_difference_t']:.1e} t")
        say(args, "  exchange build time against N_k log N_k W^2:")
        for row in r["exchange_scaling"]:
            say(args, f"    W = {row['width']:4d}, N_k = {row['k_points']:4d}: {row['build_seconds']:7.3f} s, "
                       f"time ratio {row['time_ratio']:5.2f}, model ratio {row['model_ratio']:5.2f}")
    if "hf" in parts:
        from ..workflows.bench_levels import bench_mixing

        say(args, f"mixing memory of the self-consistent ribbon: W = {hf_width}, N_k = {hf_nk}, history 8 ...")
        report["mixing"] = r = bench_mixing(width=hf_width, k_points=hf_nk)
        for name in ("full iterates (Pulay)", "residuals only (lean)"):
            say(args, f"  {name:24s} {r[name]['bytes'] / 1e9:7.3f} GB held, {r[name]['seconds_per_step']:.3f} s per step")
        say(args, f"  ratio full / lean = {r['ratio_full_over_lean']:.2f}")
    if "levels" in parts:
        from ..workflows.bench_levels import bench_levels

        say(args, "level-ordering diagram: nu = 3, flux 1/20, 20 x 20 points (continuum envelope and lattice "
                   "bulk Hartree-Fock of every candidate) ...")
        report["levels"] = r = bench_levels()
        say(args, f"  {r['candidates']} candidates, grid {r['grid'][0]} x {r['grid'][1]}: {r['seconds']:.1f} s "
                   f"({r['solutions']} lattice solutions, {r['lattice_seconds']:.1f} s; continuum "
                   f"{r['continuum_seconds']:.2f} s), at most {r['most_iterations']} iterations, all converged: "
                   f"{r['all_converged']}")
        say(args, f"  transitions along E_C / hbar omega_c at zero Zeeman: lattice "
                   f"{', '.join(f'{w:.3f}' for w in r['lattice_transitions'])}; continuum "
                   f"{', '.join(f'{w:.3f}' for w in r['continuum_transitions'])}")
    if "sweep" in parts:
        from ..workflows.bench import bench_sweep

        say(args, f"sweep benchmark: {sweep_file} from nothing, 1 worker process against 2 ...")
        report["sweep"] = r = bench_sweep(sweep_file)
        say(args, f"  {r['points']} points ({r['failed']} failed): 1 worker {r['seconds']['1']:.1f} s, "
                   f"2 workers {r['seconds']['2']:.1f} s: ratio {r['ratio']:.2f}; tables identical: "
                   f"{r['tables_identical']}")
    if args.json:
        print(json.dumps(report, indent=2))
    return 0


def add_arguments(parser) -> None:
    """The arguments of ``topoedge bench`` (besides ``--set``, ``--json`` and ``--quiet``)."""
    parser.add_argument("config", nargs="?", default=None, help="scenario TOML file (default: the shipped default)")
    parser.add_argument("--width", type=int, default=400, help="sites across the ribbon per spin (default 400)")
    parser.add_argument("--k-points", type=int, default=200, help="number of momenta (default 200)")
    parser.add_argument("--window", type=float, default=0.5,
                        help="half-width of the energy window around E_F, units of t (default 0.5)")
    parser.add_argument("--chern-q", type=int, default=50,
                        help="Chern benchmark at flux 1/q, spinless (default 50)")
    parser.add_argument("--parts", default="ribbon,chern,landau,gaas,hallbar,hf,sweep,marker,levels",
                        help="comma-separated benchmarks to run: ribbon, chern, landau, gaas, hallbar, hf (with the "
                             "mixing memory), sweep, marker, levels (default all)")
    parser.add_argument("--marker-flakes", default="60:50,100,200", metavar="DENSE:SIZE,...",
                        help="marker part: the flake side where dense and kernel polynomials are compared, and the "
                             "sides of the kernel-polynomial growth (default 60:50,100,200)")
    parser.add_argument("--landau-q", default="200,1000,2000", metavar="Q,...",
                        help="landau part: fluxes 1/q of the Landau-level Chern benchmark (default 200,1000,2000); "
                             "the dense route runs at the smallest (at most 200), half and a quarter of it (at least 12)")
    parser.add_argument("--gaas", default=None, metavar="SCENARIO",
                        help="gaas part: the GaAs scenario run at 1 T and 10 T (default: the shipped gaas-1T)")
    parser.add_argument("--sweep", default=None, metavar="SWEEP",
                        help="sweep file of the sweep part, run with 1 and with 2 workers "
                             "(default: the shipped nu2-width-zeeman)")
    parser.add_argument("--hf-size", default="200x256", metavar="WxNK",
                        help="Hartree-Fock benchmark: rows per spin x momenta (default 200x256)")
    parser.add_argument("--bars", default=None, metavar="LxW,...",
                        help="Hall-bar sizes in sites for the hallbar part (default: the scenario's "
                             "bar and the bars 2x and 4x larger)")


#: ``topoedge bench`` in the command registry of :mod:`topoedge.cli`.
COMMAND = Command(help="side-by-side timings: ribbon spectrum vs kwant.physics.Bands, Chern numbers " "vs bare diagonalisation, Hall bar with MUMPS vs SciPy", add_arguments=add_arguments, run=cmd_bench)
