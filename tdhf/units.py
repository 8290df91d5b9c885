"""Units at the edges: frequencies read with a unit, numbers shown in SI or spectroscopic units.

Inside tdhf everything is in Hartree atomic units; this module converts only where numbers enter
(deck frequencies, the columns of a user's CSV) or leave (tables, CSV, Markdown, LaTeX, plots).
The JSON result files always stay in atomic units.  Every factor comes from the CODATA values of
:mod:`tdhf.constants` (scipy.constants).

Input
-----
A frequency is a plain number in hartree or a string ``"<number> <unit>"`` with a unit of
:data:`FREQUENCY_UNITS`: ``"0.1 hartree"``, ``"2.5 eV"``, ``"1064 nm"`` (the photon of that vacuum
wavelength, E = hc/lambda), ``"9398 cm^-1"``, ``"300 THz"`` (E = h nu) ...

>>> round(parse_frequency("1064 nm", "response.frequencies[0]"), 7)  # 1/(1064e-9 m x 2.1947e7 m^-1)
0.0428227
>>> parse_frequency(0.5, "response.frequencies[0]")
0.5

Output
------
:data:`UNIT_SYSTEMS`: ``atomic`` (hartree, bohr), ``spectroscopic`` (eV; alpha_L as the
polarizability volume in angstrom^(2L+1); C_n in meV angstrom^n) and ``si`` (J, m; alpha_L in
C m^(2L) V^-1).  SI units carry a power of ten that brings one atomic unit between 1 and 10
(alpha_1 in 10^-41 C m^2 V^-1, energies in 10^-18 J).  Frequencies are photon energies hbar omega
and take the energy unit.

>>> unit = display_unit("polarizability", "bohr^3", "si")
>>> unit.label, round(unit.factor, 6)
('10^-41 C m^2 V^-1', 1.648777)
>>> display_unit("C6", "hartree bohr^6", "spectroscopic").label
'meV angstrom^6'
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from tdhf import constants
from tdhf.errors import InputError

__all__ = ["Unit", "UNIT_SYSTEMS", "FREQUENCY_UNITS", "parse_frequency", "display_unit", "frequency_unit",
           "to_atomic"]

#: The output unit systems (command-line option ``--units``).
UNIT_SYSTEMS = ("atomic", "si", "spectroscopic")

#: Properties whose atomic unit bohr^(2L+1) is a polarizability (SI: C m^(2L) V^-1).
_POLARIZABILITIES = ("polarizability", "polarizability_velocity_form", "polarizability_imaginary_part")
#: Properties in hartree bohr^n whose spectroscopic energy unit is meV (they are small energies).
_DISPERSION = ("C6", "C8", "C10")


def _times(factor: float, per: str | None = None):
    """number -> number x factor [/ the CODATA factor ``per`` of :mod:`tdhf.constants`, read when used]."""
    if per is None:
        return lambda number: number * factor
    return lambda number: number * (factor / getattr(constants, per))


#: Frequency units accepted on input: the name and the map from the number given to hartree.
#: ``nm`` is a vacuum wavelength (E = hc / lambda); ``THz`` an ordinary frequency (E = h nu).
FREQUENCY_UNITS = {
    "hartree": _times(1.0),
    "Eh": _times(1.0),
    "eV": _times(1.0, "HARTREE_EV"),
    "meV": _times(1e-3, "HARTREE_EV"),
    "cm^-1": _times(100.0, "HARTREE_INVERSE_METER"),
    "nm": lambda wavelength: 1.0 / (wavelength * 1e-9 * constants.HARTREE_INVERSE_METER),
    "THz": _times(1e12, "HARTREE_HERTZ"),
    "10^-18 J": _times(1e-18, "HARTREE_J"),
}
_ALIASES = {"cm-1": "cm^-1", "1/cm": "cm^-1", "a.u.": "hartree", "au": "hartree", "aJ": "10^-18 J",
            "Ha": "hartree"}
_QUANTITY = re.compile(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*")


def _accepted_frequency_units() -> str:
    return ", ".join(FREQUENCY_UNITS)


def parse_frequency(value: object, key: str, unit: str | None = None) -> float:
    """A frequency in hartree from a number (hartree, or ``unit``) or a string "<number> <unit>".

    ``key`` names the input in errors (a deck key path, or ``file:line:column``).

    Raises
    ------
    InputError
        One line naming ``key``: not a number, an unknown unit (with the accepted ones), a
        negative or non-finite value, a zero wavelength.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise InputError(f"{key}: expected a number in hartree or a string such as \"2.5 eV\", got {value!r}")
    if isinstance(value, str):
        match = _QUANTITY.fullmatch(value)
        if match is None:
            raise InputError(f"{key}: cannot read {value!r}; write a number in hartree or a number and a unit,"
                             f" e.g. \"1064 nm\" or \"2.5 eV\" (units: {_accepted_frequency_units()})")
        number, written = float(match.group(1)), match.group(2)
        if written and unit:
            raise InputError(f"{key}: {value!r} carries a unit and the unit is also given as {unit!r}; give one")
        unit = written or unit
    else:
        number = float(value)
    name = _ALIASES.get(unit, unit) if unit else "hartree"
    if name not in FREQUENCY_UNITS:
        raise InputError(f"{key}: unknown frequency unit {unit!r}; use one of {_accepted_frequency_units()}")
    if not math.isfinite(number) or number < 0.0:
        raise InputError(f"{key}: {number!r} {name} must be finite and >= 0")
    if name == "nm" and number == 0.0:
        raise InputError(f"{key}: a wavelength of 0 nm has no photon energy; give a wavelength > 0")
    return FREQUENCY_UNITS[name](number)


@dataclass(frozen=True)
class Unit:
    """A unit to show numbers in: ``label`` (words such as "eV" or "10^-41 C m^2 V^-1") and
    ``factor``, the number of these units in one atomic unit (shown value = atomic value x factor)."""

    label: str
    factor: float


def _dimensions(atomic_unit: str) -> tuple[int, int]:
    """(energy exponent, length exponent) of an atomic unit written as "hartree^a bohr^b" or "1"."""
    energy = length = 0
    for part in atomic_unit.split():
        name, _, power = part.partition("^")
        exponent = int(power) if power else 1
        if name == "hartree":
            energy += exponent
        elif name == "bohr":
            length += exponent
        elif name != "1":
            raise ValueError(f"not an atomic unit: {atomic_unit!r}")
    return energy, length


def _label(*parts: tuple[str, int]) -> str:
    words = [name if power == 1 else f"{name}^{power}" for name, power in parts if power]
    return " ".join(words) or "1"


def _scaled(label: str, factor: float) -> Unit:
    """``label`` with the power of ten that puts one atomic unit in [1, 10)."""
    power = math.floor(math.log10(factor))
    return Unit(f"10^{power} {label}" if power else label, factor / 10.0**power)


def display_unit(property: str, atomic_unit: str, system: str) -> Unit:
    """The unit to show ``property`` (atomic unit ``atomic_unit``, e.g. "bohr^3") in ``system``.

    Raises
    ------
    InputError
        If ``system`` is not one of UNIT_SYSTEMS.
    """
    if system not in UNIT_SYSTEMS:
        raise InputError(f"--units: {system!r} is unknown; use one of {', '.join(UNIT_SYSTEMS)}")
    energy, length = _dimensions(atomic_unit)
    if system == "atomic" or (energy, length) == (0, 0):
        return Unit(atomic_unit, 1.0)
    if property in _POLARIZABILITIES and energy == 0:
        if system == "spectroscopic":  # the polarizability volume alpha / (4 pi epsilon_0)
            return Unit(_label(("angstrom", length)), constants.BOHR_ANGSTROM**length)
        return _scaled(_label(("C", 1), ("m", length - 1), ("V", -1)),
                       constants.POLARIZABILITY_SI * constants.BOHR_M ** (length - 3))
    if system == "spectroscopic":
        name, per_hartree = ("meV", 1e3 * constants.HARTREE_EV) if property in _DISPERSION \
            else ("eV", constants.HARTREE_EV)
        return Unit(_label((name, energy), ("angstrom", length)), per_hartree**energy * constants.BOHR_ANGSTROM**length)
    return _scaled(_label(("J", energy), ("m", length)), constants.HARTREE_J**energy * constants.BOHR_M**length)


def frequency_unit(system: str) -> Unit:
    """The unit of frequencies (photon energies) in ``system``."""
    return display_unit("frequency", "hartree", system)


def _normal(label: str) -> str:
    return " ".join(label.replace("Å", "angstrom").replace("Eh", "hartree").split())


def to_atomic(value: float, label: str, property: str, atomic_unit: str, key: str) -> float:
    """``value`` given in the unit ``label`` of any UNIT_SYSTEMS, converted to atomic units.

    Raises
    ------
    InputError
        If ``label`` is not the unit of ``property`` in any unit system (the message, which names
        ``key``, lists the accepted labels).
    """
    choices = []
    for system in UNIT_SYSTEMS:
        unit = display_unit(property, atomic_unit, system)
        if _normal(label) == _normal(unit.label):
            return value / unit.factor
        if unit.label not in choices:
            choices.append(unit.label)
    raise InputError(f"{key}: {label!r} is not a unit of {property}; use one of {', '.join(map(repr, choices))}")
