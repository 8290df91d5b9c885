"""Shared fixtures: Hartree–Fock ground states solved once per test session at default settings.

Each fixture is a :class:`tdhf.ground_state.GroundState` for the neutral atom with its default
closed-shell configuration, ``GridSettings()`` and ``ScfSettings()``.  They are session-scoped
because response and property tests reuse them; treat them as read-only.  Solving them must not
warn (``filterwarnings = error`` turns a warning into a failure at fixture set-up).
"""

from __future__ import annotations

import pytest

from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.radial.mesh import GridSettings
from tdhf.scf import ScfSettings
from tdhf.system import System


def solve_default(element: str, charge: int = 0, configuration: str | None = None) -> GroundState:
    """Ground state of an atom or ion at default grid and SCF settings."""
    system = System.from_input(element, charge=charge, configuration=configuration)
    return solve_ground_state(system, GridSettings(), ScfSettings())


@pytest.fixture(scope="session")
def helium() -> GroundState:
    """He, 1s2."""
    return solve_default("He")


@pytest.fixture(scope="session")
def beryllium() -> GroundState:
    """Be, 1s2 2s2."""
    return solve_default("Be")


@pytest.fixture(scope="session")
def neon() -> GroundState:
    """Ne, 1s2 2s2 2p6."""
    return solve_default("Ne")


@pytest.fixture(scope="session")
def argon() -> GroundState:
    """Ar, 1s2 2s2 2p6 3s2 3p6."""
    return solve_default("Ar")
