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


def resolvent_bound(solver, frequency: float = 0.0) -> float:
    """Relative round-off bound of alpha-like quantities <b|(F_l' - e_a -+ w)^-1|b> of a solver.

    U * lambda_max / gap, with lambda_max the largest |eigenvalue| of the Fock matrices F_l' (the
    backward error of their eigen-decomposition is ~U lambda_max) and gap the smallest
    |e_v - e_a -+ w| over virtual v and channels (the largest amplification of that error).
    """
    largest = max(float(np.abs(values).max()) for values, _, _ in solver.spectra.values())
    gaps = []
    for channel in solver.channels:
        values, _, virtual = solver.spectra[channel.l_prime]
        excitation = values[virtual] - solver.orbital_energies[channel.shell]
        gaps.append(float(np.min(np.abs(excitation) - abs(frequency))))
    return U * largest / min(gaps)
