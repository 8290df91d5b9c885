"""The atom or ion being computed: nuclear charge, charge state and closed-subshell configuration."""

from __future__ import annotations

from dataclasses import dataclass, field

from tdhf.elements import (
    Subshell,
    atomic_number,
    default_configuration,
    format_configuration,
    ion_name,
    parse_configuration,
    require_closed_shell,
    symbol,
)

__all__ = ["System"]


@dataclass(frozen=True)
class System:
    """A closed-shell atom or ion (or a one-electron ion) with a point nucleus of infinite mass.

    Attributes
    ----------
    name : str
        Element symbol with charge, e.g. "Ne", "Na+", "Cl-".
    Z : int
        Nuclear charge.
    charge : int
        Net charge Z - electrons.
    electrons : int
        Number of electrons N.
    configuration : str
        Occupied subshells, e.g. "1s2 2s2 2p6".
    subshells : tuple of Subshell
        The same, parsed (not serialized).
    """

    name: str
    Z: int
    charge: int
    electrons: int
    configuration: str
    subshells: tuple[Subshell, ...] = field(repr=False, metadata={"json": False})

    @classmethod
    def from_input(cls, element: str | int, charge: int = 0, configuration: str | None = None) -> "System":
        """Validate an element, charge and optional configuration (default: the ground state).

        Raises
        ------
        UnknownElementError, ConfigurationError, OpenShellError
            With a one-line message naming the deck key (``atom.element`` ...) and the fix.
        """
        z = atomic_number(element)
        subshells = parse_configuration(configuration) if configuration else default_configuration(z, charge)
        require_closed_shell(z, charge, subshells)
        return cls(
            name=ion_name(z, charge),
            Z=z,
            charge=charge,
            electrons=z - charge,
            configuration=format_configuration(subshells),
            subshells=tuple(subshells),
        )

    @property
    def symbol(self) -> str:
        return symbol(self.Z)

    @property
    def max_l(self) -> int:
        return max(s.l for s in self.subshells)
