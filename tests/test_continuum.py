"""Tests of the continuum: the exterior-complex-scaled grid (tdhf.radial.exterior_scaling), the
outgoing-wave first-order equations (tdhf.response.continuum) and the photoionization properties
(tdhf.properties.photoionization).

Evidence:

1. exact results: the hydrogen 1s photoionization cross section (Stobbe's closed form, itself
   checked against mpmath Coulomb functions here), its Z-scaling, the 6.30 Mb threshold value;
   the analytic relation of the scaled stiffness to the real one; the hole potential 1/r outside
   the orbital; the discrete flux identity;
2. cross-route agreement: the outgoing-wave solver at zero, imaginary and sub-threshold real
   frequencies against the bound-state solver on the ground-state grid (an independent grid and
   code path); length = velocity form (equal in RPA in a complete basis); the whole-spectrum sum
   rules and Kramers–Kronig relations against direct solves;
3. independence of the scaling radius, angle, element order and size and outer radius;
4. features reported for RPA cross sections, "from memory" with honest tolerances.

Atomic units (hartree, bohr; cross sections in bohr^2, 1 Mb = 1e-22 m^2).
"""

from __future__ import annotations

import dataclasses

import mpmath as mp
import numpy as np
import pytest
import scipy.constants

from tdhf.execution import ProcessPool
from tdhf.constants import HARTREE_EV
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.properties.photoionization import (
    SPEED_OF_LIGHT,
    PhotoionizationSection,
    compute_photoionization,
    continuum_polarizabilities,
)
from tdhf.properties.response_properties import compute_response
from tdhf.radial.exterior_scaling import ContinuumGridSettings, ScaledGrid, continuum_boundaries
from tdhf.radial.mesh import RadialGrid
from tdhf.response.continuum import KRYLOV_TOLERANCE, build_continuum_solver
from tdhf.system import System

#: One megabarn in bohr^2 (CODATA Bohr radius from scipy).
MEGABARN = 1e-22 / scipy.constants.physical_constants["Bohr radius"][0] ** 2
#: Accuracy the default continuum grid is built for: the element size is capped so that the
#: hydrogen cross section is within ~1e-8 of the exact one (measured: <= 6e-9 up to 100x
#: threshold); 1e-6 leaves room for other CPUs and grids of other sizes.
GRID_RTOL = 1e-6
#: The coupled solves stop at a relative residual KRYLOV_TOLERANCE = 1e-9; values derived from
#: them (cross sections, sums) carry errors of that order: 1e-7 leaves a factor 100.
SOLVE_RTOL = 100 * KRYLOV_TOLERANCE


def stobbe_cross_section(omega: np.ndarray, charge: float = 1.0) -> np.ndarray:
    """Exact nonrelativistic 1s photoionization cross section of a hydrogen-like ion, bohr^2.

    Stobbe, Ann. Phys. 7, 661 (1930); Bethe and Salpeter, Quantum Mechanics of One- and
    Two-Electron Atoms (1957), eq. (71.5) (both from memory):
    sigma = (2^9 pi^2 / (3 c Z^2)) (I/omega)^4 exp(-4 eta arccot eta) / (1 - exp(-2 pi eta)),
    I = Z^2/2, eta = Z/k, k = sqrt(2 omega - Z^2).  Checked below against mpmath.
    """
    omega = np.asarray(omega, dtype=float)
    k = np.sqrt(2.0 * omega - charge**2)
    eta = charge / k
    return (2**9 * np.pi**2 / (3.0 * SPEED_OF_LIGHT * charge**2) * (0.5 * charge**2 / omega) ** 4
            * np.exp(-4.0 * eta * np.arctan(1.0 / eta)) / (1.0 - np.exp(-2.0 * np.pi * eta)))


def mpmath_cross_section(omega: float) -> float:
    """sigma = (4 pi^2 omega / 3c) |<eps p| r |1s>|^2 with the energy-normalized Coulomb wave
    sqrt(2/(pi k)) F_1(-1/k, kr) of mpmath and P_1s = 2 r e^-r (the dipole golden rule)."""
    mp.mp.dps = 20
    k = mp.sqrt(2 * mp.mpf(omega) - 1)
    integrand = lambda r: mp.sqrt(2 / (mp.pi * k)) * mp.coulombf(1, -1 / k, k * r) * r * 2 * r * mp.exp(-r)
    matrix_element = mp.quad(integrand, [0, 5, 15, 40, mp.inf])
    return float(4 * mp.pi**2 * omega / (3 * SPEED_OF_LIGHT) * matrix_element**2)


def solve_default(element: str, charge: int = 0) -> GroundState:
    return solve_ground_state(System.from_input(element, charge=charge))


@pytest.fixture(scope="module")
def hydrogen() -> GroundState:
    return solve_default("H")


def cross_sections(state: GroundState, energies, settings=ContinuumGridSettings()):
    result = compute_photoionization(state, PhotoionizationSection(tuple(energies), sum_rules=False), settings)
    return result, np.array([row.cross_section for row in result.photoionization])


# --- the scaled grid ------------------------------------------------------------------------


def test_scaled_grid_is_the_real_grid_inside_the_scaling_radius():
    """Common practice, no source: up to R_0 nothing is scaled, so nodes, weights and the stiffness
    of the real part equal those of the real grid of the same elements (to round-off)."""
    boundaries, r_inner, r_scaling = continuum_boundaries(ContinuumGridSettings(), 2, 20.0, 3.0, 0.5)
    grid = ScaledGrid.from_boundaries(boundaries, 12, r_scaling, 0.8)
    real = grid.real_grid(r_inner)
    n = real.size
    assert np.array_equal(grid.r[:n], real.r) and np.all(grid.z[:n].imag == 0.0)
    assert np.allclose(grid.weights[:n], real.weights, rtol=1e-15, atol=0.0)
    scale = np.abs(real.stiffness).max()
    assert np.abs(grid.stiffness[:n, :n] - real.stiffness).max() <= 1e-14 * scale
    assert grid.node_at(r_inner) == n


def test_scaled_elements_are_rotated_real_elements():
    """Analytic: z = R_0 + (r - R_0) e^{i theta} multiplies the weights by e^{i theta} and the DVR
    stiffness (d/dz = e^{-i theta} d/dr, DVR scale w^-1/2 each side) by e^{-2 i theta}; the
    matrix is complex symmetric (the unconjugated bilinear form)."""
    boundaries = np.array([0.0, 1.0, 2.5, 4.0, 6.0, 9.0, 13.0])
    theta = 0.7
    grid = ScaledGrid.from_boundaries(boundaries, 8, 4.0, theta)
    real = RadialGrid.from_boundaries(boundaries, 8)
    outer = grid.r > 4.0 + 1e-12
    assert np.allclose(grid.z[outer], 4.0 + (grid.r[outer] - 4.0) * np.exp(1j * theta), rtol=1e-15)
    assert np.allclose(grid.weights[outer], real.weights[outer] * np.exp(1j * theta), rtol=1e-14)
    block = np.ix_(outer, outer)
    assert np.allclose(grid.stiffness[block], real.stiffness[block] * np.exp(-2j * theta), rtol=1e-13, atol=0)
    assert np.abs(grid.stiffness - grid.stiffness.T).max() <= 1e-15 * np.abs(grid.stiffness).max()


# --- hydrogen: the exact cross section --------------------------------------------------------


@pytest.mark.parametrize("omega", [0.6, 1.0, 5.0])
def test_stobbe_formula_against_mpmath_coulomb_functions(omega):
    """The closed form used as the reference equals the golden-rule integral with mpmath's
    Coulomb functions (general-purpose reference library) to quadrature accuracy."""
    assert stobbe_cross_section(omega) == pytest.approx(mpmath_cross_section(omega), rel=1e-12)


#: From just above threshold (k = 0.014) to 100 times the threshold.
HYDROGEN_ENERGIES = (0.5001, 0.505, 0.55, 0.75, 1.5, 5.0, 15.0, 50.0)


def test_hydrogen_cross_section_is_stobbe_from_threshold_to_100_times(hydrogen):
    """Stobbe's exact cross section (above), relative GRID_RTOL (measured: <= 6e-9)."""
    _, sigma = cross_sections(hydrogen, HYDROGEN_ENERGIES)
    assert sigma == pytest.approx(stobbe_cross_section(np.array(HYDROGEN_ENERGIES)), rel=GRID_RTOL)


def test_hydrogen_threshold_value_is_6_30_megabarn(hydrogen):
    """sigma(I) = 2^9 pi^2 e^-4 / (3c) bohr^2 = 6.30 Mb (Bethe and Salpeter (1957), from memory)."""
    exact = 2**9 * np.pi**2 * np.exp(-4.0) / (3.0 * SPEED_OF_LIGHT)
    assert exact / MEGABARN == pytest.approx(6.30, abs=0.005)
    _, sigma = cross_sections(hydrogen, [0.5 * (1.0 + 1e-6)])
    assert sigma[0] == pytest.approx(exact, rel=1e-5)  # k = 1e-3: sigma(E) - sigma(I) ~ 1e-6 sigma


@pytest.mark.parametrize("charge", [2, 3], ids=["He+", "Li2+"])
def test_hydrogen_like_z_scaling(hydrogen, charge):
    """Exact: sigma_Z(omega) = sigma_H(omega / Z^2) / Z^2, with the grid built afresh for each Z."""
    ion = solve_default({2: "He", 3: "Li"}[charge], charge=charge - 1)
    scaled = np.array([0.505, 1.5, 15.0])
    _, sigma_h = cross_sections(hydrogen, scaled)
    _, sigma_z = cross_sections(ion, charge**2 * scaled)
    assert sigma_z * charge**2 == pytest.approx(sigma_h, rel=GRID_RTOL)
    assert sigma_z == pytest.approx(stobbe_cross_section(charge**2 * scaled, charge), rel=GRID_RTOL)


# --- the outgoing-wave solver -------------------------------------------------------------------


@pytest.fixture(scope="module")
def neon_continuum(neon):
    solver, _ = build_continuum_solver(neon.system, neon.homo_energy, 1, 3.0, 0.2)
    return solver


def test_outgoing_resolvent_has_a_small_backward_error(neon_continuum):
    """Common practice, no source: the bridge-Schur/LU resolvent solves the dense scaled operator
    F_l' - E with a normwise backward error ||A x - b|| / (||A|| ||x||) of a few n eps (it
    combines an orthogonal eigen-decomposition and a pivoted LU, both backward stable)."""
    solver = neon_continuum
    rhs = solver.padded(solver.inner.project(np.random.default_rng(3).standard_normal((len(solver.channels), solver.n_inner))))
    frequency = 2.2
    plus, _ = solver.resolvents(rhs, np.zeros(rhs[:, : solver.n_inner].shape, complex), solver.propagator(frequency, False))
    n = solver.grid.size
    for t, channel in enumerate(solver.channels):
        matrix = solver.fock_matrix(channel.l_prime)
        matrix[np.diag_indices(n)] -= solver.inner.orbital_energies[channel.shell] + frequency
        residual = np.linalg.norm(matrix @ plus[t] - rhs[t])
        assert residual <= 20 * n * np.finfo(float).eps * np.linalg.norm(matrix, 2) * np.linalg.norm(plus[t])


def test_hole_potential_is_one_over_r_beyond_the_orbitals(helium):
    """Analytic: the monopole potential of a normalized 1s density is 1/r outside it (Gauss); He
    has no other multipole, so the channel-diagonal exchange tail is exactly 1/z."""
    solver, _ = build_continuum_solver(helium.system, helium.homo_energy, 1, 2.0, 0.2)
    tail = solver.hole_potential[0, solver.n_inner:]
    assert np.allclose(tail, 1.0 / solver.grid.z[solver.n_inner:], rtol=1e-12, atol=0.0)


@pytest.mark.parametrize("frequency", [0.0, 0.3j, 1.5j, 0.25])
def test_outgoing_solver_equals_bound_state_solver_off_the_continuum(neon, neon_continuum, frequency):
    """Where the response decays (zero, imaginary, and real frequencies below the first pole at
    0.63 hartree) the outgoing-wave alpha must equal the bound-state solver's on the ground-state
    grid (another grid, another code path); both grids are accurate to ~1e-10 (measured 1e-11)."""
    direct = neon_continuum.polarizability(neon_continuum.solve(frequency))
    imaginary = isinstance(frequency, complex)
    value = abs(frequency) if imaginary else frequency
    reference = compute_response(neon, frequencies=() if imaginary else (value,),
                                 imaginary_frequencies=(value,) if imaginary else (), excitation_count=1)
    assert direct.real == pytest.approx(reference.polarizabilities[0].coupled, rel=1e-9)
    assert abs(direct.imag) <= 1e-12 * abs(direct)


def test_flux_identity_at_every_real_radius(neon_continuum):
    """Analytic (discrete): with the Hermitian ground-state and induced terms, the weighted channel
    currents through any real element boundary X >= R_i add up to Im alpha exactly (the
    integration-by-parts identity of the current); only the Krylov residual spoils it."""
    solver = neon_continuum
    solution = solver.solve(2.5)
    alpha = solver.polarizability(solution)
    grid = solver.grid
    for boundary in grid.boundaries[(grid.boundaries >= solver.inner_radius) & (grid.boundaries <= grid.scaling_radius)]:
        flux = solver.channel_flux(solution, grid.node_at(boundary))
        assert flux.sum() == pytest.approx(alpha.imag, rel=SOLVE_RTOL)


# --- helium: coupled TDHF ---------------------------------------------------------------------


HELIUM_ENERGIES = (0.9181, 0.95, 1.4, 2.5, 8.0)


@pytest.fixture(scope="module")
def helium_rows(helium):
    return cross_sections(helium, HELIUM_ENERGIES)[0]


def test_helium_threshold_cross_section_near_7_4_megabarn(helium_rows):
    """RPA (TDHF) He at threshold ~7.4 Mb (Amusia and coworkers, from memory; not checked): +-0.1 Mb."""
    assert helium_rows.photoionization[0].cross_section / MEGABARN == pytest.approx(7.4, abs=0.1)


def test_helium_length_equals_velocity(helium_rows):
    """Exact in RPA with a complete basis: the two forms differ only by the grid (measured 3e-10)."""
    for row in helium_rows.photoionization:
        assert row.cross_section_velocity == pytest.approx(row.cross_section, rel=GRID_RTOL)
        assert row.converged and row.partial[0].cross_section == pytest.approx(row.cross_section, rel=SOLVE_RTOL)


def test_helium_coupled_and_uncoupled_differ(helium_rows):
    """Common practice: the V^N continuum has no hole attraction (a neutral potential), so its
    p-wave cross section vanishes at threshold like k^3 while the coupled one is finite."""
    first = helium_rows.photoionization[0]
    assert first.cross_section_uncoupled < 1e-2 * first.cross_section


def test_helium_sum_rules_and_kramers_kronig(helium):
    """S(0) = N (Thomas–Reiche–Kuhn, exact in RPA), S(-2) = alpha(0) and alpha(i nu) rebuilt from
    bound lines + continuum, against the bound-state solver on the ground-state grid; to 1e-6
    (the issue's target; measured ~3e-10)."""
    summary = compute_photoionization(helium, PhotoionizationSection((), None, True)).continuum
    rules = {rule.k: rule for rule in summary.sum_rules}
    direct = compute_response(helium, frequencies=(0.0,),
                              imaginary_frequencies=tuple(c.imaginary_frequency for c in summary.kramers_kronig),
                              excitation_count=1).polarizabilities
    assert rules[0].total == pytest.approx(2.0, rel=1e-6)
    assert rules[-2].total == pytest.approx(direct[0].coupled, rel=1e-6)
    assert rules[-1].total == pytest.approx(rules[-1].exact, rel=1e-6)
    for check, reference in zip(summary.kramers_kronig, direct[1:]):
        assert check.rebuilt == pytest.approx(reference.coupled, rel=1e-6)
    assert all(rule.bound > 0 and rule.continuum > 0 and rule.converged for rule in summary.sum_rules)


@pytest.mark.parametrize("change", [
    {"angle": 0.6}, {"angle": 1.0}, {"extension": 100.0}, {"order": 10}, {"order": 14},
    {"resolution": 7.0}, {"growth": 1.4}, {"scaled_growth": 1.25}, {"absorbing_length": 4000.0},
], ids=lambda change: "-".join(f"{k}={v}" for k, v in change.items()))
def test_helium_cross_section_independent_of_the_continuum_grid(helium, helium_rows, change):
    """The issue's criterion: sigma stable to 1e-5 relative against R_0, theta, the element order
    and size, the outer radius (measured <= 1.1e-7, at order 10)."""
    rows, sigma = cross_sections(helium, HELIUM_ENERGIES, dataclasses.replace(ContinuumGridSettings(), **change))
    assert rows.continuum.grid != helium_rows.continuum.grid
    assert sigma == pytest.approx([row.cross_section for row in helium_rows.photoionization], rel=1e-5)


# --- neon, argon: partial cross sections, interchannel coupling --------------------------------


def test_neon_partial_cross_sections_add_up_to_the_total(neon):
    """Common practice: the fluxes of the open subshells add up to the total (exact at every X up
    to the closed channels' transient flux; measured 1e-9)."""
    result, sigma = cross_sections(neon, [2.5, 4.0, 7.0])
    for row in result.photoionization:
        assert [p.subshell for p in row.partial] == ["2p", "2s"]
        assert sum(p.cross_section for p in row.partial) == pytest.approx(row.cross_section, rel=1e-6)
        assert all(p.cross_section > 0 for p in row.partial)


def test_continuum_polarizability_below_and_above_threshold(neon):
    """Below the first pole the complex alpha is real and equals the bound-state value; above the
    threshold Im alpha_1 = c sigma / (4 pi omega); alpha_2 has Im > 0 (absorption)."""
    below, above = continuum_polarizabilities(neon, 1, (0.25, 2.5))
    reference = compute_response(neon, frequencies=(0.25,), excitation_count=1).polarizabilities[0].coupled
    assert below.real_part == pytest.approx(reference, rel=1e-9) and abs(below.imaginary_part) < 1e-12
    sigma = cross_sections(neon, [2.5])[1][0]
    assert above.imaginary_part == pytest.approx(SPEED_OF_LIGHT * sigma / (4 * np.pi * 2.5), rel=SOLVE_RTOL)
    quadrupole = continuum_polarizabilities(neon, 2, (2.5,))[0]
    assert quadrupole.converged and quadrupole.imaginary_part > 0


@pytest.mark.slow
@pytest.mark.parametrize("element", ["Ne", "Ar", "Kr", "Xe"])
def test_sum_rules_and_kramers_kronig_heavier_atoms(element):
    """As for He: S(0) = N, S(-2) = alpha(0), S(-1), alpha(i nu) at three nu, to 1e-6 (measured
    1e-9 .. 1e-10); the references are direct solves on the ground-state grid."""
    state = solve_default(element)
    summary = compute_photoionization(state, PhotoionizationSection((), None, True)).continuum
    rules = {rule.k: rule for rule in summary.sum_rules}
    direct = compute_response(state, frequencies=(0.0,),
                              imaginary_frequencies=tuple(c.imaginary_frequency for c in summary.kramers_kronig),
                              excitation_count=1).polarizabilities
    assert rules[0].total == pytest.approx(state.system.electrons, rel=1e-6)
    assert rules[-2].total == pytest.approx(direct[0].coupled, rel=1e-6)
    assert rules[-1].total == pytest.approx(rules[-1].exact, rel=1e-6)
    for check, reference in zip(summary.kramers_kronig, direct[1:]):
        assert check.rebuilt == pytest.approx(reference.coupled, rel=1e-6)


@pytest.mark.slow
@pytest.mark.parametrize("element, energies", [
    ("Ne", (0.9, 2.5, 6.0)), ("Ar", (0.65, 1.8, 6.0)), ("Kr", (0.6, 3.0, 5.0)), ("Xe", (0.6, 3.7, 5.0)),
])
def test_length_equals_velocity_heavier_atoms(element, energies):
    """Exact in RPA with a complete basis; the issue's target 1e-5 (measured <= 3e-9)."""
    rows, _ = cross_sections(solve_default(element), energies)
    for row in rows.photoionization:
        assert row.converged
        assert row.cross_section_velocity == pytest.approx(row.cross_section, rel=1e-5)


@pytest.fixture(scope="module")
def argon_cooper(argon):
    energies = np.linspace(1.4, 2.4, 21)
    return energies, cross_sections(argon, energies)[0]


@pytest.mark.slow
def test_argon_3p_cooper_minimum(argon_cooper):
    """RPA with exchange puts the Ar 3p Cooper minimum near 45-50 eV photon energy (Amusia and
    Cherepkov, Case Stud. At. Phys. 5, 47 (1975), from memory; measured here ~49 eV): the 3p
    partial cross section has its minimum in 44-52 eV, below a fifth of its value at 38 eV."""
    energies, rows = argon_cooper
    partial = np.array([next(p.cross_section for p in row.partial if p.subshell == "3p") for row in rows.photoionization])
    minimum = energies[np.argmin(partial)] * HARTREE_EV
    assert 44.0 <= minimum <= 52.0
    assert partial.min() < 0.2 * partial[0]


@pytest.mark.slow
def test_argon_partials_independent_of_the_flux_radius(argon):
    """The windowed flux reads the partial cross sections to ~1e-5 of the total (measured 5e-6
    against other grids); a 100-bohr window must agree to 2e-5."""
    energies = (1.5, 2.5, 6.0)
    base, _ = cross_sections(argon, energies)
    wide, _ = cross_sections(argon, energies, dataclasses.replace(ContinuumGridSettings(), extension=100.0))
    for a, b in zip(base.photoionization, wide.photoionization):
        for p, q in zip(a.partial, b.partial):
            assert p.subshell == q.subshell and abs(p.cross_section - q.cross_section) <= 2e-5 * a.cross_section


@pytest.mark.slow
def test_xenon_4d_giant_resonance():
    """The Xe 4d giant resonance in RPA with exchange: delayed well above the 4d threshold (75.6 eV
    here), peaking near 100 eV at ~30 Mb (Amusia, Cherepkov, Chernysheva, Phys. Lett. A 40, 15
    (1972); Wendin, J. Phys. B 6, 42 (1973); both from memory): peak in 90-110 eV, above 20 Mb,
    carried by the 4d subshell, and at most a third of it 3 eV above the threshold."""
    xenon = solve_default("Xe")
    onset = -next(o.energy for o in xenon.orbitals if o.label == "4d") + 3.0 / HARTREE_EV
    energies = np.linspace(3.0, 4.6, 17)
    rows, sigma = cross_sections(xenon, [onset, *energies])
    peak = 1 + int(np.argmax(sigma[1:]))
    assert 90.0 <= energies[peak - 1] * HARTREE_EV <= 110.0
    assert sigma[peak] / MEGABARN > 20.0
    four_d = next(p.cross_section for p in rows.photoionization[peak].partial if p.subshell == "4d")
    assert four_d > 0.8 * sigma[peak]
    assert sigma[0] < sigma[peak] / 3.0


@pytest.mark.slow
def test_neon_2s_autoionizing_resonances_form_a_rydberg_series(neon):
    """Quantum-defect theory (Seaton, Rep. Prog. Phys. 46, 167 (1983), from memory): the 2s -> np
    resonances in the 2p continuum converge to I_2s with energies I_2s - 1/(2 n*^2), n* = n - mu
    with a slowly varying defect (consecutive n* one apart), and widths falling as n*^-3 (Gamma
    n*^3 tends to a constant; measured here constant to 3 %, tested to 10 %)."""
    threshold = -next(o.energy for o in neon.orbitals if o.label == "2s")
    result = compute_photoionization(neon, PhotoionizationSection((), (1.78, 1.915), False))
    series = [r for r in result.resonances if r.subshell == "2s"]
    assert len(series) == len(result.resonances) >= 4
    effective = np.array([1.0 / np.sqrt(2.0 * (threshold - r.energy)) for r in series])
    assert np.diff(effective) == pytest.approx(np.ones(len(series) - 1), abs=0.03)
    widths = np.array([r.width for r in series])
    reduced = widths * effective**3
    assert np.all(widths > 0) and widths[0] / widths[-1] > 5.0
    assert reduced.max() / reduced.min() < 1.1


def test_two_workers_give_the_serial_numbers(helium):
    """Common practice, no source: spreading the photon energies and the sum-rule frequencies over
    processes runs the same computation (one BLAS thread each).  The solver reaches the workers
    pickled, and numpy's vectorized sums depend on the memory alignment of the copies, so the numbers
    agree to round-off: a few ulp per operation, bounded here by 1e-13 relative (the contour sums
    add ~1e3 terms of alternating sign; measured differences 2e-16)."""
    section = PhotoionizationSection((1.0, 1.5, 3.0), (1.2, 1.3), True)
    serial = compute_photoionization(helium, section)
    with ProcessPool(2) as pool:
        parallel = compute_photoionization(helium, section, map_tasks=pool)
    assert len(parallel.photoionization) == len(serial.photoionization)
    for a, b in zip(parallel.photoionization, serial.photoionization):
        assert a.photon_energy == b.photon_energy
        assert a.cross_section == pytest.approx(b.cross_section, rel=1e-13, abs=0.0)
        assert a.cross_section_velocity == pytest.approx(b.cross_section_velocity, rel=1e-13, abs=0.0)
    for a, b in zip(parallel.continuum.sum_rules, serial.continuum.sum_rules):
        assert a.total == pytest.approx(b.total, rel=1e-13, abs=0.0)
    for a, b in zip(parallel.continuum.kramers_kronig, serial.continuum.kramers_kronig):
        assert a.rebuilt == pytest.approx(b.rebuilt, rel=1e-13, abs=0.0)

def test_real_frequencies_above_threshold_give_the_continuum_alpha(hydrogen):
    """Analytic (Stobbe's exact 1s cross section, above): a [response] frequency above the hydrogen
    threshold is no longer refused but solved with outgoing waves, and its Im alpha_1 gives
    sigma = 4 pi omega Im alpha / c to the 1e-7 of the continuum solver (measured 6e-9)."""
    from tdhf.properties.photoionization import SPEED_OF_LIGHT
    from tdhf.properties.response_properties import compute_response

    frequencies = (0.6, 1.0, 3.0)
    results = compute_response(hydrogen, frequencies=frequencies)
    assert not results.rejected
    rows = results.polarizabilities
    assert [row.method for row in rows] == ["outgoing waves"] * 3 and all(row.converged for row in rows)
    sigma = np.array([4.0 * np.pi * row.frequency * row.coupled_imaginary_part / SPEED_OF_LIGHT for row in rows])
    np.testing.assert_allclose(sigma, stobbe_cross_section(np.array(frequencies)), rtol=1e-7, atol=0.0)
    # one electron: coupled and uncoupled are the same equations
    assert [row.uncoupled_imaginary_part for row in rows] == pytest.approx([row.coupled_imaginary_part for row in rows],
                                                                              rel=1e-12, abs=0.0)
