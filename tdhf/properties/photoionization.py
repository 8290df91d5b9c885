r"""Photoionization above the first threshold: TDHF (RPA) cross sections, partial cross sections,
autoionizing resonances, and the dipole sum rules over the whole spectrum.

Conventions (atomic units: hartree, bohr; cross sections in bohr^2)
-------------------------------------------------------------------
* Total cross section, length form: :math:`\sigma(\omega) = (4\pi\omega/c)\,\mathrm{Im}\,\alpha_1(\omega)`
  with the outgoing-wave :math:`\alpha_1` of :mod:`tdhf.response.continuum` and c = 1/fine-structure
  constant (:data:`scipy.constants.fine_structure`); hydrogen at threshold: :math:`2^9\pi^2 e^{-4}/(3c)`
  = 0.2251 bohr^2 = 6.30 Mb.
* Velocity form: :math:`\alpha_V(\omega) = (R(\omega) - R(0))/\omega^2` from the right-hand sides
  :math:`-\partial_z\phi_a` (see :meth:`tdhf.response.solver.ResponseSolver.velocity_polarizability`), so
  :math:`\sigma_V = (4\pi/(c\,\omega))\,\mathrm{Im}\,R(\omega)`; equal to the length form in RPA.
* Uncoupled: the same with no induced Coulomb and exchange terms, i.e. the V^N continuum of the
  ground-state Fock operator (the photoelectron sees the neutral atom, no hole attraction).
* Oscillator-strength density :math:`df/d\omega = c\,\sigma/(2\pi^2)` per hartree; it continues the
  bound lines f_n (:mod:`tdhf.properties.spectrum`) across the threshold.
* Partial cross section of subshell a: the outgoing flux into its channels a -> l'.  For any
  real radius X beyond the occupied orbitals the weighted channel currents add up exactly to
  Im alpha (:meth:`ContinuumSolver.channel_flux`); long-range multipole couplings between channels
  of different holes still exchange flux as :math:`\cos(\Delta k X)/X^2`, so the flux is averaged
  with the window :math:`\sin^2(\pi (X - R_i)/(R_0 - R_i))` over the element boundaries of the real
  region [R_i, R_0] (60 bohr by default: within ~1e-5 of the X -> infinity limit for Ar, measured
  against X up to 300 bohr).  Only subshells whose threshold lies below the photon energy are
  listed; a closed channel's transient flux at finite X is left out, so the listed partial
  cross sections add up to the total up to that (small) remainder.
* Thresholds: :math:`I_a = -\varepsilon_a` (Koopmans), where channel a opens in TDHF.
* Resonances: complex poles :math:`E - i\Gamma/2` of :math:`\alpha_1(\omega)` continued below the real
  axis (exterior complex scaling exposes the second sheet); ``width`` is the full width Gamma.

Sum rules over the whole spectrum
---------------------------------
:math:`S(k) = \sum_n f_n\omega_n^k + \int_{I_1}^\infty \frac{df}{d\omega}\omega^k d\omega
= \frac{2}{\pi}\int_0^\infty \omega^{k+1}\,\mathrm{Im}\,\alpha_1(\omega + i0)\,d\omega`, and the
Kramers–Kronig relation :math:`\alpha(i\nu) = \frac{2}{\pi}\int_0^\infty
\frac{\omega\,\mathrm{Im}\,\alpha(\omega)}{\omega^2+\nu^2}d\omega`.  Both are
:math:`\frac{2}{\pi}\mathrm{Im}\int\alpha(\omega)\,\omega\,g(\omega)\,d\omega` with g real on the real
axis and analytic in the upper half plane, where :math:`\alpha` is analytic too, so by Cauchy's
theorem the real-axis integral may be taken along any path in the upper half plane with the same
end points.  It is split into

* **bound**: the bound lines below I_1, as the integral along a half-ellipse to I_1 from half the
  lowest bare excitation (below the first RPA one) (an infinite Rydberg series accumulates at I_1 and cannot be summed
  line by line; approached off the real axis its contribution is smooth);
* **continuum**: the real axis from I_1 up to :math:`\Omega_c` (the actual cross sections), with a
  semicircular detour over each inner threshold and the autoionizing Rydberg series below it;
* **remainder**: everything above :math:`\Omega_c` (all inner shells), along the vertical line
  :math:`\Omega_c + iy`; there :math:`-N/\omega^2`, the exact high-frequency limit (real on the real
  axis, so it adds nothing to the real-axis integral), is subtracted from :math:`\alpha` so that the
  arc at infinity vanishes.

References: S(0) = N (Thomas–Reiche–Kuhn, exact in RPA), S(-2) = alpha(0), S(-1) =
:math:`(2/\pi)\int_0^\infty\alpha(i\nu)d\nu`, each from direct solves at zero and imaginary
frequency.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from dataclasses import replace as dataclasses_replace
from typing import Sequence

import numpy as np
from scipy.constants import fine_structure

from tdhf.errors import InputError
from tdhf.ground_state import GroundState
from tdhf.numerics.tasks import TaskMap
from tdhf.properties.photoionization_rows import (  # the result types live in a light module
    CROSS_SECTION_CONVENTION,
    PhotoionizationSection,
    PartialCrossSection,
    PhotoionizationPoint,
    Resonance,
    Threshold,
    SpectralSumRule,
    KramersKronigCheck,
    ContinuumGrid,
    ContinuumSummary,
    PhotoionizationResults,
    ContinuumPolarizability,
)
from tdhf.numerics.threads import single_blas_thread
from tdhf.properties.dispersion import imaginary_frequency_rule
from tdhf.radial.exterior_scaling import ContinuumGridSettings, continuum_boundaries
from tdhf.response.continuum import INNER_DECAY, ContinuumSolver, OutgoingWaveOrbitals, build_continuum_solver

__all__ = [
    "PhotoionizationSection",
    "PartialCrossSection",
    "PhotoionizationPoint",
    "Resonance",
    "Threshold",
    "SpectralSumRule",
    "KramersKronigCheck",
    "ContinuumGrid",
    "ContinuumSummary",
    "PhotoionizationResults",
    "ContinuumPolarizability",
    "compute_photoionization",
    "continuum_polarizabilities",
    "continuum_grid_points",
    "largest_energy_that_fits",
    "frequencies_that_fit",
    "MAX_CONTINUUM_POINTS",
    "continuum_polarizability",
    "SPEED_OF_LIGHT",
    "CROSS_SECTION_CONVENTION",
]

#: c in atomic units (1/alpha): the physics constant of sigma = 4 pi omega Im alpha / c.
SPEED_OF_LIGHT = 1.0 / fine_structure


#: Relative residual above which a coupled solve counts as not converged (as for the bound response).
COUPLING_RESIDUAL = 1e-8
#: A photon energy must exceed the first threshold by this relative margin (k = 0 is not a solve).
THRESHOLD_MARGIN = 1e-9


# --------------------------------------------------------------------------------------------
# Building blocks


def thresholds(ground_state: GroundState) -> tuple[Threshold, ...]:
    """Subshell thresholds -epsilon_a, lowest first."""
    rows = [Threshold(o.label, -float(o.energy)) for o in ground_state.orbitals]
    return tuple(sorted(rows, key=lambda row: row.energy))


def _momenta(energies: Sequence[float], threshold_energies: Sequence[float]) -> tuple[float, float]:
    """Largest and smallest photoelectron momentum over the open channels (bohr^-1)."""
    largest, smallest = 0.0, math.inf
    for omega in energies:
        for threshold in threshold_energies:
            if omega > threshold:
                k = math.sqrt(2.0 * (omega - threshold))
                largest, smallest = max(largest, k), min(smallest, k)
    return largest, smallest


class _Photoionization:
    """One continuum solver with the pieces every photon energy needs."""

    def __init__(self, solver: ContinuumSolver, ground_state: GroundState, labels: Sequence[str]) -> None:
        self.solver = solver
        self.labels = tuple(labels)
        self.hole_energies = -np.asarray(solver.inner.orbital_energies)
        self.length = solver.inner.perturbation()
        self.velocity = solver.velocity_perturbation()
        self.channel_shells = np.array([c.shell for c in solver.channels])
        self.electrons = float(solver.inner.shells.occupations.sum())
        grid = solver.grid
        boundaries = grid.boundaries[(grid.boundaries >= solver.inner_radius) & (grid.boundaries <= grid.scaling_radius)]
        self.flux_nodes = [grid.node_at(b) for b in boundaries]
        span = grid.scaling_radius - solver.inner_radius
        window = np.sin(np.pi * (boundaries - solver.inner_radius) / span) ** 2 if span > 0 else np.ones(1)
        self.flux_weights = window / window.sum()

    def point(self, omega: float) -> tuple[PhotoionizationPoint, complex]:
        solver = self.solver
        length, velocity = solver.solve_together(
            omega, ((self.length, self.length), (self.velocity, -self.velocity)))
        uncoupled = solver.solve(omega, coupled=False)
        alpha = solver.polarizability(length)
        factor = 4.0 * np.pi * omega / SPEED_OF_LIGHT
        sigma = factor * alpha.imag
        sigma_velocity = factor * solver.response(velocity, self.velocity, -1).imag / omega**2
        flux = sum(w * solver.channel_flux(length, node) for w, node in zip(self.flux_weights, self.flux_nodes))
        per_shell = np.bincount(self.channel_shells, weights=flux, minlength=len(self.labels))
        partial = tuple(
            PartialCrossSection(self.labels[a], float(factor * per_shell[a]))
            for a in np.argsort(self.hole_energies) if self.hole_energies[a] < omega
        )
        residual = max(length.residual, velocity.residual)
        row = PhotoionizationPoint(
            photon_energy=float(omega),
            cross_section=float(sigma),
            cross_section_velocity=float(sigma_velocity),
            cross_section_uncoupled=float(factor * solver.polarizability(uncoupled).imag),
            partial=partial,
            oscillator_strength_density=float(SPEED_OF_LIGHT * sigma / (2.0 * np.pi**2)),
            polarizability=float(alpha.real),
            polarizability_imaginary_part=float(alpha.imag),
            converged=bool(residual <= COUPLING_RESIDUAL and np.isfinite(sigma) and np.isfinite(sigma_velocity)),
            krylov_iterations=length.krylov_iterations,
            residual=float(residual),
        )
        return row, alpha

    def alpha(self, frequency: complex, max_cycles: int | None = None) -> tuple[complex, OutgoingWaveOrbitals]:
        solution = (self.solver.solve(frequency) if max_cycles is None
                    else self.solver.solve(frequency, max_cycles=max_cycles))
        return self.solver.polarizability(solution), solution


@single_blas_thread
def _points_task(state: _Photoionization, energies: Sequence[float]) -> list[tuple[PhotoionizationPoint, complex]]:
    return [state.point(omega) for omega in energies]


@single_blas_thread
def _alphas_task(state: _Photoionization, frequencies: Sequence[complex]) -> list[tuple[complex, float]]:
    return [(value, solution.residual) for value, solution in map(state.alpha, frequencies)]


#: Shares a batch of photon energies is cut into for a task map (each carries the solver once).
TASK_SHARES = 8


class _Evaluator:
    """Maps photon energies to rows and frequencies to alpha, here or through a task map.

    With ``map_tasks`` (:mod:`tdhf.numerics.tasks`; pools come from :mod:`tdhf.execution`) a
    batch is cut into interleaved shares that cost alike, each a task carrying the solver; the
    numbers are those of the serial loop (the same computation, one BLAS thread everywhere).
    """

    def __init__(self, state: _Photoionization, map_tasks: TaskMap | None) -> None:
        self.state = state
        self.map_tasks = map_tasks

    def _map(self, task, items: Sequence) -> list:
        if self.map_tasks is None or len(items) < 2:
            return task(self.state, items)
        count = min(TASK_SHARES, len(items))
        shares = [list(items[i::count]) for i in range(count)]
        out = [None] * len(items)
        for i, result in enumerate(self.map_tasks(task, [(self.state, share) for share in shares])):
            out[i::count] = result
        return out

    def points(self, energies: Sequence[float]) -> list[tuple[PhotoionizationPoint, complex]]:
        return self._map(_points_task, [float(omega) for omega in energies])

    def alphas(self, frequencies: Sequence[complex]) -> list[tuple[complex, float]]:
        return self._map(_alphas_task, list(frequencies))


# --------------------------------------------------------------------------------------------
# Sum rules over the whole spectrum (module docstring)

#: Gauss–Legendre points of the bound half-ellipse, of each real-axis panel and of each detour.
#: With these and REMAINDER_POINTS the sums close to ~1e-9 (He to Kr); 1.5x the points, ~1e-10.
BOUND_POINTS = 24
PANEL_POINTS = 8
DETOUR_POINTS = 16
#: Largest width of a real-axis panel, hartree.
PANEL_WIDTH = 0.25
#: Points of the vertical line above Omega_c and of the imaginary-axis integral for S(-1).
REMAINDER_POINTS = 40
#: Kramers–Kronig checks at nu = these multiples of the first threshold.
KRAMERS_KRONIG_MULTIPLES = (0.5, 1.0, 2.0)
#: The detour below an inner threshold I_b starts this factor times the binding of the lowest
#: bare resonance of hole b (the lowest eigenvalue of its channel operator with the hole potential)
#: below I_b: room for the shift the RPA coupling gives the resonances.
DETOUR_MARGIN = 1.3


@dataclass(frozen=True)
class _Contour:
    """Quadrature nodes and weights (d omega, complex) of the three parts of the path."""

    nodes: np.ndarray
    weights: np.ndarray
    parts: np.ndarray  # 0 bound, 1 continuum (real axis and detours), 2 remainder (vertical line)
    end: float  # Omega_c


def _gauss(points: int) -> tuple[np.ndarray, np.ndarray]:
    return np.polynomial.legendre.leggauss(points)


def _half_ellipse(left: float, right: float, height: float, points: int) -> tuple[np.ndarray, np.ndarray]:
    """omega(phi) = c - A cos(phi) + i H sin(phi), phi in (0, pi): from ``left`` to ``right`` above the axis."""
    x, w = _gauss(points)
    phi = 0.5 * np.pi * (x + 1.0)
    centre, axis = 0.5 * (left + right), 0.5 * (right - left)
    nodes = centre - axis * np.cos(phi) + 1j * height * np.sin(phi)
    weights = 0.5 * np.pi * w * (axis * np.sin(phi) + 1j * height * np.cos(phi))
    return nodes, weights


def _real_panels(left: float, right: float) -> tuple[np.ndarray, np.ndarray]:
    count = max(1, int(math.ceil((right - left) / PANEL_WIDTH)))
    x, w = _gauss(PANEL_POINTS)
    edges = np.linspace(left, right, count + 1)
    nodes = [0.5 * (a + b) + 0.5 * (b - a) * x for a, b in zip(edges[:-1], edges[1:])]
    weights = [0.5 * (b - a) * w for a, b in zip(edges[:-1], edges[1:])]
    return np.concatenate(nodes).astype(complex), np.concatenate(weights).astype(complex)


def _detours(solver: ContinuumSolver, first: float, inner_thresholds: Sequence[float], end: float) -> list[tuple[float, float]]:
    """Intervals [I_b - Delta_b, I_b + delta_b] of the inner thresholds below ``end``, merged."""
    energies = solver.channel_energies(True)
    holes = -np.asarray(solver.inner.orbital_energies)
    intervals = []
    ordered = sorted(set(float(t) for t in inner_thresholds))
    for i, threshold in enumerate(ordered):
        if threshold >= end:
            break
        lowest = min(float(values[0]) for values, c in zip(energies, solver.channels)
                     if abs(holes[c.shell] - threshold) <= 1e-9 * threshold)
        depth = DETOUR_MARGIN * max(-lowest, 0.02)
        following = ordered[i + 1] if i + 1 < len(ordered) else math.inf
        left = max(first + 0.05 * (threshold - first), threshold - depth)
        right = threshold + min(0.1 * depth, 0.25 * (following - threshold))
        if intervals and left <= intervals[-1][1]:
            intervals[-1] = (intervals[-1][0], right)
        else:
            intervals.append((left, right))
    return intervals


def _sum_rule_contour(solver: ContinuumSolver, threshold_energies: Sequence[float]) -> _Contour:
    first = float(min(threshold_energies))
    height = 0.5 * min(KRAMERS_KRONIG_MULTIPLES) * first
    # The path must leave the real axis below the first excitation.  The bare excitations (the
    # photoelectron bound by the hole potential, without the induced terms) lie below the RPA
    # singlet ones, whose exchange term raises them: start at half the lowest of them.
    holes = -np.asarray(solver.inner.orbital_energies)
    bare = min(float(values[0]) + holes[c.shell] for values, c in zip(solver.channel_energies(True), solver.channels))
    start = 0.5 * min(first, bare) if bare > 0.0 else 0.5 * first
    pieces = [(*_half_ellipse(start, first, min(0.5 * (first - start), height), BOUND_POINTS), 0)]
    end = max(3.0 * first, first + 1.0)
    inner = [t for t in threshold_energies if t > first * (1.0 + 1e-12)]
    detours = _detours(solver, first, inner, end)
    for left, right in detours:  # an end inside a detour moves to the detour's end
        if left < end < right:
            end = right + 0.5 * PANEL_WIDTH
    start = first
    for left, right in [d for d in detours if d[1] < end]:
        pieces.append((*_real_panels(start, left), 1))
        pieces.append((*_half_ellipse(left, right, min(0.5 * (right - left), height), DETOUR_POINTS), 1))
        start = right
    pieces.append((*_real_panels(start, end), 1))
    y, w = imaginary_frequency_rule(REMAINDER_POINTS, _frequency_scale(threshold_energies))
    pieces.append((end + 1j * y, 1j * w, 2))
    return _Contour(
        nodes=np.concatenate([p[0] for p in pieces]),
        weights=np.concatenate([p[1] for p in pieces]),
        parts=np.concatenate([np.full(p[0].size, p[2]) for p in pieces]),
        end=end,
    )


def _frequency_scale(threshold_energies: Sequence[float]) -> float:
    """Scale of the (1+t)/(1-t) map for integrals out to infinity: the geometric mean of the
    lowest and highest thresholds, which centres the nodes on the spread of the spectrum."""
    return float(np.sqrt(min(threshold_energies) * max(threshold_energies)))


def _spectral_integrals(contour: _Contour, alpha: np.ndarray, electrons: float, g) -> tuple[float, float, float]:
    """(2/pi) Im of the integral of alpha omega g(omega) over each part of the contour."""
    nodes, weights = contour.nodes, contour.weights
    values = np.where(contour.parts == 2, alpha + electrons / nodes**2, alpha) * nodes * g(nodes) * weights
    return tuple(float(2.0 / np.pi * values[contour.parts == part].sum().imag) for part in (0, 1, 2))


def _sum_rules(evaluator: _Evaluator, threshold_energies: Sequence[float], notes: list[str], ground_converged: bool):
    state = evaluator.state
    contour = _sum_rule_contour(state.solver, threshold_energies)
    first = float(min(threshold_energies))
    nu_nodes, nu_weights = imaginary_frequency_rule(REMAINDER_POINTS, _frequency_scale(threshold_energies))
    checks_at = [1j * multiple * first for multiple in KRAMERS_KRONIG_MULTIPLES]
    values = evaluator.alphas([complex(w) for w in contour.nodes] + [1j * nu for nu in nu_nodes] + [0.0] + checks_at)
    worst = max(residual for _, residual in values)
    converged = bool(ground_converged and worst <= COUPLING_RESIDUAL)
    values = np.array([value for value, _ in values])
    alpha, on_axis = values[: contour.nodes.size], values[contour.nodes.size: -1 - len(checks_at)].real
    static, direct_checks = values[-1 - len(checks_at)].real, values[-len(checks_at):].real
    exact = {0: state.electrons, -1: float(2.0 / np.pi * nu_weights @ on_axis), -2: static}
    rules = []
    for k in (0, -1, -2):
        bound, continuum, remainder = _spectral_integrals(contour, alpha, state.electrons, lambda w, k=k: w**k)
        total = bound + continuum + remainder
        rules.append(SpectralSumRule(k, bound, continuum, remainder, total, exact[k],
                                     abs(total - exact[k]) / abs(exact[k]), converged))
    checks = []
    for multiple, direct in zip(KRAMERS_KRONIG_MULTIPLES, direct_checks):
        nu = multiple * first
        rebuilt = sum(_spectral_integrals(contour, alpha, state.electrons, lambda w, nu=nu: 1.0 / (w**2 + nu**2)))
        checks.append(KramersKronigCheck(nu, rebuilt, float(direct), abs(rebuilt - direct) / abs(direct), converged))
    if worst > COUPLING_RESIDUAL:
        notes.append(f"photoionization.sum_rules: a coupled solve on the sum-rule path stopped at residual {worst:.1e};"
                     " the sums are not converged")
    return tuple(rules), tuple(checks)


# --------------------------------------------------------------------------------------------
# Adaptive photon-energy grid and resonances

#: Initial points of an adaptive range (spread over its segments between thresholds).
RANGE_POINTS = 40
#: Refine an interval while two quadratic interpolants disagree at its midpoint by more than this
#: fraction of the local cross section (floored at 1e-3 of the largest one in the range).
RANGE_TOLERANCE = 1e-2
#: Most points of an adaptive range; the smallest interval, relative to the range.
RANGE_MAX_POINTS = 400
RANGE_MIN_SPACING = 1e-4
#: Secant steps of a resonance pole; it has settled when a step is below POLE_TOLERANCE times the
#: half width.  Next to the pole the coupled equations are nearly singular and round-off caps
#: the reachable residual, so those solves stop after POLE_CYCLES restart cycles.
POLE_STEPS = 30
POLE_TOLERANCE = 1e-6
POLE_CYCLES = 2


def _segments(low: float, high: float, threshold_energies: Sequence[float]) -> list[tuple[float, float]]:
    """[low, high] cut at the thresholds inside it (a threshold is a kink of sigma)."""
    cuts = sorted(t for t in set(threshold_energies) if low < t < high)
    edges = [low] + [x for t in cuts for x in (t * (1.0 - 1e-7), t * (1.0 + 1e-7))] + [high]
    return [(a, b) for a, b in zip(edges[::2], edges[1::2])]


def _disagreement(x: np.ndarray, y: np.ndarray, i: int) -> float:
    """|left quadratic - right quadratic| at the midpoint of [x_i, x_i+1] (linear where a side is missing)."""
    middle = 0.5 * (x[i] + x[i + 1])
    estimates = []
    for j in (i - 1, i):
        if 0 <= j and j + 2 < x.size:
            estimates.append(np.polyval(np.polyfit(x[j:j + 3] - middle, y[j:j + 3], 2), 0.0))
    if len(estimates) == 1:
        estimates.append(0.5 * (y[i] + y[i + 1]))
    return abs(estimates[0] - estimates[1]) if len(estimates) == 2 else 0.0


def _adaptive_range(evaluator: _Evaluator, low: float, high: float, threshold_energies: Sequence[float]):
    """Rows on a grid refined where sigma changes fast; returns {omega: (row, alpha)}."""
    segments = _segments(low, high, threshold_energies)
    total = sum(b - a for a, b in segments)
    start = [float(w) for a, b in segments for w in np.linspace(a, b, max(3, int(round(RANGE_POINTS * (b - a) / total))))]
    samples: dict[float, tuple[PhotoionizationPoint, complex]] = dict(zip(start, evaluator.points(start)))
    spacing = RANGE_MIN_SPACING * (high - low)
    while len(samples) < RANGE_MAX_POINTS:
        largest = max(abs(row.cross_section) for row, _ in samples.values())
        new = []
        for a, b in segments:
            x = np.array(sorted(w for w in samples if a <= w <= b))
            y = np.array([samples[w][0].cross_section for w in x])
            for i in range(x.size - 1):
                scale = max(abs(y[i]), abs(y[i + 1]), 1e-3 * largest)
                if x[i + 1] - x[i] > spacing and _disagreement(x, y, i) > RANGE_TOLERANCE * scale:
                    new.append(0.5 * (x[i] + x[i + 1]))
        if not new:
            break
        new = [float(omega) for omega in new[: RANGE_MAX_POINTS - len(samples)]]
        samples.update(zip(new, evaluator.points(new)))
    return samples


def _pade_pole(omegas: np.ndarray, alphas: np.ndarray) -> complex | None:
    """Pole p of the [2/1] fit alpha (omega - p) = c0 + c1 omega + c2 omega^2 (least squares)."""
    centre = float(omegas.mean())
    x = omegas - centre
    design = np.column_stack([np.ones_like(x), x, x**2, alphas]).astype(complex)
    solution, *_ = np.linalg.lstsq(design, alphas * x, rcond=None)
    pole = complex(solution[3])
    return centre + pole if np.isfinite(pole) else None


def _refine_resonance(state: _Photoionization, guess: complex) -> complex | None:
    """Secant on 1/alpha in the complex plane (below the real axis: ECS exposes the second sheet)."""
    step = 0.05 * max(abs(guess.imag), 1e-6)

    def inverse(x: complex) -> complex:
        return 1.0 / state.alpha(x, POLE_CYCLES)[0]

    x0, x1 = guess, guess + step
    g0, g1 = inverse(x0), inverse(x1)
    for _ in range(POLE_STEPS):
        if g1 == g0:
            return None
        x2 = x1 - g1 * (x1 - x0) / (g1 - g0)
        if not np.isfinite(x2) or abs(x2 - guess) > 20.0 * max(abs(guess.imag), step):
            return None
        if abs(x2 - x1) <= POLE_TOLERANCE * abs(x2.imag):
            return x2 if x2.imag < 0.0 else None
        x0, g0 = x1, g1
        x1, g1 = x2, inverse(x2)
    return None


def _resonance_subshell(state: _Photoionization, pole: complex) -> str:
    """The hole whose closed channels carry the resonance: the largest weighted rho+ near the pole."""
    _, solution = state.alpha(pole + 1j * 0.1 * abs(pole.imag), POLE_CYCLES)
    inner = solution.plus[:, : state.solver.n_inner]
    weights = np.array([c.weight for c in state.solver.channels]) * np.sum(np.abs(inner) ** 2, axis=1)
    closed = state.hole_energies[state.channel_shells] > pole.real
    weights = np.where(closed, weights, 0.0) if closed.any() else weights
    amount = np.bincount(state.channel_shells, weights=weights, minlength=len(state.labels))
    return state.labels[int(np.argmax(amount))]


def _resonances(state: _Photoionization, samples: dict, low: float, high: float) -> tuple[Resonance, ...]:
    """Poles behind the sharp features of an adaptive range."""
    x = np.array(sorted(samples))
    y = np.array([samples[w][0].cross_section for w in x])
    alpha = np.array([samples[w][1] for w in x])
    typical = (high - low) / RANGE_POINTS
    found: list[complex] = []
    for i in range(1, x.size - 1):
        local = min(x[i] - x[i - 1], x[i + 1] - x[i])
        extremum = (y[i] - y[i - 1]) * (y[i + 1] - y[i]) < 0.0
        if not extremum or local > typical / 8.0:
            continue
        near = np.argsort(np.abs(x - x[i]))[:8]
        guess = _pade_pole(x[near], alpha[near])
        if guess is None or guess.imag >= 0.0 or not low <= guess.real <= high:
            continue
        pole = _refine_resonance(state, guess)
        if pole is None or not low <= pole.real <= high:
            continue
        if all(abs(pole - other) > 1e-3 * abs(pole.imag) + 1e-9 * abs(pole) for other in found):
            found.append(pole)
    return tuple(
        Resonance(float(p.real), float(-2.0 * p.imag), _resonance_subshell(state, p)) for p in sorted(found, key=lambda p: p.real)
    )


# --------------------------------------------------------------------------------------------
# Entry points

#: Smallest photoelectron momentum the scaled region is sized for (the sum-rule path starts at
#: the threshold itself, where the Coulomb tail keeps the waves absorbed), bohr^-1.
SMALLEST_MOMENTUM = 0.02


#: Most points of a continuum grid (memory ~ channels x points^2 per kernel; measured: Rn at 2000 points 0.8 GB
#: for heavy atoms): photon energies that need more are refused, naming the largest that fits.
MAX_CONTINUUM_POINTS = 2000


def continuum_grid_points(ground_state: GroundState, energies: Sequence[float],
                          settings: ContinuumGridSettings = ContinuumGridSettings()) -> int:
    """Points of the scaled grid that photon energies (or frequencies) ``energies`` would need."""
    threshold_energies = [-float(o.energy) for o in ground_state.orbitals]
    largest, smallest = _momenta(energies, threshold_energies)
    boundaries, _, _ = continuum_boundaries(
        settings, ground_state.system.Z, INNER_DECAY / math.sqrt(-2.0 * ground_state.homo_energy),
        max(largest, 1.0), max(min(smallest, SMALLEST_MOMENTUM), 1e-3))
    return (len(boundaries) - 1) * settings.order


def largest_energy_that_fits(ground_state: GroundState, settings: ContinuumGridSettings = ContinuumGridSettings()) -> float:
    """The largest photon energy (hartree) whose continuum grid stays within MAX_CONTINUUM_POINTS (bisection)."""
    low, high = -ground_state.homo_energy * 1.01, 1e6
    for _ in range(60):
        middle = math.sqrt(low * high)
        if continuum_grid_points(ground_state, [middle], settings) <= MAX_CONTINUUM_POINTS:
            low = middle
        else:
            high = middle
    return low


def frequencies_that_fit(ground_state: GroundState, key: str, energies: Sequence[float], settings: ContinuumGridSettings,
             rejected: list[str], indices: Sequence[int] | None = None) -> list[float]:
    """The energies whose grid fits; the others become one-line refusals naming ``key``."""
    kept = []
    for i, omega in zip(indices if indices is not None else range(len(energies)), energies):
        points = continuum_grid_points(ground_state, [omega], settings)
        if points > MAX_CONTINUUM_POINTS:
            rejected.append(f"{key}[{i}]: {omega:g} hartree needs a continuum grid of {points} points (more than"
                            f" {MAX_CONTINUUM_POINTS}); the largest photon energy that fits is"
                            f" {largest_energy_that_fits(ground_state, settings):.4g} hartree")
        else:
            kept.append(omega)
    return kept


def _solver_for(ground_state: GroundState, multipole: int, energies: Sequence[float],
                settings: ContinuumGridSettings, notes: list[str]) -> tuple[ContinuumSolver, ContinuumGrid, bool]:
    """A continuum solver sized for ``energies``, with the grid summary and whether its SCF converged."""
    threshold_energies = [-float(o.energy) for o in ground_state.orbitals]
    largest, smallest = _momenta(energies, threshold_energies)
    solver, scf = build_continuum_solver(
        ground_state.system, ground_state.homo_energy, multipole, max(largest, 1.0),
        max(min(smallest, SMALLEST_MOMENTUM), 1e-3), settings, ground_state.scf_settings,
    )
    difference = scf.total_energy - ground_state.total_energy
    if not scf.converged:
        notes.append(f"photoionization: the ground state on the continuum grid did not converge"
                     f" (orbital change {scf.residual:.1e}); every continuum number is flagged")
    elif abs(difference) > 1e-8 * abs(ground_state.total_energy):
        notes.append(f"photoionization: the ground state on the continuum grid differs by {difference:.1e} hartree"
                     " from the given one; refine [grid] or the continuum grid")
    grid = solver.grid
    info = ContinuumGrid(solver.inner_radius, grid.scaling_radius, grid.angle, grid.r_max, grid.size,
                         solver.n_inner, grid.order, float(largest), float(difference))
    return solver, info, scf.converged


def _accepted(section: PhotoionizationSection, first: float, first_label: str,
              rejected: list[str]) -> tuple[list[float], tuple[float, float] | None]:
    """Photon energies above the first threshold; the others become one-line refusals."""
    where = (f"the first ionization threshold {first:.6f} hartree ({first_label} hole); bound lines"
             " below it are the excitations of [response] (list `excitations`)")
    energies = []
    for i, omega in enumerate(section.photon_energies):
        if omega <= first * (1.0 + THRESHOLD_MARGIN):
            rejected.append(f"photoionization.photon_energies[{i}]: {omega:g} hartree is not above {where}")
        else:
            energies.append(float(omega))
    window = None
    if section.range is not None:
        low, high = section.range
        if high <= first * (1.0 + THRESHOLD_MARGIN):
            rejected.append(f"photoionization.range: [{low:g}, {high:g}] hartree lies below {where}")
        else:
            if low <= first * (1.0 + THRESHOLD_MARGIN):
                rejected.append(f"photoionization.range[0]: {low:g} hartree is not above {where};"
                                " the range is computed from just above the threshold")
                low = first * (1.0 + 1e-4)
            window = (float(low), float(high))
    return energies, window


@single_blas_thread
def compute_photoionization(
    ground_state: GroundState,
    section: PhotoionizationSection,
    settings: ContinuumGridSettings = ContinuumGridSettings(),
    map_tasks: TaskMap | None = None,
) -> PhotoionizationResults:
    """Dipole photoionization of a solved closed-shell atom (module docstring for the conventions).

    Photon energies at or below the first threshold are refused (``rejected``, one line each,
    naming the deck key); the others are computed.  The continuum grid is sized for the largest
    photoelectron momentum requested (and the sum-rule path).  ``map_tasks`` (a task map,
    :mod:`tdhf.execution`) spreads the photon energies (and the sum-rule frequencies) over its
    workers; the numbers are the same either way.
    """
    notes: list[str] = []
    rejected: list[str] = []
    ordered = thresholds(ground_state)
    first = ordered[0]
    energies, window = _accepted(section, first.energy, first.subshell, rejected)
    indices = [i for i, omega in enumerate(section.photon_energies) if omega in energies]
    energies = frequencies_that_fit(ground_state, "photoionization.photon_energies", energies, settings, rejected, indices)
    if window and continuum_grid_points(ground_state, [window[1]], settings) > MAX_CONTINUUM_POINTS:
        rejected.append(f"photoionization.range: the upper end {window[1]:g} hartree needs more than"
                        f" {MAX_CONTINUUM_POINTS} grid points; the largest photon energy that fits is"
                        f" {largest_energy_that_fits(ground_state, settings):.4g} hartree")
        window = None
    wanted = energies + (list(window) if window else [])
    if section.sum_rules:
        wanted.append(max(3.0 * first.energy, first.energy + 1.0) + 1.0)
    if not wanted:
        return PhotoionizationResults((), (), ContinuumSummary(ordered, (), (), None), tuple(notes), tuple(rejected))
    solver, grid, scf_converged = _solver_for(ground_state, 1, wanted, settings, notes)
    state = _Photoionization(solver, ground_state, [o.label for o in ground_state.orbitals])
    threshold_energies = [float(t) for t in state.hole_energies]
    resonances: tuple[Resonance, ...] = ()
    sum_rules, checks = (), ()
    evaluator = _Evaluator(state, map_tasks)
    rows = [row for row, _ in evaluator.points(energies)]
    if window:
        samples = _adaptive_range(evaluator, *window, threshold_energies)
        rows += [samples[omega][0] for omega in sorted(samples)]
        resonances = _resonances(state, samples, *window)
        if len(samples) >= RANGE_MAX_POINTS:
            notes.append(f"photoionization.range: stopped refining at {RANGE_MAX_POINTS} photon energies;"
                         " narrow structures may be under-resolved")
    if section.sum_rules:
        sum_rules, checks = _sum_rules(evaluator, threshold_energies, notes, scf_converged)
    if not scf_converged:
        rows = [dataclasses_replace(row, converged=False) for row in rows]
    unconverged = [row.photon_energy for row in rows if not row.converged]
    if unconverged and scf_converged:
        notes.append(f"photoionization: {len(unconverged)} photon energies did not converge (GMRES), e.g."
                     f" {unconverged[0]:g} hartree; their rows are flagged")
    summary = ContinuumSummary(ordered, sum_rules, checks, grid)
    return PhotoionizationResults(tuple(rows), resonances, summary, tuple(notes), tuple(rejected))


@single_blas_thread
def continuum_polarizabilities(
    ground_state: GroundState,
    multipole: int,
    frequencies: Sequence[float],
    coupled: bool = True,
    settings: ContinuumGridSettings = ContinuumGridSettings(),
) -> tuple[ContinuumPolarizability, ...]:
    """Complex alpha_L at real frequencies (hartree), any of them above the ionization threshold.

    One scaled grid serves all frequencies.  ``converged`` is False for a coupled solve that
    stopped above the residual limit, or when the ground state on the continuum grid failed.
    """
    if isinstance(multipole, bool) or not isinstance(multipole, int) or multipole < 1:
        raise InputError(f"multipole: {multipole!r} is not an integer >= 1")
    for omega in frequencies:
        if not (isinstance(omega, (int, float)) and math.isfinite(omega) and omega >= 0.0):
            raise InputError(f"frequency: {omega!r} is not a finite number >= 0 (hartree)")
    solver, _, scf_converged = _solver_for(ground_state, multipole, frequencies, settings, [])
    rows = []
    for omega in frequencies:
        solution = solver.solve(float(omega), coupled)
        value = solver.polarizability(solution)
        rows.append(ContinuumPolarizability(
            multipole, float(omega), bool(coupled), float(value.real), float(value.imag),
            bool(scf_converged and solution.residual <= COUPLING_RESIDUAL and np.isfinite(value)),
            solution.krylov_iterations, float(solution.residual),
        ))
    return tuple(rows)


def continuum_polarizability(
    ground_state: GroundState, multipole: int, frequency: float, coupled: bool = True
) -> ContinuumPolarizability:
    """Complex alpha_L(omega) at one real frequency, e.g. above the ionization threshold (bohr^(2L+1))."""
    return continuum_polarizabilities(ground_state, multipole, (frequency,), coupled)[0]
