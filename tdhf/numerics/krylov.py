r"""Restarted GMRES for matrix-free linear systems, physics-free, with a convergence record.

Solves :math:`A x = b` for an operator given only by its action ``apply(x) = A x`` on flat
vectors (real or complex), minimising the residual over Krylov spaces
:math:`x_0 + \mathcal K_m(A, r_0)` (Y. Saad and M. H. Schultz, SIAM J. Sci. Stat. Comput. 7, 856
(1986)).  The Arnoldi basis is orthogonalised twice (classical Gram–Schmidt with one
re-orthogonalisation, stable to round-off), the small least-squares problem is updated by Givens
rotations, and the basis restarts every ``restart`` steps.

Why not :func:`scipy.sparse.linalg.gmres`: tdhf needs to know *why* a solve stopped (converged,
iteration limit, stagnation, non-finite values) and the true residual, for every number it prints.

The relative residual :math:`\|b - A x\| / \|b\|` is the stopping measure; it is recomputed from
the operator at every restart and at the end (never only the recurrence's estimate).  It cannot
fall below the round-off of computing it, :math:`\sim \epsilon\,\|A\|\,\|x\| / \|b\|`: for a
nearly singular system (a frequency next to a pole) :math:`\|x\| \gg \|b\|`, and a residual below
:data:`ROUNDOFF_FACTOR` times that floor counts as converged ("converged to round-off"), as no
further step could improve it.  :math:`\|A\|` is estimated by the largest column of the
Hessenberg matrix.

>>> import numpy as np
>>> matrix = np.array([[4.0, 1.0], [2.0, 3.0]])
>>> solution, status = gmres(lambda x: matrix @ x, np.array([1.0, 2.0]))
>>> np.allclose(matrix @ solution, [1.0, 2.0]), status.converged
(True, True)
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from tdhf.numerics.status import SolveStatus

__all__ = ["gmres", "DEFAULT_RESTART"]

#: Krylov vectors kept before a restart.
DEFAULT_RESTART = 60
#: Residuals below this multiple of eps ||A|| ||x|| / ||b|| are at the round-off floor: forming
#: A x sums O(n) products, whose rounding grows like sqrt(n) eps (n ~ 1e3-1e4 here), so 100 covers it.
ROUNDOFF_FACTOR = 100.0
#: A restart cycle that reduces the residual by less than 10 % (factor 0.9) counts as stagnation:
#: round-off (about eps times the condition number) then bounds what more cycles could reach.
STAGNATION_FACTOR = 0.9
EPSILON = float(np.finfo(float).eps)


def gmres(
    apply: Callable[[np.ndarray], np.ndarray],
    rhs: np.ndarray,
    x0: np.ndarray | None = None,
    tolerance: float = 1e-12,
    max_iterations: int = 480,
    restart: int = DEFAULT_RESTART,
) -> tuple[np.ndarray, SolveStatus]:
    """Solve ``apply(x) = rhs`` to relative residual ``tolerance``.

    Parameters
    ----------
    apply : callable
        ``apply(x)`` returns A x for a flat vector x of ``rhs``'s shape and dtype.
    rhs : ndarray, shape (n,)
    x0 : ndarray, optional
        Starting vector (default zero).
    tolerance : float
        Target of :math:`\\|b - A x\\| / \\|b\\|`.
    max_iterations : int
        Total Krylov steps over all restart cycles.
    restart : int
        Steps per cycle.

    Returns
    -------
    solution : ndarray, shape (n,)
    status : SolveStatus
        ``iterations`` counts operator applications inside Krylov cycles; ``residual`` is the
        true relative residual of ``solution``.
    """
    rhs = np.asarray(rhs)
    dtype = np.result_type(rhs, np.float64)
    norm_rhs = float(np.linalg.norm(rhs))
    if not np.isfinite(norm_rhs):
        return np.full(rhs.shape, np.nan, dtype=dtype), SolveStatus(False, 0, np.inf, tolerance, "non-finite values")
    if norm_rhs == 0.0:
        return np.zeros(rhs.shape, dtype=dtype), SolveStatus(True, 0, 0.0, tolerance, "converged")
    x = np.zeros(rhs.shape, dtype=dtype) if x0 is None else np.array(x0, dtype=dtype, copy=True)
    residual_vector = rhs - apply(x) if x0 is not None else rhs.astype(dtype, copy=True)
    residual = float(np.linalg.norm(residual_vector)) / norm_rhs
    steps = 0
    operator_norm = 1.0
    while True:
        if not np.isfinite(residual):
            return x, SolveStatus(False, steps, np.inf, tolerance, "non-finite values")
        if residual <= tolerance:
            return x, SolveStatus(True, steps, residual, tolerance, "converged")
        floor = ROUNDOFF_FACTOR * EPSILON * operator_norm * float(np.linalg.norm(x)) / norm_rhs
        if residual <= floor:
            return x, SolveStatus(True, steps, residual, tolerance, "converged to round-off")
        if steps >= max_iterations:
            return x, SolveStatus(False, steps, residual, tolerance, "iteration limit reached")
        cycle = min(restart, max_iterations - steps)
        update, used, norm_estimate = _cycle(apply, residual_vector, cycle, max(tolerance, floor) * norm_rhs)
        operator_norm = max(operator_norm, norm_estimate)
        steps += used
        x = x + update
        residual_vector = rhs - apply(x)
        previous, residual = residual, float(np.linalg.norm(residual_vector)) / norm_rhs
        floor = ROUNDOFF_FACTOR * EPSILON * operator_norm * float(np.linalg.norm(x)) / norm_rhs
        if residual > max(tolerance, floor) and residual > STAGNATION_FACTOR * previous:
            message = "non-finite values" if not np.isfinite(residual) else "stagnated"
            return x, SolveStatus(False, steps, residual if np.isfinite(residual) else np.inf, tolerance, message)


def _cycle(apply, start: np.ndarray, steps: int, target: float) -> tuple[np.ndarray, int, float]:
    """One GMRES cycle from residual ``start``: the correction, the steps taken, an estimate of ||A||."""
    n = start.size
    dtype = start.dtype
    beta = float(np.linalg.norm(start))
    basis = np.zeros((steps + 1, n), dtype=dtype)
    hessenberg = np.zeros((steps + 1, steps), dtype=dtype)
    cosines = np.zeros(steps, dtype=dtype)
    sines = np.zeros(steps, dtype=dtype)
    g = np.zeros(steps + 1, dtype=dtype)
    g[0] = beta
    basis[0] = start / beta
    taken = 0
    for j in range(steps):
        w = apply(basis[j])
        if not np.all(np.isfinite(w)):
            break
        # Classical Gram-Schmidt twice: as stable as modified GS, and two matrix products.
        h = basis[: j + 1].conj() @ w
        w = w - h @ basis[: j + 1]
        correction = basis[: j + 1].conj() @ w
        w = w - correction @ basis[: j + 1]
        h = h + correction
        norm_w = float(np.linalg.norm(w))
        hessenberg[: j + 1, j] = h
        hessenberg[j + 1, j] = norm_w
        for i in range(j):  # previous rotations
            upper = cosines[i] * hessenberg[i, j] + sines[i] * hessenberg[i + 1, j]
            lower = -np.conj(sines[i]) * hessenberg[i, j] + cosines[i] * hessenberg[i + 1, j]
            hessenberg[i, j], hessenberg[i + 1, j] = upper, lower
        a, b = hessenberg[j, j], hessenberg[j + 1, j]
        radius = np.hypot(abs(a), abs(b))
        if radius == 0.0:
            break
        cosines[j] = abs(a) / radius
        sines[j] = (a / abs(a) if abs(a) else 1.0) * np.conj(b) / radius
        hessenberg[j, j] = cosines[j] * a + sines[j] * b
        hessenberg[j + 1, j] = 0.0
        g[j + 1] = -np.conj(sines[j]) * g[j]
        g[j] = cosines[j] * g[j]
        taken = j + 1
        if abs(g[j + 1]) <= target or norm_w == 0.0:
            break
        basis[j + 1] = w / norm_w
    if taken == 0:
        return np.zeros(n, dtype=dtype), 1, 1.0
    coefficients = _upper_solve(hessenberg[:taken, :taken], g[:taken])
    # Column norms of the (rotated) Hessenberg matrix are ||A v_j||: a lower bound of ||A||.
    norm_estimate = float(np.max(np.linalg.norm(hessenberg[: taken + 1, :taken], axis=0)))
    return coefficients @ basis[:taken], taken, norm_estimate


def _upper_solve(matrix: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Back substitution with an upper-triangular matrix."""
    out = np.zeros_like(rhs)
    for i in range(rhs.size - 1, -1, -1):
        out[i] = (rhs[i] - matrix[i, i + 1:] @ out[i + 1:]) / matrix[i, i]
    return out
