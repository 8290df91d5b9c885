"""Tests of tdhf.angular: Wigner 3j (m = 0) and 6j symbols and the closed-shell angular factors.

Reference: sympy.physics.wigner (a general-purpose exact implementation, independent of ours),
plus exact orthogonality relations of the symbols.

Round-off (derived): tdhf evaluates every symbol in exact rational arithmetic and converts at the
end, sqrt(float(square)) * float(sum), so a 3j or 6j symbol carries at most 3.5 U relative error
(conversions U each, the square root U/2 + U, the product U); float(sympy value) adds U.  Sums of
n such products add gamma(n) relative to the sum of their absolute values (tests/roundoff.py).
"""

from __future__ import annotations

import itertools
from math import sqrt

import numpy as np
import pytest
from sympy.physics.wigner import wigner_3j as sympy_3j
from sympy.physics.wigner import wigner_6j as sympy_6j
from roundoff import U, gamma

from tdhf.angular import (
    c_matrix_element,
    exchange_coefficient,
    multipole_weight,
    reduced_c,
    response_exchange_factors,
    wigner_3j,
    wigner_3j_zero,
    wigner_6j,
)

#: Largest l in the exhaustive 3j comparison (covers every k = 0..2 l_max of atoms through l = 4).
L_MAX_3J = 10
#: Largest j in the exhaustive 6j comparison (4^6 = 4096 argument sets, triangles or not).
J_MAX_6J = 3
#: Relative error bound of one 3j or 6j symbol (3.5 U) against a correctly rounded reference (U).
SYMBOL_RTOL = 4.5 * U


def test_wigner_3j_zero_matches_sympy_exhaustively():
    mismatches = []
    for l1, l2, l3 in itertools.product(range(L_MAX_3J + 1), repeat=3):
        ours = wigner_3j_zero(l1, l2, l3)
        reference = float(sympy_3j(l1, l2, l3, 0, 0, 0))
        if abs(ours - reference) > SYMBOL_RTOL * abs(reference):  # zeros must be exact
            mismatches.append(((l1, l2, l3), ours, reference))
    assert not mismatches, mismatches[:5]


@pytest.mark.parametrize("ls", [(20, 20, 0), (15, 17, 30), (25, 30, 41), (40, 40, 40)], ids=str)
def test_wigner_3j_zero_large_arguments(ls):
    reference = float(sympy_3j(*ls, 0, 0, 0))
    assert abs(wigner_3j_zero(*ls) - reference) <= SYMBOL_RTOL * abs(reference)


@pytest.mark.parametrize("ls", [(1, 1, 1), (1, 2, 2), (0, 2, 1), (3, 1, 5), (2, 2, 5)], ids=str)
def test_wigner_3j_zero_selection_rules(ls):
    # Odd l1 + l2 + l3 or a broken triangle gives zero exactly.
    assert wigner_3j_zero(*ls) == 0.0


@pytest.mark.parametrize("l1, l2", list(itertools.product(range(7), repeat=2)), ids=lambda v: str(v))
def test_wigner_3j_zero_orthogonality(l1, l2):
    # sum_{l3, m3} (2 l3 + 1) (l1 l2 l3; m1 m2 m3)^2 = 1; with m1 = m2 = 0 only m3 = 0 survives.
    # Each term: 2 x 3.5 U from the symbol, U for the square, U for the factor; the terms sum to 1.
    terms = [(2 * l3 + 1) * wigner_3j_zero(l1, l2, l3) ** 2 for l3 in range(abs(l1 - l2), l1 + l2 + 1)]
    assert abs(sum(terms) - 1.0) <= 9 * U + gamma(len(terms))


def test_wigner_6j_matches_sympy_exhaustively():
    mismatches = []
    for js in itertools.product(range(J_MAX_6J + 1), repeat=6):
        ours = wigner_6j(*js)
        reference = float(sympy_6j(*js))
        if abs(ours - reference) > SYMBOL_RTOL * abs(reference):  # zeros must be exact
            mismatches.append((js, ours, reference))
    assert not mismatches, mismatches[:5]


def test_wigner_6j_matches_sympy_on_random_larger_arguments():
    rng = np.random.default_rng(20240611)
    checked = 0
    while checked < 150:
        j1, j2, j4, j5 = (int(v) for v in rng.integers(0, 9, size=4))
        j3 = int(rng.integers(abs(j1 - j2), j1 + j2 + 1))
        j6 = int(rng.integers(abs(j1 - j5), j1 + j5 + 1))
        js = (j1, j2, j3, j4, j5, j6)
        reference = float(sympy_6j(*js))
        assert abs(wigner_6j(*js) - reference) <= SYMBOL_RTOL * abs(reference), js
        checked += 1


@pytest.mark.parametrize("a, b, c, d", [(1, 1, 1, 1), (2, 1, 2, 3), (3, 2, 2, 4), (2, 2, 2, 2)], ids=str)
def test_wigner_6j_orthogonality(a, b, c, d):
    # sum_x (2x+1)(2p+1) {a b x; c d p}{a b x; c d q} = delta_pq (Racah orthogonality).
    xs = range(max(abs(a - b), abs(c - d)), min(a + b, c + d) + 1)
    ps = range(max(abs(a - d), abs(b - c)), min(a + d, b + c) + 1)
    for p, q in itertools.product(ps, repeat=2):
        terms = [(2 * x + 1) * (2 * p + 1) * wigner_6j(a, b, x, c, d, p) * wigner_6j(a, b, x, c, d, q) for x in xs]
        # Each term: 2 x 3.5 U from the symbols and 3 products; then the sum.
        bound = (10 * U + gamma(len(terms))) * sum(abs(t) for t in terms)
        assert abs(sum(terms) - float(p == q)) <= bound, (p, q)


@pytest.mark.parametrize("l", range(6))
def test_reduced_c_of_rank_zero(l):
    # <l m|C_00|l m> = 1 and the Wigner–Eckart theorem give <l||C_0||l> = sqrt(2l+1).
    # Round-off: the 3j (3.5 U), sqrt(2l+1)^2 under the root (1.5 U), the product (U); reference U.
    assert abs(reduced_c(l, 0, l) - sqrt(2 * l + 1)) <= 7 * U * sqrt(2 * l + 1)


@pytest.mark.parametrize("l, k, lp", [(0, 1, 1), (1, 1, 2), (1, 2, 1), (2, 3, 3)], ids=str)
def test_reduced_c_symmetry(l, k, lp):
    # <l||C_k||l'> = (-1)^(l - l') <l'||C_k||l> in this convention; 6 U on each side.
    assert abs(reduced_c(l, k, lp) - (-1) ** (l - lp) * reduced_c(lp, k, l)) <= 12 * U * abs(reduced_c(l, k, lp))


def test_exchange_coefficient_of_closed_s_shell_cancels_self_interaction():
    # A closed s shell (q = 2): direct 2 Y^0 minus exchange 2 * c Y^0 must leave one electron's Y^0.
    assert 2.0 * exchange_coefficient(0, 0, 0) == 1.0


@pytest.mark.parametrize("l_a, l_b", list(itertools.product(range(5), repeat=2)), ids=str)
def test_exchange_coefficient_sum_rule(l_a, l_b):
    # From the 3j orthogonality above: sum_k (2k+1) * 1/2 (l_a k l_b; 000)^2 = 1/2 (9 U per term).
    terms = [(2 * k + 1) * exchange_coefficient(l_a, k, l_b) for k in range(l_a + l_b + 1)]
    assert abs(sum(terms) - 0.5) <= (9 * U + gamma(len(terms))) * 0.5


def test_general_wigner_3j_matches_sympy():
    """sympy.physics.wigner (general-purpose reference library), every argument set with j <= 3."""
    for j1, j2, j3 in itertools.product(range(4), repeat=3):
        for m1 in range(-j1, j1 + 1):
            for m2 in range(-j2, j2 + 1):
                expected = float(sympy_3j(j1, j2, j3, m1, m2, -m1 - m2))
                assert abs(wigner_3j(j1, j2, j3, m1, m2, -m1 - m2) - expected) <= SYMBOL_RTOL * abs(expected)


@pytest.mark.parametrize("L, l, lp", [(1, 0, 1), (1, 1, 2), (2, 1, 1), (3, 2, 3), (2, 3, 1)])
def test_multipole_weight_is_the_m_sum_of_squared_matrix_elements(L, l, lp):
    """Identity: sum_m <l' m|C_L0|l m>^2 = (2l+1)(2l'+1)(l L l';000)^2/(2L+1) (Wigner-Eckart).

    Round-off: a matrix element is sqrt(integer) x two symbols x phase, <= 10 U; its square 21 U;
    the weight 2 x 3.5 U + 3 U = 10 U; the m sum gamma(2l + 1)."""
    terms = [c_matrix_element(lp, m, L, 0, l, m) ** 2 for m in range(-min(l, lp), min(l, lp) + 1)]
    assert abs(multipole_weight(L, l, lp) - sum(terms)) <= (31 * U + gamma(len(terms))) * sum(terms)


def _exchange_sum_at(L, l_a, l_t, l_b, l_s, k, m_a):
    """The m_b, q sums of the first-order exchange for one target m_a (as in the solver's derivation),
    and the sums of the absolute values of their terms (for the round-off bound)."""
    s1 = s2 = a1 = a2 = 0.0
    for m_b in range(-min(l_b, l_s), min(l_b, l_s) + 1):
        q = m_a - m_b
        if abs(q) > k:
            continue
        source = c_matrix_element(l_s, m_b, L, 0, l_b, m_b)
        t1 = (-1) ** q * c_matrix_element(l_b, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_s, m_b) * source
        t2 = (-1) ** q * c_matrix_element(l_s, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_b, m_b) * source
        s1, s2, a1, a2 = s1 + t1, s2 + t2, a1 + abs(t1), a2 + abs(t2)
    return s1, s2, a1, a2


@pytest.mark.parametrize("L", [1, 2, 3])
def test_response_exchange_factors_do_not_depend_on_m(L):
    """Wigner-Eckart: for every target m_a the exchange sums equal factor x <l_t m_a|C_L0|l_a m_a>,
    so the radial first-order functions are m-independent (exact identity).

    Round-off (derived): a term is a product of four matrix elements (10 U each) and four more
    roundings, 45 U; tdhf's factor sums N terms over (m_a, m_b) weighted by the targets and divides
    by the multipole weight (10 U), so it errs by (56 U + gamma(N)) sum|terms| / weight; the m_a
    sum here errs by (45 U + gamma(n)) sum|terms|.  Factors below 1e-14 are dropped by tdhf as zero."""
    checked = 0
    for l_a, l_b in itertools.product(range(3), repeat=2):
        for l_t in range(abs(l_a - L), l_a + L + 1, 2):
            for l_s in range(abs(l_b - L), l_b + L + 1, 2):
                factors = {k: (s1, s2) for k, s1, s2 in response_exchange_factors(L, l_a, l_t, l_b, l_s)}
                weight = multipole_weight(L, l_a, l_t)
                m_values = range(-min(l_a, l_t), min(l_a, l_t) + 1)
                for k in range(l_a + l_b + l_t + l_s + 1):
                    targets = {m_a: c_matrix_element(l_t, m_a, L, 0, l_a, m_a) for m_a in m_values}
                    sums = {m_a: _exchange_sum_at(L, l_a, l_t, l_b, l_s, k, m_a) for m_a in m_values}
                    count = len(m_values) * (2 * min(l_b, l_s) + 1)
                    spread = [sum(abs(targets[m]) * sums[m][2 + i] for m in m_values) / weight for i in (0, 1)]
                    for m_a in m_values:
                        target = targets[m_a]
                        if target == 0.0:
                            continue
                        e1, e2 = factors.get(k, (0.0, 0.0))
                        for i, (value, factor) in enumerate(((sums[m_a][0], e1), (sums[m_a][1], e2))):
                            bound = abs(target) * ((56 * U + gamma(count)) * spread[i] + 1e-14 / weight)
                            bound += (45 * U + gamma(count)) * sums[m_a][2 + i] + U * abs(factor * target)
                            assert abs(value - factor * target) <= bound
                        checked += 1
    assert checked > 100
