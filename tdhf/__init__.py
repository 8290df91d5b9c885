"""tdhf: TDHF (RPA) linear response of closed-shell atoms on a numerical radial grid.

Public API
----------
Systems and ground states
    System                 closed-shell atom or ion (``System.from_input("Ne", charge=0)``)
    GridSettings           radial grid knobs (``GridSettings.tight()`` for ~1e-10 hartree)
    ScfSettings            SCF tolerances and accelerator settings
    solve_ground_state     Hartree–Fock ground state -> GroundState
    GroundState, OrbitalResult

Response
    ResponseSolver         first-order TDHF equations of one atom and multipole, reused over frequencies
    compute_response       polarizabilities, shielding factors, sum rules, excitations -> ResponseResults
    lowest_excitations     RPA excitation energies and oscillator strengths
    certify                every number again with grid, box, tolerances and quadrature varied

Decks and runs
    load_deck, parse_deck  TOML decks -> Deck
    run_deck               everything a deck asks for -> RunResult (JSON via ``tdhf.report.json_result.result_to_json``)

Errors
    InputError (exit code 2 in the CLI) and ConvergenceError (exit code 3), see :mod:`tdhf.errors`.

The names are imported on first use (``import tdhf.cli`` must not load numpy, scipy and rich,
so that ``tdhf --help`` starts at once).

Atomic units throughout; the polarizability normalization is
alpha_L = 2 sum_n |<0| sum_i r_i^L P_L(cos theta_i) |n>|^2 / (E_n - E_0).
"""

import importlib
from typing import Any

#: Public name -> module that defines it.
_SOURCES = {
    "System": "tdhf.system",
    "GridSettings": "tdhf.radial.mesh",
    "ScfSettings": "tdhf.scf",
    "solve_ground_state": "tdhf.ground_state",
    "GroundState": "tdhf.ground_state",
    "OrbitalResult": "tdhf.ground_state",
    "ResponseSolver": "tdhf.response.solver",
    "compute_response": "tdhf.properties.response_properties",
    "lowest_excitations": "tdhf.properties.spectrum",
    "load_deck": "tdhf.deck",
    "parse_deck": "tdhf.deck",
    "run_deck": "tdhf.driver",
    "certify": "tdhf.certify",
    "InputError": "tdhf.errors",
    "ConvergenceError": "tdhf.errors",
}

__all__ = list(_SOURCES)


def __getattr__(name: str) -> Any:
    if name not in _SOURCES:
        raise AttributeError(f"module 'tdhf' has no attribute {name!r}")
    value = getattr(importlib.import_module(_SOURCES[name]), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
