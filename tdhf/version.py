"""The program's name and installed version (light: no numerics imported, so ``tdhf --version`` is instant)."""

from __future__ import annotations

import importlib.metadata
from dataclasses import dataclass

__all__ = ["ProgramInfo", "program_info"]


@dataclass(frozen=True)
class ProgramInfo:
    """Name and installed version of the program that made a result.

    Attributes
    ----------
    name : str
        "tdhf".
    version : str
        The installed version ("unknown" outside an installation).
    """

    name: str
    version: str


def program_info() -> ProgramInfo:
    """``ProgramInfo("tdhf", <installed version>)``; version "unknown" if tdhf is not installed."""
    try:
        version = importlib.metadata.version("tdhf")
    except importlib.metadata.PackageNotFoundError:
        version = "unknown"
    return ProgramInfo(name="tdhf", version=version)
