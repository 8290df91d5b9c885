"""Reference tables across many results: the long table (CSV, Markdown, LaTeX) and a wide terminal view.

The long table has one row per reported number (:class:`TableRow`, the long form of
:mod:`tdhf.quantities` plus where the number came from) and the columns :data:`LONG_COLUMNS`:

``system, partner, property, multipole, frequency, frequency_unit, imaginary, level, k, orbital,
index, value, uncertainty, unit, converged, source, program, settings``

``source`` is the result file the number was read from, ``program`` the program and version that
computed it and ``settings`` the effective options in one line (accuracy preset, grid, SCF and
solver tolerances, quadrature, whether it was certified).  It is built from result files only
(:func:`read_result`), so ``tdhf series --table`` and ``tdhf table DIR`` give the same table:
rows are ordered by nuclear charge, then charge, then file name.

Formats, chosen by the file suffix (:data:`TABLE_FORMATS`):

``.csv``
    every column; floats with ``repr`` (they read back bit-identical), empty cells for None.
    It is valid input for ``tdhf compare``.
``.md``
    a Markdown pipe table with the certified digits only (``1.3222336700(30)``, see
    :func:`tdhf.report.terminal.format_value`), units in the headers, the sources listed below it.
``.tex``
    the same as a LaTeX ``tabular`` (booktabs-free: ``\\hline`` only), sources in a comment.

Numbers are in atomic units unless the rows were converted with :func:`in_units`.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

from rich.table import Table

from tdhf.errors import InputError
from tdhf.report.terminal import MISSING, format_value, new_table
from tdhf.units import display_unit, frequency_unit

__all__ = ["TableRow", "LONG_COLUMNS", "TABLE_FORMATS", "WIDE_PROPERTIES", "read_result", "result_paths",
           "long_table", "in_units", "table_text", "wide_table", "check_table_path", "csv_cell", "csv_text"]

#: Properties shown by default in the wide terminal view.
WIDE_PROPERTIES = ("total_energy", "polarizability", "C6")
#: File suffixes of the long table and their formats.
TABLE_FORMATS = {".csv": "CSV", ".md": "Markdown", ".tex": "LaTeX tabular"}


@dataclass(frozen=True)
class TableRow:
    """One number of the long table (the field names are the CSV columns).

    Attributes
    ----------
    system, partner : str
        The system (e.g. "Na+"); the second system of a pair property (C6, C8, C10), else None.
    property : str
        As in :mod:`tdhf.quantities` (``total_energy``, ``polarizability``, ``C6`` ...).
    multipole, k, orbital, index : int, int, str, int
        What identifies the number besides the frequency: the multipole order L, the sum-rule
        power k, the orbital label of an orbital energy, the line number (1 = lowest) of an
        excitation; None where they do not apply.
    frequency, frequency_unit : float, str
        The frequency (nu for ``imaginary``) and its unit ("hartree" unless converted); None for
        static-only properties.
    imaginary : bool
        True for omega = i nu; None where no frequency applies.
    level : str
        "coupled" (TDHF) or "uncoupled"; None for ground-state numbers.
    value, uncertainty, unit : float, float, str
        The number, its certified absolute uncertainty (None if not certified) and their unit.
    converged : bool
        False if a solve behind the number did not converge.
    source, program, settings : str
        Result file, program and version, effective options in one line.
    """

    system: str
    partner: str | None
    property: str
    multipole: int | None
    frequency: float | None
    frequency_unit: str | None
    imaginary: bool | None
    level: str | None
    k: int | None
    orbital: str | None
    index: int | None
    value: float
    uncertainty: float | None
    unit: str
    converged: bool
    source: str
    program: str
    settings: str


#: The columns of the long table, in order.
LONG_COLUMNS = tuple(f.name for f in fields(TableRow))
#: Keys every result file has (:func:`tdhf.report.json_result.result_to_json`).
_RESULT_KEYS = ("atom", "ground_state", "settings", "program", "quantities")


# --------------------------------------------------------------------------------------------
# Reading result files


def read_result(path: str | Path) -> dict[str, Any]:
    """The JSON object of a result file.

    Raises
    ------
    InputError
        If the file cannot be read, is not JSON, or is not a tdhf result (one line naming it).
    """
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError as err:
        raise InputError(f"{path}: cannot read the result file: {err.strerror or err}") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as err:
        raise InputError(f"{path}: not a JSON result file ({err})") from None
    missing = [key for key in _RESULT_KEYS if not isinstance(data, dict) or key not in data]
    if missing:
        raise InputError(f"{path}: not a tdhf result file (no {', '.join(missing)}); give the JSON files that"
                         " tdhf run, atom or series wrote")
    return data


def result_paths(paths: Sequence[str | Path]) -> tuple[list[Path], list[str]]:
    """The result files among ``paths`` (folders are searched for ``*.json``) and notes on the others.

    Raises
    ------
    InputError
        If a path does not exist, or no result file is found.
    """
    found, notes = [], []
    for given in map(Path, paths):
        if given.is_dir():
            candidates = sorted(p for p in given.glob("*.json") if not p.name.startswith("."))
        elif given.exists():
            candidates = [given]
        else:
            raise InputError(f"{given}: no such file or folder; give the folder of a series (--out) or result files")
        for candidate in candidates:
            try:
                read_result(candidate)
            except InputError as err:
                if not given.is_dir():
                    raise
                notes.append(f"{err} (skipped)")
                continue
            found.append(candidate)
    if not found:
        raise InputError(f"{', '.join(map(str, paths))}: no tdhf result files found")
    return found, notes


def settings_text(data: Mapping[str, Any]) -> str:
    """The effective options of a result in one line (accuracy, grid, tolerances, certified)."""
    settings = data.get("settings") or {}
    grid = settings.get("grid") or {}
    scf = settings.get("scf") or {}
    tolerances = settings.get("tolerances") or {}
    parts = [f"accuracy {settings.get('accuracy', '?')}",
             f"grid order {grid.get('order')} growth {grid.get('growth')}"
             f" first element {grid.get('first_element') or '0.1/Z'} bohr"
             f" box {grid.get('r_max') or 'automatic'}",
             f"scf {scf.get('energy_tolerance')} hartree {scf.get('residual_tolerance')}",
             f"krylov {tolerances.get('krylov_tolerance')} eigen {tolerances.get('eigen_tolerance')}"]
    dispersion = settings.get("dispersion")
    if dispersion:
        parts.append(f"quadrature {dispersion.get('quadrature_points')} points")
    parts.append("certified" if data.get("certification") else "not certified")
    return "; ".join(parts)


def _rows(data: Mapping[str, Any], source: str) -> list[TableRow]:
    program = f"{data['program'].get('name', 'tdhf')} {data['program'].get('version', 'unknown')}"
    settings = settings_text(data)
    rows = []
    for q in data["quantities"]:
        rows.append(TableRow(
            system=q["system"], partner=q.get("partner"), property=q["property"], multipole=q.get("multipole"),
            frequency=q.get("frequency"), frequency_unit=None if q.get("frequency") is None else "hartree",
            imaginary=q.get("imaginary"), level=q.get("level"), k=q.get("k"), orbital=q.get("orbital"),
            index=q.get("index"), value=float(q["value"]), uncertainty=q.get("uncertainty"), unit=q["unit"],
            converged=bool(q.get("converged", True)), source=source, program=program, settings=settings,
        ))
    return rows


def long_table(paths: Sequence[str | Path]) -> tuple[TableRow, ...]:
    """The long table of the result files ``paths`` (in atomic units), ordered by Z, charge, file name."""
    results = [(Path(path), read_result(path)) for path in paths]
    results.sort(key=lambda item: (item[1]["atom"].get("Z", 0), item[1]["atom"].get("charge", 0), item[0].name))
    return tuple(row for path, data in results for row in _rows(data, path.name))


def in_units(rows: Iterable[TableRow], system: str) -> tuple[TableRow, ...]:
    """``rows`` with values, uncertainties and frequencies in the unit system ``system`` (tdhf.units)."""
    out = []
    frequency = frequency_unit(system)
    for row in rows:
        unit = display_unit(row.property, row.unit, system)
        changes: dict[str, Any] = dict(value=row.value * unit.factor, unit=unit.label)
        if row.uncertainty is not None:
            changes["uncertainty"] = row.uncertainty * unit.factor
        if row.frequency is not None:
            changes.update(frequency=row.frequency * frequency.factor, frequency_unit=frequency.label)
        out.append(replace(row, **changes))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# Writing


def check_table_path(path: str | Path) -> str:
    """The format of a ``--table`` path from its suffix; InputError (one line) for another suffix."""
    suffix = Path(path).suffix.lower()
    if suffix not in TABLE_FORMATS:
        accepted = ", ".join(f"{key} ({name})" for key, name in TABLE_FORMATS.items())
        raise InputError(f"--table {path}: unknown table format {suffix or '(no suffix)'!r}; end the name in {accepted}")
    return suffix


def table_text(rows: Sequence[TableRow], suffix: str) -> str:
    """The text of the long table in the format of ``suffix`` (".csv", ".md" or ".tex")."""
    return {".csv": csv_text, ".md": _markdown_text, ".tex": _latex_text}[check_table_path(f"x{suffix}")](rows)


def csv_cell(value: Any) -> str:
    """A CSV cell: empty for None (and non-finite floats), true/false, floats by repr (bit-exact)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def csv_text(rows: Sequence[Any]) -> str:
    """CSV of dataclass rows: a header of their field names, one line per row (:func:`csv_cell`)."""
    names = [f.name for f in fields(rows[0])] if rows else list(LONG_COLUMNS)
    stream = io.StringIO(newline="")
    writer = csv.writer(stream, lineterminator="\n")
    writer.writerow(names)
    for row in rows:
        writer.writerow([csv_cell(getattr(row, name)) for name in names])
    return stream.getvalue()


def _display_columns(rows: Sequence[TableRow]) -> list[tuple[str, Any]]:
    """Columns of the Markdown and LaTeX views: (header, cell of a row); empty columns are dropped."""
    frequency_units = sorted({row.frequency_unit for row in rows if row.frequency_unit})
    columns = [
        ("system", lambda r: r.system),
        ("partner", lambda r: r.partner),
        ("property", lambda r: r.property),
        ("L", lambda r: r.multipole),
        (f"frequency ({', '.join(frequency_units)})", lambda r: None if r.frequency is None else f"{r.frequency:.10g}"),
        ("axis", lambda r: None if r.imaginary is None else "imaginary" if r.imaginary else "real"),
        ("level", lambda r: r.level),
        ("k", lambda r: r.k),
        ("orbital", lambda r: r.orbital),
        ("line", lambda r: r.index),
        ("value", lambda r: format_value(r.value, r.uncertainty)),
        ("unit", lambda r: r.unit),
        ("converged", lambda r: None if r.converged else "NO"),
    ]
    return [(header, get) for header, get in columns if any(get(row) is not None for row in rows)]


def _sources(rows: Sequence[TableRow]) -> list[str]:
    seen: dict[str, str] = {}
    for row in rows:
        seen.setdefault(row.source, f"{row.source}: {row.program}; {row.settings}")
    return list(seen.values())


def _note(rows: Sequence[TableRow]) -> str:
    if all(row.uncertainty is not None for row in rows):
        return "Digits shown are certified: the uncertainty in parentheses is in units of the last digit."
    return ("Numbers without (uncertainty) are not certified and shown to 7 significant digits;"
            " the CSV table holds every digit.")


def _markdown_text(rows: Sequence[TableRow]) -> str:
    columns = _display_columns(rows)
    escape = (lambda cell: MISSING if cell is None else str(cell).replace("|", "\\|"))
    lines = ["| " + " | ".join(header for header, _ in columns) + " |",
             "|" + "|".join("---:" if header == "value" else "---" for header, _ in columns) + "|"]
    lines += ["| " + " | ".join(escape(get(row)) for _, get in columns) + " |" for row in rows]
    lines += ["", _note(rows), "", "Sources (TDHF/RPA, nonrelativistic Hartree-Fock, point nucleus):", ""]
    lines += [f"- {source}" for source in _sources(rows)]
    return "\n".join(lines) + "\n"


_LATEX_SPECIAL = re.compile(r"([_&%#$])")
_POWER = re.compile(r"\^(-?\d+)")
_EXPONENT = re.compile(r"^(-?[\d.]+)e([-+]\d+)(\(\d+\))?$")


def _latex(cell: Any, header: str) -> str:
    if cell is None:
        return "--"
    text = str(cell)
    if header == "value":
        match = _EXPONENT.match(text)
        if match:
            return f"${match.group(1)}{match.group(3) or ''}\\times10^{{{int(match.group(2))}}}$"
        return f"${text}$"
    text = _LATEX_SPECIAL.sub(r"\\\1", text)
    return _POWER.sub(lambda m: f"$^{{{m.group(1)}}}$", text)


def _latex_text(rows: Sequence[TableRow]) -> str:
    columns = _display_columns(rows)
    lines = [f"% {line}" for line in ["tdhf long table. " + _note(rows), *_sources(rows)]]
    lines += ["\\begin{tabular}{" + "".join("r" if h == "value" else "l" for h, _ in columns) + "}", "\\hline",
              " & ".join(_latex(h, "") for h, _ in columns) + " \\\\", "\\hline"]
    lines += [" & ".join(_latex(get(row), header) for header, get in columns) + " \\\\" for row in rows]
    lines += ["\\hline", "\\end{tabular}"]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------------------------
# The wide terminal view


def _frequency_text(row: TableRow) -> str:
    if row.frequency is None:
        return ""
    unit = "" if row.frequency == 0.0 else f" {row.frequency_unit}"
    return f"({'i ' if row.imaginary else ''}{row.frequency:.6g}{unit})"


def column_header(row: TableRow) -> str:
    """A short header naming the number of ``row`` without its system, e.g. ``alpha_1(0)``."""
    name = {
        "total_energy": "E",
        "orbital_energy": f"eps({row.orbital})",
        "polarizability": f"alpha_{row.multipole}",
        "polarizability_velocity_form": f"alpha_{row.multipole} velocity",
        "polarizability_imaginary_part": f"Im alpha_{row.multipole}",
        "dipole_shielding": "beta",
        "quadrupole_shielding": "gamma_inf",
        "sum_rule": f"S_{row.multipole}({row.k})",
        "excitation_energy": f"omega_{row.index} L={row.multipole}",
        "oscillator_strength": f"f_{row.index} L={row.multipole}",
    }.get(row.property, f"{row.property} with {row.partner}" if row.partner else row.property)
    level = " uncoupled" if row.level == "uncoupled" else ""
    return f"{name}{_frequency_text(row)}{level}\n({row.unit})"


def _column_key(row: TableRow) -> tuple:
    return (row.property, row.partner, row.multipole, row.frequency, row.imaginary, row.level, row.k,
            row.orbital, row.index, row.unit)


def wide_table(rows: Sequence[TableRow], properties: Sequence[str] = WIDE_PROPERTIES,
               title: str = "Reference table") -> Table:
    """Systems as rows, one column per number of the chosen ``properties`` (coupled level only).

    Cells show the certified digits (:func:`tdhf.report.terminal.format_value`); a number whose
    solve did not converge is marked ``(NOT CONVERGED)``.
    """
    chosen = [row for row in rows if row.property in properties and row.level in (None, "coupled")]
    order = {name: i for i, name in enumerate(properties)}
    keys = sorted(dict.fromkeys(_column_key(row) for row in chosen),
                  key=lambda key: (order[key[0]], str(key[1]), key[2] or 0, key[4] or False, key[3] or 0.0,
                                   key[6] or 0, str(key[7]), key[8] or 0))
    headers = {key: column_header(next(row for row in chosen if _column_key(row) == key)) for key in keys}
    systems = list(dict.fromkeys(row.system for row in chosen))
    cells: dict[tuple[str, tuple], str] = {}
    for row in chosen:
        text = format_value(row.value, row.uncertainty) + ("" if row.converged else " (NOT CONVERGED)")
        cells.setdefault((row.system, _column_key(row)), text)
    for row in chosen:  # C_n(A, B) = C_n(B, A): the pair also fills the partner's row
        if row.partner is not None:
            mirror = replace(row, system=row.partner, partner=row.system)
            if mirror.system in systems and _column_key(mirror) in headers:
                cells.setdefault((mirror.system, _column_key(mirror)), cells[row.system, _column_key(row)])
    table = new_table(title)
    table.add_column("system", justify="left")
    for key in keys:
        table.add_column(headers[key], justify="right", overflow="fold")
    for system in systems:
        table.add_row(system, *(cells.get((system, key), MISSING) for key in keys))
    return table
