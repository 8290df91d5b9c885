"""Tests of the FE-DVR radial discretization: LGL rules, grid operators, hydrogen, Poisson kernels.

Evidence used here: exact invariants (polynomial exactness, operator symmetries), analytic
hydrogen results, and Slater integrals of hydrogen orbitals derived exactly with sympy inside the
tests (no external numbers).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest
import scipy.linalg
import sympy as sp

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


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_integrates_degree_2p_minus_1_exactly(order):
    nodes, weights = lobatto_rule(order)
    degrees = np.arange(2 * order)
    exact = np.where(degrees % 2 == 0, 2.0 / (degrees + 1), 0.0)
    quadrature = np.array([weights @ nodes**m for m in degrees])
    np.testing.assert_allclose(quadrature, exact, rtol=0, atol=1e-14)


@pytest.mark.parametrize("order", range(1, 17), ids=lambda p: f"p{p}")
def test_lobatto_is_not_exact_for_degree_2p(order):
    # The error of the (p+1)-point LGL rule on x^{2p} is > 7e-10 for p <= 16: clearly above round-off.
    nodes, weights = lobatto_rule(order)
    assert abs(weights @ nodes ** (2 * order) - 2.0 / (2 * order + 1)) > 1e-10


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_nodes_and_weights_structure(order):
    nodes, weights = lobatto_rule(order)
    assert nodes.shape == weights.shape == (order + 1,)
    assert nodes[0] == -1.0 and nodes[-1] == 1.0
    assert np.all(np.diff(nodes) > 0.0)
    assert np.all(weights > 0.0)
    np.testing.assert_allclose(nodes, -nodes[::-1], rtol=0, atol=1e-15)
    np.testing.assert_allclose(weights, weights[::-1], rtol=0, atol=1e-15)
    # End weights of the LGL rule: 2 / (p (p + 1)).
    assert weights[0] == pytest.approx(2.0 / (order * (order + 1)), rel=1e-14)


@pytest.mark.parametrize("order", ORDERS, ids=lambda p: f"p{p}")
def test_lobatto_derivative_matrix_exact_on_degree_p(order):
    nodes, _ = lobatto_rule(order)
    derivative = lobatto_derivative_matrix(order)
    for m in range(order + 1):
        expected = m * nodes ** max(m - 1, 0)
        # Round-off of the barycentric-type formula grows ~ p^2 (observed 4e-13 at p = 24).
        np.testing.assert_allclose(derivative @ nodes**m, expected, rtol=0, atol=2e-15 * order**2 * max(m, 1))


def test_lobatto_rejects_order_zero():
    with pytest.raises(ValueError, match="order"):
        lobatto_rule(0)


# --- grid construction and quadrature ------------------------------------------------------


@pytest.mark.parametrize("order", [4, 7, 10, 16], ids=lambda p: f"p{p}")
def test_grid_quadrature_exact_for_piecewise_degree_2p_minus_1(order):
    r_max = 30.0
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.05, r_max, 12), order)
    # f = r (R - r) r^m vanishes at both removed end nodes, so interior nodes alone integrate it.
    for m in range(2 * order - 2):
        values = grid.r * (r_max - grid.r) * grid.r**m
        exact = r_max ** (m + 3) * (1.0 / (m + 2) - 1.0 / (m + 3))
        assert grid.integrate(values) == pytest.approx(exact, rel=1e-13), m


def test_grid_sizes_and_box():
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.1, 40.0, 9), 6)
    assert grid.n_elements == 9
    assert grid.size == 9 * 6 - 1
    assert grid.r_max == 40.0
    assert np.all(np.diff(grid.r) > 0.0) and 0.0 < grid.r[0] and grid.r[-1] < 40.0
    sizes = np.diff(grid.boundaries)
    assert sizes[0] == pytest.approx(0.1, rel=1e-12)
    np.testing.assert_allclose(sizes[1:] / sizes[:-1], sizes[1] / sizes[0], rtol=1e-9)


def test_build_grid_growth_and_first_element():
    settings = GridSettings()
    grid = build_grid(settings, 10.0, 40.0)
    sizes = np.diff(grid.boundaries)
    assert sizes[0] == pytest.approx(0.1 / 10.0, rel=1e-12)
    assert np.all(sizes[1:] / sizes[:-1] <= settings.growth * (1 + 1e-12))
    assert grid.r_max == 40.0


def test_from_boundaries_rejects_bad_boundaries():
    with pytest.raises(ValueError, match="boundaries"):
        RadialGrid.from_boundaries(np.array([0.1, 1.0, 2.0]), 4)
    with pytest.raises(ValueError, match="boundaries"):
        RadialGrid.from_boundaries(np.array([0.0, 2.0, 1.0]), 4)


def test_dvr_coefficient_round_trip(hydrogen_grid):
    values = hydrogen_1s(hydrogen_grid.r)
    coefficients = hydrogen_grid.to_coefficients(values)
    np.testing.assert_allclose(hydrogen_grid.to_values(coefficients), values, rtol=1e-15, atol=0)
    # Quadrature of a product is a dot product of DVR coefficients: norm of P_1s is 1 (analytic).
    assert coefficients @ coefficients == pytest.approx(1.0, abs=1e-13)


# --- operators ----------------------------------------------------------------------------


@pytest.mark.parametrize("order", [4, 10, 18], ids=lambda p: f"p{p}")
def test_stiffness_symmetric_positive_definite(order):
    grid = build_grid(GridSettings(order=order), 10.0, 40.0)
    stiffness = grid.stiffness
    scale = np.abs(stiffness).max()
    np.testing.assert_allclose(stiffness, stiffness.T, rtol=0, atol=1e-15 * scale)
    scipy.linalg.cholesky(stiffness)  # raises LinAlgError unless positive definite


@pytest.mark.parametrize("order", [4, 10, 18], ids=lambda p: f"p{p}")
def test_derivative_antisymmetric(order):
    grid = build_grid(GridSettings(order=order), 10.0, 40.0)
    derivative = grid.derivative
    scale = np.abs(derivative).max()
    np.testing.assert_allclose(derivative, -derivative.T, rtol=0, atol=1e-14 * scale)


@pytest.mark.parametrize("order", [4, 8, 12], ids=lambda p: f"p{p}")
def test_operators_exact_on_global_polynomials(order):
    # f = r (R - r)(1 + r/R)^(p-2) has degree p, lies in the FE-DVR space and vanishes at 0 and R.
    # Then D f = coefficients of f' and L f = -(coefficients of f''), both exactly (integrands of
    # degree <= 2p - 1 per element; f' is continuous, so the bridge terms cancel).
    r_max = 20.0
    grid = RadialGrid.from_boundaries(geometric_boundaries(0.05, r_max, 10), order)
    polynomial = np.polynomial.Polynomial([0.0, r_max, -1.0]) * np.polynomial.Polynomial([1.0, 1.0 / r_max]) ** (
        order - 2
    )
    f = grid.to_coefficients(polynomial(grid.r))
    first = grid.to_coefficients(polynomial.deriv(1)(grid.r))
    second = grid.to_coefficients(polynomial.deriv(2)(grid.r))
    # Observed relative errors: 5e-15 (D) and 6e-14 (L, whose entries reach ~1e4 on this grid).
    np.testing.assert_allclose(grid.derivative @ f, first, rtol=0, atol=1e-13 * np.abs(first).max())
    np.testing.assert_allclose(grid.stiffness @ f, -second, rtol=0, atol=1e-12 * np.abs(second).max())


# --- hydrogen: -1/(2 n^2), analytic -------------------------------------------------------


@pytest.mark.parametrize(
    "n, l", [(1, 0), (2, 0), (2, 1), (3, 2)], ids=["1s", "2s", "2p", "3d"]
)
def test_hydrogen_eigenvalues(hydrogen_grid, n, l):
    operator = one_electron_operator(hydrogen_grid, 1.0, l)
    index = n - l - 1
    value = scipy.linalg.eigvalsh(operator, subset_by_index=[index, index])[0]
    assert value == pytest.approx(-1.0 / (2 * n**2), abs=1e-10)  # exact Schrödinger value


@pytest.mark.parametrize("z", [1.0, 10.0, 54.0, 86.0], ids=lambda z: f"Z{z:g}")
def test_hydrogen_like_ground_state_scales_as_z_squared(z):
    # The default first element 0.1/Z keeps the relative accuracy independent of Z.  The floor is
    # round-off in the eigensolver, ~ eps * lambda_max / |lambda_1| ~ 1e-10 (observed <= 3e-11;
    # a smaller first element makes it worse, not better).
    grid = build_grid(GridSettings(), z, 40.0)
    value = scipy.linalg.eigvalsh(one_electron_operator(grid, z, 0), subset_by_index=[0, 0])[0]
    assert value == pytest.approx(-0.5 * z**2, rel=1e-10)


def test_origin_slope_and_curvature_of_hydrogen_1s(hydrogen_grid):
    # P = 2 r e^{-r}: P'(0) = 2, P''(0) = -4 (analytic).
    coefficients = hydrogen_grid.to_coefficients(hydrogen_1s(hydrogen_grid.r))
    assert hydrogen_grid.origin_slope @ coefficients == pytest.approx(2.0, abs=1e-12)
    assert hydrogen_grid.origin_curvature @ coefficients == pytest.approx(-4.0, abs=1e-9)


def test_origin_slope_of_computed_hydrogen_eigenvector(hydrogen_grid):
    _, vectors = scipy.linalg.eigh(one_electron_operator(hydrogen_grid, 1.0, 0), subset_by_index=[0, 0])
    vector = vectors[:, 0] * np.sign(vectors[0, 0])
    assert hydrogen_grid.origin_slope @ vector == pytest.approx(2.0, abs=1e-9)


# --- Poisson kernels ---------------------------------------------------------------------


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
    exact = exact_slater_integral(k, first, second)
    if closed_form is not None:
        assert exact == closed_form
    functions = {"1s": hydrogen_1s, "2p": hydrogen_2p}
    pair = hydrogen_grid.to_coefficients(functions[first](hydrogen_grid.r)) * hydrogen_grid.to_coefficients(
        functions[second](hydrogen_grid.r)
    )
    assert pair @ hydrogen_kernels[k] @ pair == pytest.approx(float(exact), abs=1e-12)


def test_hartree_potential_of_hydrogen_1s(hydrogen_grid, hydrogen_kernels):
    # Y^0(r)/r of rho = P_1s^2 is 1/r - e^{-2r} (1 + 1/r) (analytic).
    r = hydrogen_grid.r
    pair = hydrogen_grid.to_coefficients(hydrogen_1s(r)) ** 2
    expected = 1.0 / r - np.exp(-2.0 * r) * (1.0 + 1.0 / r)
    np.testing.assert_allclose(hydrogen_kernels[0] @ pair, expected, rtol=0, atol=1e-11)


@pytest.mark.parametrize("k", range(5))
def test_coulomb_kernels_symmetric_positive_definite(hydrogen_kernels, k):
    kernel = hydrogen_kernels[k]
    np.testing.assert_array_equal(kernel, kernel.T)
    # r_<^k / r_>^{k+1} is a positive definite kernel (multipole expansion of 1/|r - r'|).
    assert scipy.linalg.eigvalsh(kernel)[0] > 0.0
    scipy.linalg.cholesky(kernel)
