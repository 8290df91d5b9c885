r"""Casimir–Polder dispersion coefficients C6, C8, C10 from TDHF polarizabilities at imaginary frequency.

Convention
----------
:math:`E_{AB}(R) = -C_6/R^6 - C_8/R^8 - C_{10}/R^{10} - \dots` (hartree, R in bohr; C_{2n} in
hartree bohr^{2n}), for two closed-shell (:sup:`1`\ S) atoms, from second-order perturbation theory
in the multipole-expanded Coulomb interaction (no overlap, no retardation).  The polarizabilities
are those of :mod:`tdhf.response.solver`,
:math:`\alpha_l(i\omega) = 2\sum_n \Delta_n |\langle 0|Q_{l0}|n\rangle|^2 / (\Delta_n^2 + \omega^2)`
with :math:`Q_{lm} = \sum_i r_i^l C_{lm}(\hat r_i)` (Racah-normalised, :math:`C_{l0} = P_l(\cos\theta)`)
and :math:`\Delta_n = E_n - E_0`; hydrogen has :math:`\alpha_1(0) = 4.5`, :math:`\alpha_2(0) = 15`.

.. math:: C_{2n} = \sum_{l_A + l_B = n - 1,\; l_A, l_B \ge 1}
          \frac{(2l_A + 2l_B)!}{(2l_A)!\,(2l_B)!}\,
          \frac{1}{2\pi}\int_0^\infty \alpha^A_{l_A}(i\omega)\,\alpha^B_{l_B}(i\omega)\,d\omega,

that is :math:`C_6 = \frac{3}{\pi}\int\alpha_1^A\alpha_1^B`,
:math:`C_8 = \frac{15}{2\pi}\int(\alpha_1^A\alpha_2^B + \alpha_2^A\alpha_1^B)` and
:math:`C_{10} = \frac{14}{\pi}\int(\alpha_1^A\alpha_3^B + \alpha_3^A\alpha_1^B)
+ \frac{35}{\pi}\int\alpha_2^A\alpha_2^B`.

Derivation
~~~~~~~~~~
With A at the origin and B at :math:`R\hat z`, the interaction of the two (neutral) charge
distributions is, for non-overlapping densities (e.g. Dalgarno, Adv. Chem. Phys. 12, 143 (1967);
from memory),

.. math:: V = \sum_{l_A, l_B \ge 1} \sum_m \frac{T_{l_A l_B m}}{R^{l_A + l_B + 1}}\,
          Q^A_{l_A m} Q^B_{l_B, -m},\qquad
          T_{l_A l_B m}^2 = \frac{[(l_A + l_B)!]^2}{(l_A+m)!\,(l_A-m)!\,(l_B+m)!\,(l_B-m)!}

(:math:`T_{11m} = -2, 1, 1` for m = 0, ±1: the dipole–dipole
:math:`(x_A x_B + y_A y_B - 2 z_A z_B)/R^3`).  The second-order energy is
:math:`E_2 = -\sum_{a,b} |\langle 0_A 0_B|V|a b\rangle|^2/(\Delta_a + \Delta_b)`.  A :sup:`1`\ S state
is connected by :math:`Q_{lm}` only to states of angular momentum l and projection m, so different
(l_A, l_B, m) do not interfere, the term with l_A + l_B = n - 1 falls off as :math:`R^{-2n}`, and
(Wigner–Eckart) the sums over excited states do not depend on m.  Three steps remain:

1. Casimir–Polder: :math:`\frac{1}{x + y} = \frac{2}{\pi}\int_0^\infty
   \frac{x\,y\,d\omega}{(x^2+\omega^2)(y^2+\omega^2)}` for x, y > 0 (H. B. G. Casimir and D. Polder,
   Phys. Rev. 73, 360 (1948)), which factorises the double sum:
   :math:`\sum_{ab}\frac{|q_a|^2 |q_b|^2}{\Delta_a+\Delta_b} = \frac{2}{\pi}\int
   \frac{\alpha^A}{2}\frac{\alpha^B}{2}\,d\omega = \frac{1}{2\pi}\int\alpha^A\alpha^B\,d\omega`;
2. the angular sum: :math:`T^2 = \binom{N}{l_A + m}\binom{N}{l_A - m}` with N = l_A + l_B, and
   Vandermonde's identity gives :math:`\sum_m T^2 = \binom{2N}{2l_A} = (2l_A+2l_B)!/((2l_A)!(2l_B)!)`
   (6 for C6; 15 for each cross term of C8; 28 and 70 for C10);
3. C_{2n} collects the terms with :math:`2(l_A + l_B + 1) = 2n`.

The exact one-electron limit checks all of it: hydrogen (no electron–electron terms in TDHF)
gives C6 = 6.4990267054, C8 = 124.39908358, C10 = 3285.8284150, the exact values
6.499026705, 124.3990835, 3285.828414 as quoted in the literature (tests/test_dispersion.py).

Quadrature
~~~~~~~~~~
Gauss–Legendre in t on the map :math:`\omega = \omega_0 (1 + t)/(1 - t)`, t in (-1, 1), with the
fixed scale :data:`FREQUENCY_SCALE` :math:`\omega_0 = 0.5` hartree.  Since
:math:`\alpha_l(i\omega) \sim S_l(0)/\omega^2` at large ω the integrands vanish like
:math:`(1-t)^2` at t = 1; an excitation energy Δ puts a pole of the integrand on the unit circle
of the t plane, close to t = 1 when Δ >> ω0, which slows the convergence for deep core shells
but with weights that fall like Δ^-3.  Each result uses two rules: the *base* rule of n = ``quadrature_points`` nodes and the
*companion* rule, its Gauss–Kronrod extension of 2n + 1 nodes (:mod:`tdhf.numerics.quadrature`;
exact to degree 3n + 1 in t), which contains the base nodes.  The reported coefficients are those
of the companion (more accurate) rule and the reported error is :math:`\max(|Q_n - K_{2n+1}|,\ `
:data:`ERROR_FLOOR` :math:`\cdot |K_{2n+1}|)`: an estimate of the base rule's error, so an
overestimate for the reported value; the base costs no solves of its own.  The floor covers the irregular, non-monotone convergence
seen at 1e-10..1e-9 for atoms with deep d and p shells (He–Cd C6: errors 1.1e-9 at n = 24 and
8e-10 at n = 36, against n = 96) and the response solver's own noise (alpha reproducible to
~1.5e-10 at its Krylov tolerance).  The error is that of the frequency quadrature only; the radial grid's error
is separate (compare a run with ``GridSettings.tight()``).  A single ω0 for all pairs lets each
atom's :math:`\alpha_l(i\omega)` be solved once, on the companion's nodes, and reused for
every pair; pairs then cost a few dot products.  The (system, multipole) responses are
independent: ``map_tasks`` (:mod:`tdhf.execution`) may run them elsewhere (a process pool, a
cluster), with bit-identical results.

Non-convergence policy
~~~~~~~~~~~~~~~~~~~~~~
A system whose ground state did not converge, whose response solver raises (e.g.
:class:`~tdhf.errors.ConvergenceError`), has a Krylov solve that does not converge
(:mod:`tdhf.numerics.status`) or gives a non-finite polarizability does not stop the other
pairs: its polarizabilities of that multipole become NaN, the coefficients that need them NaN,
the pair ``converged=False``, and a note naming the system goes to ``warnings`` (and to
:func:`warnings.warn` as a RuntimeWarning).  A pair whose error estimate exceeds
:data:`RELATIVE_ERROR_GOAL` of a coefficient is also ``converged=False``, with a note.

>>> from tdhf.ground_state import solve_ground_state
>>> from tdhf.system import System
>>> hydrogen = solve_ground_state(System.from_input("H"))
>>> result = compute_dispersion(hydrogen, (hydrogen,))
>>> row = result.coefficients[0]
>>> print(row.pair, f"{row.C6:.9f} {row.C8:.6f} {row.C10:.5f}", row.converged)
('H', 'H') 6.499026705 124.399084 3285.82841 True
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from tdhf.errors import ConvergenceError, InputError, TdhfError
from tdhf.ground_state import GroundState
from tdhf.numerics.tasks import TaskMap
from tdhf.numerics.threads import single_blas_thread
from tdhf.numerics.extrapolation import lagrange_extrapolate
from tdhf.numerics.quadrature import gauss_kronrod_legendre
from tdhf.response.solver import FirstOrderOrbitals, ResponseSolver, ResponseTolerances

__all__ = [
    "DispersionCoefficients",
    "DispersionResults",
    "ImaginaryFrequencyTable",
    "compute_dispersion",
    "dispersion_table",
    "dispersion_pairs",
    "start_dispersion",
    "partner_pairs",
    "table_pairs",
    "imaginary_frequency_rule",
    "companion_points",
    "imaginary_polarizabilities",
    "casimir_polder_coefficients",
    "MULTIPOLES",
    "FREQUENCY_SCALE",
    "DEFAULT_QUADRATURE_POINTS",
    "QUADRATURE_RANGE",
    "RELATIVE_ERROR_GOAL",
    "ERROR_FLOOR",
]

#: Multipole orders whose polarizabilities enter C6, C8, C10: dipole, quadrupole, octupole.
MULTIPOLES = (1, 2, 3)
#: omega_0 of the map omega = omega_0 (1 + t)/(1 - t), hartree: half the nodes lie below it.  The
#: integrands live at valence excitation energies, 0.2-1 hartree for He..Cd; 0.25 and 1.0 converge
#: about as fast (He, Ca, Xe, Cd studied).
FREQUENCY_SCALE = 0.5
#: Base rule size by default, and the accepted range (the deck's dispersion.quadrature_points).
DEFAULT_QUADRATURE_POINTS = 24
QUADRATURE_RANGE = (8, 96)
#: Relative error estimate above which a coefficient is flagged (6 significant digits).
RELATIVE_ERROR_GOAL = 1e-6
#: Smallest relative error reported: below ~1e-9 the convergence in n is irregular (e.g. He-Cd C6
#: errors of 1.1e-9 at n = 24 and 8e-10 at n = 36 against n = 96), so a difference of two rules
#: alone could understate the error there.
ERROR_FLOOR = 1e-9

#: (2 l_A + 2 l_B)! / ((2 l_A)! (2 l_B)!) / (2 pi) for each (l_A, l_B) of C6, C8, C10.
_PREFACTORS = {
    (l_a, l_b): math.comb(2 * (l_a + l_b), 2 * l_a) / (2.0 * math.pi)
    for l_a in MULTIPOLES for l_b in MULTIPOLES if l_a + l_b <= 4
}
_COEFFICIENT_NAMES = ("C6", "C8", "C10")
#: Errors raised by the numerics of a failing response (anything else is a bug and propagates).
_RESPONSE_FAILURES = (TdhfError, np.linalg.LinAlgError, ArithmeticError)

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class DispersionCoefficients:
    """C6, C8, C10 of one pair of systems (atomic units: hartree bohr^6, ^8, ^10).

    Attributes
    ----------
    pair : tuple of str
        System names (A, B), e.g. ("Ne", "He"); the coefficients are symmetric in A and B.
    C6, C8, C10 : float
        Values of the companion (Gauss–Kronrod) quadrature rule (2n + 1 nodes); NaN if a response failed.
    C6_error, C8_error, C10_error : float
        Quadrature error estimates (module docstring), same units; NaN with the value.
    converged : bool
        All three values finite and each error within RELATIVE_ERROR_GOAL of its value.
    """

    pair: tuple[str, str]
    C6: float
    C8: float
    C10: float
    C6_error: float
    C8_error: float
    C10_error: float
    converged: bool


@dataclass(frozen=True)
class ImaginaryFrequencyTable:
    r"""TDHF polarizabilities alpha_L(i omega) of one system at the nodes of the reported rule.

    ``sum(w * a * b)`` over the rows of two tables times the prefactors of the module docstring
    reproduces the reported coefficients exactly.

    Attributes
    ----------
    system : str
        The system's name, e.g. "Na+".
    frequencies : tuple of float, shape (m,)
        Quadrature nodes omega_k in hartree, ascending (m = 2n + 1).
    weights : tuple of float, shape (m,)
        Weights w_k in hartree: :math:`\int_0^\infty f\,d\omega \approx \sum_k w_k f(\omega_k)`.
    dipole, quadrupole, octupole : tuple of float, shape (m,)
        :math:`\alpha_1, \alpha_2, \alpha_3` at :math:`i\omega_k` (a.u.); NaN if that response failed.
    converged : bool
        False if any of the system's responses failed (its NaN entries).
    static_dipole, static_quadrupole, static_octupole : float
        :math:`\alpha_1(0), \alpha_2(0), \alpha_3(0)` (a.u.) from one static solve each (not used
        by the quadrature); NaN where that response failed.
    """

    system: str
    frequencies: tuple[float, ...]
    weights: tuple[float, ...]
    dipole: tuple[float, ...]
    quadrupole: tuple[float, ...]
    octupole: tuple[float, ...]
    converged: bool = True
    static_dipole: float = math.nan
    static_quadrupole: float = math.nan
    static_octupole: float = math.nan


@dataclass(frozen=True)
class DispersionResults:
    """Coefficient rows, notes, and the polarizability table of every system involved.

    Attributes
    ----------
    coefficients : tuple of DispersionCoefficients
        One row per pair, in the order documented by the function that made it.
    warnings : tuple of str
        One line per failed response, skipped system, and pair whose error estimate is above
        RELATIVE_ERROR_GOAL; also issued as RuntimeWarnings.
    polarizability_tables : tuple of ImaginaryFrequencyTable
        One per distinct system, in order of first appearance.
    """

    coefficients: tuple[DispersionCoefficients, ...]
    warnings: tuple[str, ...]
    polarizability_tables: tuple[ImaginaryFrequencyTable, ...]


# --------------------------------------------------------------------------------------------
# Functional core


def imaginary_frequency_rule(points: int, scale: float = FREQUENCY_SCALE) -> tuple[np.ndarray, np.ndarray]:
    r"""Gauss–Legendre rule for :math:`\int_0^\infty f(\omega)\,d\omega` on :math:`\omega = s(1+t)/(1-t)`.

    Exact for :math:`f = \omega^k/(\omega + s)^{k+2}` with k <= 2 points - 1 (a polynomial of degree k
    in t); the integral is :math:`1/(s(k+1))`.

    Parameters
    ----------
    points : int
        Number of nodes n >= 1.
    scale : float
        s in hartree (> 0).

    Returns
    -------
    nodes, weights : ndarray, shape (n,)
        Ascending frequencies (hartree) and weights (hartree), weights including :math:`d\omega/dt`.

    >>> nodes, weights = imaginary_frequency_rule(4, 1.0)
    >>> print(f"{weights @ (1.0 / (1.0 + nodes) ** 2):.15f}")
    1.000000000000000
    """
    if points < 1 or scale <= 0.0:
        raise InputError(f"imaginary_frequency_rule: need points >= 1 and scale > 0, got {points}, {scale}")
    return _mapped(*np.polynomial.legendre.leggauss(points), scale)


def _mapped(t: np.ndarray, w: np.ndarray, scale: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of a rule in t on (-1, 1) carried to omega = s (1 + t)/(1 - t)."""
    return scale * (1.0 + t) / (1.0 - t), w * 2.0 * scale / (1.0 - t) ** 2


def companion_points(points: int) -> int:
    """Size of the companion (Gauss–Kronrod) rule that gives the reported value and, with the base, the error."""
    return 2 * points + 1


def casimir_polder_coefficients(
    weights: np.ndarray, alpha_a: np.ndarray, alpha_b: np.ndarray
) -> tuple[float, float, float]:
    r"""C6, C8, C10 (hartree bohr^{2n}) from polarizabilities at the nodes of one rule.

    Parameters
    ----------
    weights : ndarray, shape (m,)
        Quadrature weights in hartree.
    alpha_a, alpha_b : ndarray, shape (3, m)
        :math:`\alpha_1, \alpha_2, \alpha_3` of A and B at :math:`i\omega_k` (a.u.).

    Exactly symmetric: swapping A and B gives bit-identical values.

    >>> nodes, weights = imaginary_frequency_rule(48)
    >>> one_pole = np.array([1.0 / (1.0 + nodes**2)] * 3)   # alpha = 1, excitation energy 1
    >>> print(f"{casimir_polder_coefficients(weights, one_pole, one_pole)[0]:.12f}")  # London: 3/4
    0.750000000000
    """
    def integral(l_a: int, l_b: int) -> float:
        # a*b + b*a in one expression keeps the sum symmetric in A and B to the last bit.
        if l_a == l_b:
            integrand = alpha_a[l_a - 1] * alpha_b[l_b - 1]
        else:
            integrand = alpha_a[l_a - 1] * alpha_b[l_b - 1] + alpha_a[l_b - 1] * alpha_b[l_a - 1]
        return _PREFACTORS[l_a, l_b] * float(np.sum(weights * integrand))

    return integral(1, 1), integral(1, 2), integral(1, 3) + integral(2, 2)


@single_blas_thread
def imaginary_polarizabilities(
    ground_state: GroundState,
    frequencies: np.ndarray,
    multipoles: Sequence[int] = MULTIPOLES,
    progress: Callable[[int], None] | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
    static: bool = False,
) -> np.ndarray:
    r"""Coupled TDHF :math:`\alpha_L(i\omega)` (a.u.) at real ``frequencies`` omega >= 0 (hartree).

    One :class:`ResponseSolver` per multipole, reused for every frequency; one BLAS thread (the
    matrices are ~150 wide, where threads cost more than they give).

    Parameters
    ----------
    progress : callable, optional
        Called with 1 after each frequency solve.
    static : bool
        Also solve at omega = 0 after the sweep (its own solve, so the sweep is unchanged) and
        return alpha_L(0) as an extra last column.

    Returns
    -------
    ndarray, shape (len(multipoles), len(frequencies) + static)

    Raises
    ------
    ConvergenceError
        If a coupled solve does not converge or alpha is not finite.
    """
    frequencies = np.asarray(frequencies, dtype=float)
    out = np.empty((len(multipoles), frequencies.size + bool(static)))
    name = ground_state.system.name
    for i, multipole in enumerate(multipoles):
        solver = ResponseSolver(ground_state.grid, ground_state.system.Z, ground_state.shells,
                                ground_state.orbital_energies, multipole)
        history: list[tuple[float, FirstOrderOrbitals]] = []
        for k, nu in enumerate(frequencies):
            # Cubic extrapolation from the previous nodes (in the map variable t) starts the solve.
            first_order = solver.solve(1j * nu, tolerances=tolerances, guess=_predicted(history, nu))
            alpha = solver.polarizability(first_order).real
            if not first_order.converged or not math.isfinite(alpha):
                raise ConvergenceError(
                    f"response of {name}: L={multipole} at i*{nu:.6g} hartree gave alpha = {alpha!r}"
                    f" ({first_order.status.describe()})"
                )
            history = (history + [(nu, first_order)])[-EXTRAPOLATION_POINTS:]
            out[i, k] = alpha
            if progress is not None:
                progress(1)
        if static:
            first_order = solver.solve(0.0, tolerances=tolerances)
            alpha = float(solver.polarizability(first_order).real)
            if not first_order.converged or not math.isfinite(alpha):
                raise ConvergenceError(f"response of {name}: static L={multipole} gave alpha = {alpha!r}"
                                       f" ({first_order.status.describe()})")
            out[i, -1] = alpha
    return out


#: Previous solutions the next node's starting guess is extrapolated from (a cubic).
EXTRAPOLATION_POINTS = 4


def _predicted(history: list[tuple[float, FirstOrderOrbitals]], nu: float) -> FirstOrderOrbitals | None:
    """Starting guess at i nu from the solutions at the previous nodes, or None for the first."""
    if not history:
        return None
    first = history[-1][1]

    def t(frequency: float) -> float:  # the variable of the quadrature map omega = s (1 + t)/(1 - t)
        return (frequency - FREQUENCY_SCALE) / (frequency + FREQUENCY_SCALE)

    plus = lagrange_extrapolate([t(x) for x, _ in history], [f.plus for _, f in history], t(nu))
    return FirstOrderOrbitals(first.multipole, 1j * nu, True, plus, plus.conj())


# --------------------------------------------------------------------------------------------
# Object shell: per-system caches and the pair loop


@dataclass(frozen=True)
class _Rules:
    """Base and companion rules and the companion's nodes (where alpha is solved; they hold the base's)."""

    base_points: int
    nodes: np.ndarray
    base: tuple[np.ndarray, np.ndarray]  # (indices into nodes, weights)
    companion: tuple[np.ndarray, np.ndarray]

    @classmethod
    def make(cls, points: int) -> "_Rules":
        # The companion is the Kronrod extension of the base Gauss rule: its 2n + 1 nodes hold the
        # base's n, so the error estimate costs no solves of its own.
        t, kronrod_weights, gauss = gauss_kronrod_legendre(points)
        nodes, weights = _mapped(t, kronrod_weights, FREQUENCY_SCALE)
        base_nodes, base_weights = imaginary_frequency_rule(points)
        if not np.array_equal(nodes[gauss], base_nodes):  # the same floats by construction
            raise RuntimeError("the Gauss nodes of the Kronrod rule moved")
        return cls(points, nodes, (gauss, base_weights), (np.arange(nodes.size), weights))


@dataclass(frozen=True)
class _SystemResponse:
    name: str
    alpha: np.ndarray  # shape (3, companion nodes + 1): alpha_L(i w) then alpha_L(0); NaN rows for failed multipoles


def _check_options(points: int) -> None:
    low, high = QUADRATURE_RANGE
    if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not low <= points <= high:
        raise InputError(f"dispersion.quadrature_points: {points!r} is not an integer in {low}..{high}")


def _response_task(
    state: GroundState, multipole: int, nodes: np.ndarray, progress: Callable[[int], None] | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> tuple[np.ndarray | None, str | None]:
    """alpha_L at ``nodes`` followed by alpha_L(0), or None and the failure ("ErrorType: message");
    bugs propagate."""
    try:
        return imaginary_polarizabilities(state, nodes, (multipole,), progress, tolerances, static=True)[0], None
    except _RESPONSE_FAILURES as err:
        return None, f"{type(err).__name__}: {err}"


def _submit_systems(
    states: Sequence[GroundState], rules: _Rules, map_tasks: TaskMap | None, advance: Callable[[int], None],
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> Callable[[], tuple[list[_SystemResponse], list[str]]]:
    """Hand alpha_L on the companion's nodes for each state to ``map_tasks``; return the collector.

    The collector gives the responses and the notes; failures become NaN rows and notes.  With
    ``map_tasks`` the (system, multipole) tasks go to it, the costliest first (a process pool
    starts them at once, so the caller may do other work before collecting); each task is the
    same computation as in the serial loop, so the numbers are bit-identical (one BLAS thread
    everywhere).  Without it the work is done when the collector is called.
    """
    alphas = [np.full((len(MULTIPOLES), rules.nodes.size + 1), np.nan) for _ in states]
    tasks = [(k, i) for k, state in enumerate(states) if state.converged for i in range(len(MULTIPOLES))]
    failures: dict[tuple[int, int], str] = {}

    def store(task: tuple[int, int], result: tuple[np.ndarray | None, str | None]) -> None:
        values, failure = result
        if failure is None:
            alphas[task[0]][task[1]] = values
        else:
            failures[task] = failure

    if map_tasks is None or len(tasks) < 2:
        def solve() -> None:
            for task in tasks:
                done = [0]

                def step(count: int) -> None:
                    done[0] += count
                    advance(count)

                store(task, _response_task(states[task[0]], MULTIPOLES[task[1]], rules.nodes, step, tolerances))
                advance(rules.nodes.size - done[0])  # the nodes a failed solve skipped
    else:
        # Cost of a solve ~ grid points^2 x subshells, and it grows with the multipole (more channels):
        # the costliest first, so that the last tasks to start are the short ones (measured on
        # two workers, a Rn deck's dispersion 5.2 -> 4.9 s against the multipoles in ascending order).
        ordered = sorted(tasks, key=lambda t: (-states[t[0]].grid_points ** 2 * len(states[t[0]].orbitals), -t[1]))
        arguments = [(states[k], MULTIPOLES[i], rules.nodes, None, tolerances) for k, i in ordered]
        results = map_tasks(_response_task, arguments)

        def solve() -> None:
            for task, result in zip(ordered, results):
                store(task, result)
                advance(rules.nodes.size)

    def collect() -> tuple[list[_SystemResponse], list[str]]:
        advance(sum(len(MULTIPOLES) * rules.nodes.size for state in states if not state.converged))
        solve()
        notes = []
        for k, state in enumerate(states):
            name = state.system.name
            if not state.converged:
                notes.append(f"dispersion: {name}: skipped; its ground state did not converge")
            for i, multipole in enumerate(MULTIPOLES):
                if (k, i) in failures:
                    notes.append(f"dispersion: {name}: the L={multipole} response failed ({failures[k, i]});"
                                 f" its pairs get NaN coefficients")
        return [_SystemResponse(state.system.name, alpha) for state, alpha in zip(states, alphas)], notes

    return collect


def _pair(a: _SystemResponse, b: _SystemResponse, rules: _Rules, notes: list[str]) -> DispersionCoefficients:
    (base_index, base_weights), (report_index, report_weights) = rules.base, rules.companion
    base = casimir_polder_coefficients(base_weights, a.alpha[:, base_index], b.alpha[:, base_index])
    values = casimir_polder_coefficients(report_weights, a.alpha[:, report_index], b.alpha[:, report_index])
    errors = tuple(max(abs(q - v), ERROR_FLOOR * abs(v)) for q, v in zip(base, values))
    finite = all(math.isfinite(v) for v in values)
    inaccurate = [f"{name} {error / abs(value):.1e}" for name, value, error in zip(_COEFFICIENT_NAMES, values, errors)
                  if math.isfinite(value) and not error <= RELATIVE_ERROR_GOAL * abs(value)]
    if inaccurate:
        notes.append(
            f"dispersion: {a.name}-{b.name}: quadrature error estimate above the goal of"
            f" {RELATIVE_ERROR_GOAL:.0e} relative ({', '.join(inaccurate)});"
            f" increase dispersion.quadrature_points (now {rules.base_points})"
        )
    return DispersionCoefficients((a.name, b.name), *values, *errors, converged=finite and not inaccurate)


def _table(response: _SystemResponse, rules: _Rules) -> ImaginaryFrequencyTable:
    index, weights = rules.companion
    alpha = response.alpha[:, index]
    return ImaginaryFrequencyTable(
        system=response.name,
        frequencies=tuple(float(x) for x in rules.nodes[index]),
        weights=tuple(float(x) for x in weights),
        dipole=tuple(float(x) for x in alpha[0]),
        quadrupole=tuple(float(x) for x in alpha[1]),
        octupole=tuple(float(x) for x in alpha[2]),
        converged=bool(np.all(np.isfinite(alpha))),
        static_dipole=float(response.alpha[0, -1]),
        static_quadrupole=float(response.alpha[1, -1]),
        static_octupole=float(response.alpha[2, -1]),
    )


def _run(
    states: Sequence[GroundState],
    pairs: Sequence[tuple[int, int]],
    points: int,
    progress: Progress | None,
    map_tasks: TaskMap | None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> DispersionResults:
    """Solve each distinct state (by identity) once, then sum every pair of indices into ``states``."""
    return _start(states, pairs, points, progress, map_tasks, tolerances)()


def _start(
    states: Sequence[GroundState],
    pairs: Sequence[tuple[int, int]],
    points: int,
    progress: Progress | None,
    map_tasks: TaskMap | None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> Callable[[], DispersionResults]:
    """:func:`_run` in two steps: hand the responses to ``map_tasks`` now, sum the pairs when called."""
    _check_options(points)
    rules = _Rules.make(points)
    position: dict[int, int] = {}  # id(state) -> index into `unique`
    unique: list[GroundState] = []
    for state in states:
        if id(state) not in position:
            position[id(state)] = len(unique)
            unique.append(state)
    total = len(unique) * len(MULTIPOLES) * rules.nodes.size
    done = [0]

    def advance(count: int) -> None:
        if count:
            done[0] += count
            if progress is not None:
                progress(done[0], total)

    collect = _submit_systems(unique, rules, map_tasks, advance, tolerances)

    def finish() -> DispersionResults:
        responses, notes = collect()
        by_index = [responses[position[id(state)]] for state in states]
        rows = [_pair(by_index[i], by_index[j], rules, notes) for i, j in pairs]
        for note in notes:
            warnings.warn(note, RuntimeWarning, stacklevel=4)
        return DispersionResults(tuple(rows), tuple(notes), tuple(_table(r, rules) for r in responses))

    return finish


# --------------------------------------------------------------------------------------------
# Public entry points


def compute_dispersion(
    ground_state: GroundState,
    partners: tuple[GroundState, ...],
    quadrature_points: int = DEFAULT_QUADRATURE_POINTS,
    *,
    progress: Progress | None = None,
    map_tasks: TaskMap | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> DispersionResults:
    """C6, C8, C10 of ``ground_state`` with each partner.

    Parameters
    ----------
    ground_state : GroundState
        The deck's atom (A of every pair).
    partners : tuple of GroundState
        B of each pair, in order; passing ``ground_state`` itself gives the like pair.
    quadrature_points : int
        Base rule size n in QUADRATURE_RANGE; the reported values use its 2n + 1-node Kronrod extension.
    progress : callable, optional
        ``progress(done, total)`` counted in frequency solves: after each solve (serial) or
        each finished (system, multipole) block (with ``map_tasks``).
    map_tasks : callable, optional
        Where the (system, multipole) responses run (:mod:`tdhf.execution`); by default here, one
        after the other.  Same numbers either way.

    Returns
    -------
    DispersionResults
        ``coefficients[k]`` is the pair (atom, partners[k]); one table per distinct system,
        the atom first.  Failures follow the module's non-convergence policy.

    Raises
    ------
    InputError
        If ``quadrature_points`` is not an integer in QUADRATURE_RANGE.
    """
    states = (ground_state, *partners)
    return _run(states, partner_pairs(len(states)), quadrature_points, progress, map_tasks, tolerances)


def dispersion_table(
    ground_states: Sequence[GroundState],
    quadrature_points: int = DEFAULT_QUADRATURE_POINTS,
    progress: Progress | None = None,
    *,
    map_tasks: TaskMap | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> DispersionResults:
    """C6, C8, C10 of every unordered pair of a series, like pairs included.

    Rows (i, j) for i <= j in row-major order: (0, 0), (0, 1), ..., (1, 1), ...; n(n+1)/2 rows.
    Each system's response is solved once.  Parameters, returns and errors as
    :func:`compute_dispersion`.
    """
    return _run(tuple(ground_states), table_pairs(len(ground_states)), quadrature_points, progress, map_tasks,
                tolerances)


def partner_pairs(count: int) -> list[tuple[int, int]]:
    """The pairs of :func:`compute_dispersion`: system 0 with each of the other ``count - 1``."""
    return [(0, k) for k in range(1, count)]


def table_pairs(count: int) -> list[tuple[int, int]]:
    """The pairs of :func:`dispersion_table`: (i, j) for i <= j, row-major, n(n+1)/2 of them."""
    return [(i, j) for i in range(count) for j in range(i, count)]


def dispersion_pairs(
    ground_states: Sequence[GroundState],
    pairs: Sequence[tuple[int, int]],
    quadrature_points: int = DEFAULT_QUADRATURE_POINTS,
    progress: Progress | None = None,
    *,
    map_tasks: TaskMap | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> DispersionResults:
    """C6, C8, C10 of the given pairs (i, j) of indices into ``ground_states``, in that order.

    Each system's response is solved once however many pairs it is in.  Parameters, returns and
    errors as :func:`compute_dispersion`; an index outside ``ground_states`` is an InputError.
    """
    return start_dispersion(ground_states, pairs, quadrature_points, progress, map_tasks=map_tasks,
                            tolerances=tolerances)()


def start_dispersion(
    ground_states: Sequence[GroundState],
    pairs: Sequence[tuple[int, int]],
    quadrature_points: int = DEFAULT_QUADRATURE_POINTS,
    progress: Progress | None = None,
    *,
    map_tasks: TaskMap | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> Callable[[], DispersionResults]:
    """:func:`dispersion_pairs` in two steps, for a caller with other work to hand to the same task map.

    Returns at once after handing the responses to ``map_tasks`` (a process pool starts them
    then); calling the returned function waits for them and gives the results.  Without a task
    map the responses are solved when it is called.  Same numbers as :func:`dispersion_pairs`.
    """
    n = len(ground_states)
    for number, (i, j) in enumerate(pairs):
        if not (0 <= i < n and 0 <= j < n):
            raise InputError(f"dispersion.pairs[{number}]: ({i}, {j}) is not a pair of the {n} systems")
    return _start(tuple(ground_states), list(pairs), quadrature_points, progress, map_tasks, tolerances)
