"""Gauss–Kronrod–Legendre rules (tdhf.numerics.quadrature), the dispersion quadrature's core.

Sources: the exactness of the (2n+1)-point Kronrod rule for degree 3n + 1 (Kronrod 1964, an
analytic property: int_{-1}^{1} P_k = 2 delta_k0); the 15-point rule's outermost node and weight
and its centre weight as tabulated in QUADPACK (Piessens, de Doncker-Kapenga, Überhuber and
Kahaner, Springer 1983), from memory.
"""

import numpy as np
import pytest
from numpy.polynomial import legendre

from tdhf.numerics.quadrature import gauss_kronrod_legendre

EPS = np.finfo(float).eps


@pytest.mark.parametrize("n", [1, 2, 3, 7, 8, 24, 36, 96])
def test_kronrod_rule_is_exact_to_degree_3n_plus_1_and_no_further(n):
    nodes, weights, gauss = gauss_kronrod_legendre(n)
    assert nodes.size == 2 * n + 1 and np.all(np.diff(nodes) > 0) and np.all(weights > 0)
    integrals = legendre.legvander(nodes, 3 * n + 3).T @ weights
    exact = np.zeros(3 * n + 4)
    exact[0] = 2.0
    # Round-off, derived: the weights carry cond(V) eps relative error from their Vandermonde
    # solve, and the sum of 2n + 1 terms |w_j P_k(x_j)| <= w_j (total 2) adds (2n + 1) eps x 2.
    condition = np.linalg.cond(legendre.legvander(nodes, 2 * n).T)
    tolerance = 2.0 * EPS * (condition + 2 * n + 1)
    assert np.max(np.abs(integrals[: 3 * n + 2] - exact[: 3 * n + 2])) < tolerance
    assert np.max(np.abs(integrals[3 * n + 2:])) > 1e-7  # degree 3n + 2 (or 3n + 3) is not exact


@pytest.mark.parametrize("n", [5, 24])
def test_the_gauss_nodes_are_exactly_leggauss_and_interlace(n):
    nodes, _, gauss = gauss_kronrod_legendre(n)
    assert np.array_equal(nodes[gauss], legendre.leggauss(n)[0])
    assert gauss.tolist() == list(range(1, 2 * n, 2))  # Kronrod, Gauss, Kronrod, ... (interlacing)


def test_fifteen_point_rule_matches_the_quadpack_table():
    nodes, weights, _ = gauss_kronrod_legendre(7)
    assert abs(nodes[-1] - 0.991455371120812639206854697526329) < 4 * EPS
    assert abs(weights[-1] - 0.022935322010529224963732008058970) < 4 * EPS
    assert abs(weights[7] - 0.209482141084727828012999174891714) < 4 * EPS
    assert nodes[7] == 0.0 or abs(nodes[7]) < 4 * EPS


def test_a_nonpositive_size_is_an_error():
    with pytest.raises(ValueError, match="n = 0"):
        gauss_kronrod_legendre(0)
