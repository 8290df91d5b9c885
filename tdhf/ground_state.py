"""Ground state of a closed-shell atom: grid choice, SCF, box check and the typed result.

The box radius is chosen from the decay of the outermost orbital, :math:`P(r) \\sim e^{-\\kappa r}`
with :math:`\\kappa = \\sqrt{2|\\varepsilon_{\\rm HOMO}|}`: the SCF is repeated in a larger box until
:math:`\\kappa R \\ge` ``BOX_DECAY`` (the orbital has fallen by ~e^-34 ~ 1e-15 at the wall).  A box
given by the user is kept and a warning is recorded if it is too small.
"""

from __future__ import annotations

import logging
import warnings
from dataclasses import dataclass, field

import numpy as np

from tdhf.errors import ConfigurationError, InputError
from tdhf.numerics.threads import single_blas_thread
from tdhf.potentials import OccupiedShells
from tdhf.radial.mesh import MAX_R_MAX, GridSettings, RadialGrid, build_grid
from tdhf.scf import ScfSettings, ScfSolution, solve_scf
from tdhf.system import System

__all__ = ["OrbitalResult", "GroundState", "solve_ground_state", "starting_box", "BOX_DECAY"]

logger = logging.getLogger(__name__)

#: Required kappa * R for the outermost orbital (P(R)/P_max ~ e^-BOX_DECAY).
BOX_DECAY = 34.0
#: Starting box radius, bohr (neutral atoms and cations); anions start at ANION_R_MAX.
DEFAULT_R_MAX = 40.0
ANION_R_MAX = 80.0


@dataclass(frozen=True)
class OrbitalResult:
    """One occupied subshell: energy and radial moments (atomic units).

    ``mean_r`` etc. are :math:`\\langle r^k \\rangle = \\int P(r)^2 r^k dr` per electron.

    Attributes
    ----------
    label : str
        Subshell, e.g. "2p".
    n, l : int
        Principal and orbital angular momentum quantum numbers.
    occupation : int
        Electrons in the subshell, 2(2l+1).
    energy : float
        Orbital energy epsilon, hartree (-epsilon_HOMO is the Koopmans ionization energy).
    mean_inverse_r_squared, mean_inverse_r, mean_r, mean_r_squared : float
        <r^-2>, <r^-1>, <r>, <r^2> per electron, bohr^k.
    """

    label: str
    n: int
    l: int
    occupation: int
    energy: float
    mean_inverse_r_squared: float
    mean_inverse_r: float
    mean_r: float
    mean_r_squared: float


@dataclass(frozen=True)
class GroundState:
    """Hartree–Fock ground state (hartree, bohr).

    Energy components: ``kinetic_energy`` T, ``nuclear_attraction_energy``, ``coulomb_energy``
    (direct e–e), ``exchange_energy`` (negative); ``virial_ratio`` = -V/T (2 for the exact HF
    solution).  Totals ``mean_r`` etc. are sums over all electrons of :math:`\\langle r^k \\rangle`.
    ``density_at_nucleus`` is :math:`\\rho(0)` in bohr^-3 and ``cusp_ratio`` is
    :math:`-\\rho'(0) / (2 Z \\rho(0))`, 1 by Kato's theorem; without an occupied s orbital
    :math:`\\rho(0) = 0` exactly (P ~ r^(l+1)), the theorem says nothing and ``cusp_ratio`` is None.
    ``scf_message`` says what stopped the SCF (:attr:`tdhf.scf.ScfSolution.message`).

    Attributes
    ----------
    system : System
        The atom or ion.
    converged : bool
        The SCF reached its tolerances (else the numbers are flagged and nothing is built on them).
    total_energy : float
        The Hartree-Fock total energy, hartree.
    orbitals : tuple of OrbitalResult
        One per occupied subshell.
    mean_inverse_r_squared, mean_inverse_r, mean_r, mean_r_squared : float
        <r^-2>, <r^-1>, <r>, <r^2> summed over all electrons, bohr^k.
    iterations : int
        SCF iterations used.
    orbital_change, energy_change : float
        The last iteration's largest orbital change and energy change (hartree).
    scf_strategy : str
        The accelerator that finished ("diis" or the damped fallback).
    r_max : float
        Box radius, bohr (the automatic box grows until the outermost orbital has decayed).
    grid_points : int
        Radial grid points.
    box_decay : float
        kappa R of the outermost orbital (at least BOX_DECAY = 34 in an automatic box).
    warnings : tuple of str
        One-line notes (box too small, not converged, unbound in HF ...).
    grid_settings, scf_settings : GridSettings, ScfSettings
        The settings it was solved with.
    """

    system: System
    converged: bool
    total_energy: float
    kinetic_energy: float
    nuclear_attraction_energy: float
    coulomb_energy: float
    exchange_energy: float
    virial_ratio: float
    orbitals: tuple[OrbitalResult, ...]
    mean_inverse_r_squared: float
    mean_inverse_r: float
    mean_r: float
    mean_r_squared: float
    density_at_nucleus: float
    cusp_ratio: float | None
    iterations: int
    orbital_change: float
    energy_change: float
    scf_strategy: str
    scf_message: str
    r_max: float
    grid_points: int
    box_decay: float
    warnings: tuple[str, ...]
    grid_settings: GridSettings = field(repr=False)
    scf_settings: ScfSettings = field(repr=False)
    grid: RadialGrid = field(repr=False, metadata={"json": False})
    shells: OccupiedShells = field(repr=False, metadata={"json": False})
    orbital_energies: np.ndarray = field(repr=False, metadata={"json": False})
    history: tuple[tuple[int, float, float, float], ...] = field(repr=False, metadata={"json": False})

    @property
    def homo_energy(self) -> float:
        return float(self.orbital_energies.max())


def starting_box(system: System, grid_settings: GridSettings) -> float:
    """The box radius (bohr) of the first SCF: the given r_max, else DEFAULT_R_MAX (ANION_R_MAX for anions)."""
    return grid_settings.r_max or (ANION_R_MAX if system.charge < 0 else DEFAULT_R_MAX)


@single_blas_thread
def solve_ground_state(
    system: System,
    grid_settings: GridSettings = GridSettings(),
    scf_settings: ScfSettings = ScfSettings(),
) -> GroundState:
    """Solve the HF equations of ``system``, enlarging an automatic box until it holds the orbitals.

    Returns a result with ``converged=False`` (and a :class:`RuntimeWarning`) if the SCF fails.

    Raises
    ------
    ConfigurationError
        If the outermost orbital is not bound (orbital energy >= 0): the ion does not exist in HF.
    """
    automatic = grid_settings.r_max is None
    r_max = starting_box(system, grid_settings)
    for _ in range(4):
        grid = build_grid(grid_settings, system.Z, r_max)
        solution = solve_scf(grid, system.Z, system.subshells, scf_settings)
        homo = float(solution.orbital_energies.max())
        if homo >= 0.0:
            raise ConfigurationError(
                f"atom.charge: the outermost orbital of {system.name} is not bound in Hartree-Fock"
                f" (energy {homo:+.4f} hartree); choose a less negative charge"
            )
        decay = np.sqrt(-2.0 * homo) * r_max
        if not automatic or decay >= BOX_DECAY or not solution.converged or r_max >= MAX_R_MAX:
            break
        r_max = min(1.15 * BOX_DECAY / np.sqrt(-2.0 * homo), MAX_R_MAX)
        logger.info("box enlarged to %.1f bohr (kappa R was %.1f)", r_max, decay)
    notes = []
    first = grid_settings.first_element
    if first is not None and first * system.Z > 1.0:
        notes.append(
            f"grid.first_element: {first:g} bohr is larger than the 1s orbital of {system.name} (size 1/Z ="
            f" {1.0 / system.Z:.3g} bohr), so the nucleus is not resolved and the energy can be far off;"
            f" leave it out for the default 0.1/Z"
        )
    if decay < BOX_DECAY:
        notes.append(
            f"grid.r_max: the outermost orbital has decayed only to exp(-{decay:.1f}) at r = {r_max:g} bohr;"
            f" use r_max >= {BOX_DECAY / np.sqrt(-2.0 * homo):.0f} or leave it out"
        )
    if not solution.converged:
        notes.append(
            f"scf: not converged after {solution.iterations} iterations (DIIS, then damped DIIS;"
            f" {solution.message}); orbital change {solution.residual:.1e}, energy change"
            f" {solution.energy_change:.1e}"
        )
    if system.charge < 0 and solution.converged:
        notes += _electron_loss_notes(system, solution, grid_settings, scf_settings)
    for note in notes:
        warnings.warn(note, RuntimeWarning, stacklevel=2)
    return _ground_state_result(system, grid, solution, grid_settings, scf_settings, decay, tuple(notes))


def _electron_loss_notes(
    system: System, solution: ScfSolution, grid_settings: GridSettings, scf_settings: ScfSettings
) -> list[str]:
    """A note if the anion's HF energy lies above the neutral atom's (plus free electrons at rest).

    A negative orbital energy does not make an anion bound: H- has epsilon = -0.046 hartree but
    E = -0.4879 > E(H) = -0.5 in HF.  The check needs the neutral atom, so it is made where that is
    closed-shell or one-electron (H-); an open-shell neutral atom is beyond this program.
    """
    try:
        neutral = System.from_input(system.Z)
    except InputError:
        return []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        reference = solve_ground_state(neutral, grid_settings, scf_settings)
    if not (reference.converged and solution.total_energy > reference.total_energy):
        return []
    extra = -system.charge
    return [
        f"atom.charge: {system.name} is unbound against electron loss in Hartree-Fock: its energy"
        f" {solution.total_energy:.8f} hartree lies above that of {neutral.name} and {extra} free"
        f" electron{'s' if extra > 1 else ''} ({reference.total_energy:.8f} hartree), although its"
        f" orbital energy {float(solution.orbital_energies.max()):+.6f} hartree is negative;"
        " its results describe a state Hartree-Fock does not bind"
    ]


def _ground_state_result(system, grid, solution, grid_settings, scf_settings, decay, notes) -> GroundState:
    shells = solution.shells
    densities = shells.orbitals**2
    powers = {k: densities @ grid.r**k for k in (-2, -1, 1, 2)}
    q = shells.occupations
    orbitals = tuple(
        OrbitalResult(
            label=f"{s.n}{'spdfghik'[s.l]}",
            n=s.n,
            l=s.l,
            occupation=s.occupation,
            energy=float(solution.orbital_energies[i]),
            mean_inverse_r_squared=float(powers[-2][i]),
            mean_inverse_r=float(powers[-1][i]),
            mean_r=float(powers[1][i]),
            mean_r_squared=float(powers[2][i]),
        )
        for i, s in enumerate(system.subshells)
    )
    # Near r = 0 only s orbitals contribute: P = a r + b r^2 + ..., rho(0) = sum q a^2 / 4 pi.
    s_orbitals = shells.l == 0
    slopes = shells.orbitals[s_orbitals] @ grid.origin_slope
    half_curvatures = 0.5 * shells.orbitals[s_orbitals] @ grid.origin_curvature
    weights = q[s_orbitals]
    density_at_nucleus = float(weights @ slopes**2) / (4.0 * np.pi)
    density_slope = 2.0 * float(weights @ (slopes * half_curvatures)) / (4.0 * np.pi)
    potential = solution.total_energy - solution.kinetic
    return GroundState(
        system=system,
        converged=solution.converged,
        total_energy=solution.total_energy,
        kinetic_energy=solution.kinetic,
        nuclear_attraction_energy=solution.nuclear_attraction,
        coulomb_energy=solution.coulomb,
        exchange_energy=solution.exchange,
        virial_ratio=-potential / solution.kinetic,
        orbitals=orbitals,
        mean_inverse_r_squared=float(q @ powers[-2]),
        mean_inverse_r=float(q @ powers[-1]),
        mean_r=float(q @ powers[1]),
        mean_r_squared=float(q @ powers[2]),
        density_at_nucleus=density_at_nucleus,
        cusp_ratio=-density_slope / (2.0 * system.Z * density_at_nucleus) if s_orbitals.any() else None,
        iterations=solution.iterations,
        orbital_change=solution.residual,
        energy_change=solution.energy_change,
        scf_strategy=solution.strategy,
        scf_message=solution.message,
        r_max=grid.r_max,
        grid_points=grid.size,
        box_decay=float(decay),
        warnings=notes,
        grid_settings=grid_settings,
        scf_settings=scf_settings,
        grid=grid,
        shells=shells,
        orbital_energies=solution.orbital_energies,
        history=solution.history,
    )
