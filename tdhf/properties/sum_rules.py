r"""Oscillator-strength sum rules :math:`S_L(k) = \sum_n \omega_n^k f_n` of the RPA (or uncoupled) spectrum.

With S = A - B and T = A + B the RPA matrices in the particle–hole space, b the projected
perturbation and W the channel weights (:mod:`tdhf.response.solver`),

.. math:: \alpha(\omega) = 2\,b^T W\,[T - \omega^2 S^{-1}]^{-1} b
          = \sum_{k \ge 0} S(-2k-2)\,\omega^{2k}
          = -\sum_{k \ge 0} S(2k)\,\omega^{-2k-2},

so :math:`S(0) = 2 b^T W S b` (the double commutator, exact in the discrete space: no solve),
:math:`S(2) = 2 (Sb)^T W\,T\,(Sb)`, and the Cauchy moments S(-2), S(-4), S(-6) follow from
three static solves (:func:`cauchy_moments`).

Identities: :math:`S_1(0) = N` (Thomas–Reiche–Kuhn) and in general
:math:`S_L(0) = L \sum_i \langle r_i^{2L-2}\rangle`, exact in RPA (not for the uncoupled response,
whose exchange operator is non-local).
"""

from __future__ import annotations

from dataclasses import dataclass

from tdhf.numerics.status import SolveStatus, combine
from tdhf.response.solver import FirstOrderOrbitals, ResponseSolver, ResponseTolerances

__all__ = ["SumRule", "energy_weighted_sum", "second_energy_moment", "cauchy_moments", "exact_energy_weighted_sum"]


@dataclass(frozen=True)
class SumRule:
    """S_L(k) coupled (``value``) and uncoupled; ``exact`` is the RPA identity where one exists.

    ``converged`` is False if a solve behind ``value`` or ``uncoupled`` did not converge.

    Attributes
    ----------
    multipole : int
        L.
    k : int
        The power: S_L(k) = sum_n omega_n^k f_n (0: the TRK sum, N for L = 1; -2: alpha_L(0)).
    value, uncoupled : float
        Coupled (TDHF) and uncoupled sums, hartree^k bohr^(2L-2).
    exact : float or None
        The exact value of the same discrete RPA space (the double commutator for k = 0).
    converged : bool
        Every solve behind the row converged.
    """

    multipole: int
    k: int
    value: float
    uncoupled: float
    exact: float | None
    converged: bool = True


def energy_weighted_sum(solver: ResponseSolver, coupled: bool = True) -> float:
    """S(0) = 2 b^T W (A - B) b: the exact energy-weighted sum of the discrete space (no solve)."""
    b = solver.project(solver.perturbation())
    return 2.0 * float(solver.weighted_dot(b, solver.apply_difference(b, coupled)))


def second_energy_moment(solver: ResponseSolver, coupled: bool = True) -> float:
    """S(2) = 2 (S b)^T W T (S b) of the discrete space (no solve)."""
    b = solver.project(solver.perturbation())
    first = solver.apply_difference(b, coupled)
    return 2.0 * float(solver.weighted_dot(first, solver.apply_sum(first, coupled)))


def exact_energy_weighted_sum(solver: ResponseSolver) -> float:
    """The RPA identity S_L(0) = L sum_i <r_i^(2L-2)> from the ground-state orbitals."""
    shells, L = solver.shells, solver.multipole
    return float(L * shells.occupations @ (shells.orbitals**2 @ solver.grid.r ** (2 * L - 2)))


def cauchy_moments(
    solver: ResponseSolver,
    coupled: bool = True,
    tolerances: ResponseTolerances = ResponseTolerances(),
    static: FirstOrderOrbitals | None = None,
) -> tuple[tuple[float, float, float], SolveStatus]:
    r"""S(-2), S(-4), S(-6) from three static solves, and the combined status of the solves.

    With s = rho+ + rho- of the static response, y = (A - B)^{-1} s and z = (A + B)^{-1} y (the
    static solves with right-hand sides (s, -s) and (y, y)): S(-2) = alpha(0),
    S(-4) = <s|W|y>/2 and S(-6) = <y|W|z>/2.  ``static`` reuses a static solution already made.
    """
    if static is None:
        static = solver.solve(0.0, coupled, tolerances=tolerances)
    s = static.plus + static.minus
    antisymmetric = solver.solve(0.0, coupled, rhs=(s, -s), tolerances=tolerances)
    y = antisymmetric.plus
    symmetric = solver.solve(0.0, coupled, rhs=(y, y), tolerances=tolerances)
    z = symmetric.plus
    values = (float(solver.polarizability(static)), 0.5 * float(solver.weighted_dot(s, y)),
              0.5 * float(solver.weighted_dot(y, z)))
    return values, combine(static.status, antisymmetric.status, symmetric.status)
