"""Tests of closed-shell Hartree–Fock ground states (tdhf.ground_state, tdhf.scf).

Evidence: exact invariants (one-electron limits, virial theorem, Hellmann-Feynman theorem, Kato
cusp, orthonormality), variational upper bounds computed independently (an analytic trial function;
Gaussian-basis RHF of a general-purpose library), observed convergence under grid refinement,
published numerical-HF values (source beside each number), and the documented behaviour of the
SCF and the automatic box.

All energies are in hartree, lengths in bohr.
"""

from __future__ import annotations

from decimal import Decimal

import warnings

import numpy as np
import pytest
from roundoff import U, gamma

from tdhf.errors import ConfigurationError, GridError, InputError
from tdhf.ground_state import BOX_DECAY, ANION_R_MAX, solve_ground_state
from tdhf.numerics.threads import single_blas_thread
from tdhf.radial.mesh import GridSettings
from tdhf.radial.poisson import coulomb_kernels
from tdhf.scf import ENERGY_ROUNDOFF, ScfSettings, solve_scf
from tdhf.system import System


def solve_default(element: str, charge: int = 0, configuration: str | None = None):
    """Ground state at default grid and SCF settings (as the conftest fixtures are made)."""
    system = System.from_input(element, charge=charge, configuration=configuration)
    return solve_ground_state(system, GridSettings(), ScfSettings())

FIXTURES = ["helium", "beryllium", "neon", "argon"]

#: Our own discretization error at default settings, hartree: measured against much finer grids
#: (test_energy_error_falls_spectrally_with_order, test_tight_preset_matches_fine_grid) for light
#: atoms; the GridSettings docstring promises ~1e-9 through Rn.
DEFAULT_GRID_ERROR = 1e-9


def quoted_tolerance(value: str) -> float:
    """Half a unit in the last quoted decimal place (the reference's own rounding) + our grid error."""
    exponent = Decimal(value).as_tuple().exponent
    return 0.5 * 10.0**exponent + DEFAULT_GRID_ERROR


# --- published numerical Hartree–Fock limits ------------------------------------------------

# He total energy -2.861679995612: Hatano & Yamamoto, J. Comput. Chem. Jpn. Int. Ed. 11 (2025);
# also Cinal, J. Math. Chem. 58 (2020). From memory, not re-read.
HELIUM_ENERGY = -2.861679995612
# He 1s orbital energy -0.917955563: numerical HF literature (e.g. Cinal, J. Math. Chem. 58 (2020)),
# from memory.
HELIUM_1S_ENERGY = -0.917955563
# Be -14.5730231683, Ne -128.5470981094: Cinal, J. Math. Chem. 58 (2020), from memory.
BERYLLIUM_ENERGY = -14.5730231683
NEON_ENERGY = -128.5470981094
# Ne orbital energies 1s, 2s, 2p to 5 decimals: numerical HF tables (e.g. C. Froese Fischer,
# "The Hartree-Fock Method for Atoms", Wiley 1977), from memory.
NEON_ORBITAL_ENERGIES = {"1s": "-32.77244", "2s": "-1.93039", "2p": "-0.85041"}


# Tolerance of each: half a unit in the last quoted digit plus our default-grid error (1e-9).
def test_helium_total_energy(helium):
    assert helium.total_energy == pytest.approx(HELIUM_ENERGY, abs=quoted_tolerance(str(HELIUM_ENERGY)))


def test_helium_1s_orbital_energy(helium):
    assert helium.orbitals[0].energy == pytest.approx(HELIUM_1S_ENERGY, abs=quoted_tolerance(str(HELIUM_1S_ENERGY)))


def test_beryllium_total_energy(beryllium):
    assert beryllium.total_energy == pytest.approx(BERYLLIUM_ENERGY, abs=quoted_tolerance(str(BERYLLIUM_ENERGY)))


def test_neon_total_energy(neon):
    assert neon.total_energy == pytest.approx(NEON_ENERGY, abs=quoted_tolerance(str(NEON_ENERGY)))


@pytest.mark.parametrize("label", NEON_ORBITAL_ENERGIES)
def test_neon_orbital_energies(neon, label):
    (orbital,) = [o for o in neon.orbitals if o.label == label]
    quoted = NEON_ORBITAL_ENERGIES[label]
    assert orbital.energy == pytest.approx(float(quoted), abs=quoted_tolerance(quoted))


# Numerical HF total energies, values from memory of the numerical HF literature (e.g. S. L. Saito,
# At. Data Nucl. Data Tables 95, 836 (2009) for neutral atoms; Koga and co-workers' tables for ions),
# digits as recalled, not re-read.  Tolerance: half a unit in the last digit plus our grid error.
LIGHT_REFERENCES = {
    "Mg": ("Mg", 0, "-199.6146364"),
    "Ar": ("Ar", 0, "-526.8175128"),
    "Ca": ("Ca", 0, "-676.7581859"),
    "H-": ("H", -1, "-0.4879297343"),
    "Li+": ("Li", 1, "-7.2364152"),
    "Na+": ("Na", 1, "-161.6769626"),
    "F-": ("F", -1, "-99.4594539"),
    "Cl-": ("Cl", -1, "-459.5769253"),
}
# Same sources; these take 0.1–0.5 s each, ~3 s together.
HEAVY_REFERENCES = {
    "Zn": ("Zn", 0, "-1777.8481162"),
    "Kr": ("Kr", 0, "-2752.0549773"),
    "Sr": ("Sr", 0, "-3131.5456864"),
    "Pd": ("Pd", 0, "-4937.9210241"),
    "Cd": ("Cd", 0, "-5465.1331425"),
    "Xe": ("Xe", 0, "-7232.1383639"),
    "Ba": ("Ba", 0, "-7883.5438273"),
    "Hg": ("Hg", 0, "-18408.9914949"),
    "Rn": ("Rn", 0, "-21866.7722409"),
}


def check_reference(element: str, charge: int, quoted: str) -> None:
    state = solve_default(element, charge)
    assert state.converged
    assert state.total_energy == pytest.approx(float(quoted), abs=quoted_tolerance(quoted))


@pytest.mark.parametrize("element, charge, quoted", LIGHT_REFERENCES.values(), ids=list(LIGHT_REFERENCES))
def test_total_energy_light_atoms_and_ions(element, charge, quoted):
    with warnings.catch_warnings():  # H- warns that HF does not bind it (tested below)
        warnings.filterwarnings("ignore", "atom.charge: H- is unbound", RuntimeWarning)
        check_reference(element, charge, quoted)


@pytest.mark.slow
@pytest.mark.parametrize("element, charge, quoted", HEAVY_REFERENCES.values(), ids=list(HEAVY_REFERENCES))
def test_total_energy_heavy_atoms(element, charge, quoted):
    check_reference(element, charge, quoted)


#: Variational upper bound for He, analytic: the single-zeta determinant 1s^2 with P = r e^(-zeta r)
#: has E(zeta) = zeta^2 - 27 zeta / 8, lowest at zeta = 27/16: E = -(27/16)^2 = -2.84765625 hartree
#: (textbook variational calculation, re-derived here).  HF is the best single determinant, so
#: E_HF < E(27/16); the margin (0.014 hartree) is far above our grid error.
HELIUM_SINGLE_ZETA_BOUND = -(27 / 16) ** 2


def test_helium_energy_lies_below_the_single_zeta_variational_bound(helium):
    assert helium.total_energy < HELIUM_SINGLE_ZETA_BOUND


#: Gaussian-basis RHF energies are variational upper bounds to the HF limit; computed here with a
#: general-purpose library (PySCF, cc-pVQZ; Q. Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018),
#: from memory).  Our energies must lie below them; the basis error of cc-pVQZ is ~1e-3 hartree
#: for Ne and Ar (measured: Ne 1.1e-3, Ar 7.3e-4 above our values), so a grid error that lifted our
#: energy above the basis value would be caught, and the gap is bounded by 5e-3 to catch a wrong basis.
@pytest.mark.slow
@pytest.mark.parametrize("atom, symbol", [("neon", "Ne"), ("argon", "Ar")])
def test_energy_lies_below_a_gaussian_basis_variational_bound(request, atom, symbol):
    pyscf = pytest.importorskip("pyscf")
    state = request.getfixturevalue(atom)
    mol = pyscf.gto.M(atom=f"{symbol} 0 0 0", basis="cc-pvqz", verbose=0)
    rhf = pyscf.scf.RHF(mol)
    scratch = getattr(rhf, "_chkfile", None)
    if scratch is not None:  # no checkpoint file: one left to the garbage collector warns later
        scratch.close()
    rhf.chkfile = None
    rhf.conv_tol = 1e-11
    bound = rhf.kernel()
    assert rhf.converged
    assert 0.0 < bound - state.total_energy < 5e-3


# --- exact invariants ------------------------------------------------------------------------


@pytest.mark.parametrize("atom", FIXTURES)
def test_fixture_converged_cleanly(request, atom):
    state = request.getfixturevalue(atom)
    assert state.converged
    assert state.warnings == ()
    assert state.orbital_change < state.scf_settings.residual_tolerance
    assert state.box_decay >= BOX_DECAY


#: How well the virial theorem and Kato's cusp condition hold for the converged SCF on the default
#: grid: measured |-V/T - 2| <= 7e-12 and |cusp - 1| <= 6e-11 for He, Be, Ne, Ar and the
#: one-electron ions on GridSettings() and GridSettings.tight().  Both are first order in the
#: remaining orbital error, which the SCF stops below its residual tolerance 1e-9 (final orbital
#: changes 2e-11 .. 4e-10 here, the error itself smaller still); an SCF that stopped a step earlier
#: on another machine could reach ~1e-10, so 1e-9 bounds both with room.
VIRIAL_ATOL = 1e-9
CUSP_ATOL = 1e-9


@pytest.mark.parametrize("atom", FIXTURES)
def test_virial_ratio_is_two(request, atom):
    # -V/T = 2 holds exactly for the HF solution with a point nucleus (virial theorem).
    assert request.getfixturevalue(atom).virial_ratio == pytest.approx(2.0, abs=VIRIAL_ATOL)


@pytest.mark.parametrize("atom", FIXTURES)
def test_kato_cusp_ratio_is_one(request, atom):
    # Kato's theorem: rho'(0) = -2 Z rho(0), satisfied by the exact HF orbitals too.
    assert request.getfixturevalue(atom).cusp_ratio == pytest.approx(1.0, abs=CUSP_ATOL)


@pytest.mark.parametrize("atom", FIXTURES)
def test_orbitals_orthonormal_within_each_symmetry(request, atom):
    """Eigenvectors of one symmetric eigen-decomposition are orthonormal to O(n U) (LAPACK's
    bound for well-separated eigenvalues; measured <= 0.06 n U here), and the Gram product adds
    gamma(n): tolerance 2 gamma(n)."""
    state = request.getfixturevalue(atom)
    for l in set(state.shells.l.tolist()):
        block = state.shells.orbitals[state.shells.l == l]
        np.testing.assert_allclose(block @ block.T, np.eye(len(block)), rtol=0, atol=2 * gamma(state.grid_points))


@single_blas_thread
def hellmann_feynman_derivative(state, step: float = 1e-2) -> tuple[float, float]:
    """dE/dZ at fixed grid and configuration by the five-point rule, and its error bound.

    Truncation: step^4 |E^(5)| / 30, with |E^(5)| < 1 hartree for these atoms (E(Z) is smooth,
    ~-Z^2 N/2 plus slowly varying terms), i.e. < 4e-10.  Noise: each SCF energy is converged to
    max(1e-12, ENERGY_ROUNDOFF |E|), which the rule's weights (sum 18/12) divide by step.
    """
    kernels = coulomb_kernels(state.grid, 2 * max(s.l for s in state.system.subshells))
    energies = {k: solve_scf(state.grid, state.system.Z + k * step, state.system.subshells, ScfSettings(),
                             kernels=kernels) for k in (-2, -1, 1, 2)}
    assert all(solution.converged for solution in energies.values())
    e = {k: solution.total_energy for k, solution in energies.items()}
    derivative = (e[-2] - 8 * e[-1] + 8 * e[1] - e[2]) / (12 * step)
    noise = 18 / 12 * max(1e-12, ENERGY_ROUNDOFF * abs(state.total_energy)) / step
    return derivative, step**4 / 30 + noise


@pytest.mark.parametrize("atom", FIXTURES)
def test_nuclear_attraction_energy_obeys_hellmann_feynman(request, atom):
    """dE/dZ = <dH/dZ> = -sum_i <1/r_i> = V_ne / Z (Hellmann-Feynman theorem, exact for the
    variational HF energy at fixed N): the nuclear-attraction component against an independent
    route, SCF energies at Z +- h, +-2h on the same grid."""
    state = request.getfixturevalue(atom)
    derivative, bound = hellmann_feynman_derivative(state)
    assert abs(derivative - state.nuclear_attraction_energy / state.system.Z) <= bound


@pytest.mark.parametrize("atom", FIXTURES)
def test_energy_components_have_the_physical_signs(request, atom):
    state = request.getfixturevalue(atom)
    assert state.kinetic_energy > 0 and state.coulomb_energy > 0 and state.exchange_energy < 0
    # Electron count from the orbitals: every subshell is filled.
    assert sum(o.occupation for o in state.orbitals) == state.system.electrons


def test_helium_exchange_is_minus_half_the_coulomb_energy(helium):
    """For 1s^2 the exchange integral equals the direct one, K = J = F^0(1s,1s), so E_x = -E_J/2
    exactly (analytic); the two come from different operators in tdhf (the exchange operator with its
    3j factor, the Hartree potential).  Round-off: each is the bilinear form d^T V^0 d of d = p^2,
    a matrix-vector product and a dot product, within 2 gamma(n) + 4 U of d^T |V^0| d."""
    pair = helium.shells.orbitals[0] ** 2
    absolute = pair @ np.abs(coulomb_kernels(helium.grid, 0)[0]) @ pair
    bound = 3 * (2 * gamma(helium.grid_points) + 4 * U) * absolute  # E_J = 2 d V d, E_x = -d V d
    assert abs(helium.exchange_energy + 0.5 * helium.coulomb_energy) <= bound


def test_orbital_energies_ordered_as_expected(neon, argon):
    energies = {o.label: o.energy for o in argon.orbitals}
    assert energies["1s"] < energies["2s"] < energies["2p"] < energies["3s"] < energies["3p"] < 0
    assert neon.homo_energy == pytest.approx(neon.orbitals[-1].energy, abs=0)


@pytest.mark.parametrize("element, charge", [("H", 0), ("He", 1), ("Li", 2)], ids=["H", "He+", "Li2+"])
def test_one_electron_ions_are_exactly_hydrogenic(element, charge):
    """Analytic hydrogen-like 1s: E = eps = -Z^2/2, <r> = 3/(2Z), rho(0) = Z^3/pi.

    Measured deviations on the default and the tight grid: energies <= 2.2e-13, <r> <= 9e-13 and
    rho(0) <= 4e-12 relative (round-off: they grow, not shrink, on the tight grid), virial <= 3e-12,
    cusp <= 6e-11.  Tolerances: 1e-11 relative for the energies (a self-interaction J = 5Z/8 would
    miss by 0.6), 1e-10 for <r> and rho(0), and VIRIAL_ATOL, CUSP_ATOL."""
    state = solve_default(element, charge, configuration="1s1")
    z = state.system.Z
    assert state.total_energy == pytest.approx(-0.5 * z**2, rel=1e-11, abs=0)
    assert state.orbitals[0].energy == pytest.approx(-0.5 * z**2, rel=1e-11, abs=0)
    assert state.mean_r == pytest.approx(1.5 / z, rel=1e-10, abs=0)
    assert state.density_at_nucleus == pytest.approx(z**3 / np.pi, rel=1e-10, abs=0)
    assert state.virial_ratio == pytest.approx(2.0, abs=VIRIAL_ATOL)
    assert state.cusp_ratio == pytest.approx(1.0, abs=CUSP_ATOL)


# --- convergence under grid refinement -------------------------------------------------------

#: Reference "much finer" grid for convergence checks.
FINE_GRID = GridSettings(order=18, growth=1.3)
#: Below this the reference itself is not reproducible: for Ne the fine grid and
#: GridSettings(order=20, growth=1.3) differ by 5e-11 hartree (self-measured), ~ 4 * ENERGY_ROUNDOFF|E|.
CONVERGENCE_FLOOR = 1e-10


@pytest.fixture(scope="module")
def fine_helium():
    return solve_ground_state(System.from_input("He"), FINE_GRID)


@pytest.fixture(scope="module")
def fine_neon():
    return solve_ground_state(System.from_input("Ne"), FINE_GRID)


def test_energy_error_falls_spectrally_with_order(fine_neon):
    system = System.from_input("Ne")
    orders = [4, 6, 8, 10]
    errors = [abs(solve_ground_state(system, GridSettings(order=p)).total_energy - fine_neon.total_energy) for p in orders]
    # Observed: 1.9e-4, 1.5e-7, 8.2e-11, 1.4e-11 -- a factor ~1e3 per +2 in order until the floor.
    # An algebraic method would gain a fixed factor per refinement; we require >= 100 per step.
    for previous, current in zip(errors, errors[1:]):
        assert current <= max(previous / 100.0, CONVERGENCE_FLOOR), errors
    assert errors[0] > 1e-6, errors  # order 4 is genuinely under-resolved: the test measures something
    assert errors[-1] < CONVERGENCE_FLOOR, errors


@pytest.mark.parametrize("atom", ["helium", "neon"])
def test_tight_preset_matches_fine_grid(request, atom):
    fine = request.getfixturevalue(f"fine_{atom}")
    tight = solve_ground_state(fine.system, GridSettings.tight())
    assert tight.total_energy == pytest.approx(fine.total_energy, abs=1e-10)


@pytest.mark.parametrize("atom", ["helium", "neon"])
def test_default_grid_matches_fine_grid(request, atom):
    fine = request.getfixturevalue(f"fine_{atom}")
    default = request.getfixturevalue(atom)
    assert default.total_energy == pytest.approx(fine.total_energy, abs=1e-10)
    for ours, reference in zip(default.orbitals, fine.orbitals):
        assert ours.energy == pytest.approx(reference.energy, abs=1e-9)
        assert ours.mean_r == pytest.approx(reference.mean_r, rel=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("element", ["Kr", "Xe", "Rn"])
def test_default_grid_matches_tight_for_heavy_atoms(element):
    # For heavy atoms refinement moves E by up to ~5e-13 |E| in either direction (round-off in the
    # ~1e8 hartree innermost kinetic eigenvalues; Rn: 1e-9 at the tight preset, 1e-8 at order 16):
    # that is the measurable floor, not the 1e-9 of the GridSettings docstring.
    system = System.from_input(element)
    default = solve_default(element)
    tight = solve_ground_state(system, GridSettings.tight())
    assert tight.total_energy == pytest.approx(default.total_energy, abs=10 * ENERGY_ROUNDOFF * abs(default.total_energy))


# --- SCF behaviour --------------------------------------------------------------------------


@pytest.mark.parametrize("atom", FIXTURES)
def test_history_approaches_final_energy(request, atom):
    state = request.getfixturevalue(atom)
    iterations, energies, changes, orbital_changes = (np.array(column) for column in zip(*state.history))
    np.testing.assert_array_equal(iterations, np.arange(1, state.iterations + 1))
    # The starting guess is above the HF energy (variational), and the error shrinks to round-off:
    # each error is at most the previous one, once both are above the 1e-13 |E| floor.
    errors = np.abs(energies - state.total_energy)
    floor = 10 * ENERGY_ROUNDOFF * abs(state.total_energy)
    assert energies[0] > state.total_energy + floor
    for previous, current in zip(errors, errors[1:]):
        assert current <= max(previous, floor)
    assert errors[-4:].max() < 1e-8


@pytest.mark.parametrize(
    "settings, key",
    [
        (dict(order=3), "grid.order"),
        (dict(order=25), "grid.order"),
        (dict(order=10.0), "grid.order"),
        (dict(order=True), "grid.order"),
        (dict(growth=1.0), "grid.growth"),
        (dict(growth=4.5), "grid.growth"),
        (dict(growth=float("nan")), "grid.growth"),
        (dict(first_element=0.0), "grid.first_element"),
        (dict(first_element=2.0), "grid.first_element"),
        (dict(r_max=1.0), "grid.r_max"),
        (dict(r_max=5000.0), "grid.r_max"),
    ],
    ids=lambda v: v if isinstance(v, str) else "-".join(f"{k}={x}" for k, x in v.items()),
)
def test_grid_settings_validation_names_the_key(settings, key):
    with pytest.raises(GridError, match=key.replace(".", r"\.")):
        GridSettings(**settings)


@pytest.mark.parametrize(
    "settings, key",
    [
        (dict(max_iterations=0), "scf.max_iterations"),
        (dict(diis_size=0), "scf.diis_size"),
        (dict(damping=1.5), "scf.damping"),
        (dict(energy_tolerance=-1.0), "scf.energy_tolerance"),
    ],
    ids=["max_iterations", "diis_size", "damping", "energy_tolerance"],
)
def test_scf_settings_validation_names_the_key(settings, key):
    with pytest.raises(InputError, match=key.replace(".", r"\.")):
        solve_ground_state(System.from_input("He"), GridSettings(), ScfSettings(**settings))


def test_scf_non_convergence_is_reported_not_raised():
    system = System.from_input("He")
    with pytest.warns(RuntimeWarning, match="scf: not converged"):
        state = solve_ground_state(system, GridSettings(), ScfSettings(max_iterations=2))
    assert not state.converged
    assert state.iterations == 4  # two strategies, two iterations each
    assert any(note.startswith("scf:") for note in state.warnings)


def test_explicit_configuration_equals_default(beryllium):
    explicit = solve_default("Be", 0, configuration="1s2 2s2")
    assert explicit.system.configuration == beryllium.system.configuration
    assert explicit.total_energy == pytest.approx(beryllium.total_energy, abs=1e-12)


def test_unbound_anion_is_a_configuration_error():
    # O2- has no bound 2p orbital in Hartree-Fock (the free ion does not exist).
    with pytest.raises(ConfigurationError, match=r"atom\.charge"):
        solve_default("O", -2)


def test_excited_closed_shell_configuration_helium_2s2(helium):
    state = solve_default("He", 0, configuration="2s2")
    assert state.converged
    # A doubly excited state: above the ground state and above the He+ 1s threshold (-2 hartree).
    assert state.total_energy > helium.total_energy
    assert state.total_energy > -2.0
    assert state.virial_ratio == pytest.approx(2.0, abs=VIRIAL_ATOL)
    # The occupied orbital is the second s solution: exactly one radial node.
    values = state.grid.to_values(state.shells.orbitals[0])
    significant = np.abs(values) > 1e-8 * np.abs(values).max()
    signs = np.sign(values[significant])
    assert np.count_nonzero(signs[1:] != signs[:-1]) == 1
    assert -1.0 < state.orbitals[0].energy < 0.0


def test_hydrogen_anion_orbital_is_bound_and_the_box_grows():
    with pytest.warns(RuntimeWarning, match="H- is unbound against electron loss in Hartree-Fock"):
        state = solve_default("H", -1)
    assert state.converged
    (note,) = state.warnings
    assert "-0.50000000" in note  # E(H) = -1/2 exactly (analytic), the energy it is compared with
    # H- HF orbital energy -0.0462 (numerical HF literature, from memory; 4 decimals).
    assert state.orbitals[0].energy == pytest.approx(-0.0462, abs=quoted_tolerance("-0.0462"))
    # Koopmans-bound (negative orbital energy) but, in HF, not bound against H(1s) + e-: the HF
    # total energy lies above -0.5, a known failure of HF for H- (its value is checked in
    # LIGHT_REFERENCES).
    assert state.total_energy > -0.5
    assert state.r_max > ANION_R_MAX
    assert state.box_decay >= BOX_DECAY


def test_user_box_too_small_warns_and_keeps_the_box():
    with pytest.warns(RuntimeWarning, match=r"grid\.r_max"):
        state = solve_ground_state(System.from_input("Ne"), GridSettings(r_max=10.0))
    assert state.r_max == 10.0
    assert state.box_decay < BOX_DECAY
    assert any(note.startswith("grid.r_max") for note in state.warnings)


def test_a_first_element_wider_than_the_1s_orbital_warns():
    """Ne with a 1 bohr first element (10x its 1s size 1/Z): the energy is far off, and says so."""
    with pytest.warns(RuntimeWarning, match=r"grid\.first_element: 1 bohr is larger than the 1s orbital"):
        state = solve_ground_state(System.from_input("Ne"), GridSettings(first_element=1.0))
    assert abs(state.total_energy - (-128.5470981)) > 1e-3  # Ne HF limit (from memory), missed
