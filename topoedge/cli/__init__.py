"""The ``topoedge`` command line (stage 7): the parser and ``main``; one module per command.

``topoedge run [CONFIG]``    bulk, ribbon, edges and Hall routes of a scenario (self-consistent with
                             [interaction]), results folder
``topoedge bench``           side-by-side timings against kwant and between solvers
``topoedge hallbar``         R_xy and R_xx of the scenario's Hall bar over E_F or B, results folder
``topoedge sweep SWEEP``     a scenario over a grid of parameters (resumable; local or dask), table and maps
``topoedge butterfly``       flux-energy spectrum with gap Chern numbers, results folder
``topoedge disorder``        local Chern marker and Kubo-Bastin sigma_xy of a disordered flake, results folder
``topoedge levels``          which spin-split Landau levels the exchange fills: diagram, transitions, gaps

Each command is a module of this package with its arguments and its
:class:`~topoedge.cli.common.Command`, listed once in :data:`COMMANDS`.

Bad input (configuration, overrides, an existing results folder) ends with
one line on standard error and exit status 2, before anything is written.
"""

from __future__ import annotations

import argparse
import re
import sys
import warnings

from .. import __version__
from ..scenario import ConfigError
from . import bench, butterfly, disorder, hallbar, levels, run, sweep
from .common import EXIT_BAD_INPUT, Command, Parser, one_line

#: Every subcommand, in the order of ``topoedge --help``: a new command is a
#: module of this package with a :class:`~topoedge.cli.common.Command` and one
#: entry here.
COMMANDS: dict[str, Command] = {"run": run.COMMAND, "bench": bench.COMMAND, "hallbar": hallbar.COMMAND,
                                "sweep": sweep.COMMAND, "butterfly": butterfly.COMMAND,
                                "disorder": disorder.COMMAND, "levels": levels.COMMAND}


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
    for name, command in COMMANDS.items():
        command.add_arguments(sub.add_parser(name, parents=[common], help=command.help))

    return parser


#: Options whose value may start with a minus sign (a range of negative energies).
_RANGE_OPTIONS = ("--energies", "--fields")
_NUMBER_START = re.compile(r"^-(\d|\.\d)")


def _join_negative_values(argv: list[str]) -> list[str]:
    """``--energies -3.95:-3.3:14`` as ``--energies=-3.95:-3.3:14``: argparse would take the value for an option."""
    out: list[str] = []
    i = 0
    while i < len(argv):
        word = argv[i]
        if word in _RANGE_OPTIONS and i + 1 < len(argv) and _NUMBER_START.match(argv[i + 1]):
            out.append(f"{word}={argv[i + 1]}")
            i += 2
            continue
        out.append(word)
        i += 1
    return out


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``topoedge`` command."""
    argv = list(sys.argv[1:] if argv is None else argv)
    args = _parser().parse_args(_join_negative_values(argv))
    # kwant warns at import that its sparse solver falls back to SciPy; the
    # ribbon and bulk calculations do not use that solver.
    warnings.filterwarnings("ignore", message="MUMPS is not available")
    from ..util.budget import MemoryBudgetError
    from ..solvers.chern import GapClosedError
    from ..solvers.landau import LandauSolverError
    from ..outputs.results import RestartFileError
    from ..util.atomic import ResultsExistError

    try:
        return COMMANDS[args.command].run(args)
    except (ConfigError, ResultsExistError, GapClosedError, RestartFileError, MemoryBudgetError,
            LandauSolverError) as err:
        print(f"topoedge: error: {one_line(str(err))}", file=sys.stderr)
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
