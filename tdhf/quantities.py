"""The long ("tidy") form of a result: one :class:`Quantity` per number.

Every number a run reports becomes one row with the columns ``system, partner, property,
multipole, frequency, imaginary, level, k, orbital, index, value, uncertainty, unit`` and the
key path of the number in the JSON result (``path``).  Certificates, tables, comparisons and
plots are built from these rows; the typed result objects stay the API.

Property names (extend, never rename): ``total_energy``, ``orbital_energy`` (``orbital`` set),
``polarizability`` (``level`` coupled or uncoupled), ``polarizability_velocity_form``,
``polarizability_imaginary_part`` (broadened frequencies and above the threshold), ``dipole_shielding``,
``quadrupole_shielding``, ``sum_rule`` (``k`` set), ``excitation_energy`` and
``oscillator_strength`` (``index``: 1 for the lowest listed line of the multipole), ``C6``,
``C8``, ``C10`` (``partner`` set), ``cross_section`` (coupled or uncoupled, length form; the
photon energy in ``frequency``), ``cross_section_velocity``, ``partial_cross_section``
(``orbital``: the hole subshell), ``resonance_energy`` and ``resonance_width`` (``index``,
``orbital``: the hole).  Frequencies are in hartree (nu for ``imaginary``); units are
words such as ``bohr^3`` or ``hartree``.

>>> from tdhf.deck import parse_deck
>>> from tdhf.driver import run_deck
>>> rows = quantities(run_deck(parse_deck('[atom]\\nelement = "He"\\n[response]\\n')))
>>> [(q.property, q.level, q.unit) for q in rows if q.property == "polarizability"]
[('polarizability', 'coupled', 'bohr^3'), ('polarizability', 'uncoupled', 'bohr^3')]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Iterator

from tdhf.driver import RunResult

__all__ = ["Quantity", "quantities", "key_of", "multipole_unit", "property_unit"]


@dataclass(frozen=True)
class Quantity:
    """One reported number with everything that identifies it (see the module docstring).

    Attributes
    ----------
    system : str
        The system, e.g. "Ne"; the first system of a pair property.
    property : str
        What the number is (module docstring).
    value : float
        The number, in ``unit``.
    unit : str
        Its atomic unit in words: "hartree", "bohr^3", "hartree bohr^6", "1" (dimensionless).
    path : str
        Key path of the number in the JSON result, e.g. "polarizabilities[0].coupled".
    partner : str or None
        The second system of C6, C8, C10.
    multipole : int or None
        L of a response property.
    frequency : float or None
        omega (or nu if ``imaginary``), hartree.
    imaginary : bool or None
        True for omega = i nu.
    level : str or None
        "coupled" (TDHF) or "uncoupled".
    k : int or None
        The power of a sum rule S(k).
    orbital : str or None
        The subshell of an orbital energy.
    index : int or None
        The line of an excitation (1 = lowest listed of its multipole).
    uncertainty : float or None
        Certified absolute uncertainty (same unit); None if the run was not certified.
    converged : bool
        False if a solve behind the number did not converge.
    """

    system: str
    property: str
    value: float
    unit: str
    path: str
    partner: str | None = None
    multipole: int | None = None
    frequency: float | None = None
    imaginary: bool | None = None
    level: str | None = None
    k: int | None = None
    orbital: str | None = None
    index: int | None = None
    uncertainty: float | None = None
    converged: bool = True


def multipole_unit(multipole: int) -> str:
    """The unit of alpha_L in atomic units: bohr^(2L+1)."""
    return f"bohr^{2 * multipole + 1}"


def key_of(quantity: Quantity) -> tuple:
    """What identifies a number across runs of the same deck (everything but value, uncertainty, path)."""
    return (quantity.system, quantity.partner, quantity.property, quantity.multipole, quantity.frequency,
            quantity.imaginary, quantity.level, quantity.k, quantity.orbital, quantity.index)


def quantities(result: RunResult) -> tuple[Quantity, ...]:
    """Every finite number of ``result`` as a Quantity, with its certified uncertainty if any."""
    uncertainty = result.uncertainties()
    rows = []
    every = list(_rows(result))
    for row in every + list(_static_rows(result, every)):
        if row.value is None or not math.isfinite(row.value):
            continue
        rows.append(replace(row, value=float(row.value), uncertainty=uncertainty.get(row.path)))
    return tuple(rows)


def _rows(result: RunResult) -> Iterator[Quantity]:
    name = result.atom.name
    state = result.ground_state
    yield Quantity(name, "total_energy", state.total_energy, "hartree", "ground_state.total_energy",
                   converged=state.converged)
    for i, orbital in enumerate(state.orbitals):
        yield Quantity(name, "orbital_energy", orbital.energy, "hartree", f"ground_state.orbitals[{i}].energy",
                       orbital=orbital.label, converged=state.converged)
    for i, row in enumerate(result.polarizabilities):
        common = dict(multipole=row.multipole, frequency=row.frequency, imaginary=row.imaginary,
                      converged=row.converged)
        unit = multipole_unit(row.multipole)
        path = f"polarizabilities[{i}]"
        yield Quantity(name, "polarizability", row.coupled, unit, f"{path}.coupled", level="coupled", **common)
        yield Quantity(name, "polarizability", row.uncoupled, unit, f"{path}.uncoupled", level="uncoupled", **common)
        yield Quantity(name, "polarizability_velocity_form", row.velocity_form, unit, f"{path}.velocity_form",
                       level="coupled", **common)
        if row.broadening or row.method == "outgoing waves":
            yield Quantity(name, "polarizability_imaginary_part", row.coupled_imaginary_part, unit,
                           f"{path}.coupled_imaginary_part", level="coupled", **common)
            yield Quantity(name, "polarizability_imaginary_part", row.uncoupled_imaginary_part, unit,
                           f"{path}.uncoupled_imaginary_part", level="uncoupled", **common)
    for i, row in enumerate(result.shielding):
        yield Quantity(name, "dipole_shielding", row.direct, "1", f"shielding[{i}].direct", multipole=1,
                       frequency=row.frequency, imaginary=row.imaginary, level="coupled", converged=row.converged)
    for i, row in enumerate(result.quadrupole_shielding):
        common = dict(multipole=2, frequency=row.frequency, imaginary=row.imaginary, converged=row.converged)
        yield Quantity(name, "quadrupole_shielding", row.coupled, "1", f"quadrupole_shielding[{i}].coupled",
                       level="coupled", **common)
        yield Quantity(name, "quadrupole_shielding", row.uncoupled, "1", f"quadrupole_shielding[{i}].uncoupled",
                       level="uncoupled", **common)
    for i, row in enumerate(result.sum_rules):
        unit = _sum_rule_unit(row.multipole, row.k)
        common = dict(multipole=row.multipole, k=row.k, converged=row.converged)
        yield Quantity(name, "sum_rule", row.value, unit, f"sum_rules[{i}].value", level="coupled", **common)
        yield Quantity(name, "sum_rule", row.uncoupled, unit, f"sum_rules[{i}].uncoupled", level="uncoupled", **common)
    counters: dict[int, int] = {}
    for i, row in enumerate(result.excitations):
        counters[row.multipole] = counters.get(row.multipole, 0) + 1
        common = dict(multipole=row.multipole, index=counters[row.multipole], level="coupled", converged=row.converged)
        yield Quantity(name, "excitation_energy", row.energy, "hartree", f"excitations[{i}].energy", **common)
        yield Quantity(name, "oscillator_strength", row.oscillator_strength,
                       property_unit("oscillator_strength", row.multipole),
                       f"excitations[{i}].oscillator_strength", **common)
    for i, row in enumerate(result.photoionization):
        common = dict(multipole=1, frequency=row.photon_energy, imaginary=False, converged=row.converged)
        path = f"photoionization[{i}]"
        yield Quantity(name, "cross_section", row.cross_section, "bohr^2", f"{path}.cross_section",
                       level="coupled", **common)
        yield Quantity(name, "cross_section_velocity", row.cross_section_velocity, "bohr^2",
                       f"{path}.cross_section_velocity", level="coupled", **common)
        yield Quantity(name, "cross_section", row.cross_section_uncoupled, "bohr^2",
                       f"{path}.cross_section_uncoupled", level="uncoupled", **common)
        for j, partial in enumerate(row.partial):
            yield Quantity(name, "partial_cross_section", partial.cross_section, "bohr^2",
                           f"{path}.partial[{j}].cross_section", orbital=partial.subshell, level="coupled", **common)
    for i, row in enumerate(result.resonances):
        common = dict(multipole=1, index=i + 1, orbital=row.subshell, level="coupled")
        yield Quantity(name, "resonance_energy", row.energy, "hartree", f"resonances[{i}].energy", **common)
        yield Quantity(name, "resonance_width", row.width, "hartree", f"resonances[{i}].width", **common)
    for i, state in enumerate(result.partner_ground_states):
        if state.system != result.atom:
            yield Quantity(state.system.name, "total_energy", state.total_energy, "hartree",
                           f"partner_ground_states[{i}].total_energy", converged=state.converged)
    for i, row in enumerate(result.dispersion):
        first, second = row.pair
        for order, value in (("C6", row.C6), ("C8", row.C8), ("C10", row.C10)):
            yield Quantity(first, order, value, property_unit(order), f"dispersion[{i}].{order}",
                           partner=second, level="coupled", converged=row.converged)


def _static_rows(result: RunResult, rows: list[Quantity]) -> Iterator[Quantity]:
    """alpha_L(0) of each dispersion table's system, unless a response row already has it."""
    known = {key_of(q) for q in rows}
    for i, table in enumerate(result.polarizability_tables):
        for L, name in ((1, "static_dipole"), (2, "static_quadrupole"), (3, "static_octupole")):
            row = Quantity(table.system, "polarizability", getattr(table, name), multipole_unit(L),
                           f"polarizability_tables[{i}].{name}", multipole=L, frequency=0.0, imaginary=False,
                           level="coupled", converged=table.converged)
            if key_of(row) not in known:
                known.add(key_of(row))
                yield row


def _sum_rule_unit(multipole: int, k: int) -> str:
    """S_L(k) = sum_n omega_n^k f_n with f_n in bohr^(2L-2) (dimensionless for L = 1)."""
    parts = []
    if k:
        parts.append(f"hartree^{k}")
    if multipole > 1:
        parts.append(f"bohr^{2 * multipole - 2}")
    return " ".join(parts) if parts else "1"


def property_unit(property: str, multipole: int | None = None, k: int | None = None) -> str:
    """The atomic unit of a property in words, e.g. ``property_unit("C6") == "hartree bohr^6"``.

    Oscillator strengths f = 2 omega |<n|r^L P_L|0>|^2 are in bohr^(2L-2) (dimensionless for L = 1).
    """
    if property in ("total_energy", "orbital_energy", "excitation_energy", "resonance_energy", "resonance_width"):
        return "hartree"
    if property in ("cross_section", "cross_section_velocity", "partial_cross_section"):
        return "bohr^2"
    if property.startswith("polarizability"):
        return multipole_unit(multipole)
    if property == "sum_rule":
        return _sum_rule_unit(multipole, k)
    if property == "oscillator_strength":
        return _sum_rule_unit(multipole, 0)
    if property in ("C6", "C8", "C10"):
        return f"hartree bohr^{property[1:]}"
    return "1"
