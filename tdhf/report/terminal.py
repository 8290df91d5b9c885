"""Terminal tables of a run (rich).  Every function takes the Console to print on; none prints
anywhere else.  Values are in atomic units (hartree, bohr) unless a header says otherwise; the eV
columns use :data:`tdhf.constants.HARTREE_EV`.

Result rows from the response and dispersion stages are read by attribute name (dataclass rows or
mappings), so a table shows whatever those stages return, with "-" for a missing value.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Callable, Sequence

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from tdhf.constants import HARTREE_EV
from tdhf.driver import RunResult
from tdhf.ground_state import GroundState

__all__ = ["print_report", "header_line", "ground_state_table", "orbital_table", "rows_table",
           "Column", "ROW_TABLES", "SERIES_COLUMNS"]

MISSING = "-"


def _new_table(title: str) -> Table:
    """A table in the house style: light rules, units on a second header line."""
    return Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)


def _add_column(table: Table, header: str, justify: str = "right") -> None:
    # "fold" moves digits that do not fit to the next line instead of cutting them off
    table.add_column(header, justify=justify, overflow="fold")


@dataclass(frozen=True)
class Column:
    """One table column: header (with unit), how to get the value from a row, how to format it."""

    header: str
    value: Callable[[Any], Any]
    format: str = ".8g"
    optional: bool = False  # left out when every row has None or 0 (e.g. imaginary parts without broadening)


def _field(name: str) -> Callable[[Any], Any]:
    def get(row: Any) -> Any:
        return row.get(name) if isinstance(row, Mapping) else getattr(row, name, None)

    return get


def _in_ev(name: str) -> Callable[[Any], Any]:
    get = _field(name)

    def convert(row: Any) -> Any:
        value = get(row)
        return None if value is None else value * HARTREE_EV

    return convert


def _axis(row: Any) -> str | None:
    flag = _field("imaginary")(row)
    return None if flag is None else "imaginary" if flag else "real"


def _cell(value: Any, spec: str) -> str:
    if value is None:
        return MISSING
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, complex):
        return f"{value.real:{spec}} {value.imag:+{spec}}i"
    try:  # floats and numpy scalars; inf and nan format as "inf" and "nan"
        return f"{float(value):{spec}}"
    except (TypeError, ValueError):
        return str(value)


#: Column layouts of the result lists, by RunResult field: (title, columns).
ROW_TABLES: dict[str, tuple[str, tuple[Column, ...]]] = {
    "polarizabilities": ("Multipole polarizabilities", (
        Column("L", _field("multipole")),
        Column("frequency\n(hartree)", _field("frequency"), ".6f"),
        Column("axis", _axis),
        Column("coupled, TDHF\n(a.u.)", _field("coupled"), ".10g"),
        Column("uncoupled\n(a.u.)", _field("uncoupled"), ".10g"),
        Column("velocity form\n(a.u.)", _field("velocity_form"), ".10g"),
        Column("broadening\n(hartree)", _field("broadening"), ".4g", optional=True),
        Column("Im coupled\n(a.u.)", _field("coupled_imaginary_part"), ".10g", optional=True),
        Column("Im uncoupled\n(a.u.)", _field("uncoupled_imaginary_part"), ".10g", optional=True),
    )),
    "shielding": ("Dipole shielding factor (dimensionless)", (
        Column("frequency\n(hartree)", _field("frequency"), ".6f"),
        Column("axis", _axis),
        Column("direct\n(1)", _field("direct"), ".10g"),
        Column("from polarizability\n(1)", _field("from_polarizability"), ".10g"),
    )),
    "quadrupole_shielding": ("Quadrupole shielding factor (dimensionless)", (
        Column("frequency\n(hartree)", _field("frequency"), ".6f"),
        Column("coupled\n(1)", _field("coupled"), ".10g"),
        Column("uncoupled\n(1)", _field("uncoupled"), ".10g"),
    )),
    "sum_rules": ("Oscillator-strength sums S(k)", (
        Column("L", _field("multipole")),
        Column("k", _field("k")),
        Column("S(k), TDHF\n(a.u.)", _field("value"), ".10g"),
        Column("uncoupled\n(a.u.)", _field("uncoupled"), ".10g"),
        Column("exact RPA\n(a.u.)", _field("exact"), ".10g"),
    )),
    "excitations": ("Excitations", (
        Column("L", _field("multipole")),
        Column("energy\n(hartree)", _field("energy"), ".8f"),
        Column("energy\n(eV)", _in_ev("energy"), ".6f"),
        Column("oscillator strength\n(1)", _field("oscillator_strength"), ".6g"),
        Column("bound", lambda row: "yes" if _field("bound")(row) else "no"),
    )),
    "strength_distribution": ("Where the oscillator strength lies (S(0) split)", (
        Column("L", _field("multipole")),
        Column("threshold\n(hartree)", _field("continuum_threshold"), ".6f"),
        Column("bound states\n(count)", _field("discrete_states")),
        Column("bound\n(sum f)", _field("discrete_sum"), ".8g"),
        Column("continuum\n(sum f)", _field("continuum_sum"), ".8g"),
        Column("above cutoff\n(sum f)", _field("beyond_cutoff"), ".8g"),
        Column("S(0)\n(sum f)", _field("total"), ".10g"),
    )),
    "certification": ("Grid certification: each number again on a finer grid", (
        Column("quantity", _field("quantity")),
        Column("value", _field("value"), ".12g"),
        Column("finer grid", _field("refined"), ".12g"),
        Column("relative change", _field("relative_difference"), ".1e"),
    )),
    "dispersion": ("Dispersion coefficients", (
        Column("pair", lambda row: "-".join(_field("pair")(row))),
        Column("C6\n(hartree bohr^6)", _field("C6"), ".8g"),
        Column("C8\n(hartree bohr^8)", _field("C8"), ".8g"),
        Column("C10\n(hartree bohr^10)", _field("C10"), ".8g"),
        Column("C6 error estimate\n(hartree bohr^6)", _field("C6_error"), ".1e"),
        Column("C10 error estimate\n(hartree bohr^10)", _field("C10_error"), ".1e"),
    )),
}


#: Columns of the ``tdhf series`` summary (rows are tdhf.series.SeriesEntry).
SERIES_COLUMNS = (
    Column("deck", _field("deck")),
    Column("system", _field("system")),
    Column("status", _field("status")),
    Column("total energy\n(hartree)", _field("total_energy"), ".10f"),
    Column("result file", _field("output")),
)


def header_line(result: RunResult) -> Text:
    """One line naming the system and the program."""
    atom = result.atom
    return Text.assemble(
        (atom.name, "bold"),
        f"   Z = {atom.Z}, charge {atom.charge:+d}" if atom.charge else f"   Z = {atom.Z}, neutral, {atom.electrons} electrons, {atom.configuration}"
        f"   ({result.program.name} {result.program.version})",
    )


def ground_state_table(state: GroundState) -> Table:
    """Energy components, virial ratio, density at the nucleus, convergence and grid."""
    table = _new_table("Hartree-Fock ground state")
    _add_column(table, "quantity", "left")
    _add_column(table, "value")
    _add_column(table, "unit", "left")
    rows = [
        ("total energy", _cell(state.total_energy, ".10f"), "hartree"),
        ("kinetic energy T", _cell(state.kinetic_energy, ".10f"), "hartree"),
        ("electron-nucleus energy", _cell(state.nuclear_attraction_energy, ".10f"), "hartree"),
        ("Coulomb (direct) energy", _cell(state.coulomb_energy, ".10f"), "hartree"),
        ("exchange energy", _cell(state.exchange_energy, ".10f"), "hartree"),
        ("virial ratio -V/T", _cell(state.virial_ratio, ".12f"), "1 (exact: 2)"),
        ("density at nucleus rho(0)", _cell(state.density_at_nucleus, ".8g"), "bohr^-3"),
        ("cusp ratio -rho'(0)/(2 Z rho(0))", _cell(state.cusp_ratio, ".8f"), "1 (exact: 1)"),
        ("converged", _cell(state.converged, ""), ""),
        ("iterations", f"{state.iterations} ({state.scf_strategy})", ""),
        ("last energy change", _cell(state.energy_change, ".1e"), "hartree"),
        ("last orbital change", _cell(state.orbital_change, ".1e"), "1"),
        ("grid", f"{state.grid_points} points to {state.r_max:g}", "bohr"),
    ]
    for row in rows:
        table.add_row(*row)
    return table


def orbital_table(state: GroundState) -> Table:
    """One row per occupied subshell: occupation, energy (hartree and eV), <r> and <r^2>."""
    table = _new_table("Orbitals")
    for header in ("orbital", "occ.", "energy\n(hartree)", "energy\n(eV)", "<r>\n(bohr)", "<r^2>\n(bohr^2)"):
        _add_column(table, header, "left" if header == "orbital" else "right")
    for orbital in state.orbitals:
        table.add_row(
            orbital.label,
            str(orbital.occupation),
            _cell(orbital.energy, ".10f"),
            _cell(orbital.energy * HARTREE_EV, ".6f"),
            _cell(orbital.mean_r, ".8f"),
            _cell(orbital.mean_r_squared, ".8f"),
        )
    return table


def rows_table(title: str, rows: Sequence[Any], columns: Sequence[Column]) -> Table:
    """A table with one line per result row."""
    table = _new_table(title)
    columns = [c for c in columns if not c.optional or any(c.value(row) not in (None, 0, 0.0) for row in rows)]
    for column in columns:
        _add_column(table, column.header)
    for row in rows:
        table.add_row(*(_cell(column.value(row), column.format) for column in columns))
    return table


def print_report(console: Console, result: RunResult) -> None:
    """Print the header, the ground-state and orbital tables, and every non-empty result list."""
    console.print(header_line(result))
    console.print(ground_state_table(result.ground_state))
    console.print(orbital_table(result.ground_state))
    for name, (title, columns) in ROW_TABLES.items():
        rows = getattr(result, name)
        if rows:
            console.print(rows_table(title, rows, columns))
