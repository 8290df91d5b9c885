"""Radial Poisson equation: multipole kernels of the Coulomb interaction on the FE-DVR grid.

For a radial pair density :math:`\\rho(r)` (e.g. :math:`P_a(r) P_b(r)`) the Hartree screening function

.. math:: Y^k(r) = r \\int_0^\\infty \\frac{r_<^k}{r_>^{k+1}} \\rho(r')\\,dr'

solves :math:`Y'' - k(k+1) Y / r^2 = -(2k+1) \\rho / r` with :math:`Y(0) = 0` and
:math:`Y(R) = R^{-k} \\int r'^k \\rho\\,dr'`.  The Dirichlet part is solved in the FE-DVR basis
and the exact homogeneous solution :math:`r^{k+1} Q_k / R^{2k+1}` restores the outer condition.

Written with DVR pair coefficients :math:`d_i = p_{a,i} p_{b,i} = w_i \\rho(r_i)`, the Slater
integral of two pair densities becomes a symmetric bilinear form,

.. math:: R^k = \\iint \\rho_1(r) \\frac{r_<^k}{r_>^{k+1}} \\rho_2(r')\\,dr\\,dr' \\approx d_1^T V^k d_2,
          \\qquad V^k_{ij} = \\frac{(2k+1) [M_k^{-1}]_{ij}}{r_i r_j \\sqrt{w_i w_j}}
          + \\frac{(r_i r_j)^k}{R^{2k+1}},

with :math:`M_k = L + \\mathrm{diag}(k(k+1)/r^2)` and L the DVR matrix of :math:`-d^2/dr^2`.
The potential :math:`Y^k(r_i)/r_i` felt at node i is :math:`(V^k d)_i`.
"""

from __future__ import annotations

import numpy as np

from tdhf.radial.mesh import RadialGrid

__all__ = ["coulomb_kernels"]


def coulomb_kernels(grid: RadialGrid, k_max: int) -> np.ndarray:
    """Kernels ``V^k`` for k = 0..k_max.

    Returns
    -------
    ndarray, shape (k_max + 1, n, n)
        Symmetric matrices, in hartree per unit pair coefficient (see module docstring).
    """
    r, w = grid.r, grid.weights
    outer_scale = 1.0 / (r * np.sqrt(w))
    kernels = np.empty((k_max + 1, grid.size, grid.size))
    for k in range(k_max + 1):
        laplacian = grid.stiffness + np.diag(k * (k + 1) / r**2)
        # M_k is symmetric positive definite: Cholesky inverse is both fast and accurate.
        lower = np.linalg.cholesky(laplacian)
        lower_inverse = np.linalg.solve(lower, np.eye(grid.size))
        inverse = lower_inverse.T @ lower_inverse
        kernel = (2 * k + 1) * inverse * outer_scale[:, None] * outer_scale[None, :]
        kernel += np.outer(r**k, r**k) / grid.r_max ** (2 * k + 1)
        kernels[k] = 0.5 * (kernel + kernel.T)
    return kernels
