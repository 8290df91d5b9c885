"""Response properties of one atom: polarizabilities, shielding factors, sum rules, excitations.

Conventions are those of :mod:`tdhf.properties.polarizability` (alpha_L, beta, gamma_inf),
:mod:`tdhf.properties.sum_rules` (S_L(k)) and :mod:`tdhf.properties.spectrum` (lines, f).

Real frequencies
----------------
Between bound poles alpha(omega) is real and finite: every real frequency below the ionization
threshold is computed unless it lies on an excitation (within :data:`RESONANCE_MARGIN` relative),
and the row names the poles on either side (``pole_below``, ``pole_above``).  Above the threshold
alpha is complex: it is solved with outgoing waves (exterior complex scaling, method
"outgoing waves"; coupled and uncoupled, imaginary parts in ``*_imaginary_part``).  A frequency
on a pole or on the threshold itself is refused: an entry in ``ResponseResults.rejected`` naming
the key, the pole or threshold and the nearest allowed frequencies, while the other frequencies
are still computed.  With a broadening eta > 0 every
frequency is computed at omega + i eta.

Boxes
-----
Near an excitation the first-order orbitals become diffuse, and Rydberg lines extend far out:
an automatic box is enlarged (ground state re-solved, x1.5 per step up to
:data:`MAX_BOX_RADIUS`) until the response at every real frequency and every listed line has
decayed at the wall (:data:`BOUNDARY_FRACTION`); a box the user fixed is kept, with a note.
Lines that still do not fit are not listed (a note says so).

Non-convergence policy (:mod:`tdhf.numerics.status`): every row carries ``converged``; a failed
solve adds a one-line note to ``warnings``; nothing is raised for non-convergence.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from tdhf.errors import FrequencyError, InputError
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.numerics.status import combine
from tdhf.numerics.tasks import TaskMap, serial
from tdhf.numerics.threads import single_blas_thread
from tdhf.properties.polarizability import DipoleShielding, Polarizability, QuadrupoleShielding, VelocityForm
from tdhf.properties.spectrum import (
    Excitation,
    Spectrum,
    StrengthDistribution,
    rpa_spectrum,
    strength_distribution,
)
from tdhf.properties.sum_rules import SumRule, cauchy_moments, energy_weighted_sum, exact_energy_weighted_sum
from tdhf.radial.exterior_scaling import ContinuumGridSettings
from tdhf.response.solver import FirstOrderOrbitals, ResponseSolver, ResponseTolerances

__all__ = [
    "Polarizability",
    "DipoleShielding",
    "QuadrupoleShielding",
    "SumRule",
    "ResponseResults",
    "compute_response",
    "NORMALIZATION",
    "MAX_FREQUENCY",
]

logger = logging.getLogger(__name__)

NORMALIZATION = "alpha_L = 2 sum_n |<0|sum_i r_i^L P_L(cos theta_i)|n>|^2 / (E_n - E_0), atomic units"

#: The first-order orbitals must fall below this fraction of their maximum beyond 0.75 R.  Measured:
#: alpha moves by < 1e-9 relative between boxes of 40 and 150 bohr even with fractions up to 1e-3
#: (Ca, L = 3); the test catches responses that really reach the wall, as next to a resonance.
BOUNDARY_FRACTION = 1e-6
#: Frequencies within this relative distance of an excitation are treated as on it.
RESONANCE_MARGIN = 1e-6
#: Closer than this (relative) to a pole, a note says how the error grows there.
NEAR_POLE = 1e-3
#: The largest box an automatic enlargement goes to (bohr), and its growth per step.
MAX_BOX_RADIUS = 400.0
BOX_GROWTH = 1.5
#: Largest frequency accepted (hartree): far beyond every physical scale, and alpha(i nu) ~ N/nu^2
#: stays a normal double (nu^2 < 1e308).
MAX_FREQUENCY = 1e100

_NAMES = {1: "dipole", 2: "quadrupole", 3: "octupole"}


@dataclass(frozen=True)
class ResponseResults:
    """Everything computed for the requested multipoles and frequencies."""

    polarizabilities: tuple[Polarizability, ...]
    shielding: tuple[DipoleShielding, ...]
    quadrupole_shielding: tuple[QuadrupoleShielding, ...]
    sum_rules: tuple[SumRule, ...]
    excitations: tuple[Excitation, ...]
    strength_distribution: tuple[StrengthDistribution, ...]
    warnings: tuple[str, ...]
    rejected: tuple[str, ...]
    normalization: str = NORMALIZATION


@dataclass
class _Collected:
    """Rows gathered over the multipoles (mutable while computing; frozen into ResponseResults)."""

    polarizabilities: list[Polarizability] = field(default_factory=list)
    shielding: list[DipoleShielding] = field(default_factory=list)
    quadrupole_shielding: list[QuadrupoleShielding] = field(default_factory=list)
    sum_rules: list[SumRule] = field(default_factory=list)
    excitations: list[Excitation] = field(default_factory=list)
    strength_distribution: list[StrengthDistribution] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    rejected: list[str] = field(default_factory=list)
    boxes: dict[float, GroundState] = field(default_factory=dict)  # ground states by box radius, reused


@dataclass(frozen=True)
class _Request:
    """The options of one compute_response call, shared by every multipole."""

    frequencies: tuple[float, ...]
    imaginary_frequencies: tuple[float, ...]
    coupled: bool
    broadening: float
    excitation_count: int
    tolerances: ResponseTolerances
    eigen_tolerance: float
    continuum_grid: ContinuumGridSettings = ContinuumGridSettings()


def _check_frequencies(name: str, values: Sequence[float]) -> tuple[float, ...]:
    out = []
    for i, value in enumerate(values):
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
            raise FrequencyError(f"response.{name}[{i}]: {value!r} is not a number; frequencies are in hartree")
        value = float(value)
        if not math.isfinite(value) or value < 0.0:
            raise FrequencyError(f"response.{name}[{i}]: {value!r} must be finite and >= 0 (hartree)")
        if value > MAX_FREQUENCY:
            raise FrequencyError(f"response.{name}[{i}]: {value:g} hartree is above the largest accepted"
                                 f" frequency {MAX_FREQUENCY:g}; alpha is N/nu^2 to all digits long before")
        out.append(value)
    return tuple(out)


@single_blas_thread
def compute_response(
    ground_state: GroundState,
    multipoles: Sequence[int] = (1,),
    frequencies: Sequence[float] = (0.0,),
    imaginary_frequencies: Sequence[float] = (),
    coupled: bool = True,
    broadening: float = 0.0,
    excitation_count: int = 0,
    tolerances: ResponseTolerances = ResponseTolerances(),
    eigen_tolerance: float = 1e-10,
    continuum_grid: ContinuumGridSettings = ContinuumGridSettings(),
    map_tasks: TaskMap | None = None,
) -> ResponseResults:
    """Polarizabilities, shielding factors, sum rules and (if asked) excitations of a solved atom.

    Parameters
    ----------
    ground_state : GroundState
        A converged ground state; it is reused for every frequency of a multipole and only
        re-solved in a larger box when the response or a listed line reaches the wall.
    multipoles : sequence of int
        L = 1, 2, 3 ...
    frequencies, imaginary_frequencies : sequence of float
        Real frequencies omega and imaginary ones nu (omega = i nu), hartree, finite and >= 0.
    coupled : bool
        False: the "coupled" columns hold the uncoupled values too.
    broadening : float
        eta >= 0 hartree: real frequencies become omega + i eta.
    excitation_count : int
        Lowest bound lines listed per multipole (0: none); with lines the S(0) split is reported.
    tolerances : ResponseTolerances
    eigen_tolerance : float
        Residual of the RPA eigensolver.
    continuum_grid : ContinuumGridSettings
        The scaled grid of real frequencies above the ionization threshold.
    map_tasks : callable, optional
        Where the multipoles (independent tasks) run (:mod:`tdhf.numerics.tasks`); by default
        here, one after the other.  The numbers are the same either way.

    Raises
    ------
    InputError
        For an invalid multipole, frequency, broadening or count (before anything is computed).
    """
    for i, L in enumerate(multipoles):
        if isinstance(L, bool) or not isinstance(L, (int, np.integer)) or not 1 <= L <= 10:
            raise InputError(f"response.multipoles[{i}]: {L!r} is not an integer in 1..10")
    if not math.isfinite(broadening) or not 0.0 <= broadening <= 1.0:
        raise InputError(f"response.broadening: {broadening!r} hartree must be in [0, 1]")
    if isinstance(excitation_count, bool) or not isinstance(excitation_count, (int, np.integer)) or not 0 <= excitation_count <= 100:
        raise InputError(f"response.excitations: {excitation_count!r} is not an integer in 0..100")
    if not ground_state.converged:
        raise InputError(f"response: the ground state of {ground_state.system.name} did not converge; no response from it")
    request = _Request(_check_frequencies("frequencies", frequencies),
                       _check_frequencies("imaginary_frequencies", imaginary_frequencies),
                       bool(coupled), float(broadening), int(excitation_count), tolerances, float(eigen_tolerance),
                       continuum_grid)
    tasks = [(ground_state, int(L), request) for L in multipoles]
    parts = (map_tasks or serial)(_multipole_task, tasks) if len(tasks) > 1 else [_multipole_task(*tasks[0])]
    collected = _Collected()
    for part in parts:  # in multipole order, whichever finished first
        for name in ("polarizabilities", "shielding", "quadrupole_shielding", "sum_rules", "excitations",
                     "strength_distribution", "warnings", "rejected"):
            getattr(collected, name).extend(getattr(part, name))
    return ResponseResults(
        polarizabilities=tuple(collected.polarizabilities),
        shielding=tuple(collected.shielding),
        quadrupole_shielding=tuple(collected.quadrupole_shielding),
        sum_rules=tuple(collected.sum_rules),
        excitations=tuple(collected.excitations),
        strength_distribution=tuple(collected.strength_distribution),
        warnings=tuple(collected.warnings),
        rejected=tuple(collected.rejected),
    )


@single_blas_thread
def _multipole_task(ground_state: GroundState, L: int, request: _Request) -> _Collected:
    """Everything of one multipole (an independent task: serially here, or elsewhere through a task map)."""
    collected = _Collected(boxes={ground_state.r_max: ground_state})
    _one_multipole(ground_state, L, request, collected)
    collected.boxes = {}  # the enlarged ground states stay where they were solved
    return collected


def _solver(state: GroundState, L: int) -> ResponseSolver:
    return ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, L)


def _boundary_fraction(solver: ResponseSolver, first_order: FirstOrderOrbitals) -> float:
    """Largest |rho(r)| beyond 0.75 R relative to the largest |rho| anywhere."""
    values = np.abs(np.concatenate([first_order.plus, first_order.minus])) / np.sqrt(solver.grid.weights)
    outer = solver.grid.r > 0.75 * solver.grid.r_max
    peak = values.max()
    return float(values[:, outer].max() / peak) if outer.any() and peak > 0.0 else 0.0


@dataclass
class _Multipole:
    """The state of one multipole's computation: box, solver, spectrum, the real-frequency verdicts
    and the coupled solutions already computed for the box check (by frequency)."""

    state: GroundState
    solver: ResponseSolver
    spectrum: Spectrum | None
    allowed: list[tuple[int, float]]
    refused: list[str]
    solved: dict[float, FirstOrderOrbitals]


def _classify(L: int, solver: ResponseSolver, spectrum: Spectrum | None, request: _Request) -> tuple[list, list]:
    """Real frequencies that can be computed (index, omega) and refusal messages for the others."""
    if request.broadening > 0.0:
        return list(enumerate(request.frequencies)), []
    name = _NAMES.get(L, f"2^{L}-pole")
    threshold = solver.ionization_threshold
    allowed, refused = [], []
    for i, omega in enumerate(request.frequencies):
        key = f"response.frequencies[{i}]"
        if abs(omega - threshold) <= RESONANCE_MARGIN * threshold:
            refused.append(
                f"{key}: {omega:g} hartree is at the ionization threshold ({threshold:.8f} hartree, -epsilon of"
                f" the outermost orbital), where the {name} photoelectron has zero momentum; give a frequency"
                f" at least {RESONANCE_MARGIN * threshold:.1e} hartree away from it"
            )
            continue
        if omega > threshold:
            continue  # the continuum: complex alpha with outgoing waves (_continuum_rows)
        if omega > 0.0 and spectrum is not None:
            below, above = spectrum.poles_around(omega)
            for pole in (below, above):
                if pole is not None and abs(omega - pole) <= RESONANCE_MARGIN * pole:
                    low, high = pole * (1.0 - 1e3 * RESONANCE_MARGIN), pole * (1.0 + 1e3 * RESONANCE_MARGIN)
                    refused.append(
                        f"{key}: {omega:g} hartree is at the {name} excitation at {pole:.10f} hartree, where alpha"
                        f" diverges; choose a frequency away from it, e.g. {low:.6f} or {high:.6f}"
                    )
                    break
            else:
                allowed.append((i, omega))
            continue
        allowed.append((i, omega))
    return allowed, refused


def _one_multipole(ground_state: GroundState, L: int, request: _Request, out: _Collected) -> None:
    name = _NAMES.get(L, f"2^{L}-pole")
    work = _settle_box(ground_state, L, request, out)
    state, solver, spectrum = work.state, work.solver, work.spectrum
    out.rejected.extend(work.refused)
    if spectrum is not None and not spectrum.status.converged:
        out.warnings.append(f"response: the {name} RPA eigensolver of {state.system.name} did not converge"
                            f" ({spectrum.status.describe()}); its poles and lines are not reliable")
    if request.excitation_count and spectrum is not None:
        lines = spectrum.lines(request.excitation_count)
        out.excitations.extend(lines)
        if len(lines) < request.excitation_count:
            reason = ("the next one does not fit in the box" if spectrum.squeezed(request.excitation_count)
                      else "there are no more visible bound lines below the ionization threshold")
            out.warnings.append(
                f"response: {len(lines)} of {request.excitation_count} {name} lines of {state.system.name}"
                f" listed: {reason} (r_max {state.r_max:g} bohr)"
            )
    velocity = VelocityForm(solver, request.tolerances) if L == 1 else None
    rows = [(omega, False) for _, omega in work.allowed] + [(nu, True) for nu in request.imaginary_frequencies]
    for omega, imaginary in rows:
        known = None if imaginary else work.solved.get(omega)
        _frequency_rows(state, solver, name, omega, imaginary, request, spectrum, velocity, out, known)
    if request.broadening == 0.0:
        _continuum_rows(state, L, name, request, out)
    static = work.solved.get(0.0) if request.broadening == 0.0 else None
    _sum_rules(state, solver, name, request, spectrum, out, static)


def _settle_box(ground_state: GroundState, L: int, request: _Request, out: _Collected) -> _Multipole:
    """Enlarge an automatic box until the real-frequency responses and the listed lines have decayed at the wall."""
    name = _NAMES.get(L, f"2^{L}-pole")
    state = ground_state
    automatic = state.grid_settings.r_max is None
    wants_spectrum = request.excitation_count > 0 or (request.broadening == 0.0 and any(request.frequencies))
    while True:
        solver = _solver(state, L)
        spectrum = (rpa_spectrum(solver, minimum_roots=max(request.excitation_count, 1), coupled=request.coupled,
                                 tolerance=request.eigen_tolerance) if wants_spectrum else None)
        allowed, refused = _classify(L, solver, spectrum, request)
        problems = []
        solved: dict[float, FirstOrderOrbitals] = {}
        if request.excitation_count and spectrum is not None and spectrum.squeezed(request.excitation_count):
            problems.append(f"the {name} lines do not fit in the box")
        if request.broadening == 0.0:
            for _, omega in allowed:
                solved[omega] = solver.solve(omega, request.coupled, tolerances=request.tolerances)
                fraction = _boundary_fraction(solver, solved[omega])
                if fraction > BOUNDARY_FRACTION:
                    problems.append(f"the {name} response at {omega:g} hartree has not decayed at the wall"
                                    f" (|rho| reaches {fraction:.1e} of its maximum beyond 0.75 R)")
                    break
        if not problems:
            break
        if not automatic:
            out.warnings.append(f"grid.r_max: {problems[0]}; increase r_max or leave it out for an automatic box")
            break
        r_max = BOX_GROWTH * state.r_max
        if r_max > MAX_BOX_RADIUS:
            out.warnings.append(f"response: {problems[0]} even at r_max = {state.r_max:g} bohr, the largest"
                                " automatic box; the affected numbers carry that box error")
            break
        logger.info("%s: box enlarged to %.0f bohr (%s)", name, r_max, problems[0])
        if r_max not in out.boxes:
            bigger = replace(state.grid_settings, r_max=r_max)
            out.boxes[r_max] = solve_ground_state(state.system, bigger, state.scf_settings)
        state = out.boxes[r_max]
        if not state.converged:
            out.warnings.append(f"response: the ground state in the {r_max:g}-bohr box did not converge")
            break
    return _Multipole(state, solver, spectrum, allowed, refused, solved)


def _frequency_rows(state, solver, name, omega, imaginary, request: _Request, spectrum, velocity, out: _Collected,
                    known: FirstOrderOrbitals | None = None):
    """alpha (and beta for L = 1, gamma_inf for L = 2) at one real, imaginary or broadened frequency.

    ``known`` is the coupled solution at this (real) frequency if the box check already made it.
    """
    L = solver.multipole
    broadened = request.broadening > 0.0 and not imaginary
    argument = complex(omega, request.broadening) if broadened else (1j * omega if imaginary else omega)
    tolerances = request.tolerances
    coupled_solution = known if known is not None else solver.solve(argument, request.coupled, tolerances=tolerances)
    uncoupled_solution = coupled_solution if not request.coupled else solver.solve(argument, False)
    alpha = complex(solver.polarizability(coupled_solution))
    alpha_uncoupled = complex(solver.polarizability(uncoupled_solution))
    where = f"{omega:g} hartree{' (imaginary)' if imaginary else ''}"
    method = coupled_solution.status.message if coupled_solution.status.message == "asymptotic series" else (
        "krylov" if request.coupled and solver.interacting else "direct")
    velocity_value = None
    if velocity is not None and not broadened and method != "asymptotic series":
        value, status = velocity.polarizability(argument)
        if status.converged:
            velocity_value = float(value.real if isinstance(value, complex) else value)
        else:
            out.warnings.append(f"response: the velocity-form {name} solve at {where} did not converge"
                                f" ({status.describe()}); velocity_form is left out")
    pole_below = pole_above = None
    uncoupled_valid = True
    if not imaginary and not broadened:
        if spectrum is not None:
            pole_below, pole_above = spectrum.poles_around(omega)
            nearest = min((p for p in (pole_below, pole_above) if p is not None), key=lambda p: abs(p - omega),
                          default=None)
            if nearest is not None and abs(nearest - omega) < NEAR_POLE * nearest:
                out.warnings.append(
                    f"response: {name} alpha at {omega:g} hartree lies {abs(nearest - omega):.2e} hartree from the"
                    f" excitation at {nearest:.8f}; its error grows as 1/|omega - omega_n| there (see the certificate)"
                )
        uncoupled_poles = solver.uncoupled_poles()
        nearest_uncoupled = uncoupled_poles[np.argmin(np.abs(uncoupled_poles - omega))]
        uncoupled_valid = abs(nearest_uncoupled - omega) > RESONANCE_MARGIN * nearest_uncoupled
    status = coupled_solution.status
    if not status.converged:
        out.warnings.append(f"response: the coupled {name} solve at {where} did not converge ({status.describe()});"
                            " the value is flagged")
    finite = all(math.isfinite(x) for x in (alpha.real, alpha.imag))
    out.polarizabilities.append(
        Polarizability(
            multipole=L,
            frequency=omega,
            imaginary=imaginary,
            coupled=alpha.real,
            uncoupled=alpha_uncoupled.real if uncoupled_valid else None,
            broadening=request.broadening if broadened else 0.0,
            coupled_imaginary_part=alpha.imag if broadened else 0.0,
            uncoupled_imaginary_part=alpha_uncoupled.imag if broadened and uncoupled_valid else 0.0,
            converged=status.converged and finite,
            krylov_iterations=status.iterations,
            r_max=state.r_max,
            velocity_form=velocity_value,
            residual=status.residual,
            pole_below=pole_below,
            pole_above=pole_above,
            method=method,
        )
    )
    if broadened:
        return
    if L == 1:
        direct = -complex(solver.expectation(coupled_solution, state.grid.r**-2.0)).real
        identity = (state.system.electrons + (-omega**2 if imaginary else omega**2) * alpha.real) / state.system.Z
        out.shielding.append(DipoleShielding(omega, imaginary, direct, identity, direct - identity, status.converged))
    if L == 2:
        gamma = -complex(solver.expectation(coupled_solution, state.grid.r**-3.0)).real
        gamma_uncoupled = -complex(solver.expectation(uncoupled_solution, state.grid.r**-3.0)).real
        out.quadrupole_shielding.append(
            QuadrupoleShielding(omega, imaginary, gamma, gamma_uncoupled if uncoupled_valid else None, status.converged)
        )


def _continuum_rows(state: GroundState, L: int, name: str, request: _Request, out: _Collected) -> None:
    """Complex alpha_L at the real frequencies above the ionization threshold (outgoing waves).

    Solved on an exterior-complex-scaled grid (:mod:`tdhf.properties.photoionization`), coupled
    and uncoupled; the imaginary parts are the absorption (for L = 1, sigma = 4 pi omega Im alpha / c).
    """
    threshold = -float(state.orbital_energies.max())
    indices = [i for i, omega in enumerate(request.frequencies) if omega > threshold * (1.0 + RESONANCE_MARGIN)]
    if not indices:
        return
    from tdhf.properties.photoionization import continuum_polarizabilities, frequencies_that_fit  # when needed

    above = frequencies_that_fit(state, "response.frequencies", [request.frequencies[i] for i in indices], request.continuum_grid,
                     out.rejected, indices)
    if not above:
        return
    coupled = continuum_polarizabilities(state, L, above, request.coupled, request.continuum_grid)
    uncoupled = (coupled if not request.coupled
                 else continuum_polarizabilities(state, L, above, False, request.continuum_grid))
    for omega, row, bare in zip(above, coupled, uncoupled):
        converged = row.converged and bare.converged
        if not converged:
            out.warnings.append(f"response: the outgoing-wave {name} solve at {omega:g} hartree did not converge"
                                f" (residual {row.residual:.1e}); the value is flagged")
        out.polarizabilities.append(Polarizability(
            multipole=L, frequency=omega, imaginary=False, coupled=row.real_part, uncoupled=bare.real_part,
            coupled_imaginary_part=row.imaginary_part, uncoupled_imaginary_part=bare.imaginary_part,
            converged=converged, krylov_iterations=row.krylov_iterations, r_max=state.r_max,
            residual=max(row.residual, bare.residual), method="outgoing waves",
        ))


def _sum_rules(state, solver, name, request: _Request, spectrum, out: _Collected,
               static: FirstOrderOrbitals | None = None) -> None:
    L = solver.multipole
    s0_coupled = energy_weighted_sum(solver, request.coupled)
    s0_uncoupled = energy_weighted_sum(solver, False)
    moments_coupled, status_coupled = cauchy_moments(solver, request.coupled, request.tolerances, static)
    moments_uncoupled, status_uncoupled = cauchy_moments(solver, False, request.tolerances)
    status = combine(status_coupled, status_uncoupled)
    if not status.converged:
        out.warnings.append(f"response: a sum-rule solve of the {name} response did not converge ({status.describe()})")
    exact = exact_energy_weighted_sum(solver)
    if request.excitation_count and spectrum is not None:
        out.strength_distribution.append(strength_distribution(spectrum, s0_coupled))
    out.sum_rules.append(SumRule(L, 0, s0_coupled, s0_uncoupled, exact, True))
    for k, value, uncoupled in zip((-2, -4, -6), moments_coupled, moments_uncoupled):
        out.sum_rules.append(SumRule(L, k, float(value), float(uncoupled), None, status.converged))
