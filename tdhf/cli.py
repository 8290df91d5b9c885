"""Command line: ``tdhf run DECK.toml``, ``tdhf atom ELEMENT``, ``tdhf pairs A B ...`` (or
``A:B ...``), ``tdhf series DECK... --out DIR`` and, from :mod:`tdhf.commands`, ``tdhf table``,
``tdhf compare`` and ``tdhf plot`` (argument parsing and the edges: files, terminal, exit code).

Results (tables) go to stdout; warnings, progress and the log go to stderr.  ``--quiet`` prints
nothing but errors; ``--verbose`` adds the effective options, progress and one line per SCF
iteration (logger ``tdhf.scf`` at DEBUG).  Every output path is checked before any work
(:mod:`tdhf.report.files`).  The numerical package, rich and scipy are imported only when a
command runs, so ``tdhf --help`` starts fast.

Exit codes
----------
0    success
1    internal error: a bug (``--verbose`` shows the traceback); no other path gives 1
2    input error: bad deck or argument, impossible system, an output path that cannot be written
     (all checked before any work), or a real frequency refused (the other results are written)
3    a solver did not converge; the results are written and flagged
4    output failure: a result file could not be written after the computation; the message names
     it, the other files are written and the results are printed on stdout
130  interrupted (Ctrl-C or SIGTERM); finished result files are complete
When several apply (a series, or one run with several problems) the most serious wins, in the
order 130, 1, 4, 3, 2.
"""

from __future__ import annotations

import argparse
import contextlib
import errno
import logging
import os
import signal
import sys
import traceback
import warnings
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Iterator, Sequence, TextIO

from tdhf.commands import COMMANDS, add_commands, add_parallel_options, add_table_options, add_units_option, \
    check_tables, execute, print_units_view, print_wide_view, write_tables
from tdhf.errors import ConvergenceError, InputError, OutputError

if TYPE_CHECKING:
    from rich.console import Console

    from tdhf.deck import Deck
    from tdhf.report.files import OutputTarget

__all__ = ["main", "build_parser", "worst_exit_code", "EXIT_OK", "EXIT_BUG", "EXIT_INPUT", "EXIT_CONVERGENCE",
           "EXIT_OUTPUT", "EXIT_INTERRUPTED"]

EXIT_OK, EXIT_BUG, EXIT_INPUT, EXIT_CONVERGENCE, EXIT_OUTPUT, EXIT_INTERRUPTED = 0, 1, 2, 3, 4, 130
#: Most serious first (module docstring).
_SEVERITY = (EXIT_INTERRUPTED, EXIT_BUG, EXIT_OUTPUT, EXIT_CONVERGENCE, EXIT_INPUT)
#: Exit code of each tdhf.series status.
_SERIES_EXIT = {"ok": EXIT_OK, "skipped": EXIT_OK, "input error": EXIT_INPUT, "rejected": EXIT_INPUT,
                "not converged": EXIT_CONVERGENCE, "output error": EXIT_OUTPUT, "internal error": EXIT_BUG,
                "interrupted": EXIT_INTERRUPTED}
#: Width of the tables when stdout is not a terminal (a file or a pipe).
FILE_WIDTH = 120

logger = logging.getLogger("tdhf.cli")
#: Environment variables that set the thread count of the common BLAS/OpenMP builds.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def worst_exit_code(codes: Iterable[int]) -> int:
    """The most serious of ``codes`` (order 130, 1, 4, 3, 2), or 0."""
    codes = set(codes)
    return next((code for code in _SEVERITY if code in codes), EXIT_OK)


class _UsageError(Exception):
    """A command line argparse cannot read; the message is one line."""


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (``tdhf: error: ...; usage: ...``) instead of exiting."""

    def error(self, message: str) -> None:  # type: ignore[override]
        usage = " ".join(self.format_usage().split())
        raise _UsageError(f"{message}; {usage} (see {self.prog} --help)")


class _Version(argparse.Action):
    """``--version``: the installed version, looked up only when asked for."""

    def __init__(self, option_strings: Sequence[str], dest: str = argparse.SUPPRESS, **kwargs: Any) -> None:
        super().__init__(option_strings, dest, nargs=0, default=argparse.SUPPRESS,
                         help="show the program's version and exit")

    def __call__(self, parser, namespace, values, option_string=None) -> None:
        from tdhf.version import program_info

        print(f"tdhf {program_info().version}")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of ``tdhf``."""
    parser = _Parser(
        prog="tdhf",
        description="Hartree-Fock ground states and TDHF linear response of closed-shell atoms.",
    )
    parser.add_argument("--version", action=_Version)
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
    add_parallel_options(run, "dispersion responses, photon energies and certificate runs")

    atom = commands.add_parser("atom", parents=[common], help="one atom or ion without a deck",
                               description="Ground state (and optionally response) of one system.")
    atom.add_argument("element", metavar="ELEMENT", help='element symbol or atomic number, e.g. "Ne" or 10, or an ion such as "Cl-" or "Mg2+"')
    atom.add_argument("--charge", type=int, help="net charge (default 0)")
    atom.add_argument("--configuration", metavar="CONFIG", help='closed-shell configuration, e.g. "1s2 2s2"')
    atom.add_argument("--tight", action="store_true", help="use the tight grid preset")
    atom.add_argument("--multipoles", type=int, nargs="+", metavar="L",
                      help="response multipole orders (1 dipole, 2 quadrupole, 3 octupole)")
    atom.add_argument("--frequencies", nargs="+", metavar="W",
                      help='real response frequencies, hartree or with a unit ("1064 nm", "2.5 eV")')
    atom.add_argument("--imaginary", nargs="+", metavar="W",
                      help="imaginary response frequencies, hartree or with a unit")
    atom.add_argument("--excitations", type=int, metavar="N",
                      help="list the N lowest bound lines of each multipole")

    pairs = commands.add_parser("pairs", parents=[common], help="C6, C8, C10 for every pair of a list of systems",
                                description="Dispersion coefficients of all pairs of the systems (like pairs"
                                            " included), or of the pairs A:B given.")
    pairs.add_argument("systems", metavar="SYSTEM", nargs="+",
                       help='systems such as "He", "Na+", "Cl-" (every pair), or pairs such as "He:Ne" (just those)')
    pairs.add_argument("--points", type=int, help="imaginary-frequency quadrature points (default 24)")
    pairs.add_argument("--tight", action="store_true", help="use the tight grid preset")
    add_parallel_options(pairs, "atoms of the pair table")
    series = commands.add_parser("series", help="run many decks, one JSON file each (resumable)",
                                 description="Run a series of decks; failures stay with their deck.")
    series.add_argument("decks", metavar="DECK.toml", type=Path, nargs="+")
    series.add_argument("--out", metavar="DIR", type=Path, required=True, help="directory for the JSON results")
    series.add_argument("--resume", action="store_true",
                        help="keep result files that are complete and current (same deck, same version)")
    series.add_argument("--certify", action="store_true",
                        help="certify every result (3-4 extra runs per deck; tables then show certified digits)")
    add_table_options(series)
    add_parallel_options(series, "decks")
    talk_only = argparse.ArgumentParser(add_help=False)
    for parent in (series, talk_only):
        group = parent.add_mutually_exclusive_group()
        group.add_argument("-v", "--verbose", action="store_true", help="show progress on stderr")
        group.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    for command in (run, pairs):
        command.add_argument("--csv", metavar="ALPHA.csv", type=Path,
                             help="also write alpha_L(i w) on the dispersion quadrature grid as CSV")
    for command in (run, atom, pairs):
        add_units_option(command)
    add_commands(commands, talk_only)
    return parser


def _deck_from_arguments(args: argparse.Namespace) -> "Deck":
    """The deck of ``tdhf run``, or the deck ``tdhf atom``/``pairs`` options describe (same validation)."""
    from tdhf.deck import build_deck, load_deck, parse_system_name

    if args.command == "run":
        return load_deck(args.deck)
    if args.command == "pairs":
        explicit = [":" in name for name in args.systems]
        if any(explicit) and not all(explicit):
            raise InputError("pairs: give either systems (every pair among them) or pairs such as He:Ne, not both")
        first = args.systems[0].split(":")[0]
        element, charge = parse_system_name(first, "systems[0]")
        table = {"pairs": args.systems} if all(explicit) else {"systems": args.systems[1:] or args.systems[:1]}
        data: dict[str, Any] = {"atom": {"element": element, "charge": charge}, "dispersion": table}
        if args.points is not None:
            data["dispersion"]["quadrature_points"] = args.points
        if args.tight:
            data["grid"] = {"preset": "tight"}
        return build_deck(data)
    atom: dict[str, Any] = {"element": args.element}
    if args.charge is not None:
        atom["charge"] = args.charge
    if args.element.strip().endswith(("+", "-")):  # an ion by its name, as in dispersion partners
        atom["element"], charge = parse_system_name(args.element, "ELEMENT")
        if atom.setdefault("charge", charge) != charge:
            raise InputError(f"--charge: {args.charge} disagrees with the charge {charge:+d} of {args.element!r};"
                             " give the charge once")
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


def _check_outputs(args: argparse.Namespace, deck: "Deck") -> dict[str, "OutputTarget"]:
    """Every output of the command, checked before any work: option -> where it is written."""
    from tdhf.report.files import check_output_file

    targets = {}
    if args.json is not None:
        targets["--json"] = check_output_file(args.json, "--json")
    csv_path = getattr(args, "csv", None)
    if csv_path is not None:
        if deck.dispersion is None:
            raise InputError("--csv: there are no alpha(i w) tables without a [dispersion] table in the deck")
        targets["--csv"] = check_output_file(csv_path, "--csv")
    files = {option: target for option, target in targets.items() if target.atomic}
    if len({target.target for target in files.values()}) < len(files):
        raise InputError(f"--csv {args.csv}: the same file as --json {args.json}; give two names")
    if args.command == "run":
        deck_file = Path(os.path.realpath(args.deck))
        for option, target in files.items():
            if target.target == deck_file:
                raise InputError(f"{option} {target.path}: is the deck file itself; give another name")
    return targets


def _check_certification_grid(deck: "Deck") -> None:
    """``--certify`` reruns on a finer grid (and a larger box): check now that the finer grid fits the limits."""
    from tdhf.ground_state import starting_box
    from tdhf.radial.mesh import check_grid_size

    system, grid = deck.atom.to_system(), deck.grid.refined()
    try:
        check_grid_size(grid, system.Z, starting_box(system, grid))
    except InputError as err:
        raise InputError(f"--certify: the finer grid it needs is too large: {err}") from None


def _one_line(text: str) -> str:
    """Every line break (including the Unicode ones str.splitlines knows) becomes a space."""
    return " ".join(text.strip().splitlines())


class _OneLineFormatter(logging.Formatter):
    """``tdhf: error: ...``, ``tdhf: warning: ...``, ``tdhf: ...``; newlines become spaces."""

    def format(self, record: logging.LogRecord) -> str:
        text = _one_line(record.getMessage())
        if record.levelno >= logging.ERROR:
            return f"tdhf: error: {text}"
        if record.levelno >= logging.WARNING:
            return f"tdhf: warning: {text}"
        return f"tdhf: {text}"


class _ConsoleHandler(logging.Handler):
    """Log records printed on a rich Console: they stay above a live status line, never wrap."""

    def __init__(self, console: "Console") -> None:
        super().__init__()
        self.console = console

    def emit(self, record: logging.LogRecord) -> None:
        try:
            self.console.print(self.format(record), markup=False, highlight=False, soft_wrap=True)
        except Exception:
            self.handleError(record)


@contextlib.contextmanager
def _stderr_logging(console: "Console", level: int) -> Iterator[set[str]]:
    """Send the ``tdhf`` loggers and Python warnings to ``console`` (stderr), one line each.

    Yields the set of warning texts shown, so notes stored in a result are not shown twice.
    """
    package = logging.getLogger("tdhf")
    handler = _ConsoleHandler(console)
    handler.setFormatter(_OneLineFormatter())
    saved = package.level, package.propagate
    package.addHandler(handler)
    package.setLevel(level)
    package.propagate = False
    shown: set[str] = set()

    def show_warning(message, category, filename, lineno, file=None, line=None) -> None:
        shown.add(str(message))
        logger.warning("%s", message)

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")
            warnings.showwarning = show_warning
            yield shown
    finally:
        package.removeHandler(handler)
        package.setLevel(saved[0])
        package.propagate = saved[1]


@contextlib.contextmanager
def _terminate_as_interrupt() -> Iterator[None]:
    """SIGTERM raises KeyboardInterrupt, like Ctrl-C: files being written are cleaned up."""

    def interrupt(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, interrupt)
    except ValueError:  # not the main thread (an embedding program): leave signals alone
        previous = None
    try:
        yield
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


@contextlib.contextmanager
def _progress(console: "Console", live: bool) -> Iterator[Any]:
    """A progress callback: a transient status line on a terminal, else INFO log lines."""
    if not live:
        yield lambda stage: logger.info("%s ...", stage)
        return
    from rich.live import Live
    from rich.text import Text

    # Redrawn at each stage, by this thread: a refresh thread would make the process
    # multi-threaded, and its workers would then have to spawn (tdhf.execution.start_method).
    with Live(Text("starting ..."), console=console, transient=True, auto_refresh=False) as status:
        yield lambda stage: status.update(Text(f"{stage} ..."), refresh=True)


def _silence(stream: TextIO) -> None:
    """Point a broken stdout at the null device, so exiting does not fail on it again."""
    with contextlib.suppress(Exception):
        descriptor = os.open(os.devnull, os.O_WRONLY)
        os.dup2(descriptor, stream.fileno())
        os.close(descriptor)


def main(argv: Sequence[str] | None = None, stdout: TextIO | None = None, stderr: TextIO | None = None) -> int:
    """Run the command line and return the exit code (see the module docstring)."""
    stdout, stderr = stdout or sys.stdout, stderr or sys.stderr
    try:
        with contextlib.redirect_stdout(stdout):
            args = build_parser().parse_args(argv)
    except _UsageError as err:
        print("tdhf: error:", _one_line(str(err)), file=stderr)
        return EXIT_INPUT
    except SystemExit as done:  # --help, --version
        return done.code if isinstance(done.code, int) else EXIT_OK
    # tdhf runs its dense algebra on one BLAS thread (tdhf.numerics.threads); saying so before numpy
    # loads spares the start-up of a thread pool that would only spin (measured: 0.2 s CPU per run).
    for name in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(name, "1")
    from rich.console import Console

    level = logging.ERROR if args.quiet else logging.DEBUG if args.verbose else logging.WARNING
    err_console = Console(file=stderr)
    with _stderr_logging(err_console, level) as shown, _terminate_as_interrupt():
        try:
            return _execute(args, stdout, err_console, shown)
        except InputError as err:
            logger.error("%s", err)
            return EXIT_INPUT
        except ConvergenceError as err:
            logger.error("%s", err)
            return EXIT_CONVERGENCE
        except OutputError as err:
            logger.error("%s", err)
            if stdout is sys.stdout:
                _silence(stdout)
            return EXIT_OUTPUT
        except KeyboardInterrupt:
            logger.error("interrupted; finished result files are complete, nothing else was written")
            return EXIT_INTERRUPTED
        except Exception as err:  # a bug: say so in one line, the traceback only when asked
            logger.error("internal error %s: %s%s", type(err).__name__, err,
                         "" if args.verbose else " (run with --verbose for the traceback)")
            if args.verbose:
                traceback.print_exc(file=stderr)
            return EXIT_BUG


def _stdout_console(stdout: TextIO) -> "Console":
    """The results console: the terminal's width, or a fixed width for files and pipes."""
    from rich.console import Console

    class ResultsConsole(Console):
        def on_broken_pipe(self) -> None:  # rich would exit with 1; it is an output failure
            raise BrokenPipeError(errno.EPIPE, os.strerror(errno.EPIPE))

    console = ResultsConsole(file=stdout)
    return console if console.is_terminal else ResultsConsole(file=stdout, width=FILE_WIDTH)


def _to_stdout(stdout: TextIO | None, draw: Any) -> None:
    """``draw(console)`` on stdout; a closed or full stdout is an output failure (exit 4), not a bug."""
    if stdout is None:  # the process was started with stdout closed
        raise OutputError("stdout: it is closed; cannot print the results (use -q, or --json)")
    try:
        draw(_stdout_console(stdout))
        stdout.flush()
    except OSError as err:
        raise OutputError(f"stdout: cannot print the results: {err.strerror or err}") from None


def _execute_series(args: argparse.Namespace, stdout: TextIO, err_console: "Console") -> int:
    from tdhf.report.terminal import SERIES_COLUMNS, print_report, rows_table
    from tdhf.series import run_series

    check_tables(args.table)
    live = err_console.is_terminal and not (args.quiet or args.verbose)
    with _task_map(args) as map_tasks, _progress_bar(err_console, live, len(args.decks)) as (progress, counter):
        entries = run_series(args.decks, args.out, resume=args.resume, progress=progress, certify=args.certify,
                             map_tasks=map_tasks, counter=counter)
    files = [Path(entry.output) for entry in entries if entry.output]
    rows, codes = (), []
    if files and (args.table or not args.quiet):
        rows, failed = write_tables(files, args.table, args.units)
        codes += [EXIT_OUTPUT] if failed else []  # the result files are written; only a table is missing
    elif args.table:
        logger.error("--table: no deck finished, so there is no table to write")
        codes.append(EXIT_INPUT)
    if not args.quiet:
        _to_stdout(stdout, lambda console: console.print(rows_table("Series", entries, SERIES_COLUMNS)))
        if rows:
            _to_stdout(stdout, lambda console: print_wide_view(console, rows, args.columns))
    for entry in entries:
        for note in entry.warnings:
            logger.warning("%s: %s", entry.deck, note)
        if _SERIES_EXIT[entry.status] != EXIT_OK:
            logger.error("%s: %s", entry.deck, entry.message)
        if entry.status == "output error" and entry.result is not None:
            _to_stdout(stdout, lambda console: print_report(console, entry.result))
    return worst_exit_code([*codes, *(_SERIES_EXIT[entry.status] for entry in entries)])


@contextlib.contextmanager
def _task_map(args: argparse.Namespace) -> Iterator[Any]:
    """The task map of --workers/--scheduler (tdhf.execution); None for one worker (no pool)."""
    from tdhf.execution import serial, task_map

    if not hasattr(args, "workers"):  # a command without the options runs here
        yield None
        return
    with task_map(args.workers, args.scheduler) as map_tasks:
        yield None if map_tasks is serial else map_tasks


@contextlib.contextmanager
def _progress_bar(console: "Console", live: bool, total: int) -> Iterator[tuple[Any, Any]]:
    """(stage callback, counter(done, total)): a bar with the time left on a terminal, else log lines."""
    if not live:
        yield (lambda stage: logger.info("%s ...", stage)), (lambda done, total: logger.info("%d/%d done", done, total))
        return
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, \
        TimeRemainingColumn

    columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
               TextColumn("left"), TimeRemainingColumn())
    with Progress(*columns, console=console, transient=True, auto_refresh=False) as bar:  # no thread: see _progress
        task = bar.add_task("starting", total=total)
        yield (lambda stage: bar.update(task, description=stage, refresh=True)), \
            (lambda done, total: bar.update(task, completed=done, total=total, refresh=True))


def _write_outputs(result: Any, targets: dict[str, "OutputTarget"]) -> list[str]:
    """Write every requested file; one that fails is logged and named, the others still written."""
    from tdhf.report.json_result import result_to_json
    from tdhf.report.serialize import write_json, write_polarizability_csv

    failed = []
    for option, target in targets.items():
        try:
            if option == "--json":
                write_json(target, result_to_json(result))
            else:
                write_polarizability_csv(target, result.polarizability_tables)
        except OutputError as err:
            logger.error("%s; the results are printed on stdout instead", err)
            failed.append(option)
    return failed


def _execute(args: argparse.Namespace, stdout: TextIO, err_console: "Console", shown: set[str]) -> int:
    if args.command == "series":
        return _execute_series(args, stdout, err_console)
    if args.command in COMMANDS:
        with _progress(err_console, live=err_console.is_terminal and not (args.quiet or args.verbose)) as progress:
            return execute(args, lambda draw: _to_stdout(stdout, draw), progress, _task_map)
    deck = _deck_from_arguments(args)
    targets = _check_outputs(args, deck)
    if args.certify:
        _check_certification_grid(deck)
    import dataclasses

    from tdhf.certify import certify
    from tdhf.driver import run_deck

    codes = []
    live = err_console.is_terminal and not (args.quiet or args.verbose)
    with _task_map(args) as map_tasks, _progress(err_console, live=live) as progress:
        result = run_deck(deck, progress=progress, map_tasks=map_tasks)
        if args.certify:
            try:
                result = dataclasses.replace(result, certification=certify(result, deck, progress, map_tasks))
            except (InputError, ConvergenceError) as err:  # the results of the run itself are kept
                logger.error("--certify: %s; the results are kept without certification", err)
                codes.append(EXIT_INPUT if isinstance(err, InputError) else EXIT_CONVERGENCE)
    for note in result.warnings:  # notes of the result that no library warning has shown yet
        if note not in shown:
            logger.warning("%s", note)
    failed = _write_outputs(result, targets)
    if not args.quiet or failed:
        from tdhf.report.terminal import print_report

        _to_stdout(stdout, lambda console: print_report(console, result))
        if args.units != "atomic":
            _to_stdout(stdout, lambda console: print_units_view(console, result, args.units))
    json_written = "--json" in targets and "--json" not in failed
    codes += [EXIT_OUTPUT] if failed else []
    if result.rejected:
        saved = f"; the other results were written to {args.json}" if json_written else ""
        logger.error("%s%s", "; ".join(result.rejected), saved)
        codes.append(EXIT_INPUT)
    problems = result.convergence_problems()
    if problems:
        saved = f"; results written to {args.json}" if json_written else ""
        logger.error("%s%s", "; ".join(problems), saved)
        codes.append(EXIT_CONVERGENCE)
    return worst_exit_code(codes)
