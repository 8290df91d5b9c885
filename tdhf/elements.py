"""Element symbols, subshells and ground-state electron configurations.

Conventions
-----------
* ``Z`` is the atomic number, 1..118; ``SYMBOLS[Z - 1]`` is the current IUPAC symbol.
* A subshell is ``(n, l, occupation)`` with ``n >= 1``, ``0 <= l < n``, ``l <= 7`` (letters
  ``L_LETTERS = "spdfghik"``; spectroscopic notation skips ``j``), capacity ``2(2l + 1)``.
  Configurations are tuples of :class:`Subshell` sorted by ``(n, l)``, without empty subshells.
* Neutral atoms fill in Madelung ``(n + l, n)`` order, corrected by a small table of experimental
  exceptions written from memory; Madelung is kept for Z > 103.  ``charge`` = Z - electrons; ion
  defaults come from a fixed rule (:func:`default_configuration`), not from spectroscopy.
* *Closed shell*: no partially filled subshell.  tdhf treats closed shells only, except that a
  one-electron (hydrogen-like) system such as ``1s1`` is accepted: HF is exact for one electron.
* Error messages name the deck key (``atom.element``, ``atom.charge``, ``atom.configuration``).
"""

from __future__ import annotations

import numbers
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import Iterable

from tdhf.errors import ConfigurationError, OpenShellError, UnknownElementError

__all__ = [
    "SYMBOLS", "L_LETTERS", "Subshell", "atomic_number", "symbol", "neutral_configuration",
    "default_configuration", "parse_configuration", "format_configuration", "electron_count",
    "require_closed_shell", "closed_shell_charges", "ion_name", "LOWEST_BOUND_CHARGE",
    "closed_shell_atoms", "isoelectronic_sequence",
]

SYMBOLS: tuple[str, ...] = tuple("""
H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se Br Kr
Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm
Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No
Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og
""".split())

L_LETTERS = "spdfghik"

_BY_SYMBOL = {s.lower(): z for z, s in enumerate(SYMBOLS, start=1)}
_CORES = ("He", "Ne", "Ar", "Kr", "Xe", "Rn")
_MAX_Z = len(SYMBOLS)

# Madelung order: all subshells with n + l <= 9, sorted by (n + l, n).  Holds 170 electrons.
_MADELUNG = tuple(sorted(((n, l) for n in range(1, 10) for l in range(min(n, len(L_LETTERS)))
                          if n + l <= 9), key=lambda nl: (nl[0] + nl[1], nl[0])))

# Neutral-atom exceptions to Madelung filling, from memory (standard periodic-table data):
# each entry overrides the occupations of the listed subshells.
_EXCEPTIONS = {
    24: {"3d": 5, "4s": 1}, 29: {"3d": 10, "4s": 1},                            # Cr Cu
    41: {"4d": 4, "5s": 1}, 42: {"4d": 5, "5s": 1}, 44: {"4d": 7, "5s": 1},     # Nb Mo Ru
    45: {"4d": 8, "5s": 1}, 46: {"4d": 10, "5s": 0}, 47: {"4d": 10, "5s": 1},   # Rh Pd Ag
    57: {"4f": 0, "5d": 1}, 58: {"4f": 1, "5d": 1}, 64: {"4f": 7, "5d": 1},     # La Ce Gd
    78: {"5d": 9, "6s": 1}, 79: {"5d": 10, "6s": 1},                            # Pt Au
    89: {"5f": 0, "6d": 1}, 90: {"5f": 0, "6d": 2}, 91: {"5f": 2, "6d": 1},     # Ac Th Pa
    92: {"5f": 3, "6d": 1}, 93: {"5f": 4, "6d": 1}, 96: {"5f": 7, "6d": 1},     # U Np Cm
}  # Lr (7s2 7p1 is disputed) and all Z > 103: Madelung is kept.


def _is_int(value: object) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


@dataclass(frozen=True)
class Subshell:
    """One subshell ``nl`` holding ``occupation`` electrons.

    ``n >= 1``, ``0 <= l < n`` with ``l <= 7``, and ``0 <= occupation <= 2(2l + 1)`` are checked
    in ``__post_init__``; a violation raises :class:`~tdhf.errors.ConfigurationError`.
    """

    n: int
    l: int
    occupation: int

    def __post_init__(self) -> None:
        if not (all(_is_int(v) for v in (self.n, self.l, self.occupation))
                and self.n >= 1 and 0 <= self.l < min(self.n, len(L_LETTERS))):
            raise _cfg_error(f"no subshell n={self.n!r}, l={self.l!r}, occupation="
                             f"{self.occupation!r}; need integers n >= 1, 0 <= l < n, l <= 7")
        if not 0 <= self.occupation <= self.capacity:
            raise _cfg_error(f"subshell {self.label} holds 0 to {self.capacity} electrons, "
                             f"got {self.occupation}")

    @property
    def capacity(self) -> int:
        """Maximum occupation, ``2(2l + 1)``."""
        return 2 * (2 * self.l + 1)

    @property
    def is_closed(self) -> bool:
        """True if the subshell is completely filled."""
        return self.occupation == self.capacity

    @property
    def label(self) -> str:
        """Spectroscopic label without occupation, e.g. ``"2p"``."""
        return f"{self.n}{L_LETTERS[self.l]}"

    def __str__(self) -> str:
        return f"{self.label}{self.occupation}"


def _cfg_error(message: str) -> ConfigurationError:
    return ConfigurationError(f"atom.configuration: {message}")


def _element_error(element: object) -> UnknownElementError:
    return UnknownElementError(f"atom.element: {element!r} is not a known element; give a symbol "
                               f'such as "Ne" or an atomic number 1-{_MAX_Z}')


def atomic_number(element: str | int) -> int:
    """Atomic number of a symbol in any case (``"ne"``), a digit string (``"10"``) or an int.

    Raises
    ------
    UnknownElementError
        If ``element`` names no element of Z = 1..118.
    """
    text = element.strip() if isinstance(element, str) else None
    if text is not None and text.lower() in _BY_SYMBOL:
        return _BY_SYMBOL[text.lower()]
    z = int(text) if text is not None and text.isdecimal() else element
    if not _is_int(z) or not 1 <= z <= _MAX_Z:
        raise _element_error(element)
    return int(z)


def _check_z(Z: object) -> int:
    if _is_int(Z) and 1 <= Z <= _MAX_Z:
        return int(Z)
    raise _element_error(Z)


def _check_charge(charge: object) -> int:
    if not _is_int(charge):
        raise ConfigurationError(f"atom.charge: must be an integer, got {charge!r}")
    return int(charge)


def symbol(Z: int) -> str:
    """Return the element symbol for atomic number ``Z`` (raises UnknownElementError)."""
    return SYMBOLS[_check_z(Z) - 1]


def _sorted(occ: dict[tuple[int, int], int]) -> tuple[Subshell, ...]:
    return tuple(Subshell(n, l, k) for (n, l), k in sorted(occ.items()) if k > 0)


def _madelung_fill(extra: int, occ: dict[tuple[int, int], int]) -> None:
    """Add ``extra`` electrons to ``occ`` in place, each to the first non-full Madelung subshell."""
    for n, l in _MADELUNG:
        add = min(2 * (2 * l + 1) - occ.get((n, l), 0), extra)
        occ[(n, l)], extra = occ.get((n, l), 0) + add, extra - add
    if extra:
        raise ConfigurationError("atom.charge: too many electrons for the built-in filling "
                                 "table; give atom.configuration explicitly")


@lru_cache(maxsize=None, typed=True)  # typed: True must not hit the cache of 1
def neutral_configuration(Z: int) -> tuple[Subshell, ...]:
    """Neutral ground state: Madelung filling corrected by ``_EXCEPTIONS``, sorted by (n, l)."""
    Z = _check_z(Z)
    occ: dict[tuple[int, int], int] = {}
    _madelung_fill(Z, occ)
    for label, k in _EXCEPTIONS.get(Z, {}).items():
        occ[(int(label[:-1]), L_LETTERS.index(label[-1]))] = k
    return _sorted(occ)


def default_configuration(Z: int, charge: int) -> tuple[Subshell, ...]:
    """Default configuration of the ion with ``Z - charge`` electrons, sorted by ``(n, l)``.

    Cations lose electrons one at a time from the neutral configuration: first from the valence
    subshells (those outside the preceding noble-gas core; highest n, then highest l, so 4s goes
    before 3d and Ce loses 6s, 5d, then 4f), then from the core by highest (n, l).
    Anions gain electrons one at a time in the first non-full subshell in Madelung order.

    Raises
    ------
    ConfigurationError
        If the charge is not an integer or leaves fewer than one electron.
    """
    Z, charge = _check_z(Z), _check_charge(charge)
    if Z - charge < 1:
        raise ConfigurationError(f"atom.charge: {charge} leaves {Z - charge} electrons for "
                                 f"{SYMBOLS[Z - 1]} (Z={Z}); the charge must be at most {Z - 1}")
    occ = {(s.n, s.l): s.occupation for s in neutral_configuration(Z)}
    if charge < 0:
        _madelung_fill(-charge, occ)
    core_z = max((z for z in _NOBLE_GASES if z < Z), default=0)
    core = {(s.n, s.l) for s in neutral_configuration(core_z)} if core_z else set()
    for _ in range(charge):  # valence (outside the noble-gas core) first, then highest n, then l
        _, n, l = max(((n, l) not in core, n, l) for (n, l), k in occ.items() if k > 0)
        occ[(n, l)] -= 1
    return _sorted(occ)


_NOBLE_GASES = (2, 10, 18, 36, 54, 86, 118)

_TOKEN = re.compile(r"(\d+)([a-zA-Z])(\d*)")
_CORE = re.compile(r"\s*\[\s*([A-Za-z]+)\s*\]")
_HINT = 'write subshells like "1s2 2s2 2p6" or "[Ne] 3s2"'


def parse_configuration(text: str) -> tuple[Subshell, ...]:
    """Parse a configuration such as ``"[Ne] 3s2 3p6"`` or ``"1s2.2s2"``.

    Tokens are separated by whitespace or dots; an optional noble-gas core (``[He]`` ... ``[Rn]``)
    may come first; an omitted occupation means 1.  Empty subshells (``"2p0"``) are dropped.

    Raises
    ------
    ConfigurationError
        On empty text, unreadable tokens, unknown letters, ``l >= n``, over-full subshells,
        duplicates or an unknown core; the message starts with ``atom.configuration: ``.
    """
    if not isinstance(text, str) or not text.strip():
        raise _cfg_error(f"empty configuration {text!r}; {_HINT}")
    occ: dict[tuple[int, int], int] = {}
    origin: dict[tuple[int, int], str] = {}
    core = _CORE.match(text)
    if core:
        name = core.group(1).capitalize()
        if name not in _CORES:
            raise _cfg_error(f"core [{core.group(1)}] is not a noble gas; use one of "
                             + ", ".join(f"[{c}]" for c in _CORES))
        for s in neutral_configuration(_BY_SYMBOL[name.lower()]):
            occ[(s.n, s.l)], origin[(s.n, s.l)] = s.occupation, f"the [{name}] core"
        text = text[core.end():]
    for token in (t for t in re.split(r"[\s.]+", text) if t):
        m = _TOKEN.fullmatch(token)
        if not m:
            raise _cfg_error(f"cannot read token {token!r}; {_HINT}")
        n, letter, k = int(m.group(1)), m.group(2).lower(), int(m.group(3) or 1)
        if letter not in L_LETTERS:
            raise _cfg_error(f"unknown letter {letter!r} in {token!r}; use one of "
                             f"{', '.join(L_LETTERS)}")
        l = L_LETTERS.index(letter)
        cap = 2 * (2 * l + 1)
        if n < 1 or l >= n:
            raise _cfg_error(f"{token!r} does not exist: l must be < n (the {letter} subshells "
                             f"start at {l + 1}{letter})")
        if k > cap:
            raise _cfg_error(f"{token!r} has {k} electrons; {letter} subshells hold at most {cap}")
        if (n, l) in occ:
            raise _cfg_error(f"{token!r} repeats {n}{letter}, already given in {origin[(n, l)]}; "
                             f"give each subshell once")
        occ[(n, l)], origin[(n, l)] = k, repr(token)
    return _sorted(occ)


def format_configuration(subshells: Iterable[Subshell]) -> str:
    """Format subshells as ``"1s2 2s2 2p6"`` (sorted by ``(n, l)``, no core abbreviation)."""
    return " ".join(str(s) for s in sorted(subshells, key=lambda s: (s.n, s.l)))


def electron_count(subshells: Iterable[Subshell]) -> int:
    """Total number of electrons in ``subshells``."""
    return sum(s.occupation for s in subshells)


def ion_name(Z: int, charge: int) -> str:
    """Name of an ion: ``"Ne"``, ``"Na+"``, ``"Mg2+"``, ``"F-"``, ``"O2-"``."""
    name, charge = symbol(Z), _check_charge(charge)
    sign = "" if charge == 0 else "+" if charge > 0 else "-"
    return f"{name}{abs(charge) if abs(charge) > 1 else ''}{sign}"


#: Most negative charge whose outermost orbital Hartree-Fock binds.  Measured for every Z <= 118
#: with the default configurations: all 19 closed-shell anions of charge -1 have a bound
#: outermost orbital (H- ... Ts-, epsilon from -0.008 to -0.18 hartree), none of the 19 closed-shell
#: dianions (He2-, O2-, ..., Og2-) has one, so tdhf refuses them before any work.
LOWEST_BOUND_CHARGE = -1


def _closed(subshells: Iterable[Subshell]) -> bool:
    return all(s.is_closed for s in subshells)


def closed_shell_charges(Z: int) -> tuple[int, ...]:
    """Charges in ``[LOWEST_BOUND_CHARGE, Z - 1]`` whose default configuration is closed, plus
    ``Z - 1``: the charge states of element Z that tdhf can solve."""
    Z = _check_z(Z)
    return tuple(q for q in range(LOWEST_BOUND_CHARGE, Z) if q == Z - 1 or _closed(default_configuration(Z, q)))


def closed_shell_atoms() -> tuple[int, ...]:
    """Atomic numbers whose neutral default configuration is closed (He, Be, Ne, ..., Og)."""
    return tuple(z for z in range(1, _MAX_Z + 1) if _closed(neutral_configuration(z)))


def isoelectronic_sequence(electrons: int, highest_charge: int) -> tuple[tuple[int, int], ...]:
    """(Z, charge) of the closed-shell systems with ``electrons`` electrons, charge
    LOWEST_BOUND_CHARGE .. ``highest_charge``, in the default configurations (ascending Z)."""
    members = []
    for charge in range(LOWEST_BOUND_CHARGE, highest_charge + 1):
        z = electrons + charge
        if 1 <= z <= _MAX_Z and _closed(default_configuration(z, charge)):
            members.append((z, charge))
    return tuple(members)


def require_closed_shell(Z: int, charge: int, subshells: Iterable[Subshell]) -> None:
    """Check that ``subshells`` is a closed-shell configuration with ``Z - charge`` electrons.

    A configuration with a single electron in total is accepted (HF is exact for one electron).

    Raises
    ------
    ConfigurationError
        If the electron count differs from ``Z - charge``, a subshell is given twice or the charge
        is below LOWEST_BOUND_CHARGE.
    OpenShellError
        If a subshell is partially filled; the message lists nearby closed-shell charge states.
    """
    Z, charge = _check_z(Z), _check_charge(charge)
    subshells = tuple(subshells)
    text = format_configuration(subshells)
    if len({s.label for s in subshells}) != len(subshells):
        raise _cfg_error(f"{text} gives a subshell more than once; give each subshell once")
    count, wanted = electron_count(subshells), Z - charge
    if count != wanted:
        fix = f" or set atom.charge to {Z - count}" if count >= 1 else ""
        raise _cfg_error(f"{text!r} has {count} electrons but {SYMBOLS[Z - 1]} (Z={Z}) with "
                         f"atom.charge {charge} has {wanted}; fix atom.configuration{fix}")
    if charge < LOWEST_BOUND_CHARGE:
        raise ConfigurationError(
            f"atom.charge: {charge}: Hartree-Fock binds no anion of {ion_name(Z, charge)}'s charge (the"
            f" outermost orbital of every closed-shell dianion lies in the continuum); use a charge >= {LOWEST_BOUND_CHARGE}"
        )
    if count == 1:
        return  # hydrogen-like: HF is exact for one electron
    open_ = [str(s) for s in subshells if 0 < s.occupation < s.capacity]
    if open_:
        near = sorted(closed_shell_charges(Z), key=lambda q: (abs(q - charge), -q))[:4]
        states = ", ".join(f"{ion_name(Z, q)} (charge {q})" for q in sorted(near))
        raise OpenShellError(
            f"atom.configuration: open (partially filled) subshell {' '.join(open_)} in "
            f"{ion_name(Z, charge)}; tdhf treats closed shells only. Nearest charge states of "
            f"{SYMBOLS[Z - 1]} with a closed default configuration: {states}; set atom.charge")
