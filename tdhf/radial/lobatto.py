"""Legendre–Gauss–Lobatto (LGL) rules on the reference interval [-1, 1].

The ``p + 1`` LGL nodes are the end points ±1 and the roots of :math:`P_p'(x)`; the weights are
:math:`w_i = 2 / (p (p+1) P_p(x_i)^2)`.  The rule integrates polynomials of degree ``2p - 1``
exactly.  The Lagrange polynomials :math:`\\ell_j` through the nodes give the derivative matrix
:math:`D_{ij} = \\ell_j'(x_i)`.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.polynomial import legendre

__all__ = ["lobatto_rule", "lobatto_derivative_matrix"]


@lru_cache(maxsize=64)
def lobatto_rule(order: int) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of the ``order + 1``-point LGL rule on [-1, 1].

    Parameters
    ----------
    order : int
        Polynomial order p >= 1.

    Returns
    -------
    nodes, weights : ndarray, shape (order + 1,)
        Ascending nodes and their weights (read-only arrays).
    """
    if order < 1:
        raise ValueError("LGL order must be >= 1")
    coefficients = np.zeros(order + 1)
    coefficients[order] = 1.0
    interior = legendre.legroots(legendre.legder(coefficients))
    # Newton polish: numpy's companion-matrix roots lose a few digits at high order.
    for _ in range(3):
        first = legendre.legval(interior, legendre.legder(coefficients))
        second = legendre.legval(interior, legendre.legder(coefficients, 2))
        interior = interior - first / second
    nodes = np.concatenate(([-1.0], np.sort(interior), [1.0]))
    values = legendre.legval(nodes, coefficients)
    weights = 2.0 / (order * (order + 1) * values**2)
    nodes.flags.writeable = False
    weights.flags.writeable = False
    return nodes, weights


@lru_cache(maxsize=64)
def lobatto_derivative_matrix(order: int) -> np.ndarray:
    """Matrix ``D[i, j] = l_j'(x_i)`` of the Lagrange basis through the LGL nodes."""
    nodes, _ = lobatto_rule(order)
    coefficients = np.zeros(order + 1)
    coefficients[order] = 1.0
    values = legendre.legval(nodes, coefficients)
    difference = nodes[:, None] - nodes[None, :]
    np.fill_diagonal(difference, 1.0)
    derivative = values[:, None] / (values[None, :] * difference)
    np.fill_diagonal(derivative, 0.0)
    derivative[0, 0] = -order * (order + 1) / 4.0
    derivative[order, order] = order * (order + 1) / 4.0
    derivative.flags.writeable = False
    return derivative
