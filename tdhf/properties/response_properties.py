"""Response properties of one atom: polarizabilities, shielding factors, sum rules, excitations.

Conventions (atomic units throughout):

* multipole polarizability :math:`\\alpha_L(\\omega) = 2\\sum_n \\omega_n
  |\\langle 0|\\sum_i r_i^L C_{L0}(\\hat r_i)|n\\rangle|^2 / (\\omega_n^2 - \\omega^2)`, with
  :math:`C_{L0} = P_L(\\cos\\theta)`; hydrogen: 9/2, 15, 131.25 for L = 1, 2, 3;
* dipole shielding :math:`\\beta(\\omega)`: field at the nucleus from the induced density per unit
  applied field, :math:`\\beta = -\\int \\delta n_1\\, C_{10}/r^2\\,d^3r`; acceleration-form identity
  :math:`\\beta(\\omega) = (N + \\omega^2 \\alpha_1(\\omega))/Z`, so :math:`\\beta(0) = N/Z`;
* quadrupole shielding :math:`\\gamma_\\infty = -\\int \\delta n_2\\, C_{20}/r^3\\,d^3r` (field gradient
  at the nucleus is :math:`(1 - \\gamma_\\infty)` times the applied one; antishielding is negative);
* sum rules :math:`S_L(k) = \\sum_n \\omega_n^k f_n` with :math:`f_n = 2\\omega_n
  |\\langle n|\\sum_i r_i^L C_{L0}|0\\rangle|^2`; :math:`S_1(0) = N` (Thomas–Reiche–Kuhn) and in
  general :math:`S_L(0) = L \\sum_i \\langle r_i^{2L-2}\\rangle`, exact in RPA;
  :math:`S_L(-2) = \\alpha_L(0)`.

A real frequency at or above the first excitation of its multipole has no real polarizability:
it is rejected (an entry in ``ResponseResults.rejected``) unless a broadening is given, while the
other frequencies are still computed.  Near an excitation the first-order orbitals become diffuse:
the box is enlarged automatically (ground state re-solved) until they have decayed at the wall.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.numerics.threads import single_blas_thread
from tdhf.properties.spectrum import (
    Excitation,
    StrengthDistribution,
    lowest_excitations,
    rpa_eigen_excitations,
    strength_distribution,
)
from tdhf.response.solver import FirstOrderOrbitals, ResponseSolver

__all__ = [
    "Polarizability",
    "DipoleShielding",
    "QuadrupoleShielding",
    "SumRule",
    "ResponseResults",
    "compute_response",
    "NORMALIZATION",
]

logger = logging.getLogger(__name__)

NORMALIZATION = "alpha_L = 2 sum_n |<0|sum_i r_i^L P_L(cos theta_i)|n>|^2 / (E_n - E_0), atomic units"

#: The first-order orbitals must fall below this fraction of their maximum beyond 0.75 R.  Measured:
#: alpha moves by < 1e-9 relative between boxes of 40 and 150 bohr even with fractions up to 1e-3
#: (Ca, L = 3); the test catches responses that really reach the wall, as next to a resonance.
BOUNDARY_FRACTION = 1e-6
#: Relative residual above which a coupled solve counts as not converged.
COUPLING_RESIDUAL = 1e-8
#: Frequencies within this relative distance of an excitation are treated as on it.
RESONANCE_MARGIN = 1e-6


@dataclass(frozen=True)
class Polarizability:
    """alpha_L at one frequency (bohr^(2L+1)); ``frequency`` is nu for ``imaginary`` (omega = i nu).

    With ``broadening`` eta > 0 the frequency is omega + i eta and the imaginary parts are
    non-zero; otherwise they are 0.  ``uncoupled`` is None above the first uncoupled pole.
    ``velocity_form`` is the coupled dipole value from the velocity-gauge perturbation (equal to
    ``coupled`` in a complete basis, so their difference measures the grid; None for L > 1).
    """

    multipole: int
    frequency: float
    imaginary: bool
    coupled: float
    uncoupled: float | None
    broadening: float = 0.0
    coupled_imaginary_part: float = 0.0
    uncoupled_imaginary_part: float = 0.0
    converged: bool = True
    krylov_iterations: int = 0
    r_max: float = 0.0
    velocity_form: float | None = None


@dataclass(frozen=True)
class DipoleShielding:
    """beta at one frequency: from the induced density (``direct``) and from (N + w^2 alpha)/Z."""

    frequency: float
    imaginary: bool
    direct: float
    from_polarizability: float
    difference: float


@dataclass(frozen=True)
class QuadrupoleShielding:
    """Sternheimer-type gamma_inf at one real or imaginary frequency, coupled and uncoupled."""

    frequency: float
    imaginary: bool
    coupled: float
    uncoupled: float | None


@dataclass(frozen=True)
class SumRule:
    """S_L(k) coupled (``value``) and uncoupled; ``exact`` is the RPA identity where one exists."""

    multipole: int
    k: int
    value: float
    uncoupled: float
    exact: float | None


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


@single_blas_thread
def compute_response(
    ground_state: GroundState,
    multipoles: Sequence[int] = (1,),
    frequencies: Sequence[float] = (0.0,),
    imaginary_frequencies: Sequence[float] = (),
    coupled: bool = True,
    broadening: float = 0.0,
    excitation_count: int = 3,
) -> ResponseResults:
    """Polarizabilities, shielding factors, sum rules and excitations of a solved atom.

    The ground state is reused for all frequencies of a multipole (one solver per L); it is only
    re-solved in a larger box when the first-order orbitals at a real frequency reach the wall.
    With ``coupled=False`` the "coupled" columns also hold the uncoupled values.
    """
    collected = _Collected(boxes={ground_state.r_max: ground_state})
    for L in multipoles:
        _one_multipole(ground_state, L, frequencies, imaginary_frequencies, coupled, broadening, excitation_count,
                       collected)
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


_NAMES = {1: "dipole", 2: "quadrupole", 3: "octupole"}


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
class _Spectrum:
    """The route-1 spectrum of one solver and the limits it sets on real frequencies."""

    eigen: tuple[np.ndarray, np.ndarray]
    excitations: tuple[Excitation, ...]
    first: float  # lowest excitation or the ionization threshold, whichever is lower (hartree)
    first_label: str
    first_uncoupled: float  # lowest pole of the uncoupled response (hartree)


def _solver(state: GroundState, L: int) -> ResponseSolver:
    return ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, L)


def _spectrum(solver: ResponseSolver, name: str, coupled: bool, count: int) -> _Spectrum:
    eigen = rpa_eigen_excitations(solver, coupled=coupled)
    excitations = lowest_excitations(solver, count=count, coupled=coupled, eigen=eigen)
    # Above the ionization threshold the spectrum is continuous: no real alpha there either.
    threshold = solver.ionization_threshold
    first = min(excitations[0].energy if excitations else math.inf, threshold)
    label = f"first {name} excitation" if first < threshold else "ionization threshold (onset of the continuum)"
    first_uncoupled = min(
        float(values[virtual].min() - solver.orbital_energies[c.shell])
        for c in solver.channels
        for values, _, virtual in [solver.spectra[c.l_prime]]
    )
    return _Spectrum(eigen, excitations, first, label, first_uncoupled)


def _boundary_fraction(solver: ResponseSolver, first_order: FirstOrderOrbitals) -> float:
    """Largest |rho(r)| beyond 0.75 R relative to the largest |rho| anywhere."""
    values = np.abs(np.concatenate([first_order.plus, first_order.minus])) / np.sqrt(solver.grid.weights)
    outer = solver.grid.r > 0.75 * solver.grid.r_max
    return float(values[:, outer].max() / values.max()) if outer.any() else 0.0


def _adequate_box(state: GroundState, solver: ResponseSolver, name: str, omega: float, coupled: bool,
                  notes: list[str], boxes: dict[float, GroundState]) -> tuple[GroundState, ResponseSolver]:
    """Enlarge an automatic box (re-solving the ground state) until the response at omega has decayed.

    A box the user fixed (``grid.r_max``) is kept, with a note if it is too small.
    """
    automatic = state.grid_settings.r_max is None
    for _ in range(3):
        fraction = _boundary_fraction(solver, solver.solve(omega, coupled))
        if fraction <= BOUNDARY_FRACTION:
            break
        if not automatic:
            notes.append(
                f"grid.r_max: the {name} response at {omega:g} hartree has not decayed at the wall"
                f" (|rho| reaches {fraction:.1e} of its maximum beyond 0.75 R); increase r_max or leave it out"
            )
            break
        r_max = 1.5 * state.r_max
        logger.info("%s response at %g: box enlarged to %.0f bohr", name, omega, r_max)
        if r_max not in boxes:
            bigger = replace(state.grid_settings, r_max=r_max)
            boxes[r_max] = solve_ground_state(state.system, bigger, state.scf_settings)
        state = boxes[r_max]
        solver = _solver(state, solver.multipole)
    return state, solver


def _one_multipole(state, L, frequencies, imaginary_frequencies, coupled, broadening, count, out: _Collected):
    name = _NAMES.get(L, f"2^{L}-pole")
    solver = _solver(state, L)
    spectrum = _spectrum(solver, name, coupled, count)
    allowed = []
    for i, omega in enumerate(frequencies):
        if broadening == 0.0 and omega >= spectrum.first * (1.0 - RESONANCE_MARGIN):
            out.rejected.append(
                f"response.frequencies[{i}]: {omega:g} hartree is at or above the {spectrum.first_label}"
                f" ({spectrum.first:.6f} hartree); a real alpha exists only below it: use imaginary_frequencies"
                " or a broadening"
            )
        else:
            allowed.append(float(omega))
    if allowed and broadening == 0.0:
        # The real frequency closest to resonance has the most diffuse response.
        state, enlarged = _adequate_box(state, solver, name, max(allowed), coupled, out.warnings, out.boxes)
        if enlarged is not solver:
            solver = enlarged
            spectrum = _spectrum(solver, name, coupled, count)  # every number from the same box
    out.excitations.extend(spectrum.excitations)
    if not spectrum.excitations:
        out.warnings.append(
            f"response: {state.system.name} has no bound {name} excitation below the ionization threshold"
            f" ({spectrum.first:.6f} hartree); the {name} spectrum is a continuum there"
        )
    for omega, imaginary in [(w, False) for w in allowed] + [(float(nu), True) for nu in imaginary_frequencies]:
        _frequency_rows(state, solver, name, omega, imaginary, coupled, broadening, spectrum, out)
    moments_coupled = (solver.energy_weighted_sum(coupled),) + solver.cauchy_moments(coupled)
    moments_uncoupled = (solver.energy_weighted_sum(False),) + solver.cauchy_moments(False)
    shells = state.shells
    exact_trk = float(L * shells.occupations @ (shells.orbitals**2 @ state.grid.r ** (2 * L - 2)))
    out.strength_distribution.append(strength_distribution(solver, spectrum.eigen, float(moments_coupled[0])))
    for k, value, uncoupled in zip((0, -2, -4, -6), moments_coupled, moments_uncoupled):
        out.sum_rules.append(SumRule(L, k, float(value), float(uncoupled), exact_trk if k == 0 else None))


def _frequency_rows(state, solver, name, omega, imaginary, coupled, broadening, spectrum: _Spectrum, out: _Collected):
    """alpha (and beta for L = 1, gamma_inf for L = 2) at one real, imaginary or broadened frequency."""
    L = solver.multipole
    argument = complex(omega, broadening) if not imaginary and broadening else (1j * omega if imaginary else omega)
    coupled_solution = solver.solve(argument, coupled)
    uncoupled_solution = solver.solve(argument, False)
    alpha = complex(solver.polarizability(coupled_solution))
    alpha_uncoupled = complex(solver.polarizability(uncoupled_solution))
    uncoupled_valid = imaginary or broadening > 0.0 or omega < spectrum.first_uncoupled * (1.0 - RESONANCE_MARGIN)
    converged = coupled_solution.residual <= COUPLING_RESIDUAL
    if not converged:
        out.warnings.append(
            f"response: coupled {name} solve at {omega:g} hartree{' (imaginary)' if imaginary else ''} stopped"
            f" at relative residual {coupled_solution.residual:.1e} after {coupled_solution.krylov_iterations}"
            " Krylov steps (GMRES); the value is not converged"
        )
    broadened = broadening > 0.0 and not imaginary
    out.polarizabilities.append(
        Polarizability(
            multipole=L,
            frequency=omega,
            imaginary=imaginary,
            coupled=alpha.real,
            uncoupled=alpha_uncoupled.real if uncoupled_valid else None,
            broadening=broadening if broadened else 0.0,
            coupled_imaginary_part=alpha.imag if broadened else 0.0,
            uncoupled_imaginary_part=alpha_uncoupled.imag if broadened else 0.0,
            converged=converged,
            krylov_iterations=coupled_solution.krylov_iterations,
            r_max=state.r_max,
            velocity_form=complex(solver.velocity_polarizability(argument, coupled)).real if L == 1 and not broadened else None,
        )
    )
    if broadened:
        return
    if L == 1:
        direct = -complex(solver.expectation(coupled_solution, state.grid.r**-2.0)).real
        identity = (state.system.electrons + (-omega**2 if imaginary else omega**2) * alpha.real) / state.system.Z
        out.shielding.append(DipoleShielding(omega, imaginary, direct, identity, direct - identity))
    if L == 2:
        gamma = -complex(solver.expectation(coupled_solution, state.grid.r**-3.0)).real
        gamma_uncoupled = -complex(solver.expectation(uncoupled_solution, state.grid.r**-3.0)).real
        out.quadrupole_shielding.append(
            QuadrupoleShielding(omega, imaginary, gamma, gamma_uncoupled if uncoupled_valid else None)
        )
