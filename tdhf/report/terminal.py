"""Terminal tables of a run (rich).  Every function takes the Console to print on; none prints
anywhere else.  Values are in atomic units (hartree, bohr) unless a header says otherwise; the eV
columns use :data:`tdhf.constants.HARTREE_EV`.

Digits
------
A certified number (one with an uncertainty u from :mod:`tdhf.certify`) is printed through the
place of the second significant digit of u, followed by u in units of that last digit, in
parentheses: alpha = 1.3222336700 with u = 3.0e-9 prints as ``1.3222336700(30)``; trailing zeros
are kept, as they are digits.  A number that was not certified is printed with
:data:`UNCERTIFIED_DIGITS` significant digits (trailing zeros kept) and the table says so; the
JSON file always holds every digit.  Bookkeeping columns (frequencies, counts) use fixed formats.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, Sequence

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from tdhf import constants

if TYPE_CHECKING:  # only for annotations: the report layer reads results, it does not run them
    from tdhf.driver import RunResult
    from tdhf.ground_state import GroundState

__all__ = ["print_report", "header_line", "new_table", "MISSING", "ground_state_table", "orbital_table", "rows_table", "format_value",
           "Column", "ROW_TABLES", "dispersion_systems_table", "SERIES_COLUMNS", "UNCERTIFIED_DIGITS"]

MISSING = "-"
#: Significant digits of a number printed without a certificate.
UNCERTIFIED_DIGITS = 7
#: Most significant digits ever printed (double precision holds ~15.9).
MAX_DIGITS = 15
UNCERTIFIED_NOTE = (f"Numbers without (uncertainty) are not certified and shown to {UNCERTIFIED_DIGITS} significant"
                    " digits; run with --certify for certified digits (the JSON file holds all digits).")


def format_value(value: float, uncertainty: float | None) -> str:
    """A number with the digits its uncertainty allows (module docstring); ``-`` for None."""
    if value is None:
        return MISSING
    value = float(value)
    if not math.isfinite(value):
        return str(value)
    if uncertainty is None or not math.isfinite(uncertainty):
        return f"{value:#.{UNCERTIFIED_DIGITS}g}".rstrip(".") if value else "0"
    magnitude = abs(value)
    floor = 10.0 ** (-MAX_DIGITS + 1) * magnitude
    if uncertainty <= floor or magnitude == 0.0 and uncertainty == 0.0:
        return f"{value:#.{MAX_DIGITS}g}".rstrip(".")
    last = math.floor(math.log10(uncertainty)) - 1  # exponent of the last printed digit
    units = round(uncertainty / 10.0**last)
    if units >= 100:  # 99.6 rounds up: one place less
        last += 1
        units = round(uncertainty / 10.0**last)
    if last <= 0 and (magnitude >= 1e-4 or magnitude == 0.0) and magnitude < 1e12:
        return f"{value:.{-last}f}({units})"
    exponent = math.floor(math.log10(magnitude)) if magnitude else last
    digits = max(exponent - last, 0)
    return f"{value:.{digits}e}({units})"


def new_table(title: str) -> Table:
    """A table in the house style: light rules, units on a second header line."""
    return Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)


def _add_column(table: Table, header: str, justify: str = "right") -> None:
    # "fold" moves digits that do not fit to the next line instead of cutting them off
    table.add_column(header, justify=justify, overflow="fold")


@dataclass(frozen=True)
class Column:
    """One table column: header (with unit), how to get the value from a row, how to format it.

    ``key`` names the result field of a certifiable number: its digits then follow its
    uncertainty (module docstring); columns without a key use ``format``.  ``scale`` converts a
    key column's value and uncertainty for display (e.g. bohr^2 to Mb).
    """

    header: str
    value: Callable[[Any], Any]
    format: str = ".8g"
    optional: bool = False  # left out when every row has None or 0 (e.g. imaginary parts without broadening)
    key: str | None = None
    scale: float = 1.0


def _field(name: str) -> Callable[[Any], Any]:
    def get(row: Any) -> Any:
        return row.get(name) if isinstance(row, Mapping) else getattr(row, name, None)

    return get


def _number(name: str, header: str, optional: bool = False) -> Column:
    """A certifiable number column."""
    return Column(header, _field(name), optional=optional, key=name)


def _in_ev(name: str) -> Callable[[Any], Any]:
    get = _field(name)

    def convert(row: Any) -> Any:
        value = get(row)
        return None if value is None else value * constants.HARTREE_EV

    return convert


def _axis(row: Any) -> str | None:
    flag = _field("imaginary")(row)
    return None if flag is None else "imaginary" if flag else "real"


def _flag(name: str) -> Callable[[Any], Any]:
    get = _field(name)
    return lambda row: None if get(row) is None else ("yes" if get(row) else "NO")


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
        Column("frequency\n(hartree)", _field("frequency"), ".6g"),
        Column("axis", _axis),
        _number("coupled", "coupled, TDHF\n(a.u.)"),
        _number("uncoupled", "uncoupled\n(a.u.)"),
        _number("velocity_form", "velocity form\n(a.u.)"),
        Column("broadening\n(hartree)", _field("broadening"), ".4g", optional=True),
        _number("coupled_imaginary_part", "Im coupled\n(a.u.)", optional=True),
        _number("uncoupled_imaginary_part", "Im uncoupled\n(a.u.)", optional=True),
        Column("pole below\n(hartree)", _field("pole_below"), ".8f", optional=True),
        Column("pole above\n(hartree)", _field("pole_above"), ".8f", optional=True),
        Column("converged", _flag("converged")),
    )),
    "shielding": ("Dipole shielding factor (dimensionless)", (
        Column("frequency\n(hartree)", _field("frequency"), ".6g"),
        Column("axis", _axis),
        _number("direct", "direct\n(1)"),
        Column("(N + w^2 alpha)/Z\n(1)", _field("from_polarizability"), ".10g"),
    )),
    "quadrupole_shielding": ("Quadrupole shielding factor (dimensionless)", (
        Column("frequency\n(hartree)", _field("frequency"), ".6g"),
        Column("axis", _axis),
        _number("coupled", "coupled\n(1)"),
        _number("uncoupled", "uncoupled\n(1)"),
    )),
    "sum_rules": ("Oscillator-strength sums S(k)", (
        Column("L", _field("multipole")),
        Column("k", _field("k")),
        _number("value", "S(k), TDHF\n(a.u.)"),
        _number("uncoupled", "uncoupled\n(a.u.)"),
        Column("exact RPA\n(a.u.)", _field("exact"), ".12g"),
    )),
    "excitations": ("Excitations (bound lines)", (
        Column("L", _field("multipole")),
        _number("energy", "energy\n(hartree)"),
        Column("energy\n(eV)", _in_ev("energy"), ".6f"),
        _number("oscillator_strength", "oscillator strength\n(1)"),
        Column("converged", _flag("converged")),
    )),
    "strength_distribution": ("Where the oscillator strength lies (S(0) split)", (
        Column("L", _field("multipole")),
        Column("threshold\n(hartree)", _field("continuum_threshold"), ".6f"),
        Column("roots below\n(count)", _field("discrete_states")),
        Column("below threshold\n(sum f)", _field("discrete_sum"), ".8g"),
        Column("continuum\n(sum f)", _field("continuum_sum"), ".8g"),
        Column("S(0)\n(sum f)", _field("total"), ".10g"),
    )),
    "photoionization": ("Photoionization cross sections (TDHF/RPA; 1 Mb = 1e-22 m^2)", (
        Column("photon energy\n(hartree)", _field("photon_energy"), ".6f"),
        Column("photon energy\n(eV)", _in_ev("photon_energy"), ".4f"),
        Column("sigma, length\n(Mb)", _field("cross_section"), key="cross_section", scale=constants.BOHR2_MEGABARN),
        Column("sigma, velocity\n(Mb)", _field("cross_section_velocity"), key="cross_section_velocity",
               scale=constants.BOHR2_MEGABARN),
        Column("sigma, uncoupled\n(Mb)", _field("cross_section_uncoupled"), key="cross_section_uncoupled",
               scale=constants.BOHR2_MEGABARN),
        Column("partial by hole\n(Mb)", lambda row: "  ".join(
            f"{_field('subshell')(p)} {_field('cross_section')(p) * constants.BOHR2_MEGABARN:.5g}" for p in _field("partial")(row))),
        Column("converged", _flag("converged")),
    )),
    "resonances": ("Autoionizing resonances", (
        Column("energy\n(hartree)", _field("energy"), ".8f"),
        Column("energy\n(eV)", _in_ev("energy"), ".5f"),
        Column("full width\n(hartree)", _field("width"), ".4e"),
        Column("hole", _field("subshell")),
    )),
    "certification": ("Certificate: each number with the grid, box, tolerances and quadrature varied", (
        Column("quantity", _field("quantity")),
        Column("value", _field("value"), ".12g"),
        Column("varied", _field("refined"), ".12g"),
        Column("uncertainty", _field("uncertainty"), ".1e"),
        Column("relative", _field("relative_difference"), ".1e"),
        Column("largest from", _field("approximation")),
    )),
    "dispersion": ("Dispersion coefficients", (
        Column("pair", lambda row: "-".join(_field("pair")(row))),
        _number("C6", "C6\n(hartree bohr^6)"),
        _number("C8", "C8\n(hartree bohr^8)"),
        _number("C10", "C10\n(hartree bohr^10)"),
        Column("C6 quadrature\nerror estimate", _field("C6_error"), ".1e"),
        Column("converged", _flag("converged")),
    )),
}


#: Columns of the whole-spectrum sum rules of a [photoionization] run (tdhf.properties.photoionization).
CONTINUUM_SUM_RULE_COLUMNS = (
    Column("k", _field("k")),
    Column("bound lines\n(a.u.)", _field("bound"), ".10g"),
    Column("continuum\n(a.u.)", _field("continuum"), ".10g"),
    Column("remainder\n(a.u.)", _field("remainder"), ".10g"),
    Column("total\n(a.u.)", _field("total"), ".10g"),
    Column("exact\n(a.u.)", _field("exact"), ".10g"),
    Column("relative\ndifference", _field("relative_difference"), ".1e"),
    Column("converged", _flag("converged")),
)
KRAMERS_KRONIG_COLUMNS = (
    Column("nu\n(hartree)", _field("imaginary_frequency"), ".6g"),
    Column("from the spectrum\n(bohr^3)", _field("rebuilt"), ".10g"),
    Column("direct\n(bohr^3)", _field("direct"), ".10g"),
    Column("relative\ndifference", _field("relative_difference"), ".1e"),
    Column("converged", _flag("converged")),
)

#: Columns of the ``tdhf series`` summary (rows are tdhf.series.SeriesEntry).
SERIES_COLUMNS = (
    Column("deck", _field("deck")),
    Column("system", _field("system")),
    Column("status", _field("status")),
    Column("total energy\n(hartree)", _field("total_energy"), ".10f"),
    Column("result file", _field("output")),
)


def header_line(result: "RunResult") -> Text:
    """One line naming the system and the program."""
    atom = result.atom
    charge = f"charge {atom.charge:+d}" if atom.charge else "neutral"
    return Text.assemble(
        (atom.name, "bold"),
        f"   Z = {atom.Z}, {charge}, {atom.electrons} electrons, {atom.configuration}"
        f"   ({result.program.name} {result.program.version}, accuracy {result.settings.accuracy})",
    )


def ground_state_table(state: "GroundState", uncertainties: Mapping[str, float] | None = None) -> Table:
    """Energy components, virial ratio, density at the nucleus, convergence and grid."""
    known = uncertainties or {}
    table = new_table("Hartree-Fock ground state")
    _add_column(table, "quantity", "left")
    _add_column(table, "value")
    _add_column(table, "unit", "left")
    energy = format_value(state.total_energy, known.get("ground_state.total_energy")) if known else \
        _cell(state.total_energy, ".10f")
    rows = [
        ("total energy", energy, "hartree"),
        ("kinetic energy T", _cell(state.kinetic_energy, ".10f"), "hartree"),
        ("electron-nucleus energy", _cell(state.nuclear_attraction_energy, ".10f"), "hartree"),
        ("Coulomb (direct) energy", _cell(state.coulomb_energy, ".10f"), "hartree"),
        ("exchange energy", _cell(state.exchange_energy, ".10f"), "hartree"),
        ("virial ratio -V/T", _cell(state.virial_ratio, ".12f"), "1 (exact: 2)"),
        ("density at nucleus rho(0)", _cell(state.density_at_nucleus, ".8g"), "bohr^-3"),
        ("cusp ratio -rho'(0)/(2 Z rho(0))", _cell(state.cusp_ratio, ".8f"), "1 (exact: 1)"),
        ("converged", "yes" if state.converged else "NO", ""),
        ("iterations", f"{state.iterations} ({state.scf_strategy})", ""),
        ("last energy change", _cell(state.energy_change, ".1e"), "hartree"),
        ("last orbital change", _cell(state.orbital_change, ".1e"), "1"),
        ("grid", f"{state.grid_points} points to {state.r_max:g}", "bohr"),
    ]
    for row in rows:
        table.add_row(*row)
    return table


def orbital_table(state: "GroundState", uncertainties: Mapping[str, float] | None = None) -> Table:
    """One row per occupied subshell: occupation, energy (hartree and eV), <r> and <r^2>."""
    known = uncertainties or {}
    table = new_table("Orbitals")
    for header in ("orbital", "occ.", "energy\n(hartree)", "energy\n(eV)", "<r>\n(bohr)", "<r^2>\n(bohr^2)"):
        _add_column(table, header, "left" if header == "orbital" else "right")
    for i, orbital in enumerate(state.orbitals):
        path = f"ground_state.orbitals[{i}].energy"
        energy = format_value(orbital.energy, known.get(path)) if known else _cell(orbital.energy, ".10f")
        table.add_row(
            orbital.label,
            str(orbital.occupation),
            energy,
            _cell(orbital.energy * constants.HARTREE_EV, ".6f"),
            _cell(orbital.mean_r, ".8f"),
            _cell(orbital.mean_r_squared, ".8f"),
        )
    return table


def rows_table(
    title: str,
    rows: Sequence[Any],
    columns: Sequence[Column],
    uncertainties: Mapping[str, float] | None = None,
    list_name: str | None = None,
) -> Table:
    """A table with one line per result row.

    With ``list_name`` (the RunResult field of the rows) the numbers of key columns are printed
    with the digits their uncertainty allows, looked up by key path in ``uncertainties``.
    """
    table = new_table(title)
    columns = [c for c in columns if not c.optional or any(c.value(row) not in (None, 0, 0.0) for row in rows)]
    for column in columns:
        _add_column(table, column.header)
    for i, row in enumerate(rows):
        cells = []
        for column in columns:
            value = column.value(row)
            if column.key is not None and list_name is not None and isinstance(value, (int, float)) \
                    and not isinstance(value, bool):
                uncertainty = (uncertainties or {}).get(f"{list_name}[{i}].{column.key}")
                cells.append(format_value(value * column.scale,
                                          None if uncertainty is None else uncertainty * column.scale))
            else:
                cells.append(_cell(value, column.format))
        table.add_row(*cells)
    return table


def dispersion_systems_table(result: "RunResult", uncertainties: Mapping[str, float] | None = None) -> Table:
    """Each system of the dispersion tables: its total energy and static alpha_1, alpha_2, alpha_3."""
    known = uncertainties or {}
    energies = {result.atom.name: (result.ground_state.total_energy, "ground_state.total_energy")}
    for i, state in enumerate(result.partner_ground_states):
        energies.setdefault(state.system.name, (state.total_energy, f"partner_ground_states[{i}].total_energy"))
    table = new_table("Systems of the dispersion table")
    for header in ("system", "total energy\n(hartree)", "alpha_1(0)\n(bohr^3)", "alpha_2(0)\n(bohr^5)",
                   "alpha_3(0)\n(bohr^7)"):
        _add_column(table, header, "left" if header == "system" else "right")
    for i, row in enumerate(result.polarizability_tables):
        energy, path = energies.get(row.system, (None, ""))
        cells = [format_value(energy, known.get(path))]
        cells += [format_value(getattr(row, name), known.get(f"polarizability_tables[{i}].{name}"))
                  for name in ("static_dipole", "static_quadrupole", "static_octupole")]
        table.add_row(row.system, *cells)
    return table


def print_report(console: Console, result: "RunResult") -> None:
    """Print the header, the ground-state and orbital tables, and every non-empty result list."""
    uncertainties = result.uncertainties()
    console.print(header_line(result))
    console.print(ground_state_table(result.ground_state, uncertainties))
    console.print(orbital_table(result.ground_state, uncertainties))
    for name, (title, columns) in ROW_TABLES.items():
        rows = getattr(result, name)
        if rows:
            console.print(rows_table(title, rows, columns, uncertainties, None if name == "certification" else name))
        if name == "dispersion" and result.polarizability_tables:
            console.print(dispersion_systems_table(result, uncertainties))
    continuum = getattr(result, "continuum", None)
    if continuum is not None and continuum.sum_rules:
        console.print(rows_table("Sum rules over bound lines and continuum (dipole)", continuum.sum_rules,
                                 CONTINUUM_SUM_RULE_COLUMNS))
    if continuum is not None and continuum.kramers_kronig:
        console.print(rows_table("Kramers-Kronig: alpha(i nu) from the spectrum against the direct solve",
                                 continuum.kramers_kronig, KRAMERS_KRONIG_COLUMNS))
    if any(getattr(result, name) for name in ROW_TABLES if name != "certification") and not uncertainties:
        console.print(UNCERTIFIED_NOTE)
