r"""Lowest roots of the random-phase-approximation eigenproblem by a Davidson iteration, physics-free.

The problem, for symmetric positive-definite matrices T = A + B and S = A - B known only by their
action on blocks of vectors:

.. math:: T p = \omega q, \qquad S q = \omega p \qquad (\text{so } S T p = \omega^2 p),
          \qquad p^T q = 1,

i.e. :math:`\begin{pmatrix} A & B\\ B & A\end{pmatrix}\begin{pmatrix}X\\Y\end{pmatrix}
= \omega\begin{pmatrix}X\\-Y\end{pmatrix}` with p = X + Y, q = X - Y.  The subspace iteration
follows R. E. Stratmann, G. E. Scuseria and M. J. Frisch, J. Chem. Phys. 109, 8218 (1998) (from
memory): one orthonormal basis V for both p and q, projected matrices :math:`T_V = V^T T V`,
:math:`S_V = V^T S V`, and residuals :math:`r_p = T p - \omega q`, :math:`r_q = S q - \omega p`
preconditioned as the residuals of X and Y,
:math:`\delta X = (D - \omega)^{-1} (r_p + r_q)/2` and :math:`\delta Y = (D + \omega)^{-1} (r_p - r_q)/2`
(D an approximation of A, e.g. its diagonal); :math:`\delta X \pm \delta Y` join the basis.

The projected problem is solved without squaring: with Cholesky factors
:math:`T_V = L_T L_T^T`, :math:`S_V = L_S L_S^T`, the singular values of
:math:`C = L_T^{-1} L_S^{-T}` are :math:`1/\omega_n`, and :math:`p = L_T^{-T} u`,
:math:`q = L_S^{-T} w` from its singular vectors.  The low roots are the *largest* singular
values, computed to full relative precision, even when the basis holds components with diagonal
elements ~1e9 (the innermost grid elements); the squared form :math:`S_V T_V` would lose them to
round-off (eps times the largest omega squared).

A root is converged when its preconditioned residual :math:`\|\delta X\|^2 + \|\delta Y\|^2`
(vectors with :math:`p^T q = 1`) is below ``tolerance``:sup:`2`: it estimates the error of the
eigenvector; the eigenvalue error is second order in it.

>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> d = np.arange(1.0, 41.0)
>>> coupling = 0.05 * rng.standard_normal((40, 40)); coupling = coupling + coupling.T
>>> a, b = np.diag(d) + coupling, 0.5 * coupling
>>> def both(v): return v @ (a + b).T, v @ (a - b).T
>>> def precondition(r, w): return r / (d - w)   # approximates (A - w)^-1
>>> guesses = np.eye(40)[:4]
>>> result = rpa_davidson(both, precondition, guesses, roots=3, tolerance=1e-10)
>>> exact = np.sqrt(np.linalg.eigvals((a - b) @ (a + b)).real); exact.sort()
>>> bool(np.allclose(result.energies, exact[:3], rtol=1e-12)), result.status.converged
(True, True)
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from tdhf.numerics.status import SolveStatus

__all__ = ["RpaRoots", "rpa_davidson"]

#: New basis vectors whose norm after orthogonalisation falls below this are dropped (linearly dependent).
DEPENDENCE_THRESHOLD = 1e-10


@dataclass(frozen=True, eq=False)
class RpaRoots:
    """The lowest roots: energies (ascending), vectors p = X + Y and q = X - Y (rows), the status."""

    energies: np.ndarray
    p: np.ndarray
    q: np.ndarray
    residuals: np.ndarray
    status: SolveStatus


def rpa_davidson(
    apply: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
    precondition: Callable[[np.ndarray, float], np.ndarray],
    guesses: np.ndarray,
    roots: int,
    tolerance: float = 1e-10,
    max_iterations: int = 60,
    max_basis: int = 400,
) -> RpaRoots:
    """The ``roots`` lowest positive omega of the RPA problem.

    Parameters
    ----------
    apply : callable
        ``apply(V)`` for a block V of shape (m, n) returns ``(V T^T, V S^T)``, i.e. T and S applied
        to each row.
    precondition : callable
        ``precondition(r, omega)`` for a residual row r of shape (n,): an approximation to
        :math:`(A - \\omega)^{-1} r`; it is called with omega and -omega.
    guesses : ndarray, shape (g, n)
        Starting rows, g >= roots (e.g. unit vectors of the lowest diagonal elements).
    roots : int
    tolerance : float
        Preconditioned residual norm of a converged root (module docstring).
    max_iterations : int
        Subspace expansions before giving up.
    max_basis : int
        Basis size at which the subspace is collapsed onto the current best vectors.

    Returns
    -------
    RpaRoots
        ``status.converged`` is True only if every requested root converged.
    """
    basis = _orthonormalize(np.zeros((0, guesses.shape[1])), np.asarray(guesses, dtype=float))
    images_t, images_s = apply(basis)
    energies = np.zeros(roots)
    p = q = np.zeros((roots, guesses.shape[1]))
    norms = np.full(roots, np.inf)
    for iteration in range(1, max_iterations + 1):
        t_small = basis @ images_t.T
        s_small = basis @ images_s.T
        solved = _small_problem(0.5 * (t_small + t_small.T), 0.5 * (s_small + s_small.T), roots)
        if solved is None:
            status = SolveStatus(False, iteration, np.inf, tolerance, "subspace problem not positive definite")
            return RpaRoots(np.zeros(0), p[:0], q[:0], norms[:0], status)
        energies, p_small, q_small = solved
        p, q = p_small @ basis, q_small @ basis
        residual_p = p_small @ images_t - energies[:, None] * q
        residual_q = q_small @ images_s - energies[:, None] * p
        corrections = []
        for i in range(energies.size):
            delta_x = precondition(0.5 * (residual_p[i] + residual_q[i]), energies[i])
            delta_y = precondition(0.5 * (residual_p[i] - residual_q[i]), -energies[i])
            corrections.append((delta_x + delta_y, delta_x - delta_y))
        corrections = np.array(corrections)  # (roots, 2, n)
        norms = np.sqrt(0.5 * np.sum(corrections**2, axis=(1, 2)))
        if not np.all(np.isfinite(norms)):
            return RpaRoots(energies, p, q, norms, SolveStatus(False, iteration, np.inf, tolerance, "non-finite values"))
        open_roots = np.flatnonzero(norms > tolerance)
        if open_roots.size == 0:
            return RpaRoots(energies, p, q, norms, SolveStatus(True, iteration, float(norms.max()), tolerance, "converged"))
        corrections = corrections[open_roots].reshape(-1, basis.shape[1])
        if basis.shape[0] + corrections.shape[0] > max_basis:
            basis = _orthonormalize(np.zeros((0, basis.shape[1])), np.concatenate([p, q]))
            images_t, images_s = apply(basis)
        new = _orthonormalize(basis, corrections)
        if new.shape[0] == 0:
            status = SolveStatus(False, iteration, float(norms.max()), tolerance, "stagnated")
            return RpaRoots(energies, p, q, norms, status)
        new_t, new_s = apply(new)
        basis = np.concatenate([basis, new])
        images_t, images_s = np.concatenate([images_t, new_t]), np.concatenate([images_s, new_s])
    status = SolveStatus(False, max_iterations, float(norms.max()), tolerance, "iteration limit reached")
    return RpaRoots(energies, p, q, norms, status)


def _small_problem(t_small: np.ndarray, s_small: np.ndarray, roots: int):
    """Lowest roots in the subspace (see the module docstring): energies and coefficient rows of p and q."""
    try:
        lower_t = np.linalg.cholesky(t_small)
        lower_s = np.linalg.cholesky(s_small)
    except np.linalg.LinAlgError:
        return None
    c = np.linalg.solve(lower_t, np.linalg.solve(lower_s, np.eye(len(s_small))).T)
    u, sigma, wt = np.linalg.svd(c)
    if sigma[min(roots, sigma.size) - 1] <= 0.0 or sigma.size < roots:
        return None
    sigma, u, w = sigma[:roots], u[:, :roots], wt[:roots].T
    p_small = np.linalg.solve(lower_t.T, u) / np.sqrt(sigma)
    q_small = np.linalg.solve(lower_s.T, w) / np.sqrt(sigma)
    return 1.0 / sigma, p_small.T, q_small.T


def _orthonormalize(basis: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Rows of ``candidates`` orthonormalised against ``basis`` and each other (twice), dependent ones dropped."""
    kept = []
    for vector in candidates:
        norm_in = np.linalg.norm(vector)
        if norm_in == 0.0:
            continue
        vector = vector / norm_in
        for _ in range(2):
            if basis.shape[0]:
                vector = vector - (basis @ vector) @ basis
            for other in kept:
                vector = vector - (other @ vector) * other
        norm = np.linalg.norm(vector)
        if norm > DEPENDENCE_THRESHOLD:
            kept.append(vector / norm)
    return np.array(kept).reshape(len(kept), candidates.shape[1])
