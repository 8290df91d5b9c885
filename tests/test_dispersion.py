"""Tests of the Casimir–Polder dispersion coefficients (tdhf.properties.dispersion).

Evidence, by kind:

1. exact invariants: the imaginary-frequency rule integrates its rational "polynomials" exactly;
   the London one-pole limit of the prefactors; hydrogen, the exact one-electron limit of TDHF,
   against the exact H-H C6, C8, C10; A-B against B-A bit for bit; Cauchy–Schwarz between unlike
   and like pairs; the large-frequency tail alpha_1(i w) -> N / w^2;
2. cross-route agreement: C6, C8, C10 as London double sums over the RPA spectra of both atoms
   (an eigenproblem, no frequency quadrature) against the Casimir–Polder integrals; two worker
   processes against the serial loop (slow);
3. convergence: the error estimate against a 96-point rule; the default grid against
   ``GridSettings.tight()``;
4. published values, source beside each number;
5. self-regression values, labelled as such;
plus the non-convergence policy (a failing partner loses no other pair), progress, CSV/JSON
output and the driver's call.

Units: C6, C8, C10 in hartree bohr^6, ^8, ^10; frequencies in hartree.
"""

from __future__ import annotations

import csv
import dataclasses
import math
from functools import lru_cache

import mpmath as mp
import numpy as np
import pytest
from roundoff import U, gamma, resolvent_bound

from tdhf.deck import parse_deck
from tdhf.driver import run_deck
from tdhf.report.json_result import result_to_json
from tdhf.errors import ConvergenceError, InputError
from tdhf.execution import ProcessPool
from tdhf.properties.response_properties import compute_response
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.properties import dispersion
from tdhf.properties.dispersion import (
    ERROR_FLOOR,
    RELATIVE_ERROR_GOAL,
    casimir_polder_coefficients,
    companion_points,
    compute_dispersion,
    dispersion_table,
    imaginary_frequency_rule,
    imaginary_polarizabilities,
)
from tdhf.properties.spectrum import EIGEN_CUTOFF, rpa_eigen_excitations
from tdhf.properties.sum_rules import energy_weighted_sum
from tdhf.radial.mesh import GridSettings
from tdhf.report.serialize import CSV_COLUMNS, to_jsonable, write_polarizability_csv
from tdhf.response.solver import ResponseSolver
from tdhf.system import System

#: Exact nonrelativistic H(1s)-H(1s) coefficients, hartree bohr^2n, as quoted in the literature
#: (A. J. Thakkar, J. Chem. Phys. 89, 2092 (1988); Z.-C. Yan, J. F. Babb, A. Dalgarno and
#: G. W. F. Drake, Phys. Rev. A 54, 2824 (1996)); digits from memory.
HYDROGEN_C6 = 6.499026705
HYDROGEN_C8 = 124.3990835
HYDROGEN_C10 = 3285.828414
#: Tolerance: one unit in the last recalled digit (a recalled number may be truncated, not
#: rounded) plus our reported quadrature error estimate (>= 1e-9 relative); hydrogen's radial grid
#: error is < 1e-11 (test_response.py).
HYDROGEN_LAST_DIGIT = {"C6": 1e-9, "C8": 1e-7, "C10": 1e-6}

#: Accurate (correlated) He-He C6 = 1.460978 hartree bohr^6: Yan, Babb, Dalgarno & Drake,
#: Phys. Rev. A 54, 2824 (1996); from memory.
HELIUM_C6_ACCURATE = 1.460978
#: Self-regression value of this code (default grid, default quadrature), not a reference: TDHF
#: He-He C6 = 1.375622746444, i.e. 5.8 per cent below the correlated value (TDHF underestimates
#: alpha_1(0) of He by 4.4 per cent, 1.3222 against 1.3832 (from memory), and C6 ~ alpha^2).
HELIUM_C6_TDHF = 1.375622746444
#: Agreement of the default and the tight radial grid for C_2n (same quadrature on both): measured
#: 6e-12 for He; C_2n ~ alpha^2, so twice the response tests' GRID_RTOL (2e-9), 4e-9, bounds it.
GRID_RTOL = 4e-9


def self_regression_tolerance(row) -> float:
    """Relative: GRID_RTOL (what a legitimate change of the grid numerics may move) plus the row's
    own quadrature error estimate."""
    return GRID_RTOL + row.C6_error / row.C6


def solve(element: str, grid: GridSettings = GridSettings()) -> GroundState:
    return solve_ground_state(System.from_input(element), grid)


@pytest.fixture(scope="module")
def hydrogen() -> GroundState:
    """H 1s1: TDHF of one electron is exact (no electron-electron terms)."""
    return solve("H")


@pytest.fixture(scope="module")
def helium_neon(helium, neon):
    """The He, Ne series at default accuracy: rows He-He, He-Ne, Ne-Ne."""
    return dispersion_table([helium, neon])


# --------------------------------------------------------------------------------------------
# 1. exact invariants


@lru_cache(maxsize=None)
def gauss_legendre_errors(points: int) -> tuple[np.ndarray, np.ndarray]:
    """numpy's Gauss-Legendre nodes and weights (which tdhf maps) against a 40-digit mpmath
    reference (Newton on P_n from cos(pi (k - 1/4)/(n + 1/2))): absolute node errors and relative
    weight errors."""
    nodes, weights = np.polynomial.legendre.leggauss(points)
    node_error, weight_error = [], []
    with mp.workdps(40):
        for k, (t, w) in enumerate(zip(nodes, weights)):
            x = mp.cos(mp.pi * (points - k - 0.25) / (points + 0.5))
            for _ in range(100):
                value, previous = x, mp.mpf(1)
                for j in range(1, points):
                    previous, value = value, ((2 * j + 1) * x * value - j * previous) / (j + 1)
                slope = points * (x * value - previous) / (x * x - 1)
                x -= value / slope
                if abs(value / slope) < mp.mpf(10) ** -35:
                    break
            exact_weight = 2 / ((1 - x * x) * slope**2)
            node_error.append(abs(float(mp.mpf(float(t)) - x)))
            weight_error.append(abs(float((mp.mpf(float(w)) - exact_weight) / exact_weight)))
    return np.array(node_error), np.array(weight_error)


def mapped_rule_errors(points: int, scale: float) -> tuple[np.ndarray, np.ndarray]:
    """Relative errors of the nodes w = s(1+t)/(1-t) and weights w_t 2s/(1-t)^2 of
    imaginary_frequency_rule, first order in numpy's node errors dt and weight errors: dt/(1+t) +
    dt/(1-t) + 3 U, and the weight error + 2 dt/(1-t) + 4 U."""
    t, _ = np.polynomial.legendre.leggauss(points)
    node_error, weight_error = gauss_legendre_errors(points)
    frequency = node_error / (1 + t) + node_error / (1 - t) + 3 * U
    return frequency, weight_error + 2 * node_error / (1 - t) + 4 * U


@pytest.mark.parametrize("scale", [0.5, 1.7])
def test_rule_is_exact_for_its_rational_polynomials(scale):
    """On w = s(1+t)/(1-t), w^k/(w+s)^(k+2) dw = ((1+t)/2)^k dt/(2s): exact for k <= 2n-1.

    Round-off, derived: each term carries the weight error, k times the node error (the power; 4 U
    per numpy power call), (k + 2) times that of w + s (the node error times w/(w+s) + U), and the
    sum gamma(n); the mapped rule's errors come from numpy's Gauss-Legendre rule, measured against
    mpmath (mapped_rule_errors)."""
    points = 8
    nodes, weights = imaginary_frequency_rule(points, scale)
    assert np.all(np.diff(nodes) > 0) and nodes[0] > 0 and np.all(weights > 0)
    node_error, weight_error = mapped_rule_errors(points, scale)
    for k in range(2 * points):
        terms = weights * (nodes**k / (nodes + scale) ** (k + 2))
        relative = weight_error + k * node_error + (k + 2) * (node_error * nodes / (nodes + scale) + U) + 12 * U
        bound = terms @ (relative + gamma(points)) + U / (scale * (k + 1))
        assert abs(terms.sum() - 1.0 / (scale * (k + 1))) <= bound, k


def test_one_pole_model_gives_the_london_formulas():
    """alpha_l = a_l D_l^2 / (D_l^2 + w^2): int alpha alpha' dw = pi a a' D D' / (2 (D + D')).

    This pins the prefactors 3/pi, 15/(2 pi), 14/pi and 35/pi of the module's derivation (the
    Vandermonde sums 6, 15, 28, 70 over m); hydrogen's exact coefficients check them again below.
    Tolerance: the 96-point rule integrates these rational functions to < 1e-20 (their poles map
    to the unit circle of t at angles far from +-1); round-off is gamma(96) of the positive sums,
    node and weight errors (mapped_rule_errors) times (1 + 4 w |d log alpha/dw|) <= 5, and the
    reference's 6 U."""
    a_strengths, a_poles = np.array([1.3, 2.9, 11.0]), np.array([0.9, 1.2, 1.6])
    b_strengths, b_poles = np.array([7.0, 40.0, 300.0]), np.array([0.35, 0.5, 0.6])
    nodes, weights = imaginary_frequency_rule(96)
    alpha_a = a_strengths[:, None] * a_poles[:, None] ** 2 / (a_poles[:, None] ** 2 + nodes**2)
    alpha_b = b_strengths[:, None] * b_poles[:, None] ** 2 / (b_poles[:, None] ** 2 + nodes**2)

    def integral(l_a, l_b):
        d_a, d_b = a_poles[l_a - 1], b_poles[l_b - 1]
        return math.pi * a_strengths[l_a - 1] * b_strengths[l_b - 1] * d_a * d_b / (2 * (d_a + d_b))

    def cross(l_a, l_b):
        d_a, d_b = a_poles[l_b - 1], b_poles[l_a - 1]
        return math.pi * a_strengths[l_b - 1] * b_strengths[l_a - 1] * d_a * d_b / (2 * (d_a + d_b))

    expected = (
        3 / math.pi * integral(1, 1),
        15 / (2 * math.pi) * (integral(1, 2) + cross(1, 2)),
        14 / math.pi * (integral(1, 3) + cross(1, 3)) + 35 / math.pi * integral(2, 2),
    )
    node_error, weight_error = mapped_rule_errors(96, dispersion.FREQUENCY_SCALE)
    relative = gamma(96) + float(np.max(weight_error + 5 * node_error)) + 16 * U
    assert casimir_polder_coefficients(weights, alpha_a, alpha_b) == pytest.approx(expected, rel=relative)


def test_hydrogen_reproduces_the_exact_coefficients(hydrogen):
    result = compute_dispersion(hydrogen, (hydrogen,))
    (row,) = result.coefficients
    assert row.pair == ("H", "H") and row.converged and result.warnings == ()
    for name, exact in (("C6", HYDROGEN_C6), ("C8", HYDROGEN_C8), ("C10", HYDROGEN_C10)):
        value, error = getattr(row, name), getattr(row, f"{name}_error")
        assert abs(value - exact) <= HYDROGEN_LAST_DIGIT[name] + error + 1e-11 * exact, name
    assert len(result.polarizability_tables) == 1  # the like pair is solved once


def test_pairs_are_symmetric_to_the_last_bit(helium, neon):
    """A-B and B-A from separate runs (8-point base rule: cheap, and it must warn)."""
    with pytest.warns(RuntimeWarning, match="He-Ne: quadrature error estimate above the goal"):
        forward = compute_dispersion(helium, (neon,), quadrature_points=8).coefficients[0]
    with pytest.warns(RuntimeWarning, match="Ne-He: quadrature error estimate above the goal"):
        backward = compute_dispersion(neon, (helium,), quadrature_points=8).coefficients[0]
    assert forward.pair == ("He", "Ne") and backward.pair == ("Ne", "He")
    for name in ("C6", "C8", "C10", "C6_error", "C8_error", "C10_error"):
        assert getattr(forward, name) == getattr(backward, name), name
    assert not forward.converged  # 8 points miss the 1e-6 goal (C6 by 1e-5)


def test_cauchy_schwarz_bounds_unlike_pairs(helium_neon):
    """With positive weights, C6(A,B)^2 <= C6(A,A) C6(B,B) holds exactly for the discrete sums."""
    he_he, he_ne, ne_ne = helium_neon.coefficients
    assert [row.pair for row in helium_neon.coefficients] == [("He", "He"), ("He", "Ne"), ("Ne", "Ne")]
    assert he_ne.C6**2 < he_he.C6 * ne_ne.C6
    # Same for the alpha_2 alpha_2 part of C10, from the tables.
    he, ne = helium_neon.polarizability_tables
    weights = np.array(he.weights)
    cross = weights @ (np.array(he.quadrupole) * np.array(ne.quadrupole))
    assert cross**2 < (weights @ np.array(he.quadrupole) ** 2) * (weights @ np.array(ne.quadrupole) ** 2)


def test_dipole_tail_is_the_electron_count(helium):
    """alpha_1(i w) w^2 -> S(0) = N (Thomas-Reiche-Kuhn), to 1e-8 at w = 1e5 hartree.

    Physics gives w^2 alpha = N - S(2)/w^2 + ..., with S(2) = (4 pi/3) Z rho(0) ~ 30 for He (the
    acceleration sum rule, from memory; this code's tail gives 29.6 at w = 1e5): 1.5e-9 N at
    w = 1e5, below the tolerance (at w = 1e4 it would be 1.5e-7, so the old 1e4 test could not
    check 1e-8).  The round-off of the imaginary-axis solve there is ~U lambda_max / w < 1e-14."""
    (alpha,) = imaginary_polarizabilities(helium, np.array([1e5]), (1,))[:, 0]
    assert 1e10 * alpha / 2.0 == pytest.approx(1.0, abs=1e-8)


# --------------------------------------------------------------------------------------------
# 3. convergence


def _reference(states, points=96):
    """Coefficients of every pair of ``states`` from one rule of ``points`` nodes."""
    nodes, weights = imaginary_frequency_rule(points)
    alphas = [imaginary_polarizabilities(state, nodes) for state in states]
    return {
        (i, j): casimir_polder_coefficients(weights, alphas[i], alphas[j])
        for i in range(len(states)) for j in range(i, len(states))
    }


def _assert_honest(result, reference):
    for row, ((i, j), exact) in zip(result.coefficients, reference.items()):
        for name, value in zip(("C6", "C8", "C10"), exact):
            actual = abs(getattr(row, name) - value)
            estimate = getattr(row, f"{name}_error")
            assert actual <= estimate, (row.pair, name, actual, estimate)
            assert estimate <= RELATIVE_ERROR_GOAL * abs(value), (row.pair, name)
        assert row.converged


def test_error_estimate_is_honest_and_small(helium, neon, helium_neon):
    _assert_honest(helium_neon, _reference([helium, neon]))
    he_he = helium_neon.coefficients[0]
    assert he_he.C6_error == pytest.approx(ERROR_FLOOR * he_he.C6)  # He converges to the floor


@pytest.mark.slow
def test_error_estimate_is_honest_for_heavy_atoms():
    """Ca, Xe and Cd converge irregularly (deep p and d shells); the floor must cover it."""
    states = [solve(name) for name in ("Ca", "Xe", "Cd")]
    _assert_honest(dispersion_table(states), _reference(states))


def test_default_grid_matches_tight_grid(helium):
    """Both on the same quadrature, so only the radial grid differs: GRID_RTOL plus twice the
    round-off bound of alpha on each grid (C ~ alpha^2)."""
    tight = solve("He", GridSettings.tight())
    assert tight.grid_points > helium.grid_points
    (fine,) = compute_dispersion(tight, (tight,)).coefficients
    (default,) = compute_dispersion(helium, (helium,)).coefficients
    roundoff = 2 * sum(resolvent_bound(ResponseSolver(s.grid, s.system.Z, s.shells, s.orbital_energies, 3))
                       for s in (helium, tight))
    for name in ("C6", "C8", "C10"):
        assert getattr(default, name) == pytest.approx(getattr(fine, name), rel=GRID_RTOL + roundoff)


# --------------------------------------------------------------------------------------------
# 4., 5. published and self-regression values


def test_helium_c6_lies_a_few_per_cent_below_the_accurate_value(helium_neon):
    """A sanity check of magnitude, not a test of digits: TDHF misses correlation (0.9416 here);
    the digits are checked by the London sums below and the Gaussian-basis limit
    (test_gaussian_basis_reference.py)."""
    he_he = helium_neon.coefficients[0]
    ratio = he_he.C6 / HELIUM_C6_ACCURATE
    assert 0.93 < ratio < 0.955
    assert he_he.C6 == pytest.approx(HELIUM_C6_TDHF, rel=self_regression_tolerance(he_he))  # self-regression


def rpa_spectra(state: GroundState) -> dict[int, tuple[np.ndarray, np.ndarray, float]]:
    """Route-2 (truncated dense) RPA lines (energies, strengths, missing strength above the cutoff) for L = 1, 2, 3."""
    spectra = {}
    for L in (1, 2, 3):
        solver = ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, L)
        energies, strengths = rpa_eigen_excitations(solver, cutoff=EIGEN_CUTOFF)
        keep = energies > 0.0
        spectra[L] = (energies[keep], strengths[keep], energy_weighted_sum(solver) - strengths[keep].sum())
    return spectra


def london_integral(a, b) -> tuple[float, float]:
    """(2/pi) int_0^inf alpha_A alpha_B dw = sum_nm f_n f_m / (w_n w_m (w_n + w_m)) (Casimir-Polder's
    identity applied to the pole sums) over two route-2 (dense, truncated) spectra, with a bound on the lines above the
    cutoff: a missing strength F with energies >= cutoff adds <= F / cutoff^2 sum_m f_m / w_m."""
    (wa, fa, missing_a), (wb, fb, missing_b) = a, b
    value = float(fa @ (1.0 / (np.outer(wa, wb) * (wa[:, None] + wb[None, :]))) @ fb)
    tail = abs(missing_a) * float(np.sum(fb / wb)) + abs(missing_b) * float(np.sum(fa / wa))
    return value, tail / EIGEN_CUTOFF**2 + abs(missing_a * missing_b) / EIGEN_CUTOFF**3


def test_coefficients_equal_london_sums_over_the_rpa_spectra(helium, neon, helium_neon):
    """C_2n by an independent route: the double sums over the discrete RPA spectra (route 2,
    cutoff 1e3) of both atoms, C_2n = sum_{lA+lB=n-1} (2lA+2lB)!/((2lA)!(2lB)!) (1/4) sum f f /
    (w w (w + w)), against the Casimir-Polder quadrature of alpha(i w) from the linear solves.
    Measured agreement <= 4e-10.  Tolerance: the quadrature error estimate of the row, the bound on
    the lines above the cutoff, and route 2's squaring round-off, U cutoff^2 / w_1^2 relative for
    each of the three energies in a term (the spectrum module docstring)."""
    spectra = {"He": rpa_spectra(helium), "Ne": rpa_spectra(neon)}
    for row in helium_neon.coefficients:
        a, b = (spectra[name] for name in row.pair)
        lowest = min(float(s[0].min()) for spectrum in (a, b) for s in spectrum.values())
        squaring = 3 * U * EIGEN_CUTOFF**2 / lowest**2
        for name, terms in (("C6", ((1, 1),)), ("C8", ((1, 2), (2, 1))), ("C10", ((1, 3), (3, 1), (2, 2)))):
            value = tail = 0.0
            for l_a, l_b in terms:
                integral, bound = london_integral(a[l_a], b[l_b])
                factor = math.comb(2 * (l_a + l_b), 2 * l_a) / 4.0
                value, tail = value + factor * integral, tail + factor * bound
            reported = getattr(row, name)
            assert abs(value - reported) <= getattr(row, f"{name}_error") + tail + squaring * reported, (row.pair, name)


# --------------------------------------------------------------------------------------------
# series, progress, failures


def test_series_has_every_unordered_pair_and_reports_progress(helium, beryllium):
    calls = []
    result = dispersion_table([helium, beryllium], progress=lambda done, total: calls.append((done, total)))
    assert [row.pair for row in result.coefficients] == [("He", "He"), ("He", "Be"), ("Be", "Be")]
    assert [table.system for table in result.polarizability_tables] == ["He", "Be"]
    done = [d for d, _ in calls]
    total = {t for _, t in calls}
    nodes = companion_points(24)  # the Kronrod nodes hold the Gauss ones: no other solves
    assert total == {2 * 3 * nodes} and done == sorted(done) and done[-1] == 2 * 3 * nodes
    table = result.polarizability_tables[0]
    assert len(table.frequencies) == len(table.weights) == len(table.octupole) == companion_points(24)


@pytest.mark.slow
def test_two_workers_give_the_serial_numbers(helium, beryllium):
    serial = dispersion_table([helium, beryllium])
    with ProcessPool(2) as pool:
        parallel = dispersion_table([helium, beryllium], map_tasks=pool)
    assert parallel == serial


def test_static_polarizabilities_come_with_the_tables(helium):
    """Common practice, no source: alpha_L(0) of a table, L = 1, 2, 3 in that order, equals the static
    response compute_response gives (two call paths to one solve, agreeing to the Krylov tolerance)."""
    table = compute_dispersion(helium, (helium,)).polarizability_tables[0]
    direct = compute_response(helium, multipoles=(1, 2, 3)).polarizabilities
    static = [table.static_dipole, table.static_quadrupole, table.static_octupole]
    assert static == pytest.approx([row.coupled for row in direct], rel=1e-10)


class _FailingSolver(dispersion.ResponseSolver):
    """ResponseSolver that fails on the grid ``target_grid``, in the way given by ``mode``."""

    target_grid = None
    mode = "raise"

    def solve(self, *args, **kwargs):
        first_order = super().solve(*args, **kwargs)
        if self.grid is self.target_grid:
            if self.mode == "raise":
                raise ConvergenceError("response: GMRES did not converge (test double)")
            return dataclasses.replace(first_order, plus=np.full_like(first_order.plus, np.nan))
        return first_order


@pytest.mark.parametrize("mode", ["raise", "nan"])
def test_failing_partner_loses_no_other_pair(helium, neon, monkeypatch, mode):
    monkeypatch.setattr(_FailingSolver, "mode", mode)
    monkeypatch.setattr(_FailingSolver, "target_grid", neon.grid)
    monkeypatch.setattr(dispersion, "ResponseSolver", _FailingSolver)
    with pytest.warns(RuntimeWarning) as record:
        result = compute_dispersion(helium, (neon, helium))
    messages = [str(w.message) for w in record]
    assert messages == list(result.warnings)
    for multipole, message in zip((1, 2, 3), messages):
        assert message.startswith(f"dispersion: Ne: the L={multipole} response failed (ConvergenceError: ")
    failed, fine = result.coefficients
    assert failed.pair == ("He", "Ne") and not failed.converged
    assert all(math.isnan(getattr(failed, name)) for name in ("C6", "C8", "C10", "C6_error"))
    assert fine.pair == ("He", "He") and fine.converged
    assert fine.C6 == pytest.approx(HELIUM_C6_TDHF, rel=self_regression_tolerance(fine))
    assert all("Ne" in note for note in result.warnings) and len(result.warnings) == 3  # L = 1, 2, 3
    assert math.isnan(result.polarizability_tables[1].dipole[0])


def test_unconverged_ground_state_is_skipped_with_a_note(helium):
    broken = dataclasses.replace(helium, converged=False)
    with pytest.warns(RuntimeWarning, match="He: skipped; its ground state did not converge"):
        result = compute_dispersion(helium, (broken, helium))
    assert [row.converged for row in result.coefficients] == [False, True]
    assert math.isnan(result.coefficients[0].C6)


@pytest.mark.parametrize("points", [4, 7, 97, 24.0, True])
def test_quadrature_points_out_of_range(helium, points):
    with pytest.raises(InputError, match="dispersion.quadrature_points"):
        compute_dispersion(helium, (helium,), quadrature_points=points)


def test_workers_must_be_positive():
    with pytest.raises(InputError, match="--workers"):
        ProcessPool(0)


# --------------------------------------------------------------------------------------------
# output and the driver


def test_csv_round_trips_the_tables(helium_neon, tmp_path):
    path = tmp_path / "alpha.csv"
    write_polarizability_csv(path, helium_neon.polarizability_tables)
    with path.open(newline="") as stream:
        rows = list(csv.reader(stream))
    assert tuple(rows[0]) == CSV_COLUMNS
    body = rows[1:]
    he, ne = helium_neon.polarizability_tables
    assert len(body) == len(he.frequencies) + len(ne.frequencies)
    first, last = body[0], body[-1]
    assert first[0] == "He" and last[0] == "Ne"
    assert [float(x) for x in first[1:]] == [he.frequencies[0], he.weights[0], he.dipole[0],
                                             he.quadrupole[0], he.octupole[0]]
    assert float(last[5]) == ne.octupole[-1]
    assert [p.name for p in tmp_path.iterdir()] == ["alpha.csv"]  # no temporary left behind


def test_json_form_has_the_documented_keys(helium_neon):
    data = to_jsonable(helium_neon)
    assert sorted(data) == ["coefficients", "polarizability_tables", "warnings"]
    assert sorted(data["coefficients"][0]) == sorted(
        ["pair", "C6", "C8", "C10", "C6_error", "C8_error", "C10_error", "converged"])
    assert data["coefficients"][1]["pair"] == ["He", "Ne"]
    assert sorted(data["polarizability_tables"][0]) == sorted(
        ["system", "frequencies", "weights", "dipole", "quadrupole", "octupole", "converged", "static_dipole",
         "static_quadrupole", "static_octupole"])


def test_driver_runs_a_dispersion_deck():
    result = run_deck(parse_deck('[atom]\nelement = "He"\n[dispersion]\npartners = ["He"]\n'))
    (row,) = result.dispersion
    assert row.pair == ("He", "He") and row.converged
    assert row.C6 == pytest.approx(HELIUM_C6_TDHF, rel=self_regression_tolerance(row))
    assert result_to_json(result)["dispersion"][0]["C6"] == row.C6
