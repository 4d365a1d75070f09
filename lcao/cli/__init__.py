"""Command-line interface. ``main(argv) -> int`` does the work; tests call it in-process.

Exit status: 0 success; 1 the run finished but with failures (too many flagged
points, no fit); 2 usage or input errors (nothing computed, nothing written);
130 interrupted (finished points are kept in the store).
"""

from __future__ import annotations

import argparse
import logging
import sys

from .. import __version__

COMMANDS = ("curve", "orbitals", "series", "run", "sheet", "report", "cluster-script")


class OneLineParser(argparse.ArgumentParser):
    """argparse with its usage errors on one line ('lcao curve: error: ...', exit status 2); ``--help`` shows
    the usage."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(
        prog="lcao",
        description="Potential-energy curves, orbital analysis and spectroscopic constants of diatomic"
        " molecules: Hartree-Fock, density functionals and correlated levels (PySCF).",
    )
    parser.add_argument("--version", action="version", version=f"lcao {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    from . import curve as _curve
    from . import orbitals as _orbitals
    from . import series as _series
    from . import report as _report
    from . import sheet as _sheet

    table = (
        ("curve", _curve.HELP, _curve.DESCRIPTION, _curve.add_arguments, _curve.run),
        ("orbitals", _orbitals.HELP, _orbitals.DESCRIPTION, _orbitals.add_arguments, _orbitals.run),
        ("series", _series.HELP, _series.DESCRIPTION, _series.add_arguments, _series.run),
        ("run", _series.RUN_HELP, _series.RUN_HELP, _series.add_run_arguments, _series.run_study),
        ("sheet", _sheet.HELP, _sheet.DESCRIPTION, _sheet.add_arguments, _sheet.run),
        ("report", _report.HELP, _report.DESCRIPTION, _report.add_arguments, _report.run),
        ("cluster-script", "print the batch job script of a study's [cluster] table (nothing is submitted)",
         "Print the job script that lcao run would submit for the study's [cluster] table through dask-jobqueue"
         " (SLURM or PBS), so that it can be checked before spending an allocation.",
         _series.add_script_arguments, _series.cluster_script),
    )
    for name, help_text, description, add_arguments, run in table:
        p = sub.add_parser(name, help=help_text, description=description)
        add_arguments(p)
        add_common(p)
        p.set_defaults(_run=run)
    return parser


def add_common(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("messages")
    g.add_argument("-q", "--quiet", action="store_true", help="no progress bar, summary only")
    g.add_argument("-v", "--verbose", action="store_true", help="log each step")
    g.add_argument("--debug", action="store_true", help="log everything and show tracebacks")


def _setup_logging(args) -> None:
    level = logging.DEBUG if args.debug else logging.INFO if args.verbose else logging.WARNING
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("lcao: %(levelname)s: %(message)s"))
    root = logging.getLogger("lcao")
    root.handlers[:] = [handler]
    root.setLevel(level)
    root.propagate = False


def main(argv=None) -> int:
    from ..errors import InputError, LcaoError

    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its message
        return int(exc.code or 0) if exc.code in (0, None) else 2
    if not getattr(args, "command", None):
        parser.print_help(sys.stderr)
        return 2
    _setup_logging(args)
    try:
        return int(args._run(args))
    except InputError as exc:
        print(f"lcao: error: {exc}", file=sys.stderr)
        return 2
    except LcaoError as exc:
        if args.debug:
            raise
        print(f"lcao: error: {exc}", file=sys.stderr)
        return 1
    except OSError as exc:  # a disk or permission problem while writing
        if args.debug:
            raise
        print(f"lcao: error: {exc.strerror or exc}: {exc.filename or ''}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        store = getattr(args, "store", None)
        where = f" in {store}" if store else ""
        print(
            f"lcao: interrupted; every finished point is saved{where}. Run the same command again to resume.",
            file=sys.stderr,
        )
        return 130


def entry() -> None:  # console script
    sys.exit(main(sys.argv[1:]))
