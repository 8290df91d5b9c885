"""Tests of tdhf.angular: Wigner 3j (m = 0) and 6j symbols and the closed-shell angular factors.

Reference: sympy.physics.wigner (a general-purpose exact implementation, independent of ours),
plus exact orthogonality relations of the symbols.
"""

from __future__ import annotations

import itertools
from math import sqrt

import numpy as np
import pytest
from sympy.physics.wigner import wigner_3j as sympy_3j
from sympy.physics.wigner import wigner_6j as sympy_6j

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


def test_wigner_3j_zero_matches_sympy_exhaustively():
    mismatches = []
    for l1, l2, l3 in itertools.product(range(L_MAX_3J + 1), repeat=3):
        ours = wigner_3j_zero(l1, l2, l3)
        reference = float(sympy_3j(l1, l2, l3, 0, 0, 0))
        if abs(ours - reference) > 1e-14 * max(1.0, abs(reference)):
            mismatches.append(((l1, l2, l3), ours, reference))
    assert not mismatches, mismatches[:5]


@pytest.mark.parametrize("ls", [(20, 20, 0), (15, 17, 30), (25, 30, 41), (40, 40, 40)], ids=str)
def test_wigner_3j_zero_large_arguments(ls):
    reference = float(sympy_3j(*ls, 0, 0, 0))
    assert wigner_3j_zero(*ls) == pytest.approx(reference, rel=1e-13, abs=1e-300)


@pytest.mark.parametrize("ls", [(1, 1, 1), (1, 2, 2), (0, 2, 1), (3, 1, 5), (2, 2, 5)], ids=str)
def test_wigner_3j_zero_selection_rules(ls):
    # Odd l1 + l2 + l3 or a broken triangle gives zero exactly.
    assert wigner_3j_zero(*ls) == 0.0


@pytest.mark.parametrize("l1, l2", list(itertools.product(range(7), repeat=2)), ids=lambda v: str(v))
def test_wigner_3j_zero_orthogonality(l1, l2):
    # sum_{l3, m3} (2 l3 + 1) (l1 l2 l3; m1 m2 m3)^2 = 1; with m1 = m2 = 0 only m3 = 0 survives.
    total = sum((2 * l3 + 1) * wigner_3j_zero(l1, l2, l3) ** 2 for l3 in range(abs(l1 - l2), l1 + l2 + 1))
    assert total == pytest.approx(1.0, abs=1e-14)


def test_wigner_6j_matches_sympy_exhaustively():
    mismatches = []
    for js in itertools.product(range(J_MAX_6J + 1), repeat=6):
        ours = wigner_6j(*js)
        reference = float(sympy_6j(*js))
        if abs(ours - reference) > 1e-14:
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
        assert wigner_6j(*js) == pytest.approx(reference, rel=1e-12, abs=1e-15), js
        checked += 1


@pytest.mark.parametrize("a, b, c, d", [(1, 1, 1, 1), (2, 1, 2, 3), (3, 2, 2, 4), (2, 2, 2, 2)], ids=str)
def test_wigner_6j_orthogonality(a, b, c, d):
    # sum_x (2x+1)(2p+1) {a b x; c d p}{a b x; c d q} = delta_pq (Racah orthogonality).
    xs = range(max(abs(a - b), abs(c - d)), min(a + b, c + d) + 1)
    ps = range(max(abs(a - d), abs(b - c)), min(a + d, b + c) + 1)
    for p, q in itertools.product(ps, repeat=2):
        total = sum((2 * x + 1) * (2 * p + 1) * wigner_6j(a, b, x, c, d, p) * wigner_6j(a, b, x, c, d, q) for x in xs)
        assert total == pytest.approx(float(p == q), abs=1e-13), (p, q)


@pytest.mark.parametrize("l", range(6))
def test_reduced_c_of_rank_zero(l):
    # <l m|C_00|l m> = 1 and the Wigner–Eckart theorem give <l||C_0||l> = sqrt(2l+1).
    assert reduced_c(l, 0, l) == pytest.approx(sqrt(2 * l + 1), rel=1e-14)


@pytest.mark.parametrize("l, k, lp", [(0, 1, 1), (1, 1, 2), (1, 2, 1), (2, 3, 3)], ids=str)
def test_reduced_c_symmetry(l, k, lp):
    # <l||C_k||l'> = (-1)^(l - l') <l'||C_k||l> in this convention.
    assert reduced_c(l, k, lp) == pytest.approx((-1) ** (l - lp) * reduced_c(lp, k, l), rel=1e-14)


def test_exchange_coefficient_of_closed_s_shell_cancels_self_interaction():
    # A closed s shell (q = 2): direct 2 Y^0 minus exchange 2 * c Y^0 must leave one electron's Y^0.
    assert 2.0 * exchange_coefficient(0, 0, 0) == 1.0


@pytest.mark.parametrize("l_a, l_b", list(itertools.product(range(5), repeat=2)), ids=str)
def test_exchange_coefficient_sum_rule(l_a, l_b):
    # From the 3j orthogonality above: sum_k (2k+1) * 1/2 (l_a k l_b; 000)^2 = 1/2.
    total = sum((2 * k + 1) * exchange_coefficient(l_a, k, l_b) for k in range(l_a + l_b + 1))
    assert total == pytest.approx(0.5, abs=1e-14)


def test_general_wigner_3j_matches_sympy():
    """sympy.physics.wigner (general-purpose reference library), every argument set with j <= 3."""
    for j1, j2, j3 in itertools.product(range(4), repeat=3):
        for m1 in range(-j1, j1 + 1):
            for m2 in range(-j2, j2 + 1):
                expected = float(sympy_3j(j1, j2, j3, m1, m2, -m1 - m2))
                assert wigner_3j(j1, j2, j3, m1, m2, -m1 - m2) == pytest.approx(expected, abs=1e-14)


@pytest.mark.parametrize("L, l, lp", [(1, 0, 1), (1, 1, 2), (2, 1, 1), (3, 2, 3), (2, 3, 1)])
def test_multipole_weight_is_the_m_sum_of_squared_matrix_elements(L, l, lp):
    """Identity: sum_m <l' m|C_L0|l m>^2 = (2l+1)(2l'+1)(l L l';000)^2/(2L+1) (Wigner-Eckart)."""
    total = sum(c_matrix_element(lp, m, L, 0, l, m) ** 2 for m in range(-min(l, lp), min(l, lp) + 1))
    assert multipole_weight(L, l, lp) == pytest.approx(total, rel=1e-13)


def _exchange_sum_at(L, l_a, l_t, l_b, l_s, k, m_a):
    """The m_b, q sums of the first-order exchange for one target m_a (as in the solver's derivation)."""
    s1 = s2 = 0.0
    for m_b in range(-min(l_b, l_s), min(l_b, l_s) + 1):
        q = m_a - m_b
        if abs(q) > k:
            continue
        source = c_matrix_element(l_s, m_b, L, 0, l_b, m_b)
        s1 += (-1) ** q * c_matrix_element(l_b, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_s, m_b) * source
        s2 += (-1) ** q * c_matrix_element(l_s, m_b, k, -q, l_a, m_a) * c_matrix_element(l_t, m_a, k, q, l_b, m_b) * source
    return s1, s2


@pytest.mark.parametrize("L", [1, 2, 3])
def test_response_exchange_factors_do_not_depend_on_m(L):
    """Wigner-Eckart: for every target m_a the exchange sums equal factor x <l_t m_a|C_L0|l_a m_a>,
    so the radial first-order functions are m-independent (exact identity)."""
    checked = 0
    for l_a, l_b in itertools.product(range(3), repeat=2):
        for l_t in range(abs(l_a - L), l_a + L + 1, 2):
            for l_s in range(abs(l_b - L), l_b + L + 1, 2):
                factors = {k: (s1, s2) for k, s1, s2 in response_exchange_factors(L, l_a, l_t, l_b, l_s)}
                for k in range(l_a + l_b + l_t + l_s + 1):
                    for m_a in range(-min(l_a, l_t), min(l_a, l_t) + 1):
                        target = c_matrix_element(l_t, m_a, L, 0, l_a, m_a)
                        if target == 0.0:
                            continue
                        s1, s2 = _exchange_sum_at(L, l_a, l_t, l_b, l_s, k, m_a)
                        e1, e2 = factors.get(k, (0.0, 0.0))
                        assert s1 == pytest.approx(e1 * target, abs=1e-12)
                        assert s2 == pytest.approx(e2 * target, abs=1e-12)
                        checked += 1
    assert checked > 100
