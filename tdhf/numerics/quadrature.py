"""Gauss–Kronrod–Legendre rules: a Gauss rule and the rule of 2n + 1 points that contains it.

The Kronrod extension of the n-point Gauss–Legendre rule on [-1, 1] adds the n + 1 zeros of the
Stieltjes polynomial :math:`E_{n+1}`, defined by

.. math::  \\int_{-1}^{1} P_n(x)\\,E_{n+1}(x)\\,x^k\\,dx = 0, \\qquad k = 0, \\dots, n,

and integrates polynomials of degree 3n + 1 exactly (Kronrod 1964; for the Legendre weight the
added nodes are real, interior and interlace the Gauss nodes, Szegő 1935).  Here
:math:`E_{n+1} = \\sum_j c_j P_j` is found from those conditions (the integrals by a Gauss rule
that is exact for them), its zeros from the colleague matrix of the Legendre series polished by
Newton steps, and the 2n + 1 weights from exactness on :math:`P_0 \\dots P_{2n}` (a Legendre
Vandermonde system, well conditioned at these nodes).  Physics-free: used by the dispersion
quadrature, where the Gauss values at the shared nodes give the error estimate for free.

>>> nodes, weights, gauss = gauss_kronrod_legendre(3)
>>> nodes.size, gauss.tolist()
(7, [1, 3, 5])
>>> print(f"{weights @ nodes**10:.15f} {2 / 11:.15f}")   # degree 10 = 3n + 1: exact
0.181818181818182 0.181818181818182
"""

from __future__ import annotations

import numpy as np
from numpy.polynomial import legendre

__all__ = ["gauss_kronrod_legendre"]

#: Newton steps polishing the zeros of E_{n+1} (each doubles the correct digits).
NEWTON_STEPS = 3


def gauss_kronrod_legendre(n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The (2n + 1)-point Gauss–Kronrod rule on [-1, 1] and where its Gauss nodes are.

    Returns
    -------
    nodes, weights : ndarray, shape (2n + 1,)
        Ascending nodes and the Kronrod weights (exact to degree 3n + 1).
    gauss : ndarray of int, shape (n,)
        Indices of the n Gauss–Legendre nodes in ``nodes``; those entries are exactly the floats
        of ``numpy.polynomial.legendre.leggauss(n)``.

    Raises
    ------
    ValueError
        If n < 1, or the extension is not found to round-off (a bug: it exists for every n).
    """
    if n < 1:
        raise ValueError(f"gauss_kronrod_legendre: n = {n} is not >= 1")
    gauss_nodes, _ = legendre.leggauss(n)
    # M[k, j] = int P_n P_j P_k (degree <= 3n + 1) by a Gauss rule of 2n + 2 points (exact to 4n + 3).
    x, w = legendre.leggauss(2 * n + 2)
    p = legendre.legvander(x, n + 1).T  # P_0 .. P_{n+1} at x
    products = (w * p[n]) * p[: n + 1]  # P_n P_k w at x, k = 0..n
    matrix = products @ p.T  # (k, j)
    coefficients = np.zeros(n + 2)
    coefficients[n + 1] = 1.0
    coefficients[: n + 1] = np.linalg.lstsq(matrix[:, : n + 1], -matrix[:, n + 1], rcond=None)[0]
    roots = np.sort(legendre.legroots(coefficients).real)
    slope = legendre.legder(coefficients)
    for _ in range(NEWTON_STEPS):
        roots = roots - legendre.legval(roots, coefficients) / legendre.legval(roots, slope)
    nodes = np.concatenate([gauss_nodes, roots])
    order = np.argsort(nodes, kind="stable")
    nodes = nodes[order]
    moments = np.zeros(2 * n + 1)
    moments[0] = 2.0
    weights = np.linalg.solve(legendre.legvander(nodes, 2 * n).T, moments)
    gauss = np.sort(np.flatnonzero(order < n))
    interior = np.all(np.abs(roots) < 1.0) and np.all(np.diff(nodes) > 0.0)
    if roots.size != n + 1 or not interior or not np.all(weights > 0.0):
        raise ValueError(f"gauss_kronrod_legendre: no valid Kronrod extension found for n = {n}")
    return nodes, weights, gauss
