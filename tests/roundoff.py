"""Round-off bounds used by the tests, from standard floating-point error analysis.

``U`` = 2^-53 is the unit round-off of IEEE-754 double precision: every basic operation (and a
correctly rounded square root) returns the exact result times (1 + d), |d| <= U.  The relative
error of a sum or dot product of n terms is bounded by ``gamma(n) = n U / (1 - n U)`` times the sum
of the absolute values of the terms (N. J. Higham, "Accuracy and Stability of Numerical
Algorithms", 2nd ed., SIAM 2002, Lemma 3.1 and eq. (3.5); from memory).  These are worst cases over
the summation order, the vector width and fused multiply-adds, so a tolerance built from them holds
for every BLAS kernel on every x86-64 CPU; no constant here was fitted to this machine.

For quantities obtained from a symmetric eigen-decomposition (the resolvents of the response
solver, the ground-state orbitals) the bound is first-order perturbation theory: LAPACK's ``syevr``
is backward stable, i.e. it returns the exact eigen-decomposition of F + E with ||E|| a modest
multiple of U ||F|| (LAPACK Users' Guide, 3rd ed., SIAM 1999, section 4.7; from memory).  A
second-order response quantity <b|(F - e)^-1|b> then changes by at most
||E|| <b|(F - e)^-2|b> <= ||E|| / gap times itself, which is :func:`resolvent_bound`.
"""

from __future__ import annotations

import numpy as np

#: Unit round-off of IEEE double precision, 2^-53.
U = float(np.finfo(float).eps) / 2.0


def gamma(n: int) -> float:
    """Higham's gamma_n = n U / (1 - n U): relative error bound of an n-term sum or product chain."""
    return n * U / (1.0 - n * U)


def matvec_bound(matrix: np.ndarray, vector: np.ndarray) -> np.ndarray:
    """Bound on |fl(A x) - A x| per row: gamma(n) |A| |x| (any summation order, FMA or not)."""
    return gamma(matrix.shape[-1]) * (np.abs(matrix) @ np.abs(vector))


def resolvent_bound(solver, frequency: complex = 0.0) -> float:
    """Relative round-off bound of alpha-like quantities <b|(F_l' - e_a -+ w)^-1|b> of a solver.

    U * lambda_max / gap, with lambda_max the largest |eigenvalue| of the Fock matrices F_l' (the
    backward error of their eigen-decomposition is ~U lambda_max) and gap the smallest
    |e_v - e_a -+ w| over virtual v, channels and both signs (the largest amplification of that
    error).  Measured errors of the identities it bounds are 0.001 to 0.05 of it (H to Cl-).
    """
    largest = max(float(np.abs(values).max()) for values, _, _ in solver.spectra.values())
    gaps = []
    for channel in solver.channels:
        values, _, virtual = solver.spectra[channel.l_prime]
        excitation = values[virtual] - solver.orbital_energies[channel.shell]
        gaps.append(float(min(np.abs(excitation - frequency).min(), np.abs(excitation + frequency).min())))
    return U * largest / min(gaps)


#: Bound on ||(1 - G C)^-1|| = 1/sigma_min of the coupled response operator well below the first
#: pole: dense SVD of 1 - G C gives <= 3.0 for He, Be, Ne and Ar at omega = 0 and for He, Ne, Ar at
#: 0.3 hartree (it grows near a pole: Be at 0.3, above its first pole, gives 111), and G shrinks along
#: the imaginary axis, so there the solution error is <= 3 x the residual.
KRYLOV_CONDITION = 3.0


def krylov_bound(solver, solution, measured: np.ndarray | None = None) -> float:
    """Relative error of <g|rho> from the Krylov stop of a coupled solve, derived.

    GMRES stops at a residual r relative to ||rho_0|| ~ ||rho||, so ||delta rho|| <= KRYLOV_CONDITION
    r ||rho|| and |delta <g|rho>| <= ||W g P|| ||delta rho|| (Cauchy-Schwarz over channels and the
    two signs), divided by |<g|rho>|.  The ratio ||W g P|| ||rho|| / |<g|rho>| is computed, not
    assumed: it is ~1 at small frequency but grows like nu along the imaginary axis, where alpha
    ~ N/nu^2 is the small real part of rho ~ b/(i nu).  ``measured`` is g (default r^L).
    """
    if solution.residual == 0.0:
        return 0.0
    g = solver.grid.r**solver.multipole if measured is None else measured
    probe = np.array([2.0 * channel.weight * g * solver.shells.orbitals[channel.shell] for channel in solver.channels])
    size = np.sqrt(np.sum(np.abs(solution.plus) ** 2) + np.sum(np.abs(solution.minus) ** 2))
    value = abs(solver.expectation(solution, g))
    return KRYLOV_CONDITION * solution.residual * np.linalg.norm(probe) * size / value


def response_tolerance(solver, frequency: complex = 0.0, *solutions, measured: np.ndarray | None = None) -> float:
    """Relative round-off bound of a response quantity <g|rho>: the resolvent bound plus the Krylov
    bound of each coupled solution (``measured`` = g, default r^L)."""
    return resolvent_bound(solver, frequency) + sum(krylov_bound(solver, s, measured) for s in solutions)
