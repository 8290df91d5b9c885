"""Tests of the FE-DVR radial discretization: LGL rules, grid operators, hydrogen, Poisson kernels.

Evidence used here: exact invariants (polynomial exactness, operator symmetries), the LGL rule
against a 40-digit mpmath reference, analytic hydrogen results, and Slater integrals and screening
potentials of hydrogen orbitals derived exactly with sympy inside the tests (no external numbers).

Round-off tolerances are derived, never fitted: first-order propagation of the LGL node, weight
and Legendre-value errors (measured against mpmath on the machine running the test, and each
checked against the accuracy its algorithm can attain), and Higham's gamma(n) bounds for sums,
which hold for any summation order, vector width or FMA use (tests/roundoff.py).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from math import factorial

import mpmath as mp
import numpy as np
import pytest
import scipy.linalg
import sympy as sp
from numpy.polynomial import legendre
from roundoff import U, gamma

from tdhf.potentials import one_electron_operator
from tdhf.radial.lobatto import lobatto_derivative_matrix, lobatto_rule
from tdhf.radial.mesh import GridSettings, RadialGrid, build_grid, geometric_boundaries
from tdhf.radial.poisson import coulomb_kernels

ORDERS = list(range(1, 25))
#: Box for hydrogen: the 2p orbital has decayed to e^{-R/2} ~ 1e-13 at R = 60 bohr.
HYDROGEN_R_MAX = 60.0


@pytest.fixture(scope="module")
def hydrogen_grid() -> RadialGrid:
    """Default-settings grid for Z = 1 in a 60 bohr box."""
    return build_grid(GridSettings(), 1.0, HYDROGEN_R_MAX)


@pytest.fixture(scope="module")
def hydrogen_kernels(hydrogen_grid) -> np.ndarray:
    return coulomb_kernels(hydrogen_grid, 4)


def hydrogen_1s(r):
    """P_1s(r) = 2 r e^{-r} (analytic, normalised)."""
    return 2.0 * r * np.exp(-r)


def hydrogen_2p(r):
    """P_2p(r) = r^2 e^{-r/2} / sqrt(24) (analytic, normalised)."""
    return r**2 * np.exp(-r / 2.0) / np.sqrt(24.0)


# --- LGL rule on [-1, 1] --------------------------------------------------------------------


def legendre_mp(order: int, x):
    """P_p(x), P_p'(x), P_p''(x) in mpmath: Bonnet's recurrence, then the derivative identity
    P_p' = p (x P_p - P_(p-1)) / (x^2 - 1) and the Legendre equation for P_p'' (x != +-1)."""
    previous, value = mp.mpf(1), x
    for k in range(1, order):
        previous, value = value, ((2 * k + 1) * x * value - k * previous) / (k + 1)
    first = order * (x * value - previous) / (x * x - 1)
    second = (2 * x * first - order * (order + 1) * value) / (1 - x * x)
    return value, first, second


@dataclass(frozen=True)
class LobattoErrors:
    """tdhf's LGL rule against a 40-digit mpmath reference (independent of tdhf and numpy).

    Reference: the roots of P_p' by Newton's method in mpmath from the Chebyshev-Lobatto points
    cos(pi j / p), and w = 2 / (p (p+1) P_p(x)^2).  Per node, all in units of 1 (not of U):
    ``node`` |x - x*|, ``weight`` |w - w*| / w*, ``value`` |fl(P_p)(x) - P_p(x*)| / |P_p(x*)| (the
    numpy Legendre values tdhf's derivative matrix is built from), ``attainable`` the node
    accuracy Newton's method can reach in double precision: the rounding of the iterate plus
    |fl(P_p')(x) - P_p'(x)| / |P_p''(x*)| (the numpy evaluation error of P_p', as in tdhf's polish).
    """

    node: np.ndarray
    weight: np.ndarray
    value: np.ndarray
    attainable: np.ndarray


@lru_cache(maxsize=None)
def lobatto_errors(order: int) -> LobattoErrors:
    nodes, weights = lobatto_rule(order)
    unit = np.zeros(order + 1)
    unit[order] = 1.0
    values = legendre.legval(nodes, unit)
    slopes = legendre.legval(nodes, legendre.legder(unit))
    with mp.workdps(40):
        interior = []
        for j in range(1, order):
            x = mp.cos(mp.pi * (order - j) / order)
            for _ in range(100):
                _, first, second = legendre_mp(order, x)
                x -= first / second
                if abs(first / second) < mp.mpf(10) ** -35:
                    break
            interior.append(x)
        exact = [mp.mpf(-1), *interior, mp.mpf(1)]
        assert all(b - a > 0 for a, b in zip(exact, exact[1:]))  # p + 1 distinct nodes: all of them
        exact_values = [mp.mpf((-1) ** order), *(legendre_mp(order, x)[0] for x in interior), mp.mpf(1)]
        exact_weights = [2 / (order * (order + 1) * v**2) for v in exact_values]
        node_error = [abs(float(mp.mpf(float(a)) - b)) for a, b in zip(nodes, exact)]
        weight_error = [abs(float((mp.mpf(float(a)) - b) / b)) for a, b in zip(weights, exact_weights)]
        value_error = [abs(float((mp.mpf(float(a)) - b) / b)) for a, b in zip(values, exact_values)]
        # Rounding of the final iterate: U |x|, or at the node x = 0 (even p), where that vanishes,
        # U times the node spacing (the size of the last corrections, rounded).
        spacing = np.diff(nodes).min()
        attainable = [U * max(abs(float(a)), spacing) for a in nodes]
        for j in range(1, order):
            _, slope, curvature = legendre_mp(order, mp.mpf(float(nodes[j])))
            attainable[j] += abs(float(mp.mpf(float(slopes[j])) - slope)) / abs(float(curvature))
    return LobattoErrors(np.array(node_error), np.array(weight_error), np.array(value_error), np.array(attainable))


def derivative_entry_error(order: int) -> np.ndarray:
    """Bound on the relative error of each computed D_ij = P_p(x_i) / (P_p(x_j) (x_i - x_j)), i != j.

    First order in the measured input errors: the two values, the two nodes (through the
    difference x_i - x_j), and three roundings (the difference, the product, the quotient).
    """
    nodes, _ = lobatto_rule(order)
    errors = lobatto_errors(order)
    separation = np.abs(nodes[:, None] - nodes[None, :])
    np.fill_diagonal(separation, np.inf)
    relative = errors.value[:, None] + errors.value[None, :] + (errors.node[:, None] + errors.node[None, :]) / separation
    relative += 3 * U
    np.fill_diagonal(relative, 0.0)  # the diagonal is set exactly: 0 and -+p(p+1)/4
    return relative


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_nodes_and_weights_match_mpmath(order):
    """Nodes to the accuracy Newton's method can attain in double precision (twice it: the last
    correction is computed at the previous iterate), weights to the error their formula
    2/(p(p+1)P^2) inherits from the computed P_p(x): 2 x value error + 4 roundings."""
    nodes, weights = lobatto_rule(order)
    errors = lobatto_errors(order)
    assert nodes.shape == weights.shape == (order + 1,)
    assert nodes[0] == -1.0 and nodes[-1] == 1.0
    assert np.all(errors.node <= 2.0 * errors.attainable), errors.node / errors.attainable
    assert np.all(errors.weight <= 2.0 * errors.value + 4 * U), errors.weight / U


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_integrates_degree_2p_minus_1_exactly(order):
    """sum_i w_i x_i^m = int x^m for m <= 2p - 1.  Round-off: each term w_i x_i^m carries the weight
    error, m x (node error / |x_i| + U) from the power (computed by repeated products), and the
    sum of p + 1 terms adds gamma(p + 1), all relative to sum |w_i x_i^m|."""
    nodes, weights = lobatto_rule(order)
    errors = lobatto_errors(order)
    power = np.ones_like(nodes)
    for m in range(2 * order):
        exact = 2.0 / (m + 1) if m % 2 == 0 else 0.0
        terms = np.abs(weights * power)
        with np.errstate(divide="ignore", invalid="ignore"):
            node_part = np.where(nodes != 0.0, m * errors.node / np.abs(nodes), 0.0)
        bound = terms @ (errors.weight + node_part + m * U + gamma(order + 1)) + U * exact
        assert abs(weights @ power - exact) <= bound, m
        power = power * nodes


def lobatto_error_constant(order: int) -> Fraction:
    """-(p+1) p^3 2^(2p+1) ((p-1)!)^4 / ((2p+1) ((2p)!)^3), the LGL remainder constant.

    Lobatto quadrature with n = p + 1 points has the remainder
    int f - sum w f = -n (n-1)^3 2^(2n-1) ((n-2)!)^4 / ((2n-1) ((2n-2)!)^3) f^(2n-2)(xi)
    (M. Abramowitz and I. A. Stegun, Handbook of Mathematical Functions, 25.4.32; from memory).
    For f = x^(2p), f^(2p) = (2p)! is constant, so the remainder is exactly this constant x (2p)!.
    """
    return Fraction(-(order + 1) * order**3 * 2 ** (2 * order + 1) * factorial(order - 1) ** 4,
                    (2 * order + 1) * factorial(2 * order) ** 3)


@pytest.mark.parametrize("order", range(1, 17), ids=lambda p: f"p{p}")
def test_lobatto_error_for_degree_2p_is_the_remainder_formula(order):
    """The rule is not exact one degree higher, and its error on x^(2p) is the closed-form
    remainder (analytic, Abramowitz and Stegun 25.4.32).  Up to p = 16 the remainder (>= 7e-10)
    exceeds the round-off bound of the sum (as in the exactness test) by > 1e3, so 1e-3 relative
    holds with room; a wrong node or weight formula misses it by O(1)."""
    nodes, weights = lobatto_rule(order)
    exact_integral = 2.0 / (2 * order + 1)
    remainder = float(lobatto_error_constant(order) * factorial(2 * order))
    assert abs(remainder) > 7e-10
    assert exact_integral - weights @ nodes ** (2 * order) == pytest.approx(remainder, rel=1e-3)


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_derivative_matrix_exact_on_degree_p(order):
    """D x^m = m x^(m-1) for m <= p (Lagrange interpolation through p + 1 nodes is exact).

    Round-off, derived (no fitted constant): with v_j = x_j^m by repeated products (relative
    error gamma(m)), |fl(D v) - D* v*| <= sum_j |D_ij| |v_j| (e_ij + gamma(p+1) + gamma(m)) plus
    the shift of the exact identity by the node errors, sum_j |D_ij| m |x_j|^(m-1) dx_j +
    m (m-1) |x_i|^(m-2) dx_i, where e_ij is derivative_entry_error (measured input errors,
    propagated to first order) and gamma(p+1) the matrix-vector sum (any BLAS kernel).
    """
    nodes, _ = lobatto_rule(order)
    derivative = lobatto_derivative_matrix(order)
    entry_error = derivative_entry_error(order)
    node_error = lobatto_errors(order).node
    absolute = np.abs(derivative)
    previous, power = np.zeros_like(nodes), np.ones_like(nodes)
    for m in range(order + 1):
        expected = m * previous
        bound = (absolute * (entry_error + gamma(order + 1) + gamma(m))) @ np.abs(power)
        bound += absolute @ (m * np.abs(previous) * node_error) + gamma(m + 1) * np.abs(expected)
        if m >= 2:
            bound += m * (m - 1) * np.abs(nodes) ** (m - 2) * node_error
        assert np.all(np.abs(derivative @ power - expected) <= bound), m
        previous, power = power, power * nodes


def test_lobatto_rejects_order_zero():
    with pytest.raises(ValueError, match="order"):
        lobatto_rule(0)


# --- grid construction and quadrature ------------------------------------------------------


def node_errors(grid: RadialGrid) -> tuple[np.ndarray, np.ndarray]:
    """Round-off bounds of the interior nodes and weights of a grid, (absolute in r, relative in w).

    The node r = left + half (x + 1) of an element carries half x the LGL node error plus three
    roundings (x + 1, the product, the sum) of terms up to |left| + 2 half; the weight half w
    (summed over the two elements at a shared node) the LGL weight error plus three roundings
    (right - left, the product, the sum).
    """
    order = grid.order
    x, _ = lobatto_rule(order)
    errors = lobatto_errors(order)
    position = np.zeros(grid.n_elements * order + 1)
    weight = np.zeros_like(position)
    for k, (left, right) in enumerate(zip(grid.boundaries[:-1], grid.boundaries[1:])):
        half = 0.5 * (right - left)
        block = slice(k * order, k * order + order + 1)
        position[block] = half * errors.node + 3 * U * (abs(left) + 2 * half)
        weight[block] = np.maximum(weight[block], errors.weight + 3 * U)
    position[0] = position[-1] = 0.0  # the removed end nodes, 0 and R, are exact
    return position[1:-1], weight[1:-1]


@pytest.mark.parametrize("order", [4, 7, 10, 16], ids=lambda p: f"p{p}")
def test_grid_quadrature_exact_for_piecewise_degree_2p_minus_1(order):
    """f = r (R - r) r^m vanishes at both removed end nodes, so the interior nodes alone integrate
    it exactly: R^(m+3) / ((m+2)(m+3)).  Round-off, derived: each positive term w_i f(r_i) errs by
    its weight error, (m+1) dr/r + dr/(R - r) from the node error dr, and m + 6 roundings (the
    power, by libm or a SIMD kernel, counted as 4); the sum adds gamma(n); the exact value 7 U."""
    r_max = 30.0
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.05, r_max, 12), order)
    position, weight = node_errors(grid)
    r = grid.r
    for m in range(2 * order - 2):
        values = r * (r_max - r) * r**m
        exact = r_max ** (m + 3) / ((m + 2) * (m + 3))
        relative = weight + (m + 1) * position / r + (position + U * r_max) / (r_max - r) + (m + 6) * U
        bound = (grid.weights * values) @ (relative + gamma(grid.size)) + 7 * U * exact
        assert abs(grid.integrate(values) - exact) <= bound, m


def geometric_ratio_tolerance(boundaries: np.ndarray) -> float:
    """Round-off bound on the ratio of neighbouring element sizes from geometric_boundaries.

    b_k = h (g^k - 1)/(g - 1) carries <= 7 U h g^k/(g - 1) (power 4, difference, quotient,
    product), and the bisection's g, good to 2 U g, moves the last b_N by <= 2 N U h g^N/(g - 1);
    a size b_(k+1) - b_k = h g^k thus errs by <= U h g^k ((7 + 2N)(g + 1)/(g - 1) + 1), a ratio
    of two sizes by twice that relative, plus the division.
    """
    sizes = np.diff(boundaries)
    growth = sizes[1] / sizes[0]
    elements = len(sizes)
    return 2 * U * ((7 + 2 * elements) * (growth + 1) / (growth - 1) + 1) + U


def test_grid_sizes_and_box():
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.1, 40.0, 9), 6)
    assert grid.n_elements == 9
    assert grid.size == 9 * 6 - 1
    assert grid.r_max == 40.0
    assert np.all(np.diff(grid.r) > 0.0) and 0.0 < grid.r[0] and grid.r[-1] < 40.0
    sizes = np.diff(grid.boundaries)
    # h (g - 1)/(g - 1): the two (g - 1) are the same float, so only the product and the quotient round.
    assert abs(sizes[0] - 0.1) <= 2 * U * 0.1
    tolerance = geometric_ratio_tolerance(grid.boundaries)
    np.testing.assert_allclose(sizes[1:] / sizes[:-1], sizes[1] / sizes[0], rtol=2 * tolerance, atol=0)


def test_build_grid_growth_and_first_element():
    settings = GridSettings()
    grid = build_grid(settings, 10.0, 40.0)
    sizes = np.diff(grid.boundaries)
    assert abs(sizes[0] - 0.1 / 10.0) <= 3 * U * 0.01  # 0.1 / Z rounds once more
    assert np.all(sizes[1:] / sizes[:-1] <= settings.growth * (1 + geometric_ratio_tolerance(grid.boundaries)))
    assert grid.r_max == 40.0


def test_from_boundaries_rejects_bad_boundaries():
    with pytest.raises(ValueError, match="boundaries"):
        RadialGrid.from_boundaries(np.array([0.1, 1.0, 2.0]), 4)
    with pytest.raises(ValueError, match="boundaries"):
        RadialGrid.from_boundaries(np.array([0.0, 2.0, 1.0]), 4)


def test_dvr_coefficient_round_trip(hydrogen_grid):
    values = hydrogen_1s(hydrogen_grid.r)
    coefficients = hydrogen_grid.to_coefficients(values)
    # sqrt(w) v / sqrt(w): two roundings of the same sqrt(w), plus one for the comparison.
    np.testing.assert_allclose(hydrogen_grid.to_values(coefficients), values, rtol=3 * U, atol=0)
    # Quadrature of a product is a dot product of DVR coefficients: the norm of P_1s is 1 (analytic).
    # The LGL quadrature error of 4 r^2 e^-2r on this grid is < 1e-15 (the tight grid agrees to
    # round-off); round-off: each c_i^2 errs by 2 x (weight error / 2 + node error |P'/P| + 5 U)
    # and the sum adds gamma(n).
    position, weight = node_errors(hydrogen_grid)
    r = hydrogen_grid.r
    relative = weight + 2 * position * np.abs(1.0 / r - 1.0) + 10 * U + gamma(hydrogen_grid.size)
    assert abs(coefficients @ coefficients - 1.0) <= 1e-15 + (coefficients**2) @ relative


# --- operators ----------------------------------------------------------------------------


@pytest.mark.parametrize("order", [4, 10, 18], ids=lambda p: f"p{p}")
def test_stiffness_symmetric_positive_definite(order):
    """L = s_i s_j sum_k D_ki w_k D_kj / half is symmetric in exact arithmetic; the computed entries
    ij and ji round the products in different orders, so they differ by <= 2 gamma(p + 2)
    (|D|^T W |D|)_ij <= 2 gamma(p + 2) sqrt(L_ii L_jj) (Cauchy-Schwarz; the diagonal is positive)."""
    grid = build_grid(GridSettings(order=order), 10.0, 40.0)
    stiffness = grid.stiffness
    diagonal = np.sqrt(np.diag(stiffness))
    assert np.all(np.abs(stiffness - stiffness.T) <= 2 * gamma(order + 2) * np.outer(diagonal, diagonal))
    scipy.linalg.cholesky(stiffness)  # raises LinAlgError unless positive definite


@pytest.mark.parametrize("order", [4, 10, 18], ids=lambda p: f"p{p}")
def test_derivative_antisymmetric(order):
    """Summation by parts: w_i D_ij + w_j D_ji = 0 for the exact LGL matrices except at the element
    ends, whose +-1 cancel at shared nodes and vanish at the removed ones.  Round-off, derived: each
    of the two entries carries its derivative_entry_error, the weight error and 4 roundings (the
    weight product, the two scale factors); the bridge diagonal p(p+1)/4 (w_p - w_0) the two weight errors."""
    grid = build_grid(GridSettings(order=order), 10.0, 40.0)
    derivative = grid.derivative
    errors = lobatto_errors(order)
    entry = derivative_entry_error(order).max() + errors.weight.max() + 4 * U
    bound = entry * (np.abs(derivative) + np.abs(derivative.T))
    _, weights = lobatto_rule(order)
    end_errors = errors.weight[0] + errors.weight[-1] + 2 * U
    bound[np.diag_indices(grid.size)] += order * (order + 1) / 4 * weights[0] * end_errors / grid.weights
    assert np.all(np.abs(derivative + derivative.T) <= bound)


@pytest.mark.parametrize("order", [4, 8, 12], ids=lambda p: f"p{p}")
def test_operators_exact_on_global_polynomials(order):
    """f = r (R - r)(1 + r/R)^(p-2) has degree p, lies in the FE-DVR space and vanishes at 0 and R.
    Then D f = coefficients of f' and L f = -(coefficients of f''), both exactly (integrands of
    degree <= 2p - 1 per element; f' is continuous, so the bridge terms cancel).

    Round-off, derived: the polynomials are evaluated by Horner's rule (error <= gamma(2d) times the
    polynomial of |coefficients| at |r|, Higham eq. (5.3)) at nodes off by dr, which moves f by
    |f'| dr; each operator entry carries <= rho = the largest LGL entry error + 2 weight errors +
    4 U (for L, twice the D error: it is D^T W D); the matrix-vector product adds gamma(n) |A| |f|.
    """
    r_max = 20.0
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.05, r_max, 10), order)
    polynomial = np.polynomial.Polynomial([0.0, r_max, -1.0]) * np.polynomial.Polynomial([1.0, 1.0 / r_max]) ** (
        order - 2
    )
    r = grid.r
    position, weight = node_errors(grid)
    scale = np.sqrt(grid.weights)

    def coefficients_and_error(p: np.polynomial.Polynomial) -> tuple[np.ndarray, np.ndarray]:
        horner = gamma(2 * p.degree() + 2) * np.polynomial.Polynomial(np.abs(p.coef))(r)
        shift = np.abs(p.deriv(1)(r)) * position
        value = p(r)
        return scale * value, scale * (horner + shift + np.abs(value) * (weight / 2 + 2 * U))

    f, f_error = coefficients_and_error(polynomial)
    first, first_error = coefficients_and_error(polynomial.deriv(1))
    second, second_error = coefficients_and_error(polynomial.deriv(2))
    rho = derivative_entry_error(order).max() + 2 * lobatto_errors(order).weight.max() + 4 * U
    for operator, expected, expected_error, entry in (
        (grid.derivative, first, first_error, rho),
        (grid.stiffness, -second, second_error, 2 * rho + gamma(order + 1)),
    ):
        absolute = np.abs(operator)
        bound = absolute @ (np.abs(f) * (entry + gamma(grid.size)) + f_error) + expected_error
        assert np.all(np.abs(operator @ f - expected) <= bound)


# --- hydrogen: -1/(2 n^2), analytic -------------------------------------------------------


def bisection_tolerance(operator: np.ndarray) -> float:
    """Absolute error bound of one eigenvalue from ``eigvalsh(..., subset_by_index=...)``.

    A partial spectrum goes through LAPACK's bisection (dstebz) with the default tolerance
    eps ||T||_1 for the tridiagonal T similar to A, ||T||_1 <= 3 ||A||_2 <= 3 ||A||_1; the
    Householder reduction adds a backward error of the same order, so twice that.
    """
    return 2 * 3 * (2 * U) * float(np.abs(operator).sum(axis=0).max())


@pytest.mark.parametrize(
    "n, l", [(1, 0), (2, 0), (2, 1), (3, 2)], ids=["1s", "2s", "2p", "3d"]
)
def test_hydrogen_eigenvalues(hydrogen_grid, n, l):
    """-1/(2 n^2), exact Schroedinger value.  Discretization: the 60-bohr wall lifts 3d by 4.5e-12
    (against an 80-bohr box) and the others by < 1e-14; the rest is the eigensolver's round-off."""
    operator = one_electron_operator(hydrogen_grid, 1.0, l)
    index = n - l - 1
    value = scipy.linalg.eigvalsh(operator, subset_by_index=[index, index])[0]
    box = 1e-11 if n == 3 else 1e-14
    assert abs(value + 1.0 / (2 * n**2)) <= box + bisection_tolerance(operator)


@pytest.mark.parametrize("z", [1.0, 10.0, 54.0, 86.0], ids=lambda z: f"Z{z:g}")
def test_hydrogen_like_ground_state_scales_as_z_squared(z):
    """-Z^2/2: the default first element 0.1/Z keeps the discretization error independent of Z
    (< 1e-12 relative: GridSettings.tight() agrees to 1e-12 for every Z here); the rest is the
    eigensolver's round-off, relative ~ eps ||A|| / |lambda_1|, the same for every Z."""
    grid = build_grid(GridSettings(), z, 40.0)
    operator = one_electron_operator(grid, z, 0)
    value = scipy.linalg.eigvalsh(operator, subset_by_index=[0, 0])[0]
    assert abs(value + 0.5 * z**2) <= 1e-12 * 0.5 * z**2 + bisection_tolerance(operator)


def origin_rows_error(grid: RadialGrid) -> tuple[np.ndarray, np.ndarray]:
    """Bounds on the entries of origin_slope and origin_curvature (absolute), from the LGL errors.

    The slope row is D[0] scale / half: D's entry errors (derivative_entry_error), the scale
    1/sqrt(w) (half the weight error + 2 U) and 2 roundings.  The curvature row is (D D)[0] scale / half^2:
    the product's terms carry two D errors and gamma(p + 1) from the sum.
    """
    order = grid.order
    derivative = np.abs(lobatto_derivative_matrix(order))
    entry = derivative_entry_error(order)
    _, weight = node_errors(grid)
    half = 0.5 * (grid.boundaries[1] - grid.boundaries[0])
    scale = 1.0 / np.sqrt(grid.weights[:order])
    slope = np.zeros(grid.size)
    curvature = np.zeros(grid.size)
    first = derivative[0, 1:] * (entry[0, 1:] + weight[:order] / 2 + 4 * U)
    product = (derivative * (entry[0][:, None] + entry + gamma(order + 1) + 2 * U)) @ derivative
    slope[:order] = first * scale / half
    curvature[:order] = (product[0, 1:] + derivative[0] @ derivative[:, 1:] * (weight[:order] / 2 + 4 * U)) * scale / half**2
    return slope, curvature


def test_origin_slope_and_curvature_of_hydrogen_1s(hydrogen_grid):
    """P = 2 r e^{-r}: P'(0) = 2, P''(0) = -4 (analytic).  The interpolation error on the first
    element (0.1 bohr, order 10) is ~h^10 / 10! ~ 1e-17: negligible; the rest is round-off of the
    rows (origin_rows_error), of the coefficients (weight and node errors, exp to 4 U) and of the
    p + 1 term sums."""
    grid = hydrogen_grid
    coefficients = grid.to_coefficients(hydrogen_1s(grid.r))
    position, weight = node_errors(grid)
    coefficient_error = np.abs(coefficients) * (weight / 2 + position * np.abs(1.0 / grid.r - 1.0) + 8 * U)
    slope_error, curvature_error = origin_rows_error(grid)
    for row, row_error, exact in ((grid.origin_slope, slope_error, 2.0), (grid.origin_curvature, curvature_error, -4.0)):
        bound = row_error @ np.abs(coefficients) + np.abs(row) @ coefficient_error
        bound += gamma(grid.order + 1) * np.abs(row) @ np.abs(coefficients)
        assert abs(row @ coefficients - exact) <= bound


def test_origin_slope_of_computed_hydrogen_eigenvector(hydrogen_grid):
    """P'(0) = 2 for the normalised 1s eigenvector.  Round-off, derived: the eigenvector of a
    backward-stable eigensolver is off by <= U ||A||_2 / gap in norm (gap 3/8 to 2s; first-order
    perturbation theory), which the slope row turns into ||row||_2 times that; plus the row's
    own error and the sum."""
    operator = one_electron_operator(hydrogen_grid, 1.0, 0)
    values, vectors = scipy.linalg.eigh(operator)
    vector = vectors[:, 0] * np.sign(vectors[0, 0])
    row = hydrogen_grid.origin_slope
    slope_error, _ = origin_rows_error(hydrogen_grid)
    eigenvector_error = U * np.abs(values).max() / (values[1] - values[0])
    bound = np.linalg.norm(row) * eigenvector_error + (slope_error + gamma(hydrogen_grid.order + 1) * np.abs(row)) @ np.abs(vector)
    assert abs(row @ vector - 2.0) <= bound


# --- Poisson kernels ---------------------------------------------------------------------


def kernel_error(grid: RadialGrid, k: int, kernel: np.ndarray) -> np.ndarray:
    """Componentwise bound on the error of coulomb_kernels(grid, k)[k], derived.

    The Cholesky solve of M_k X = I is backward stable componentwise: (M + dM) x = e_j with
    |dM| <= gamma(3n + 1) |R^T| |R| (Higham, Theorem 10.4; from memory), so |X - M^-1| <=
    gamma(3n + 1) |M^-1| |R^T| |R| |M^-1|.  Scaling by (2k + 1) / (r_i r_j sqrt(w_i w_j)), the outer
    term (r_i r_j)^k / R^(2k+1) and the symmetrization add <= 12 U of |V^k|.
    """
    r = grid.r
    laplacian = grid.stiffness + np.diag(k * (k + 1) / r**2)
    factor = np.abs(scipy.linalg.cholesky(laplacian, lower=False))
    inverse = np.abs(np.linalg.inv(laplacian))
    scale = 1.0 / (r * np.sqrt(grid.weights))
    solve = gamma(3 * grid.size + 1) * inverse @ (factor.T @ factor) @ inverse
    return (2 * k + 1) * solve * np.outer(scale, scale) + 12 * U * np.abs(kernel)


@lru_cache(maxsize=None)
def exact_slater_integral(k: int, first: str, second: str) -> sp.Rational:
    """R^k(ab, ab) = iint rho r_<^k / r_>^(k+1) rho, rho = P_a P_b, for hydrogen orbitals, exact.

    Derived here with sympy (symbolic integration), using the symmetry of the integrand:
    R^k = 2 int_0^inf rho(r) r^{-k-1} int_0^r rho(s) s^k ds dr.
    """
    r, s = sp.symbols("r s", positive=True)
    orbitals = {"1s": 2 * r * sp.exp(-r), "2p": r**2 * sp.exp(-r / 2) / sp.sqrt(24)}
    density = orbitals[first] * orbitals[second]
    inner = sp.integrate(density.subs(r, s) * s**k, (s, 0, r))
    return sp.nsimplify(sp.simplify(2 * sp.integrate(density * r ** (-k - 1) * inner, (r, 0, sp.oo))))


@pytest.mark.parametrize(
    "k, first, second, closed_form",
    [
        (0, "1s", "1s", sp.Rational(5, 8)),  # F^0(1s,1s) = 5/8, textbook value (from memory), re-derived
        (0, "2p", "2p", sp.Rational(93, 512)),  # F^0(2p,2p)
        (2, "2p", "2p", sp.Rational(45, 512)),  # F^2(2p,2p)
        (1, "1s", "2p", None),  # G^1(1s,2p): exchange-type pair density, no quoted closed form
    ],
    ids=["F0_1s1s", "F0_2p2p", "F2_2p2p", "G1_1s2p"],
)
def test_slater_integrals_of_hydrogen(hydrogen_grid, hydrogen_kernels, k, first, second, closed_form):
    """Against sympy.  The default grid resolves these densities to < 1e-14 (the tight grid
    agrees); the tolerance is the kernel's derived round-off plus the bilinear form's gamma(2n)."""
    exact = exact_slater_integral(k, first, second)
    if closed_form is not None:
        assert exact == closed_form
    functions = {"1s": hydrogen_1s, "2p": hydrogen_2p}
    pair = hydrogen_grid.to_coefficients(functions[first](hydrogen_grid.r)) * hydrogen_grid.to_coefficients(
        functions[second](hydrogen_grid.r)
    )
    kernel = hydrogen_kernels[k]
    bound = np.abs(pair) @ (kernel_error(hydrogen_grid, k, kernel) + gamma(2 * hydrogen_grid.size) * np.abs(kernel)) @ np.abs(pair)
    assert abs(pair @ kernel @ pair - float(exact)) <= 1e-14 + bound


@lru_cache(maxsize=None)
def exact_screening_potential(k: int, orbital: str):
    """Y^k(r)/r of rho = P^2 for a hydrogen orbital, in closed form (sympy), as a numpy function:
    r^-(k+1) int_0^r s^k rho ds + r^k int_r^inf s^-(k+1) rho ds."""
    r, s = sp.symbols("r s", positive=True)
    orbitals = {"1s": 2 * r * sp.exp(-r), "2p": r**2 * sp.exp(-r / 2) / sp.sqrt(24)}
    density = (orbitals[orbital] ** 2).subs(r, s)
    potential = r ** (-k - 1) * sp.integrate(s**k * density, (s, 0, r)) + r**k * sp.integrate(s ** (-k - 1) * density, (s, r, sp.oo))
    closed_form = sp.lambdify(r, sp.simplify(potential), "mpmath")

    def evaluate(nodes: np.ndarray) -> np.ndarray:
        # 30 digits: the closed form cancels catastrophically near r = 0 (r^-3 times a small difference).
        with mp.workdps(30):
            return np.array([float(closed_form(mp.mpf(float(x)))) for x in nodes])

    return evaluate


@pytest.mark.parametrize(
    "k, orbital, discretization",
    [(0, "1s", 0.0), (0, "2p", 0.0), (2, "2p", 1e-8)],
    ids=["Y0_1s", "Y0_2p", "Y2_2p"],
)
def test_screening_potentials_of_hydrogen(hydrogen_grid, hydrogen_kernels, k, orbital, discretization):
    """V^k d = Y^k(r_i)/r_i at every node, against the closed form (sympy, evaluated at 30 digits;
    Y^0/r of 1s is 1/r - e^{-2r}(1 + 1/r)).  k = 2 checks the outer boundary term of the kernel
    pointwise, which the integrals above only see averaged.

    Discretization: beyond the density the DVR part of Y^k is Q (r^-k - r^(k+1)/R^(2k+1)): linear
    for k = 0 (exact), but for k = 2 a polynomial must follow Q/r^2 across the 28-bohr outer element:
    measured 5e-9 relative (order 14: 4e-12), hence 1e-8 of the value.  Round-off: the kernel's
    derived error, gamma(n) for the product, U for the reference, and 1e-14 for the 60-bohr wall
    (the densities have decayed to e^-60 and e^-120 there)."""
    r = hydrogen_grid.r
    function = {"1s": hydrogen_1s, "2p": hydrogen_2p}[orbital]
    pair = hydrogen_grid.to_coefficients(function(r)) ** 2
    kernel = hydrogen_kernels[k]
    expected = exact_screening_potential(k, orbital)(r)
    bound = (kernel_error(hydrogen_grid, k, kernel) + gamma(hydrogen_grid.size) * np.abs(kernel)) @ np.abs(pair)
    bound += 8 * U * np.abs(kernel) @ np.abs(pair) + (U + discretization) * np.abs(expected) + 1e-14
    assert np.all(np.abs(kernel @ pair - expected) <= bound)


@pytest.mark.parametrize("k", range(5))
def test_coulomb_kernels_positive_definite(hydrogen_kernels, k):
    # r_<^k / r_>^{k+1} is a positive definite kernel (multipole expansion of 1/|r - r'|).
    scipy.linalg.cholesky(hydrogen_kernels[k])
