"""Tests of the discrete RPA spectrum (tdhf.properties.spectrum): energies and oscillator strengths.

Evidence, by kind:

1. exact invariants: hydrogen 2p (analytic energy and f); the TRK sum of the route-2 strengths;
   the uncoupled route reducing to Fock eigenvalue differences;
2. cross-route agreement: route 1 (Davidson roots in the complete discrete space), route 2
   (truncated dense RPA eigenproblem) and route 3 (poles of the full response), and the spectral
   sums sum f/w^(2k) against the Cauchy moments of the solver; the residue of alpha(w) at the
   first pole;
5. self-regression values of this code, labelled as such.

Oscillator strengths are those of the M = 0 dipole component, f = 2 w |<n|sum_i r_i C_10|0>|^2
(dimensionless; the TRK sum is N).  Energies in hartree.

Round-off of route 2 (derived): it diagonalizes M = (A - B)^1/2 (A + B) (A - B)^1/2, whose
eigenvalues w^2 reach cutoff^2; a backward-stable eigensolver moves them by ~U cutoff^2, i.e. a
line w_n by <= U cutoff^2 / w_n (measured: He 1P lines 5e-12 at cutoff 1e3, 6e-10 at 1e4, as the
bound's growth predicts).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from roundoff import U, gamma, response_tolerance

from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.properties.spectrum import EIGEN_CUTOFF, lowest_excitations, refine_pole, rpa_eigen_excitations, rpa_spectrum
from tdhf.properties.sum_rules import cauchy_moments, energy_weighted_sum
from tdhf.radial.mesh import GridSettings
from tdhf.response.solver import ResponseSolver
from tdhf.scf import ScfSettings
from tdhf.system import System

#: Smallest oscillator strength treated as a visible line (dark pseudo-states of other channels
#: have f ~ 1e-30 and are skipped, as lowest_excitations does).
VISIBLE = 1e-10


def make_solver(state: GroundState, multipole: int = 1) -> ResponseSolver:
    return ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, multipole)


def visible_lines(solver: ResponseSolver, cutoff: float, coupled: bool = True) -> tuple[np.ndarray, np.ndarray]:
    energies, strengths = rpa_eigen_excitations(solver, cutoff=cutoff, coupled=coupled)
    keep = (strengths > VISIBLE) & (energies > 0.0)
    return energies[keep], strengths[keep]


@pytest.fixture(scope="module")
def hydrogen() -> GroundState:
    return solve_ground_state(System.from_input("H"), GridSettings(), ScfSettings())


@pytest.fixture(scope="module")
def helium_lines(helium):
    """Route-2 (truncated dense) lines of He at cutoff 1e3 hartree (solver, energies, strengths)."""
    solver = make_solver(helium)
    return (solver, *visible_lines(solver, 1e3))


@pytest.fixture(scope="module")
def neon_lines(neon):
    solver = make_solver(neon)
    return (solver, *visible_lines(solver, 1e3))


# --------------------------------------------------------------------------- hydrogen
def test_hydrogen_lyman_alpha(hydrogen):
    r"""H 1s -> 2p: w = 3/8 and f = 2^13 / 3^9 = 0.41619672 exactly.

    <1s|z|2p0> = <Y00|cos|Y10> \int R10 R21 r^3 dr with R10 = 2e^-r, R21 = r e^(-r/2)/(2 sqrt 6):
    the radial integral is (1/sqrt 6) 4!/(3/2)^5 = 768/(243 sqrt 6); times 1/sqrt 3 this is
    2^8/(3^5 sqrt 2), so |<z>|^2 = 2^15/3^10 and f = 2 (3/8) 2^15/3^10 = 2^13/3^9.
    Both routes; the box (40 bohr) leaves 2p exact to ~1e-13.

    Round-off, derived: one electron has no coupling, so route 2 returns the Fock eigenvalue gap
    e_2p - e_1s, each eigenvalue within U lambda_max (Weyl; backward-stable eigensolver), and f
    from the 2p eigenvector, off by U lambda_max / (e_3p - e_2p) in norm, twice that in f; route 3
    returns the same pole (the guess is exact) and a residue by a central difference of 1/alpha
    over +-1e-6 relative, whose truncation (measured ~1e-8 for close Rydberg neighbours in Ne,
    scaling as the step squared) is far below 1e-6.
    """
    exact_f = float(Fraction(2**13, 3**9))
    solver = make_solver(hydrogen)
    largest = max(float(np.abs(values).max()) for values, _, _ in solver.spectra.values())
    energies, strengths = visible_lines(solver, 1e3)
    assert energies[0] == pytest.approx(0.375, abs=2 * U * largest + 1e-13)
    # f = 2 (v . b)^2: twice the eigenvector error, times ||b|| / |v . b| = (S(0)/f)^(1/2) = 1.55.
    assert strengths[0] == pytest.approx(exact_f, rel=4 * U * largest / (1 / 8 - 1 / 18) + 1e-13)
    energy, strength = refine_pole(solver, float(energies[0]))
    assert energy == pytest.approx(0.375, abs=2 * U * largest + 1e-13)
    assert strength == pytest.approx(exact_f, rel=1e-6)


# --------------------------------------------------------------------------- route agreement
#: Truncation of route 2 at cutoff 1e3, hartree: the lowest He and Ne 1P lines move by up to 1.3e-6
#: from cutoff 1e2 to 1e3 but by < 5e-12 from 1e3 to 1e4 (measured), so 1e-10 bounds it; the
#: round-off U cutoff^2 / w_n (module docstring) is added per line (route_energy_tolerance).
ROUTE_TRUNCATION = 1e-10
#: Route 3's residue is a central difference of 1/alpha with relative step RESIDUE_STEP = 1e-6; its
#: truncation error scales as the step squared: measured 9.2e-9 for the second Ne 1P line (9.2e-5 at
#: step 1e-4, 9.2e-7 at 1e-5), <= 4e-9 for the others; route 2's f is good to ~1e-9 at cutoff 1e3.
#: 1e-7 bounds both with room.
ROUTE_STRENGTH_RTOL = 1e-7


def route_energy_tolerance(energy: float) -> float:
    """ROUTE_TRUNCATION plus route 2's squaring round-off U cutoff^2 / w (both routes' common
    Fock eigen-decomposition error moves them together)."""
    return ROUTE_TRUNCATION + U * EIGEN_CUTOFF**2 / energy


@pytest.mark.parametrize("lines", ["helium_lines", "neon_lines"])
@pytest.mark.parametrize("index", [0, 1, 2])
def test_truncated_roots_and_response_poles_agree(request, lines, index):
    """The lowest three 1P lines: route 2 (dense eigenproblem, cutoff 1e3) against route 3 (poles of alpha(w))."""
    solver, energies, strengths = request.getfixturevalue(lines)
    below = 0.5 * (energies[index - 1] + energies[index]) if index else 0.5 * energies[0]
    above = 0.5 * (energies[index] + energies[index + 1])
    energy, strength = refine_pole(solver, float(energies[index]), bounds=(below, above))
    assert energy == pytest.approx(energies[index], abs=route_energy_tolerance(energy))
    assert strength == pytest.approx(strengths[index], rel=ROUTE_STRENGTH_RTOL)


@pytest.fixture(scope="module")
def helium_large_box() -> GroundState:
    """He in a 135-bohr box, where the 1s2p, 1s3p and 1s4p lines have decayed at the wall."""
    return solve_ground_state(System.from_input("He"), GridSettings(r_max=135.0), ScfSettings())


@pytest.mark.parametrize("lines", ["helium_lines", "neon_lines"])
def test_davidson_roots_agree_with_the_dense_truncated_problem(request, lines):
    """Route 1 (full discrete space) against route 2 (cutoff 1e3).

    Energies: route 2's truncation and squaring round-off (route_energy_tolerance); the Davidson
    residual 1e-10 bounds route 1's energy error at ~1e-20.  f: the Davidson residual bounds route 1's
    error at ~1e-10, route 2's is ~1e-9 (ROUTE_STRENGTH_RTOL covers both).
    """
    solver, energies, strengths = request.getfixturevalue(lines)
    spectrum = rpa_spectrum(solver, minimum_roots=6)
    assert spectrum.status.converged
    visible = spectrum.strengths > VISIBLE
    found_energies, found_strengths = spectrum.energies[visible][:4], spectrum.strengths[visible][:4]
    assert found_energies == pytest.approx(list(energies[:4]), abs=route_energy_tolerance(energies[0]))
    assert found_strengths == pytest.approx(list(strengths[:4]), rel=ROUTE_STRENGTH_RTOL)


def test_lowest_excitations_api(helium_large_box):
    """lowest_excitations returns converged, bound lines in ascending order matching route 3."""
    solver = make_solver(helium_large_box)
    found = lowest_excitations(solver, count=3)
    assert len(found) == 3
    assert all(line.converged and line.bound for line in found)
    energies = [line.energy for line in found]
    assert energies == sorted(energies)
    for i, line in enumerate(found):
        below = 0.5 * (energies[i - 1] + line.energy) if i else 0.5 * line.energy
        above = 0.5 * (energies[i + 1] + line.energy) if i + 1 < len(found) else line.energy + 0.5 * (line.energy - below)
        pole, residue = refine_pole(solver, line.energy, bounds=(below, above))
        assert line.energy == pytest.approx(pole, abs=route_energy_tolerance(pole))
        assert line.oscillator_strength == pytest.approx(residue, rel=ROUTE_STRENGTH_RTOL)


def test_lines_the_box_squeezes_are_not_listed(helium):
    """In the default 40-bohr box only 1s2p has decayed at the wall (1s3p reaches 5e-2 beyond 0.75 R)."""
    found = lowest_excitations(make_solver(helium), count=3)
    assert len(found) == 1 and found[0].box_fraction < 2e-4


#: SELF-REGRESSION value of this code (default settings): the lowest He 1P RPA excitation.  Not a
#: published number (for orientation only: the experimental 1s2p 1P energy is ~0.780 hartree,
#: recalled from memory; RPA on HF lies above it).
HELIUM_FIRST_EXCITATION_SELF_REGRESSION = 0.7969744301


def test_helium_first_excitation(helium, helium_lines):
    solver, energies, _ = helium_lines
    ionization = -float(helium.orbital_energies[0])  # Koopmans 1s ionization energy, 0.918
    energy, _ = refine_pole(solver, float(energies[0]), bounds=(0.5 * energies[0], 0.5 * (energies[0] + energies[1])))
    assert energy < ionization
    assert energy == pytest.approx(HELIUM_FIRST_EXCITATION_SELF_REGRESSION, abs=1e-9)


# --------------------------------------------------------------------------- sum rules
@pytest.mark.parametrize("atom", ["helium", "neon"])
@pytest.mark.parametrize("coupled", [True, False], ids=["coupled", "uncoupled"])
def test_truncated_strengths_sum_to_energy_weighted_sum(request, atom, coupled):
    """sum f over all route-2 lines (cutoff 1e9: every particle-hole pair of the grid) = S(0) of the
    solver's double commutator; coupled S(0) = N (TRK), exact in the discrete space.

    Round-off, derived: sum_n f_n = 2 ||(A - B)^1/2 b||^2 does not depend on M's eigenvectors
    (orthonormal to O(n U)); (A - B)^1/2 squared reproduces A - B to ~U lambda_max(A - B), which
    moves the sum by <= 2 U lambda_max ||b||^2 (||b||^2 = sum_t w_t |b_t|^2, the projected
    perturbation); the solver's S(0) has its own response_tolerance (measured deviations ~1e-11)."""
    state = request.getfixturevalue(atom)
    solver = make_solver(state)
    energies, strengths = rpa_eigen_excitations(solver, cutoff=1e9, coupled=coupled)
    s0 = energy_weighted_sum(solver, coupled)
    b = solver.project(solver.perturbation())
    largest = max(float(np.abs(values).max()) for values, _, _ in solver.spectra.values())
    route_one = 2 * U * 2 * largest * solver.weighted_dot(b, b) + gamma(strengths.size) * strengths.sum()
    tolerance = route_one / s0 + response_tolerance(solver)
    assert strengths.sum() == pytest.approx(s0, rel=tolerance, abs=0.0)
    if coupled:
        assert strengths.sum() == pytest.approx(state.system.electrons, rel=tolerance + response_tolerance(solver), abs=0.0)


@pytest.mark.parametrize("atom", ["helium", "neon"])
def test_spectral_sums_match_cauchy_moments(request, atom):
    """sum f/w^2, f/w^4, f/w^6 (route 2, cutoff 1e3) = S(-2), S(-4), S(-6) of the solver (linear
    solves), so S(-2) = alpha(0) by a second, independent route.

    Tolerance, derived: the lines above the cutoff carry at most the missing strength
    S(0) - sum f (f >= 0), each weighted by <= cutoff^-2k; route 2's squaring moves every w_n^2 by
    <= U cutoff^2 (k U cutoff^2 / w_n^2 relative in f/w^2k) and its f by the eigenvector error;
    the moments have their response_tolerance.  Measured deviations <= 7e-11.
    """
    state = request.getfixturevalue(atom)
    solver = make_solver(state)
    energies, strengths = rpa_eigen_excitations(solver, cutoff=EIGEN_CUTOFF)
    keep = energies > 0.0
    energies, strengths = energies[keep], strengths[keep]
    missing = energy_weighted_sum(solver) - strengths.sum()
    moments, status = cauchy_moments(solver)
    assert status.converged
    own = response_tolerance(solver, 0.0, solver.solve(0.0))
    for k, moment in zip((1, 2, 3), moments):
        spectral = float(np.sum(strengths / energies ** (2 * k)))
        shift = float(np.sum(strengths * k * U * EIGEN_CUTOFF**2 / energies ** (2 * k + 2)))
        bound = abs(missing) / EIGEN_CUTOFF ** (2 * k) + shift + (ROUTE_STRENGTH_RTOL + own) * moment
        assert abs(spectral - moment) <= bound, k


def test_uncoupled_lines_are_fock_eigenvalue_differences(helium):
    """Without coupling, route 2 returns e_v - e_1s for the p virtuals of F (the V^N spectrum).
    Round-off, derived: the squaring round-off U cutoff^2 / w_n plus 4 U w_n for the gap."""
    solver = make_solver(helium)
    energies, _ = rpa_eigen_excitations(solver, cutoff=1e3, coupled=False)
    values, _, virtual = solver.spectra[1]
    differences = np.sort(values[virtual] - helium.orbital_energies[0])
    expected = differences[differences < 1e3]
    assert np.all(np.abs(energies - expected) <= U * 1e3**2 / expected + 4 * U * expected)


# --------------------------------------------------------------------------- residue
def test_polarizability_near_pole_is_the_pole_term(helium_lines):
    """alpha(w) = f1/(w1^2 - w^2) + regular: (w1^2 - w^2) alpha(w) -> f1 linearly in the distance.

    At w = w1 (1 - d): the relative deviation is D(d) = (w1^2 - w^2) * background / f1 ~ 2 d * 6.5
    for He (observed 1.3e-3 at d = 1e-4), so it must fall tenfold per decade of d.  Ratio errors:
    the d^2 term, <= 1 per cent from d = 1e-3 to 1e-4 (measured 0.55 per cent); the residue's error
    (ROUTE_STRENGTH_RTOL) over D(1e-5) = 1.3e-4, 1e-3; the pole's (relative 1e-12 in w^2) over
    2 d, 5e-8 -- so 2 per cent.
    """
    solver, energies, strengths = helium_lines
    pole, residue = refine_pole(solver, float(energies[0]), bounds=(0.5 * energies[0], 0.5 * (energies[0] + energies[1])))
    deviations = []
    for distance in (1e-3, 1e-4, 1e-5):
        w = pole * (1.0 - distance)
        value = solver.polarizability(solver.solve(w))
        deviations.append((pole**2 - w**2) * value / residue - 1.0)
    assert abs(deviations[-1]) < 1e-3
    for coarse, fine in zip(deviations, deviations[1:]):
        assert coarse / fine == pytest.approx(10.0, rel=0.02)
    assert residue == pytest.approx(strengths[0], rel=ROUTE_STRENGTH_RTOL)
