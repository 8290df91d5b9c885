"""Input decks: TOML files describing one run, read into frozen dataclasses with strict checks.

A deck has one table per part of the calculation; only ``[atom]`` is required::

    schema = 1                     # optional; the deck format version (only 1 exists)
    accuracy = "default"           # optional: "default" or "tight" (grid, SCF and solver together)

    [atom]
    element = "Ne"                 # symbol or atomic number
    charge = 0                     # optional, integer
    configuration = "1s2 2s2 2p6"  # optional; default: the ground-state configuration

    [grid]                         # optional: tdhf.radial.mesh.GridSettings (override the preset)
    preset = "tight"               # the same as the top-level accuracy key (kept for old decks)
    order = 14
    growth = 1.5
    first_element = 0.01           # bohr
    r_max = 60.0                   # bohr; leave out for an automatic box

    [scf]                          # optional: tdhf.scf.ScfSettings
    energy_tolerance = 1e-12       # hartree
    residual_tolerance = 1e-9
    max_iterations = 120
    diis_size = 10
    damping = 0.5

    [response]                     # optional: linear response (tdhf.response)
    multipoles = [1, 2]            # L = 1 dipole, 2 quadrupole, 3 octupole
    frequencies = [0.0, 0.1]       # real frequencies, hartree (or with a unit: "1064 nm", "2.5 eV")
    imaginary_frequencies = [0.5]  # imaginary frequencies, hartree
    coupled = true                 # also solve the coupled (TDHF) equations, not only uncoupled
    broadening = 0.0               # eta > 0: complex frequencies omega + i eta (a broadened spectrum)
    excitations = 3                # lowest bound lines listed per multipole (default 0: none)

    [dispersion]                   # optional: dispersion coefficients with partner systems
    partners = ["He", "Na+"]       # each paired with the [atom] system
    # systems = ["Ne", "Ar"]       # instead: every pair among [atom] and these (a series table)
    # pairs = ["He:Ne", "Ar:Kr"]   # or: exactly these pairs
    quadrature_points = 24         # points of the imaginary-frequency quadrature, 8..96

    [photoionization]              # optional: cross sections above the first threshold
    photon_energies = [1.0, 2.0]   # hartree; and/or range = [0.6, 5.0] for an adaptive grid
    sum_rules = true               # sum rules over bound lines + continuum

A deck is data only: it names no files and no programs, so reading it never reaches outside the
deck file itself; results go only where the command line says (``--json``, ``--csv``, ``--out``).
A deck is at most MAX_DECK_BYTES long (a stream that does not end is refused), lists of
frequencies and systems are bounded (MAX_FREQUENCIES, MAX_SYSTEMS), frequencies lie in
[0, MAX_FREQUENCY] hartree, and the radial grid the settings ask for is estimated and capped
(:func:`tdhf.radial.mesh.check_grid_size`) before anything is allocated.

Validation is strict: an unknown table or key, a value of the wrong type (a boolean is not an
integer; an integer is accepted where a float is expected) or an impossible value raises an
:class:`~tdhf.errors.InputError` whose one-line message starts with the full key path, e.g.
``response.frequencies[2]: -0.1 is negative; frequencies are in hartree and must be >= 0``.
The atom and the dispersion partners are checked as closed-shell systems at load time, so every
input error comes before any computation.

>>> deck = parse_deck('[atom]\\nelement = "He"\\n[response]\\nfrequencies = [0, 0.1]\\n')
>>> deck.atom.element, deck.response.frequencies, deck.response.multipoles
('He', (0.0, 0.1), (1,))
>>> parse_system_name("Mg2+")
('Mg', 2)
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import json
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from tdhf.elements import atomic_number, symbol
from tdhf.errors import DeckError, FrequencyError, InputError, UnknownElementError
from tdhf.accuracy import ACCURACY_PRESETS
from tdhf.ground_state import starting_box
from tdhf.radial.exterior_scaling import ContinuumGridSettings
from tdhf.radial.mesh import GridSettings, check_grid_size
from tdhf.response.solver import ResponseTolerances
from tdhf.scf import ScfSettings
from tdhf.system import System
from tdhf.units import parse_frequency
from tdhf.properties.dispersion import DEFAULT_QUADRATURE_POINTS, QUADRATURE_RANGE
from tdhf.properties.photoionization_rows import PhotoionizationSection

__all__ = [
    "SCHEMA_VERSION",
    "AtomSection",
    "ResponseSection",
    "DispersionSection",
    "Deck",
    "load_deck",
    "parse_deck",
    "build_deck",
    "format_deck",
    "parse_system_name",
    "deck_digest",
    "MAX_DECK_BYTES",
    "MAX_FREQUENCY",
    "MAX_FREQUENCIES",
    "MAX_SYSTEMS",
    "parse_photoionization",
]

#: The only deck format version so far.
SCHEMA_VERSION = 1
#: Multipole orders the response accepts: dipole, quadrupole, octupole.
MULTIPOLE_RANGE = (1, 3)
#: Most lines listed per multipole.
MAX_EXCITATIONS = 100
#: Longest deck file, bytes; the bundled decks are < 1 kB.
MAX_DECK_BYTES = 1 << 20
#: Largest frequency, hartree (1e15 is ~3e16 eV, far beyond any atomic scale; alpha(i nu) is
#: then S(0)/nu^2 to 1e-28 relative and nu^2 stays far from overflow in every product).
MAX_FREQUENCY = 1e15
#: Most entries of one frequency list (each costs one response solve per multipole).
MAX_FREQUENCIES = 1000
#: Most dispersion partners or systems (each costs a ground state and ~100 response solves).
MAX_SYSTEMS = 120


@dataclass(frozen=True)
class AtomSection:
    """``[atom]``: the system, validated by :meth:`tdhf.system.System.from_input`."""

    element: str | int
    charge: int = 0
    configuration: str | None = None

    def to_system(self) -> System:
        """The validated closed-shell system (raises the errors of ``System.from_input``)."""
        return System.from_input(self.element, self.charge, self.configuration)


@dataclass(frozen=True)
class ResponseSection:
    """``[response]``: multipole orders and frequencies (hartree) of the linear response.

    Attributes
    ----------
    multipoles : tuple of int
        L = 1 (dipole), 2 (quadrupole), 3 (octupole).
    frequencies, imaginary_frequencies : tuple of float
        Real omega and imaginary nu (omega = i nu), hartree (read with units at the edge).
    coupled : bool
        Solve the coupled (TDHF) equations, not only the uncoupled ones.
    broadening : float
        eta, hartree: real frequencies become omega + i eta.
    excitations : int
        Lowest bound lines listed per multipole.
    """

    multipoles: tuple[int, ...] = (1,)
    frequencies: tuple[float, ...] = (0.0,)
    imaginary_frequencies: tuple[float, ...] = ()
    coupled: bool = True
    broadening: float = 0.0
    excitations: int = 0


@dataclass(frozen=True)
class DispersionSection:
    """``[dispersion]``: partner systems (names such as "He", "Na+", "Cl-") and the quadrature size.

    ``partners``: each is paired with the ``[atom]`` system.  ``systems``: a series; every
    unordered pair among ``[atom]`` and these systems (like pairs included) is computed.
    ``pairs``: exactly these pairs, each written "A:B" (e.g. "He:Ne"); [atom] need not be in one.
    ``quadrature_points``: the base rule size n of the imaginary-frequency quadrature (the
    reported values use its Gauss–Kronrod extension of 2n + 1 nodes, :mod:`tdhf.properties.dispersion`).
    """

    partners: tuple[str, ...] = ()
    systems: tuple[str, ...] = ()
    quadrature_points: int = DEFAULT_QUADRATURE_POINTS
    pairs: tuple[str, ...] = ()

    @property
    def names(self) -> tuple[str, ...]:
        """Every system named by partners, systems or pairs, once each, in order."""
        return tuple(dict.fromkeys(self.partners + self.systems + tuple(
            name for pair in self.pairs for name in pair.split(":"))))


@dataclass(frozen=True)
class Deck:
    """A validated deck: one field per table (None for an absent optional calculation).

    ``accuracy`` names the preset (tdhf.accuracy) that ``grid``, ``scf`` and ``tolerances`` started
    from; the [grid] and [scf] keys of the deck override it.  ``continuum_grid`` is the scaled grid
    of photoionization and of real frequencies above the threshold (not a deck key: the
    certificate varies it).
    """

    atom: AtomSection
    grid: GridSettings = GridSettings()
    scf: ScfSettings = ScfSettings()
    response: ResponseSection | None = None
    dispersion: DispersionSection | None = None
    schema: int = SCHEMA_VERSION
    accuracy: str = "default"
    tolerances: ResponseTolerances = ResponseTolerances()
    continuum_grid: ContinuumGridSettings = ContinuumGridSettings()
    photoionization: PhotoionizationSection | None = None


# --------------------------------------------------------------------------------------------
# Reading


def load_deck(path: str | Path) -> Deck:
    """Read and validate a deck file.

    Raises
    ------
    DeckError
        If the file cannot be read, is not valid TOML (the message gives ``file:line:column``) or
        violates the schema.
    InputError
        Any other input error (unknown element, open shell, grid values ...), before computing.
    """
    path = Path(path)
    try:
        with path.open("rb") as stream:
            data = stream.read(MAX_DECK_BYTES + 1)  # bounded: the path may be a device or a pipe
    except FileNotFoundError:
        raise DeckError(f"{path}: no such deck file") from None
    except OSError as err:
        raise DeckError(f"{path}: cannot read the deck: {err.strerror or err}") from None
    if len(data) > MAX_DECK_BYTES:
        raise DeckError(f"{path}: longer than {MAX_DECK_BYTES} bytes; a deck is a short TOML text file")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        raise DeckError(f"{path}: not a UTF-8 text file (byte {err.start}); decks are TOML text") from None
    return parse_deck(text, source=str(path))


_TOML_POSITION = re.compile(r"\s*\((?:at line (\d+), column (\d+)|at end of document)\)\s*$")


def parse_deck(text: str, source: str = "<string>") -> Deck:
    """Parse and validate deck text; ``source`` names it in TOML syntax errors.

    >>> parse_deck('[atom]\\nelement = 10\\n').atom.element
    10
    """
    if len(text) > MAX_DECK_BYTES:
        raise DeckError(f"{source}: longer than {MAX_DECK_BYTES} characters; a deck is a short TOML text")
    try:
        data = tomllib.loads(text)
    except RecursionError:
        raise DeckError(f"{source}: arrays or tables nested too deeply; a deck nests at most two levels") from None
    except tomllib.TOMLDecodeError as err:
        message = str(err).splitlines()[0] if str(err) else "syntax error"
        match = _TOML_POSITION.search(message)
        if match and match.group(1):
            line, column = int(match.group(1)), int(match.group(2))
        else:  # "at end of document" or no position: point at the end of the text
            lines = text.split("\n")
            line, column = len(lines), len(lines[-1]) + 1
        reason = message[: match.start()] if match else message
        raise DeckError(f"{source}:{line}:{column}: malformed TOML: {reason}") from None
    return build_deck(data)


def build_deck(data: Mapping[str, Any]) -> Deck:
    """Validate a deck given as nested mappings (parsed TOML, or built by the command line)."""
    _check_keys("", data, _TOP_LEVEL)
    schema = data.get("schema", SCHEMA_VERSION)
    if _integer("schema", schema) != SCHEMA_VERSION:
        raise DeckError(f"schema: {schema} is not supported; this tdhf reads schema {SCHEMA_VERSION}")
    if "atom" not in data:
        raise DeckError('atom: missing table [atom]; every deck names its system, e.g. [atom] element = "Ne"')
    atom = _atom(_table("atom", data["atom"]))
    grid_table = _table("grid", data.get("grid", {}))
    accuracy = _accuracy(data, grid_table)
    preset = ACCURACY_PRESETS[accuracy]
    grid = _grid(grid_table, preset.grid)
    scf = _scf(_table("scf", data.get("scf", {})), preset.scf)
    response = _response(_table("response", data["response"])) if "response" in data else None
    dispersion = _dispersion(_table("dispersion", data["dispersion"])) if "dispersion" in data else None
    photoionization = (parse_photoionization(_table("photoionization", data["photoionization"]))
                       if "photoionization" in data else None)
    _check_grids(atom, grid, dispersion)
    return Deck(atom=atom, grid=grid, scf=scf, response=response, dispersion=dispersion, schema=schema,
                accuracy=accuracy, tolerances=preset.tolerances, photoionization=photoionization)


def _accuracy(data: Mapping[str, Any], grid_table: Mapping[str, Any]) -> str:
    """The preset name: top-level ``accuracy``, or the older ``[grid] preset`` (the same thing)."""
    names = {}
    if "accuracy" in data:
        names["accuracy"] = _string("accuracy", data["accuracy"])
    if "preset" in grid_table:
        names["grid.preset"] = _string("grid.preset", grid_table["preset"])
    for key, name in names.items():
        if name not in ACCURACY_PRESETS:
            raise DeckError(f"{key}: {name!r} is unknown; use one of {_quoted(ACCURACY_PRESETS)}")
    if len(set(names.values())) > 1:
        raise DeckError("grid.preset: contradicts accuracy; give only the top-level accuracy key")
    return next(iter(names.values()), "default")


def _check_grids(atom: AtomSection, grid: GridSettings, dispersion: DispersionSection | None) -> None:
    """Refuse grid settings whose grid would be too large for any system of the deck, now.

    Checked in the starting box (:func:`tdhf.ground_state.starting_box`); a box that the ground
    state enlarges later is checked again before it is built.
    """
    systems = [atom.to_system()]
    for name in dispersion.names if dispersion else ():
        systems.append(System.from_input(*parse_system_name(name)))
    for system in systems:
        check_grid_size(grid, system.Z, starting_box(system, grid))


def _atom(table: Mapping[str, Any]) -> AtomSection:
    _check_keys("atom", table, _field_names(AtomSection))
    if "element" not in table:
        raise DeckError('atom.element: missing; give a symbol such as "Ne" or an atomic number')
    element = table["element"]
    if isinstance(element, bool) or not isinstance(element, (str, int)):
        raise DeckError(f"atom.element: expected a string or an integer, got {_describe(element)}")
    configuration = table.get("configuration")
    section = AtomSection(
        element=element,
        charge=_integer("atom.charge", table.get("charge", 0)),
        configuration=None if configuration is None else _string("atom.configuration", configuration),
    )
    section.to_system()  # element, charge and configuration errors now, before any computation
    return section


def _grid(table: Mapping[str, Any], preset: GridSettings) -> GridSettings:
    fields = _field_names(GridSettings)
    _check_keys("grid", table, fields + ("preset",))
    values = {"order": _integer("grid.order", table["order"])} if "order" in table else {}
    values |= {key: _number(f"grid.{key}", table[key]) for key in fields if key != "order" and key in table}
    return dataclasses.replace(preset, **values)  # GridError passes through


def _scf(table: Mapping[str, Any], preset: ScfSettings) -> ScfSettings:
    _check_keys("scf", table, _field_names(ScfSettings))
    values: dict[str, Any] = {}
    for key in ("energy_tolerance", "residual_tolerance"):
        if key in table:
            values[key] = _number(f"scf.{key}", table[key])
            if not values[key] > 0.0:
                raise DeckError(f"scf.{key}: {values[key]!r} must be > 0")
    for key in ("max_iterations", "diis_size"):
        if key in table:
            values[key] = _integer(f"scf.{key}", table[key])
            if values[key] < 1:
                raise DeckError(f"scf.{key}: {values[key]} must be >= 1")
    if "damping" in table:
        values["damping"] = _number("scf.damping", table["damping"])
        if not 0.0 <= values["damping"] < 1.0:
            raise DeckError(f"scf.damping: {values['damping']!r} must be in [0, 1), the fraction of "
                            "the previous Fock matrix kept")
    return dataclasses.replace(preset, **values)


def _response(table: Mapping[str, Any]) -> ResponseSection:
    _check_keys("response", table, _field_names(ResponseSection))
    defaults = ResponseSection()
    low, high = MULTIPOLE_RANGE
    multipoles = defaults.multipoles
    if "multipoles" in table:
        multipoles = _unique("response.multipoles", [
            _in_range(f"response.multipoles[{i}]", _integer(f"response.multipoles[{i}]", value), low, high,
                      "the multipole order L is 1 (dipole), 2 (quadrupole) or 3 (octupole)")
            for i, value in enumerate(_array("response.multipoles", table["multipoles"], allow_empty=False))
        ])
    frequencies = {
        key: _frequencies(f"response.{key}", table[key]) if key in table else getattr(defaults, key)
        for key in ("frequencies", "imaginary_frequencies")
    }
    if not any(frequencies.values()):
        raise DeckError("response: both frequencies and imaginary_frequencies are empty; give at least one")
    coupled = _boolean("response.coupled", table.get("coupled", defaults.coupled))
    broadening = _number("response.broadening", table.get("broadening", defaults.broadening))
    if not 0.0 <= broadening <= 1.0:
        raise DeckError(f"response.broadening: {broadening!r} hartree must be in [0, 1]; 0 means real frequencies")
    excitations = _in_range("response.excitations", _integer("response.excitations", table.get("excitations", 0)),
                            0, MAX_EXCITATIONS, "it is the number of lowest bound lines listed per multipole")
    return ResponseSection(multipoles=multipoles, coupled=coupled, broadening=broadening, excitations=excitations,
                           **frequencies)


def _frequencies(path: str, value: Any) -> tuple[float, ...]:
    numbers = []
    for i, item in enumerate(_array(path, value, allow_empty=True, longest=MAX_FREQUENCIES)):
        if isinstance(item, str):  # "1064 nm", "2.5 eV": tdhf.units
            try:
                number = parse_frequency(item, f"{path}[{i}]")
            except InputError as err:
                raise FrequencyError(str(err)) from None
        else:
            number = _number(f"{path}[{i}]", item)
        if number < 0.0:
            raise FrequencyError(f"{path}[{i}]: {number!r} is negative; frequencies are in hartree and must be >= 0")
        if number > MAX_FREQUENCY:
            raise FrequencyError(f"{path}[{i}]: {number!r} hartree is above the largest allowed frequency,"
                                 f" {MAX_FREQUENCY:g} hartree; give frequencies in hartree")
        numbers.append(number)
    return _unique(path, numbers)


def _dispersion(table: Mapping[str, Any]) -> DispersionSection:
    _check_keys("dispersion", table, _field_names(DispersionSection))
    given = [key for key in ("partners", "systems", "pairs") if key in table]
    if len(given) != 1:
        raise DeckError(
            'dispersion: give one of partners (pairs with [atom], e.g. partners = ["He", "Na+"]), systems'
            ' (all pairs of a series, e.g. systems = ["Ne", "Ar", "Kr"]) or pairs (e.g. pairs = ["He:Ne"])'
            + ("" if given else "; none is present")
        )
    key = given[0]
    names = []
    for i, item in enumerate(_array(f"dispersion.{key}", table[key], allow_empty=False, longest=MAX_SYSTEMS)):
        path = f"dispersion.{key}[{i}]"
        text = _string(path, item)
        parts = text.split(":") if key == "pairs" else [text]
        if len(parts) != (2 if key == "pairs" else 1):
            raise DeckError(f'{path}: {text!r} is not a pair; write two systems joined by ":", e.g. "He:Ne"')
        names.append(":".join(_canonical_name(path, part) for part in parts))
    if key == "pairs":
        for i, pair in enumerate(names):
            first, second = pair.split(":")
            if f"{second}:{first}" in names[:i]:
                raise DeckError(f"dispersion.pairs[{i}]: {pair!r} repeats {second}:{first}; give each pair once")
    low, high = QUADRATURE_RANGE
    points = _integer("dispersion.quadrature_points", table.get("quadrature_points", DEFAULT_QUADRATURE_POINTS))
    _in_range("dispersion.quadrature_points", points, low, high,
              "it is the number of points of the imaginary-frequency quadrature")
    return DispersionSection(**{key: _unique(f"dispersion.{key}", names)}, quadrature_points=points)


def _canonical_name(path: str, name: str) -> str:
    """A checked closed-shell system name in canonical form ("na1+" -> "Na+")."""
    element, charge = parse_system_name(name.strip(), path)
    try:
        return System.from_input(element, charge).name
    except InputError as err:
        raise type(err)(_partner_message(path, name, str(err))) from None


_ATOM_KEY = re.compile(r"^atom\.\w+: ")


def _partner_message(path: str, name: str, message: str) -> str:
    """Re-address an ``atom.*`` message from System.from_input to a partner entry."""
    message = _ATOM_KEY.sub("", message).replace("set atom.charge", "write the charge in the name")
    return f"{path}: {name!r}: {message}"


_SYSTEM_NAME = re.compile(r"([A-Za-z]{1,3})(?:(\d*)([+-]))?")


def parse_system_name(text: str, path: str = "dispersion.partners[0]") -> tuple[str, int]:
    """Split a system name such as ``"He"``, ``"Na+"``, ``"Cl-"``, ``"Mg2+"`` into (symbol, charge).

    ``path`` is the deck key named in errors.

    >>> parse_system_name("Cl-"), parse_system_name("o2-")
    (('Cl', -1), ('O', -2))

    Raises
    ------
    DeckError
        If the text is not an element symbol with an optional charge ``[digits]+`` or ``[digits]-``.
    UnknownElementError
        If the symbol is not an element.
    """
    match = _SYSTEM_NAME.fullmatch(text.strip())
    if not match:
        raise DeckError(f'{path}: cannot read {text!r}; write an element symbol with an optional charge '
                        f'such as "He", "Na+", "Cl-", "Mg2+"')
    letters, digits, sign = match.groups()
    try:
        z = atomic_number(letters)
    except InputError:
        raise UnknownElementError(f"{path}: {letters!r} in {text!r} is not an element symbol") from None
    magnitude = int(digits) if digits else 1
    if sign and magnitude == 0:
        raise DeckError(f'{path}: {text!r} has charge 0; write the neutral atom without a sign, e.g. "{symbol(z)}"')
    charge = 0 if not sign else magnitude if sign == "+" else -magnitude
    return symbol(z), charge


# --------------------------------------------------------------------------------------------
# Writing


def format_deck(deck: Deck) -> str:
    """TOML text of a deck with every effective option written out; ``parse_deck`` reads it back.

    >>> deck = parse_deck('[atom]\\nelement = "Ne"\\n[grid]\\npreset = "tight"\\n')
    >>> parse_deck(format_deck(deck)) == deck
    True
    """
    lines = [f"schema = {deck.schema}", f"accuracy = {_toml_value(deck.accuracy)}"]
    for name in ("atom", "grid", "scf", "response", "dispersion", "photoionization"):
        section = getattr(deck, name)
        if section is None:
            continue
        lines += ["", f"[{name}]"]
        for field in dataclasses.fields(section):
            value = getattr(section, field.name)
            # None and the unused one of dispersion.partners/systems (an empty tuple) are left out.
            if value is not None and value != ():
                lines.append(f"{field.name} = {_toml_value(value)}")
    return "\n".join(lines) + "\n"


def deck_digest(deck: Deck) -> str:
    """SHA-256 (hex) of the normalized deck: :func:`format_deck` text with the element as its symbol.

    Two decks with the same digest ask for the same calculation; a result file stores it so that
    ``tdhf series --resume`` can tell a result of the deck as it is now from one of an older edit.

    >>> deck_digest(parse_deck('[atom]\\nelement = 10\\n')) == deck_digest(parse_deck('[atom]\\nelement = "ne"\\n'))
    True
    """
    atom = dataclasses.replace(deck.atom, element=symbol(atomic_number(deck.atom.element)))
    return hashlib.sha256(format_deck(dataclasses.replace(deck, atom=atom)).encode("utf-8")).hexdigest()


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, str):
        return json.dumps(value)  # a JSON string is a TOML basic string
    return repr(value)


# --------------------------------------------------------------------------------------------
# Checks shared by the tables


_TOP_LEVEL = ("schema", "accuracy", "atom", "grid", "scf", "response", "dispersion", "photoionization")
_TABLES = _TOP_LEVEL[2:]


def _field_names(cls: type) -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(cls))


_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")


def _join(path: str, key: str) -> str:
    key = key if _BARE_KEY.fullmatch(key) else json.dumps(key)  # as TOML writes it: one line, visible
    return f"{path}.{key}" if path else key


def _check_keys(path: str, table: Mapping[str, Any], allowed: tuple[str, ...]) -> None:
    """Reject keys outside ``allowed``, suggesting the closest valid one."""
    for key in table:
        if key in allowed:
            continue
        full = _join(path, key)
        what = "unknown table" if not path and isinstance(table[key], dict) else "unknown key"
        close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
        if close:
            hint = f"[{close[0]}]" if not path and close[0] in _TABLES else _join(path, close[0])
            raise DeckError(f"{full}: {what}; did you mean {hint}?")
        valid = ", ".join(f"[{k}]" if not path and k in _TABLES else k for k in allowed)
        raise DeckError(f"{full}: {what}; valid {'top-level entries' if not path else 'keys'}: {valid}")


def _describe(value: Any) -> str:
    """A value as the deck writer sees it: 'boolean true', 'float 1.5', 'string "x"'."""
    if isinstance(value, bool):
        return f"boolean {str(value).lower()}"
    if isinstance(value, int):
        return f"integer {value}"
    if isinstance(value, float):
        return f"float {value!r}"
    if isinstance(value, str):
        return f"string {json.dumps(value)}"
    if isinstance(value, (list, tuple)):
        return "an array"
    if isinstance(value, dict):
        return "a table"
    return f"{type(value).__name__} {value}"


def _table(path: str, value: Any) -> Mapping[str, Any]:
    if not isinstance(value, dict):
        raise DeckError(f"{path}: expected a table [{path}], got {_describe(value)}")
    return value


def _integer(path: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise DeckError(f"{path}: expected an integer, got {_describe(value)}")
    return value


def _number(path: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise DeckError(f"{path}: expected a number, got {_describe(value)}")
    if not math.isfinite(value):
        raise DeckError(f"{path}: {value!r} is not a finite number")
    return float(value)


def _string(path: str, value: Any) -> str:
    if not isinstance(value, str):
        raise DeckError(f"{path}: expected a string, got {_describe(value)}")
    return value


def _boolean(path: str, value: Any) -> bool:
    if not isinstance(value, bool):
        raise DeckError(f"{path}: expected true or false, got {_describe(value)}")
    return value


def _array(path: str, value: Any, allow_empty: bool, longest: int | None = None) -> list[Any]:
    if not isinstance(value, (list, tuple)):
        raise DeckError(f"{path}: expected an array such as [1, 2], got {_describe(value)}")
    if not value and not allow_empty:
        raise DeckError(f"{path}: empty array; give at least one entry")
    if longest is not None and len(value) > longest:
        raise DeckError(f"{path}: {len(value)} entries, more than the {longest} allowed; split the run")
    return list(value)


def _in_range(path: str, value: int, low: int, high: int, meaning: str) -> int:
    if not low <= value <= high:
        raise DeckError(f"{path}: {value} is not in {low}..{high}; {meaning}")
    return value


def _unique(path: str, values: list[Any]) -> tuple[Any, ...]:
    for i, value in enumerate(values):
        if value in values[:i]:
            first = values.index(value)
            raise DeckError(f"{path}[{i}]: {_toml_value(value)} repeats {path}[{first}]; give each entry once")
    return tuple(values)


def _quoted(names: Mapping[str, Any] | tuple[str, ...]) -> str:
    return ", ".join(f'"{name}"' for name in names)


# --------------------------------------------------------------------------------------------
# [photoionization]


def _energy(path: str, item: Any) -> float:
    """A photon energy: a number in hartree or a string with a unit ("40 eV", "30 nm"; tdhf.units)."""
    if isinstance(item, str):
        try:
            value = parse_frequency(item, path)
        except InputError as err:
            raise FrequencyError(str(err)) from None
    else:
        value = _number(path, item)
    if value > MAX_FREQUENCY:
        raise FrequencyError(f"{path}: {value!r} hartree is above the largest allowed frequency, {MAX_FREQUENCY:g}")
    return value


def parse_photoionization(table: Mapping[str, Any]) -> PhotoionizationSection:
    """``[photoionization]``: ``photon_energies = [...]`` and/or ``range = [low, high]`` (hartree, or
    strings with a unit such as ``"40 eV"``).

    Photon energies at or below the first ionization threshold are refused when the atom has
    been solved (the threshold is not known before); here only the form is checked.

    >>> parse_photoionization({"range": [0.6, 5.0]}).range
    (0.6, 5.0)
    """
    _check_keys("photoionization", table, _field_names(PhotoionizationSection))
    if "photon_energies" not in table and "range" not in table:
        raise DeckError("photoionization: give photon_energies = [...] (hartree) or range = [low, high]"
                        " for an adaptive grid")
    energies = []
    for i, item in enumerate(_array("photoionization.photon_energies", table.get("photon_energies", []), True,
                                    longest=MAX_FREQUENCIES)):
        energy = _energy(f"photoionization.photon_energies[{i}]", item)
        if energy <= 0.0:
            raise DeckError(f"photoionization.photon_energies[{i}]: {energy!r} is not > 0; photon energies are"
                            " in hartree")
        energies.append(energy)
    window = None
    if "range" in table:
        bounds = _array("photoionization.range", table["range"], allow_empty=False)
        values = [_energy(f"photoionization.range[{i}]", item) for i, item in enumerate(bounds)]
        if len(values) != 2 or not 0.0 < values[0] < values[1]:
            raise DeckError(f"photoionization.range: {_toml_value(values)} is not [low, high] with"
                            " 0 < low < high (hartree)")
        window = (values[0], values[1])
    sum_rules = _boolean("photoionization.sum_rules", table.get("sum_rules", PhotoionizationSection.sum_rules))
    return PhotoionizationSection(_unique("photoionization.photon_energies", energies), window, sum_rules)
