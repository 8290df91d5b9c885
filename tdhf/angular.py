"""Angular algebra for closed-shell atoms: Wigner symbols and Coulomb/exchange angular factors.

Conventions: Racah-normalized spherical harmonics :math:`C_{kq} = \\sqrt{4\\pi/(2k+1)} Y_{kq}`, so
:math:`C_{k0}(\\hat r) = P_k(\\cos\\theta)`, and the reduced matrix element

.. math:: \\langle l \\| C_k \\| l' \\rangle = (-1)^l \\sqrt{(2l+1)(2l'+1)}
          \\begin{pmatrix} l & k & l' \\\\ 0 & 0 & 0 \\end{pmatrix}.

Everything here is exact rational arithmetic turned into floats at the end.
"""

from __future__ import annotations

from fractions import Fraction
from functools import lru_cache
from math import factorial, sqrt

__all__ = ["wigner_3j_zero", "wigner_6j", "reduced_c", "exchange_coefficient"]


def _triangle(a: int, b: int, c: int) -> bool:
    return abs(a - b) <= c <= a + b


@lru_cache(maxsize=None)
def wigner_3j_zero(l1: int, l2: int, l3: int) -> float:
    """The 3j symbol (l1 l2 l3; 0 0 0), zero unless the triangle holds and l1 + l2 + l3 is even.

    .. math:: \\begin{pmatrix} l_1 & l_2 & l_3 \\\\ 0 & 0 & 0 \\end{pmatrix}
       = (-1)^g \\sqrt{\\frac{(2g-2l_1)!(2g-2l_2)!(2g-2l_3)!}{(2g+1)!}}
         \\frac{g!}{(g-l_1)!(g-l_2)!(g-l_3)!},\\quad 2g = l_1 + l_2 + l_3.
    """
    total = l1 + l2 + l3
    if total % 2 or not _triangle(l1, l2, l3):
        return 0.0
    g = total // 2
    square = Fraction(
        factorial(2 * g - 2 * l1) * factorial(2 * g - 2 * l2) * factorial(2 * g - 2 * l3),
        factorial(2 * g + 1),
    )
    ratio = Fraction(factorial(g), factorial(g - l1) * factorial(g - l2) * factorial(g - l3))
    return (-1) ** g * sqrt(square) * float(ratio)


@lru_cache(maxsize=None)
def wigner_6j(j1: int, j2: int, j3: int, j4: int, j5: int, j6: int) -> float:
    """The 6j symbol {j1 j2 j3; j4 j5 j6} for integer arguments (Racah's single-sum formula)."""
    triads = ((j1, j2, j3), (j1, j5, j6), (j4, j2, j6), (j4, j5, j3))
    if not all(_triangle(*t) for t in triads):
        return 0.0

    def delta(a: int, b: int, c: int) -> Fraction:
        return Fraction(
            factorial(a + b - c) * factorial(a - b + c) * factorial(-a + b + c),
            factorial(a + b + c + 1),
        )

    prefactor = Fraction(1)
    for t in triads:
        prefactor *= delta(*t)
    sums = [sum(t) for t in triads]
    pairs = (j1 + j2 + j4 + j5, j2 + j3 + j5 + j6, j3 + j1 + j6 + j4)
    total = Fraction(0)
    for t in range(max(sums), min(pairs) + 1):
        denominator = 1
        for s in sums:
            denominator *= factorial(t - s)
        for p in pairs:
            denominator *= factorial(p - t)
        total += Fraction((-1) ** t * factorial(t + 1), denominator)
    return sqrt(prefactor) * float(total)


def reduced_c(l: int, k: int, l_prime: int) -> float:
    """Reduced matrix element <l||C_k||l'> in the convention of the module docstring."""
    return (-1) ** l * sqrt((2 * l + 1) * (2 * l_prime + 1)) * wigner_3j_zero(l, k, l_prime)


def exchange_coefficient(l_a: int, k: int, l_b: int) -> float:
    """Closed-shell exchange factor :math:`\\tfrac12 (l_a\\,k\\,l_b;000)^2` per electron of shell b.

    The exchange potential acting on an orbital a is
    :math:`-\\sum_b q_b \\sum_k \\tfrac12 (l_a k l_b; 000)^2\\, Y^k_{ab}(r)/r\\, P_b(r)`,
    with :math:`q_b = 2(2l_b+1)` the occupation of the closed subshell b.
    """
    return 0.5 * wigner_3j_zero(l_a, k, l_b) ** 2
