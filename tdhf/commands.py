"""The reference-table, benchmarking and picture commands: ``tdhf table``, ``tdhf compare`` and
``tdhf plot`` (their arguments and what they do; the shared edges live in :mod:`tdhf.cli`).

Every output path is checked before any work; heavy modules are imported only when a command
runs.  Exit codes as in :mod:`tdhf.cli`: 2 for bad input (a user CSV names file, line and
column), 3 when a reference did not converge, 4 when a file cannot be written afterwards.
"""

from __future__ import annotations

import argparse
import logging
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Sequence

from tdhf.errors import InputError

if TYPE_CHECKING:
    from rich.console import Console

    from tdhf.report.tables import TableRow

__all__ = ["add_commands", "add_table_options", "add_parallel_options", "add_units_option", "COMMANDS", "execute",
           "write_tables", "check_tables", "print_units_view", "print_wide_view"]

logger = logging.getLogger("tdhf.cli")

#: The commands of this module.
COMMANDS = ("table", "compare", "plot")
_UNIT_SYSTEMS = ("atomic", "si", "spectroscopic")  # tdhf.units.UNIT_SYSTEMS, without importing scipy for --help
# tdhf.user_values.COMPARABLE, likewise (tests/test_public_api.py keeps both copies equal)
_PROPERTIES = ("total_energy", "orbital_energy", "polarizability", "polarizability_velocity_form",
               "dipole_shielding", "quadrupole_shielding", "sum_rule", "excitation_energy", "oscillator_strength",
               "C6", "C8", "C10")


def _workers(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not an integer") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} must be >= 1")
    return value


def add_units_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--units", choices=_UNIT_SYSTEMS, default="atomic",
                        help="units of the terminal tables and the table files (JSON stays in atomic units)")


def add_table_options(parser: argparse.ArgumentParser) -> None:
    """``--table FILE`` (repeatable), ``--units``, ``--columns`` of ``tdhf series`` and ``tdhf table``."""
    parser.add_argument("--table", metavar="FILE", type=Path, action="append", default=[],
                        help="write the long table; .csv, .md (Markdown) or .tex (LaTeX) by the suffix; repeatable")
    add_units_option(parser)
    parser.add_argument("--columns", metavar="PROPERTY", nargs="+", choices=_PROPERTIES, default=None,
                        help="properties of the wide terminal view (default: total_energy polarizability C6)")


def add_parallel_options(parser: argparse.ArgumentParser, what: str) -> None:
    """``--workers N`` and ``--scheduler ADDRESS``."""
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--workers", metavar="N", type=_workers, default=None,
                       help=f"processes for the {what} (default: the number of cores; 1: none)")
    group.add_argument("--scheduler", metavar="ADDRESS",
                       help=f"run the {what} on a Dask distributed cluster, e.g. tcp://host:8786 (extra [cluster])")


def add_commands(commands: Any, talk: argparse.ArgumentParser) -> None:
    """Add the subcommands of this module to ``commands`` (``talk``: the -v/-q parent parser)."""
    table = commands.add_parser("table", parents=[talk], help="rebuild reference tables from result files",
                                description="The long table and the wide view of result files, without"
                                            " recomputing.")
    table.add_argument("paths", metavar="DIR_OR_JSON", type=Path, nargs="+",
                       help="a folder of result files (tdhf series --out) or result files")
    add_table_options(table)

    compare = commands.add_parser("compare", parents=[talk], help="compare your numbers with the numerical limit",
                                  description="Benchmark a basis-set code: each row of USER.csv against the TDHF"
                                              " numerical limit, ranked per label.")
    compare.add_argument("user_csv", metavar="USER.csv", type=Path)
    compare.add_argument("--json", metavar="OUT.json", type=Path, help="write the comparison as JSON")
    compare.add_argument("--csv", metavar="OUT.csv", type=Path, help="write one row per compared number as CSV")
    compare.add_argument("--plot", metavar="OUT.png", type=Path, help="draw the deviations (.png or .svg; extra [plot])")
    compare.add_argument("--accuracy", choices=("default", "tight"), default="default",
                         help="accuracy preset of the references")
    compare.add_argument("--no-certify", dest="certify", action="store_false",
                         help="skip the certificate (faster; the references then carry no uncertainty)")
    add_parallel_options(compare, "reference systems")

    plot = commands.add_parser("plot", parents=[talk], help="pictures of a result file (extra [plot])",
                               description="PNG (and SVG) pictures of what a result file holds.")
    plot.add_argument("result", metavar="RESULT.json", type=Path)
    plot.add_argument("--out", metavar="DIR", type=Path, required=True, help="folder for the pictures")
    plot.add_argument("--svg", action="store_true", help="also write SVG files")
    plot.add_argument("--multipole", metavar="L", type=int, choices=(1, 2, 3),
                      help="multipole of the first-order functions (default: the result's first)")
    plot.add_argument("--frequency", metavar="W", help="real frequency of the first-order functions"
                                                       " (hartree, or e.g. \"1064 nm\"; default: the result's first)")


# --------------------------------------------------------------------------------------------
# Files


def _write(path: Path, data: str | bytes, option: str) -> None:
    from tdhf.report.files import write_bytes

    write_bytes(path, data.encode("utf-8") if isinstance(data, str) else data, option)


def _check_file(path: Path | None, option: str) -> None:
    if path is not None:
        from tdhf.report.files import check_output_file

        check_output_file(path, option)


def check_tables(paths: Sequence[Path]) -> None:
    """Before any work: every ``--table`` has a known suffix and can be written."""
    from tdhf.report.tables import check_table_path

    for path in paths:
        check_table_path(path)
        _check_file(path, "--table")
    if len(set(map(Path.resolve, paths))) < len(paths):
        raise InputError("--table: the same file is given twice; give each table once")


def write_tables(result_files: Sequence[Path], paths: Sequence[Path], units: str) -> tuple[tuple["TableRow", ...], bool]:
    """The long table of ``result_files`` in ``units``, written to every path: (its rows, whether a
    file could not be written).  A failure is logged and the other tables are still written."""
    from tdhf.errors import OutputError
    from tdhf.report.tables import in_units, long_table, table_text

    rows = in_units(long_table(result_files), units)
    failed = False
    for path in paths:
        try:
            _write(path, table_text(rows, path.suffix.lower()), "--table")
        except OutputError as err:
            logger.error("%s", err)
            failed = True
    return rows, failed


def print_wide_view(console: "Console", rows: Sequence["TableRow"], columns: Sequence[str] | None) -> None:
    from tdhf.report.tables import WIDE_PROPERTIES, wide_table

    console.print(wide_table(rows, columns or WIDE_PROPERTIES))


def print_units_view(console: "Console", result: Any, units: str) -> None:
    """Every number of one run in ``units`` (``tdhf run/atom --units``), certified digits only."""
    from tdhf.quantities import quantities
    from tdhf.report.tables import TableRow, column_header, in_units
    from tdhf.report.terminal import format_value, new_table

    rows = in_units([TableRow(q.system, q.partner, q.property, q.multipole, q.frequency,
                              None if q.frequency is None else "hartree", q.imaginary, q.level, q.k, q.orbital,
                              q.index, q.value, q.uncertainty, q.unit, q.converged, "", "", "")
                     for q in quantities(result)], units)
    table = new_table(f"Every number in {units} units")
    for header, justify in (("system", "left"), ("quantity", "left"), ("value", "right"), ("unit", "left")):
        table.add_column(header, justify=justify, overflow="fold")
    for row in rows:
        name, unit = column_header(row).split("\n")
        partner = f" with {row.partner}" if row.partner and "with" not in name else ""
        table.add_row(row.system, name + partner, format_value(row.value, row.uncertainty), unit.strip("()"))
    console.print(table)


# --------------------------------------------------------------------------------------------
# Commands


def execute(args: argparse.Namespace, to_stdout: Callable[[Callable[["Console"], None]], None],
            progress: Callable[[str], None], map_tasks_for: Callable[[argparse.Namespace], Any]) -> int:
    """Run ``tdhf table``, ``compare`` or ``plot``; returns the exit code.

    ``to_stdout(draw)`` prints on stdout, ``progress`` reports a stage, ``map_tasks_for(args)``
    is the context manager of the task map the options ask for (tdhf.execution).
    """
    return {"table": _table, "compare": _compare, "plot": _plot}[args.command](args, to_stdout, progress,
                                                                                map_tasks_for)


def _table(args, to_stdout, progress, map_tasks_for) -> int:
    from tdhf.report.tables import result_paths

    check_tables(args.table)
    files, notes = result_paths(args.paths)
    for note in notes:
        logger.warning("%s", note)
    rows, failed = write_tables(files, args.table, args.units)
    if not args.quiet or failed:
        to_stdout(lambda console: print_wide_view(console, rows, args.columns))
    return 4 if failed else 0


def _compare(args, to_stdout, progress, map_tasks_for) -> int:
    from tdhf.compare import compare
    from tdhf.user_values import read_user_values

    for path, option in ((args.json, "--json"), (args.csv, "--csv"), (args.plot, "--plot")):
        _check_file(path, option)
    if args.plot is not None:
        if args.plot.suffix.lower() not in (".png", ".svg"):
            raise InputError(f"--plot {args.plot}: end the name in .png or .svg")
        from tdhf.report.plots import require_matplotlib

        require_matplotlib()
    values = read_user_values(args.user_csv)
    with map_tasks_for(args) as map_tasks:
        result = compare(values, accuracy=args.accuracy, certify=args.certify, map_tasks=map_tasks,
                         progress=progress)
    failed = _write_comparison(result, args)
    if not args.quiet:
        to_stdout(lambda console: _print_comparison(console, result))
    for line in result.problems:
        logger.error("%s: %s", args.user_csv, line)
    if failed:
        return 4
    statuses = {reference.status for reference in result.systems}
    if statuses & {"input error", "rejected"} or any(row.reference is None for row in result.comparison):
        return 2
    return 3 if "not converged" in statuses else 0


def _write_comparison(result, args) -> list[str]:
    """Write the requested files; a failure is logged and named, the others are still written."""
    import json

    from tdhf.errors import OutputError
    from tdhf.report.serialize import to_jsonable
    from tdhf.report.tables import csv_text

    failed = []

    def deviation_plot() -> bytes:
        from tdhf.report.plots import deviation_figure, figure_bytes

        caption = f"{args.user_csv.name}; {result.program.name} {result.program.version}"
        return figure_bytes(deviation_figure(result.comparison, caption), args.plot.suffix.lower()[1:])

    outputs = [(args.json, "--json", lambda: json.dumps(to_jsonable(result), indent=2, allow_nan=False) + "\n"),
               (args.csv, "--csv", lambda: csv_text(result.comparison)), (args.plot, "--plot", deviation_plot)]
    for path, option, make in outputs:
        if path is None:
            continue
        try:
            _write(path, make(), option)
        except OutputError as err:
            logger.error("%s", err)
            failed.append(option)
    return failed


def _print_comparison(console: "Console", result) -> None:
    from tdhf.report.terminal import format_value, new_table

    table = new_table("Comparison with the numerical limit (TDHF/RPA, atomic units)")
    for header in ("line", "label", "system", "property", "value", "reference", "deviation", "relative", "status"):
        table.add_column(header, justify="left" if header in ("label", "system", "property", "status") else "right",
                         overflow="fold")
    for row in result.comparison:
        what = row.property + "".join(
            f" {name}{value:g}" if isinstance(value, float) else f" {name}{value}"
            for name, value in (("L=", row.multipole), ("w=", row.frequency), ("k=", row.k), ("", row.orbital),
                                ("line ", row.index), ("with ", row.partner)) if value is not None)
        if row.imaginary:
            what += " imaginary"
        if row.level == "uncoupled":
            what += " uncoupled"
        table.add_row(str(row.line), row.label, row.system, what, f"{row.value:.10g}",
                      "-" if row.reference is None else format_value(row.reference, row.reference_uncertainty),
                      "-" if row.deviation is None else f"{row.deviation:+.3e}",
                      "-" if row.relative_deviation is None else f"{row.relative_deviation:+.3e}", row.status)
    console.print(table)
    summary = new_table("Per label, ranked by the rms relative deviation")
    for header in ("rank", "label", "count", "max |relative|", "rms relative"):
        summary.add_column(header, justify="left" if header == "label" else "right")
    for row in result.summary:
        summary.add_row(str(row.rank), row.label, str(row.count),
                        "-" if row.max_relative_deviation is None else f"{row.max_relative_deviation:.3e}",
                        "-" if row.rms_relative_deviation is None else f"{row.rms_relative_deviation:.3e}")
    console.print(summary)
    if not all(reference.certified for reference in result.systems):
        console.print("References without (uncertainty) are not certified (--no-certify, or a failed system).")


def _plot(args, to_stdout, progress, map_tasks_for) -> int:
    from tdhf.pictures import figures
    from tdhf.report.files import check_output_folder
    from tdhf.report.plots import figure_bytes, require_matplotlib
    from tdhf.report.tables import read_result
    from tdhf.units import parse_frequency

    require_matplotlib()
    data = read_result(args.result)
    frequency = None if args.frequency is None else parse_frequency(args.frequency, "--frequency")
    check_output_folder(args.out, "--out")
    formats = ("png", "svg") if args.svg else ("png",)
    written = []
    for name, figure in figures(data, args.multipole, frequency):
        progress(f"picture {name}")
        for kind in formats:
            path = args.out / f"{args.result.stem}_{name}.{kind}"
            _write(path, figure_bytes(figure, kind, close=kind == formats[-1]), "--out")
            written.append(path)
    if not args.quiet:
        to_stdout(lambda console: console.print("\n".join(str(path) for path in written)))
    return 0

