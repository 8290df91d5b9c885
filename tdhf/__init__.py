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

Atomic units throughout; the polarizability normalization is
alpha_L = 2 sum_n |<0| sum_i r_i^L P_L(cos theta_i) |n>|^2 / (E_n - E_0).
"""

from tdhf.deck import load_deck, parse_deck
from tdhf.certify import certify
from tdhf.driver import run_deck
from tdhf.errors import ConvergenceError, InputError
from tdhf.ground_state import GroundState, OrbitalResult, solve_ground_state
from tdhf.properties.response_properties import compute_response
from tdhf.properties.spectrum import lowest_excitations
from tdhf.radial.mesh import GridSettings
from tdhf.response.solver import ResponseSolver
from tdhf.scf import ScfSettings
from tdhf.system import System

__all__ = [
    "System",
    "GridSettings",
    "ScfSettings",
    "solve_ground_state",
    "GroundState",
    "OrbitalResult",
    "ResponseSolver",
    "compute_response",
    "lowest_excitations",
    "load_deck",
    "parse_deck",
    "run_deck",
    "certify",
    "InputError",
    "ConvergenceError",
]
