"""The ``topoedge`` command line (stage 7): the parser and ``main``; one module per command.

``topoedge run [CONFIG]``    ribbon spectrum of a scenario (self-consistent with [interaction]), results folder
``topoedge bench``           side-by-side timings against kwant
``topoedge butterfly``       flux-energy spectrum with gap Chern numbers, results folder
``topoedge sweep SWEEP``     a scenario over a grid of parameters (resumable; local or dask), table and maps

Bad input (configuration, overrides, an existing results folder) ends with
one line on standard error and exit status 2, before anything is written.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

from .. import __version__
from ..scenario import DEFAULT_SCENARIO, ConfigError
from .bench import cmd_bench
from .butterfly import cmd_butterfly
from .common import EXIT_BAD_INPUT, Parser
from .hallbar import cmd_hallbar
from .run import cmd_run
from .sweep import cmd_sweep






def _parser() -> argparse.ArgumentParser:
    parser = Parser(prog="topoedge", description="Bulk topology and edge modes of lattice quantum-Hall ribbons.")
    parser.add_argument("--version", action="version", version=f"topoedge {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=Parser)

    common = Parser(add_help=False)
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






















def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``topoedge`` command."""
    args = _parser().parse_args(argv)
    # kwant warns at import that its sparse solver falls back to SciPy; the
    # ribbon and bulk calculations do not use that solver.
    warnings.filterwarnings("ignore", message="MUMPS is not available")
    from ..util.budget import MemoryBudgetError
    from ..solvers.chern import GapClosedError
    from ..solvers.landau import LandauSolverError
    from ..outputs.results import RestartFileError
    from ..util.atomic import ResultsExistError

    try:
        commands = {"run": cmd_run, "bench": cmd_bench, "butterfly": cmd_butterfly, "hallbar": cmd_hallbar,
                    "sweep": cmd_sweep}
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
