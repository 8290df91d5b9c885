"""Command line: ``tdhf run DECK.toml``, ``tdhf atom ELEMENT``, ``tdhf pairs A B ...`` and
``tdhf series DECK... --out DIR`` (argument parsing only).

Results (tables) go to stdout; warnings, progress and the log go to stderr.  ``--quiet`` prints
nothing but errors; ``--verbose`` adds the effective options, progress and one line per SCF
iteration (logger ``tdhf.scf`` at DEBUG).

Exit codes
----------
0  success
1  unexpected internal error (a bug; ``--verbose`` shows the traceback)
2  input error: bad deck, bad argument, impossible system (one line ``tdhf: error: ...``)
3  a solver did not converge; the JSON file, if asked for, is still written
"""

from __future__ import annotations

import argparse
import dataclasses
import contextlib
import logging
import sys
import traceback
import warnings
from pathlib import Path
from typing import Any, Iterator, Sequence, TextIO

from rich.console import Console

from tdhf.deck import Deck, build_deck, load_deck, parse_system_name
from tdhf.certify import certify
from tdhf.driver import program_info, run_deck
from tdhf.report.json_result import result_to_json
from tdhf.errors import ConvergenceError, InputError
from tdhf.properties.dispersion import write_polarizability_csv
from tdhf.report.serialize import write_json
from tdhf.report.terminal import SERIES_COLUMNS, print_report, rows_table
from tdhf.series import run_series

__all__ = ["main", "build_parser", "EXIT_OK", "EXIT_BUG", "EXIT_INPUT", "EXIT_CONVERGENCE"]

EXIT_OK, EXIT_BUG, EXIT_INPUT, EXIT_CONVERGENCE, EXIT_INTERRUPTED = 0, 1, 2, 3, 130
#: Width of the tables when stdout is not a terminal (a file or a pipe).
FILE_WIDTH = 120

logger = logging.getLogger("tdhf.cli")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of ``tdhf``."""
    parser = argparse.ArgumentParser(
        prog="tdhf",
        description="Hartree-Fock ground states and TDHF linear response of closed-shell atoms.",
    )
    parser.add_argument("--version", action="version", version=f"tdhf {program_info().version}")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--json", metavar="OUT.json", type=Path, help="also write the results to this JSON file")
    common.add_argument("--certify", action="store_true",
                        help="rerun with the grid refined, the box enlarged and the tolerances tightened, and"
                             " report every number's uncertainty")
    talk = common.add_mutually_exclusive_group()
    talk.add_argument("-v", "--verbose", action="store_true",
                      help="show options, progress and every SCF iteration on stderr")
    talk.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    run = commands.add_parser("run", parents=[common], help="run a deck (TOML file)",
                              description="Run the calculation described by a deck.")
    run.add_argument("deck", metavar="DECK.toml", type=Path)

    atom = commands.add_parser("atom", parents=[common], help="one atom or ion without a deck",
                               description="Ground state (and optionally response) of one system.")
    atom.add_argument("element", metavar="ELEMENT", help='element symbol or atomic number, e.g. "Ne" or 10')
    atom.add_argument("--charge", type=int, help="net charge (default 0)")
    atom.add_argument("--configuration", metavar="CONFIG", help='closed-shell configuration, e.g. "1s2 2s2"')
    atom.add_argument("--tight", action="store_true", help="use the tight grid preset")
    atom.add_argument("--multipoles", type=int, nargs="+", metavar="L",
                      help="response multipole orders (1 dipole, 2 quadrupole, 3 octupole)")
    atom.add_argument("--frequencies", type=float, nargs="+", metavar="W",
                      help="real response frequencies, hartree")
    atom.add_argument("--imaginary", type=float, nargs="+", metavar="W",
                      help="imaginary response frequencies, hartree")
    atom.add_argument("--excitations", type=int, metavar="N",
                      help="list the N lowest bound lines of each multipole")

    pairs = commands.add_parser("pairs", parents=[common], help="C6, C8, C10 for every pair of a list of systems",
                                description="Dispersion coefficients of all pairs (like pairs included).")
    pairs.add_argument("systems", metavar="SYSTEM", nargs="+", help='systems such as "He", "Na+", "Cl-"')
    pairs.add_argument("--points", type=int, help="imaginary-frequency quadrature points (default 24)")
    pairs.add_argument("--tight", action="store_true", help="use the tight grid preset")
    series = commands.add_parser("series", help="run many decks, one JSON file each (resumable)",
                                 description="Run a series of decks; failures stay with their deck.")
    series.add_argument("decks", metavar="DECK.toml", type=Path, nargs="+")
    series.add_argument("--out", metavar="DIR", type=Path, required=True, help="directory for the JSON results")
    series.add_argument("--resume", action="store_true", help="skip decks whose result file already exists")
    series_talk = series.add_mutually_exclusive_group()
    series_talk.add_argument("-v", "--verbose", action="store_true", help="show progress on stderr")
    series_talk.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    for command in (run, pairs):
        command.add_argument("--csv", metavar="ALPHA.csv", type=Path,
                             help="also write alpha_L(i w) on the dispersion quadrature grid as CSV")
    return parser


def _deck_from_arguments(args: argparse.Namespace) -> Deck:
    """The deck of ``tdhf run``, or the deck ``tdhf atom`` options describe (same validation)."""
    if args.command == "run":
        return load_deck(args.deck)
    if args.command == "pairs":
        element, charge = parse_system_name(args.systems[0], "systems[0]")
        data: dict[str, Any] = {"atom": {"element": element, "charge": charge},
                                "dispersion": {"systems": args.systems[1:] or args.systems[:1]}}
        if args.points is not None:
            data["dispersion"]["quadrature_points"] = args.points
        if args.tight:
            data["grid"] = {"preset": "tight"}
        return build_deck(data)
    atom: dict[str, Any] = {"element": args.element}
    if args.charge is not None:
        atom["charge"] = args.charge
    if args.configuration is not None:
        atom["configuration"] = args.configuration
    data = {"atom": atom}
    if args.tight:
        data["grid"] = {"preset": "tight"}
    response = {key: value for key, value in (("multipoles", args.multipoles), ("frequencies", args.frequencies),
                                              ("imaginary_frequencies", args.imaginary),
                                              ("excitations", args.excitations)) if value is not None}
    if response:
        data["response"] = response
    return build_deck(data)


def _check_output(path: Path | None) -> Path | None:
    """Fail before computing if the JSON file could not be written."""
    if path is None:
        return None
    if path.is_dir():
        raise InputError(f"--json: {path} is a directory; give a file name")
    if not path.parent.is_dir():
        raise InputError(f"--json: the directory {path.parent} does not exist")
    return path


class _OneLineFormatter(logging.Formatter):
    """``tdhf: error: ...``, ``tdhf: warning: ...``, ``tdhf: ...``; newlines become spaces."""

    def format(self, record: logging.LogRecord) -> str:
        text = " ".join(record.getMessage().strip().splitlines())
        if record.levelno >= logging.ERROR:
            return f"tdhf: error: {text}"
        if record.levelno >= logging.WARNING:
            return f"tdhf: warning: {text}"
        return f"tdhf: {text}"


class _ConsoleHandler(logging.Handler):
    """Log records printed on a rich Console: they stay above a live status line, never wrap."""

    def __init__(self, console: Console) -> None:
        super().__init__()
        self.console = console

    def emit(self, record: logging.LogRecord) -> None:
        try:
            self.console.print(self.format(record), markup=False, highlight=False, soft_wrap=True)
        except Exception:
            self.handleError(record)


@contextlib.contextmanager
def _stderr_logging(console: Console, level: int) -> Iterator[None]:
    """Send the ``tdhf`` loggers and Python warnings to ``console`` (stderr), one line each."""
    package = logging.getLogger("tdhf")
    handler = _ConsoleHandler(console)
    handler.setFormatter(_OneLineFormatter())
    saved = package.level, package.propagate
    package.addHandler(handler)
    package.setLevel(level)
    package.propagate = False

    def show_warning(message, category, filename, lineno, file=None, line=None) -> None:
        logger.warning("%s", message)

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")
            warnings.showwarning = show_warning
            yield
    finally:
        package.removeHandler(handler)
        package.setLevel(saved[0])
        package.propagate = saved[1]


@contextlib.contextmanager
def _progress(console: Console, live: bool) -> Iterator[Any]:
    """A progress callback: a transient status line on a terminal, else INFO log lines."""
    if not live:
        yield lambda stage: logger.info("%s ...", stage)
        return
    with console.status("starting ...") as status:
        yield lambda stage: status.update(f"{stage} ...")


def main(argv: Sequence[str] | None = None, stdout: TextIO | None = None, stderr: TextIO | None = None) -> int:
    """Run the command line and return the exit code (see the module docstring)."""
    stdout, stderr = stdout or sys.stdout, stderr or sys.stderr
    args = build_parser().parse_args(argv)
    level = logging.ERROR if args.quiet else logging.DEBUG if args.verbose else logging.WARNING
    err_console = Console(file=stderr)
    with _stderr_logging(err_console, level):
        try:
            return _execute(args, stdout, err_console)
        except InputError as err:
            logger.error("%s", err)
            return EXIT_INPUT
        except ConvergenceError as err:
            logger.error("%s", err)
            return EXIT_CONVERGENCE
        except KeyboardInterrupt:
            logger.error("interrupted")
            return EXIT_INTERRUPTED
        except Exception as err:  # a bug: say so in one line, the traceback only when asked
            logger.error("internal error %s: %s%s", type(err).__name__, err,
                         "" if args.verbose else " (run with --verbose for the traceback)")
            if args.verbose:
                traceback.print_exc(file=stderr)
            return EXIT_BUG


def _stdout_console(stdout: TextIO) -> Console:
    """The results console: the terminal's width, or a fixed width for files and pipes."""
    console = Console(file=stdout)
    return console if console.is_terminal else Console(file=stdout, width=FILE_WIDTH)


def _execute_series(args: argparse.Namespace, stdout: TextIO, err_console: Console) -> int:
    with _progress(err_console, live=err_console.is_terminal and not (args.quiet or args.verbose)) as progress:
        entries = run_series(args.decks, args.out, resume=args.resume, progress=progress)
    if not args.quiet:
        _stdout_console(stdout).print(rows_table("Series", entries, SERIES_COLUMNS))
    for entry in entries:
        if entry.status in ("input error", "not converged", "rejected"):
            logger.error("%s: %s", entry.deck, entry.message)
    statuses = {entry.status for entry in entries}
    if statuses & {"input error", "rejected"}:
        return EXIT_INPUT
    return EXIT_CONVERGENCE if "not converged" in statuses else EXIT_OK


def _execute(args: argparse.Namespace, stdout: TextIO, err_console: Console) -> int:
    if args.command == "series":
        return _execute_series(args, stdout, err_console)
    deck = _deck_from_arguments(args)
    json_path = _check_output(args.json)
    with _progress(err_console, live=err_console.is_terminal and not (args.quiet or args.verbose)) as progress:
        result = run_deck(deck, progress=progress)
        if args.certify:
            result = dataclasses.replace(result, certification=certify(result, deck, progress=progress))
    if json_path is not None:
        write_json(json_path, result_to_json(result))
    csv_path = getattr(args, "csv", None)
    if csv_path is not None:
        if not result.polarizability_tables:
            raise InputError("--csv: there are no alpha(i w) tables without a [dispersion] table in the deck")
        write_polarizability_csv(csv_path, result.polarizability_tables)
    if not args.quiet:
        print_report(_stdout_console(stdout), result)
    if result.rejected:
        saved = f"; the other results were written to {json_path}" if json_path is not None else ""
        logger.error("%s%s", "; ".join(result.rejected), saved)
        return EXIT_INPUT
    problems = result.convergence_problems()
    if problems:
        saved = f"; results written to {json_path}" if json_path is not None else ""
        logger.error("%s%s", "; ".join(problems), saved)
        return EXIT_CONVERGENCE
    return EXIT_OK
