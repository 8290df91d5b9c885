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

__all__ = [
    "wigner_3j",
    "wigner_3j_zero",
    "wigner_6j",
    "reduced_c",
    "c_matrix_element",
    "exchange_coefficient",
    "multipole_weight",
    "response_exchange_factors",
]


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


@lru_cache(maxsize=None)
def wigner_3j(j1: int, j2: int, j3: int, m1: int, m2: int, m3: int) -> float:
    """The 3j symbol (j1 j2 j3; m1 m2 m3) for integer arguments (Racah's formula)."""
    if m1 + m2 + m3 != 0 or not _triangle(j1, j2, j3):
        return 0.0
    if abs(m1) > j1 or abs(m2) > j2 or abs(m3) > j3:
        return 0.0
    square = Fraction(
        factorial(j1 + j2 - j3) * factorial(j1 - j2 + j3) * factorial(-j1 + j2 + j3),
        factorial(j1 + j2 + j3 + 1),
    )
    square *= (
        factorial(j1 + m1) * factorial(j1 - m1) * factorial(j2 + m2) * factorial(j2 - m2)
        * factorial(j3 + m3) * factorial(j3 - m3)
    )
    low = max(0, j2 - j3 - m1, j1 - j3 + m2)
    high = min(j1 + j2 - j3, j1 - m1, j2 + m2)
    total = Fraction(0)
    for t in range(low, high + 1):
        total += Fraction(
            (-1) ** t,
            factorial(t) * factorial(j3 - j2 + t + m1) * factorial(j3 - j1 + t - m2)
            * factorial(j1 + j2 - j3 - t) * factorial(j1 - t - m1) * factorial(j2 - t + m2),
        )
    return (-1) ** (j1 - j2 - m3) * sqrt(square) * float(total)


def c_matrix_element(l: int, m: int, k: int, q: int, l_prime: int, m_prime: int) -> float:
    r""":math:`\langle l m | C_{kq} | l' m' \rangle
    = (-1)^m \sqrt{(2l+1)(2l'+1)} (l\,k\,l'; -m\,q\,m') (l\,k\,l'; 000)`."""
    return (
        (-1) ** m
        * sqrt((2 * l + 1) * (2 * l_prime + 1))
        * wigner_3j(l, k, l_prime, -m, q, m_prime)
        * wigner_3j_zero(l, k, l_prime)
    )


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


def multipole_weight(L: int, l: int, l_prime: int) -> float:
    """:math:`A = \\sum_m \\langle l' m | C_{L0} | l m \\rangle^2 = (2l+1)(2l'+1)(l\\,L\\,l';000)^2/(2L+1)`.

    With the spin factor 2 this is the weight of the channel l -> l' of a closed subshell in the
    induced multipole density: :math:`\\delta\\rho_L(r) \\propto 2 A\\, P_{nl}(r)\\,\\rho_{nl\\to l'}(r)`.
    """
    return (2 * l + 1) * (2 * l_prime + 1) * wigner_3j_zero(l, L, l_prime) ** 2 / (2 * L + 1)


@lru_cache(maxsize=None)
def response_exchange_factors(L: int, l_a: int, l_t: int, l_b: int, l_s: int) -> tuple[tuple[int, float, float], ...]:
    """Angular factors of the first-order exchange for the multipole-L response of closed shells.

    The first-order orbital of :math:`\\phi_{n_a l_a m}` is written
    :math:`\\chi_{am} = \\sum_{l'} \\langle l' m | C_{L0} | l_a m\\rangle \\rho_{a l'}(r)/r\\,Y_{l'm}`,
    so its radial functions do not depend on m.  Projecting the first-order exchange
    :math:`\\delta K^{+}\\phi_a = \\sum_b [\\chi^+_b \\langle \\phi_b | r_{12}^{-1} | \\phi_a\\rangle
    + \\phi_b \\langle \\chi^-_b | r_{12}^{-1} | \\phi_a \\rangle]` (same spin) on the channel
    :math:`a \\to l_t` gives, per source channel :math:`b \\to l_s` and multipole k,

    .. math:: \\sum_k \\Big[ s_1\\, \\frac{Y^k[P_a P_b]}{r} \\rho^{+}_{b l_s}
              + s_2\\, \\frac{Y^k[P_a \\rho^{-}_{b l_s}]}{r} P_b \\Big].

    The factors are evaluated by explicit sums over magnetic quantum numbers (so the m-independence
    promised by the Wigner–Eckart theorem is a checkable identity, see the tests).

    Returns
    -------
    tuple of (k, s1, s2)
        Only the k with a non-zero factor.
    """
    norm = multipole_weight(L, l_a, l_t)
    results = []
    for k in range(0, l_a + l_b + l_t + l_s + 1):
        s1 = s2 = 0.0
        for m_a in range(-min(l_a, l_t), min(l_a, l_t) + 1):
            target = c_matrix_element(l_t, m_a, L, 0, l_a, m_a)
            for m_b in range(-min(l_b, l_s), min(l_b, l_s) + 1):
                q = m_a - m_b
                if abs(q) > k:
                    continue
                source = c_matrix_element(l_s, m_b, L, 0, l_b, m_b)
                phase = (-1) ** q
                s1 += target * phase * c_matrix_element(l_b, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_s, m_b) * source
                s2 += target * phase * c_matrix_element(l_s, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_b, m_b) * source
        if abs(s1) > 1e-14 or abs(s2) > 1e-14:
            results.append((k, s1 / norm, s2 / norm))
    return tuple(results)
