"""The program's name and version (light: no numerics imported, so ``tdhf --version`` is instant).

:data:`VERSION` is the one source of the version: pyproject.toml reads it from here, so the
installed metadata always says the same (and no run pays ~15 ms to import importlib.metadata).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ProgramInfo", "program_info", "VERSION"]

#: The version of this tdhf.
VERSION = "0.1.0"


@dataclass(frozen=True)
class ProgramInfo:
    """Name and version of the program that made a result.

    Attributes
    ----------
    name : str
        "tdhf".
    version : str
        The tdhf version (:data:`VERSION`).
    """

    name: str
    version: str


def program_info() -> ProgramInfo:
    """``ProgramInfo("tdhf", VERSION)``."""
    return ProgramInfo(name="tdhf", version=VERSION)
