"""A user's own numbers (e.g. from a Gaussian-basis code) read from CSV, checked row by row.

The file has a header naming its columns, in any order; unknown columns are ignored, and so are
blank lines and lines whose first cell starts with ``#`` (comments).  The columns
are those of the long table (:mod:`tdhf.report.tables`), so a table ``tdhf series --table`` wrote
is valid input:

=================  ========  =================================================================
column             required  meaning (default)
=================  ========  =================================================================
system             yes       "He", "Na+", "Cl-" ... (a closed-shell system)
property           yes       one of :data:`COMPARABLE` (``polarizability``, ``C6`` ...)
value              yes       the user's number, in atomic units unless ``unit`` says otherwise
label              no        free text naming the method or basis set, e.g. "aug-cc-pVTZ"
unit               no        the unit of ``value`` ("bohr^3", "angstrom^3", "eV", ...; tdhf.units)
partner            C_n       the second system of C6, C8, C10
multipole          no        L (1; 2 for ``quadrupole_shielding``)
frequency          no        hartree, or with a unit ("1064 nm", "2.5 eV") (0)
frequency_unit     no        the unit of a plain ``frequency`` number (hartree)
imaginary          no        true for omega = i nu (false)
level              no        "coupled" (TDHF) or "uncoupled" (coupled)
k                  sum_rule  the power of S(k): 0, -2, -4, -6
orbital            orb.      the subshell of ``orbital_energy``, e.g. "2p"
index              lines     the line of ``excitation_energy``/``oscillator_strength`` (1 = lowest)
=================  ========  =================================================================

A cell of a column that does not apply to the row's property must be empty.  Every problem
raises an :class:`~tdhf.errors.InputError` whose one line names the file, the line and the
column, and the nearest valid choice; the whole file is checked before anything is computed.
"""

from __future__ import annotations

import csv
import difflib
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from tdhf.deck import parse_system_name
from tdhf.errors import InputError
from tdhf.quantities import property_unit
from tdhf.system import System
from tdhf.units import parse_frequency, to_atomic

__all__ = ["UserValue", "COMPARABLE", "REQUIRED_COLUMNS", "read_user_values"]

#: Columns every file must have.
REQUIRED_COLUMNS = ("system", "property", "value")
#: Identifying columns that apply to each comparable property (the others must be empty).
COMPARABLE: dict[str, tuple[str, ...]] = {
    "total_energy": (),
    "orbital_energy": ("orbital",),
    "polarizability": ("multipole", "frequency", "imaginary", "level"),
    "polarizability_velocity_form": ("multipole", "frequency", "imaginary", "level"),
    "dipole_shielding": ("multipole", "frequency", "imaginary", "level"),
    "quadrupole_shielding": ("multipole", "frequency", "imaginary", "level"),
    "sum_rule": ("multipole", "k", "level"),
    "excitation_energy": ("multipole", "index", "level"),
    "oscillator_strength": ("multipole", "index", "level"),
    "C6": ("partner", "level"),
    "C8": ("partner", "level"),
    "C10": ("partner", "level"),
}
#: Properties with only coupled (TDHF) values, and properties of one multipole only.
_COUPLED_ONLY = ("polarizability_velocity_form", "dipole_shielding", "excitation_energy", "oscillator_strength",
                 "C6", "C8", "C10")
_FIXED_MULTIPOLE = {"dipole_shielding": 1, "polarizability_velocity_form": 1, "quadrupole_shielding": 2}
_IDENTIFIERS = ("partner", "multipole", "frequency", "frequency_unit", "imaginary", "level", "k", "orbital", "index")
_REQUIRED_BY = {"orbital": "orbital_energy", "k": "sum_rule", "index": "excitation_energy and oscillator_strength",
                "partner": "C6, C8 and C10"}
_SUM_RULE_POWERS = (0, -2, -4, -6)
_TRUE, _FALSE = ("true", "yes", "1"), ("false", "no", "0")


@dataclass(frozen=True)
class UserValue:
    """One checked row of a user's CSV; identifiers as in :class:`tdhf.quantities.Quantity`,
    ``value`` converted to atomic units (``unit``), ``line`` the line of the file it came from."""

    label: str
    system: str
    property: str
    value: float
    unit: str
    line: int
    partner: str | None = None
    multipole: int | None = None
    frequency: float | None = None
    imaginary: bool | None = None
    level: str | None = None
    k: int | None = None
    orbital: str | None = None
    index: int | None = None

    def key(self) -> tuple:
        """The identity of the number, as :func:`tdhf.quantities.key_of` gives it for computed ones."""
        return (self.system, self.partner, self.property, self.multipole, self.frequency, self.imaginary,
                self.level, self.k, self.orbital, self.index)


def _nearest(text: str, choices) -> str:
    close = difflib.get_close_matches(text, list(choices), n=1, cutoff=0.5)
    return f"did you mean {close[0]!r}?" if close else f"use one of {', '.join(choices)}"


class _Row:
    """One CSV row with the means to name a cell in an error."""

    def __init__(self, path: Path, line: int, cells: dict[str, str]) -> None:
        self.path, self.line, self.cells = path, line, cells

    def where(self, column: str) -> str:
        return f"{self.path}:{self.line}: column {column}"

    def text(self, column: str) -> str:
        return (self.cells.get(column) or "").strip()

    def convert(self, column: str, parse: Callable[[str], object], expected: str):
        try:
            return parse(self.text(column))
        except (ValueError, OverflowError):
            raise InputError(f"{self.where(column)}: {self.text(column)!r} is not {expected}") from None


def _integer(text: str) -> int:
    return int(text)


def _number(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(text)
    return value


def _boolean(text: str) -> bool:
    if text.lower() in _TRUE:
        return True
    if text.lower() in _FALSE:
        return False
    raise ValueError(text)


def _system(row: _Row, column: str) -> System:
    name = row.text(column)
    try:
        element, charge = parse_system_name(name, row.where(column))
        return System.from_input(element, charge)
    except InputError as err:
        message = str(err).replace("set atom.charge", 'write the charge in the name, e.g. "Mg2+"')
        if not message.startswith(row.where(column)):
            message = f"{row.where(column)}: {name!r}: {message.split(': ', 1)[-1]}"
        raise InputError(message) from None


def _user_value(row: _Row, label_column: bool) -> UserValue:
    prop = row.text("property")
    if prop not in COMPARABLE:
        raise InputError(f"{row.where('property')}: {prop!r} is not a property tdhf compares; {_nearest(prop, COMPARABLE)}")
    applies = COMPARABLE[prop]
    for column in _IDENTIFIERS:
        governing = "frequency" if column == "frequency_unit" else column
        if row.text(column) and governing not in applies:
            raise InputError(f"{row.where(column)}: {prop} has no {governing}; leave the cell empty")
    system = _system(row, "system")
    values: dict[str, object] = {}
    if "multipole" in applies:
        multipole = row.convert("multipole", _integer, "an integer") if row.text("multipole") else \
            _FIXED_MULTIPOLE.get(prop, 1)
        if not 1 <= multipole <= 3 or _FIXED_MULTIPOLE.get(prop, multipole) != multipole:
            allowed = _FIXED_MULTIPOLE.get(prop)
            raise InputError(f"{row.where('multipole')}: {multipole} is not a multipole of {prop};"
                             f" use {allowed if allowed else '1, 2 or 3'}")
        values["multipole"] = multipole
    if "frequency" in applies:
        values["frequency"] = parse_frequency(row.text("frequency") or 0.0, row.where("frequency"),
                                              row.text("frequency_unit") or None)
        values["imaginary"] = row.convert("imaginary", _boolean, "true or false") if row.text("imaginary") else False
    if "level" in applies:
        level = row.text("level") or "coupled"
        allowed_levels = ("coupled",) if prop in _COUPLED_ONLY else ("coupled", "uncoupled")
        if level not in allowed_levels:
            raise InputError(f"{row.where('level')}: {level!r} is not a level of {prop}; {_nearest(level, allowed_levels)}")
        values["level"] = level
    for column in ("k", "index", "orbital", "partner"):
        if column in applies and not row.text(column):
            raise InputError(f"{row.where(column)}: empty; {_REQUIRED_BY[column]} need it")
    if "k" in applies:
        k = row.convert("k", _integer, "an integer")
        if k not in _SUM_RULE_POWERS:
            raise InputError(f"{row.where('k')}: S({k}) is not computed; use k = {', '.join(map(str, _SUM_RULE_POWERS))}")
        values["k"] = k
    if "index" in applies:
        index = row.convert("index", _integer, "an integer")
        if not 1 <= index <= 100:
            raise InputError(f"{row.where('index')}: {index} is not a line number in 1..100 (1 = the lowest line)")
        values["index"] = index
    if "orbital" in applies:
        labels = [f"{s.n}{'spdfghik'[s.l]}" for s in system.subshells]
        orbital = row.text("orbital")
        if orbital not in labels:
            raise InputError(f"{row.where('orbital')}: {system.name} has no occupied {orbital!r}; {_nearest(orbital, labels)}")
        values["orbital"] = orbital
    if "partner" in applies:
        values["partner"] = _system(row, "partner").name
    unit = property_unit(prop, values.get("multipole"), values.get("k"))
    value = row.convert("value", _number, "a finite number")
    if row.text("unit"):
        value = to_atomic(value, row.text("unit"), prop, unit, row.where("unit"))
    label = row.text("label") if label_column else ""
    return UserValue(label=label or "unlabelled", system=system.name, property=prop, value=value, unit=unit,
                     line=row.line, **values)


def read_user_values(path: str | Path) -> tuple[UserValue, ...]:
    """Every row of the CSV file ``path``, checked (module docstring).

    Raises
    ------
    InputError
        The file cannot be read, has no header or misses a required column, or a cell is wrong
        (file, line, column and the fix in one line).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except OSError as err:
        raise InputError(f"{path}: cannot read the file: {err.strerror or err}") from None
    except UnicodeDecodeError as err:
        raise InputError(f"{path}: not a UTF-8 text file (byte {err.start}); give a CSV file") from None
    reader = csv.reader(text.splitlines())
    header: list[str] = []
    rows = []
    for cells in reader:
        line = reader.line_num
        if not any(cell.strip() for cell in cells) or cells[0].lstrip().startswith("#"):
            continue  # blank lines and comment lines
        if not header:
            header = [cell.strip() for cell in cells]
            for column in REQUIRED_COLUMNS:
                if column not in header:
                    raise InputError(f"{path}:{line}: missing column {column!r}; the header must name"
                                     f" {', '.join(REQUIRED_COLUMNS)} (found: {', '.join(header)})")
            continue
        if len(cells) > len(header):
            raise InputError(f"{path}:{line}: {len(cells)} cells but the header names {len(header)} columns")
        rows.append(_user_value(_Row(path, line, dict(zip(header, cells))), "label" in header))
    if not header:
        raise InputError(f"{path}:1: empty file; the first line must name the columns, at least"
                         f" {', '.join(REQUIRED_COLUMNS)}")
    if not rows:
        raise InputError(f"{path}: no rows below the header; nothing to compare")
    return tuple(rows)
