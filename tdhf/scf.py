"""Self-consistent field for the closed-shell radial Hartree–Fock equations.

For each angular momentum l the occupied orbitals are eigenvectors of one Fock matrix F_l
(:mod:`tdhf.potentials`): the orbital (n, l) is the eigenvector number n - l - 1 (counting from
0), i.e. the one with n - l - 1 radial nodes.  Self-consistency is accelerated by DIIS on the
Fock matrices with the commutator :math:`F_l D_l - D_l F_l` as error (D_l the projector on the
occupied l orbitals); when DIIS stalls the loop restarts with damping of the Fock matrices.

Convergence requires both the change of the total energy below ``energy_tolerance`` and the
largest change of an orbital (L2 norm of the change of P) below ``residual_tolerance``.  The
energy test is relaxed to the round-off floor ``ENERGY_ROUNDOFF * |E|`` for heavy atoms.  The
energy is quadratic in the orbital error, the orbital change linear, so the second test is the one
that guards properties such as the virial ratio and the response.

Energies are in hartree.  The total energy is
:math:`E = \\sum_a \\tfrac{q_a}{2}(\\langle a|h|a\\rangle + \\varepsilon_a)`.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, replace
from typing import Protocol, Sequence

import numpy as np

from tdhf.errors import InputError
from tdhf.numerics.diis import Diis
from tdhf.potentials import OccupiedShells, direct_potential, exchange_operator, one_electron_operator
from tdhf.radial.mesh import RadialGrid
from tdhf.radial.poisson import coulomb_kernels

__all__ = ["ScfSettings", "ShellSpec", "ScfSolution", "solve_scf", "model_potential"]

logger = logging.getLogger(__name__)

#: Tietz's fit of the Thomas–Fermi screening function, phi(x) = 1 / (1 + a x)^2 (from memory).
TIETZ_A = 0.53625
#: Thomas–Fermi length unit b = 0.88534 Z^(-1/3) bohr.
THOMAS_FERMI_LENGTH = 0.88534


@dataclass(frozen=True)
class ScfSettings:
    """Knobs of the SCF loop (defaults reach the HF limit of the grid).

    Attributes
    ----------
    energy_tolerance : float
        Largest accepted change of the total energy between iterations, hartree.
    residual_tolerance : float
        Largest accepted orbital change per iteration (see ScfSolution.residual).
    max_iterations : int
        Iterations per strategy (DIIS, then damped DIIS) before giving up.
    diis_size : int
        Number of Fock matrices kept by DIIS.
    damping : float
        Fraction of the previous Fock matrix mixed in by the fallback strategy.
    """

    energy_tolerance: float = 1e-12
    residual_tolerance: float = 1e-9
    max_iterations: int = 120
    diis_size: int = 10
    damping: float = 0.5

    def __post_init__(self) -> None:
        for key in ("energy_tolerance", "residual_tolerance"):
            value = getattr(self, key)
            if not 0.0 < value < 1.0:
                raise InputError(f"scf.{key}: {value!r} must be in (0, 1); the default is {getattr(ScfSettings, key)}")
        if isinstance(self.max_iterations, bool) or not isinstance(self.max_iterations, int) or not 1 <= self.max_iterations <= 10000:
            raise InputError(f"scf.max_iterations: {self.max_iterations!r} must be an integer in 1..10000; the default is 120")
        # DIIS keeps 2 diis_size Fock-sized matrices per symmetry, the largest memory use of a run.
        if isinstance(self.diis_size, bool) or not isinstance(self.diis_size, int) or not 1 <= self.diis_size <= 20:
            raise InputError(f"scf.diis_size: {self.diis_size!r} must be an integer in 1..20; the default is 10")
        if not 0.0 <= self.damping < 1.0:
            raise InputError(f"scf.damping: {self.damping!r} must be in [0, 1); the default is 0.5")

    def tightened(self, factor: float = 0.01) -> "ScfSettings":
        """Tolerances ``factor`` times smaller (round-off floors kept) and twice the iterations."""
        return replace(self, energy_tolerance=max(self.energy_tolerance * factor, ENERGY_FLOOR),
                       residual_tolerance=max(self.residual_tolerance * factor, RESIDUAL_FLOOR),
                       max_iterations=2 * self.max_iterations)


#: Smallest useful SCF tolerances: below them the energy change and the orbital change are
#: round-off (energies are sums of ~1e8-hartree kinetic elements; ENERGY_ROUNDOFF relaxes the
#: energy test further for heavy atoms).
ENERGY_FLOOR = 1e-14
RESIDUAL_FLOOR = 1e-12


class ShellSpec(Protocol):
    """An occupied subshell (e.g. :class:`tdhf.elements.Subshell`)."""

    n: int
    l: int
    occupation: int


@dataclass(frozen=True, eq=False)
class ScfSolution:
    """Raw SCF output on one grid (the typed, serializable result is built by :mod:`tdhf.atom`).

    Attributes
    ----------
    shells : OccupiedShells
        Converged orbitals (DVR coefficients) with their l and occupations.
    orbital_energies : ndarray, shape (m,)
        Diagonal Fock matrix elements, hartree.
    kinetic, nuclear_attraction, coulomb, exchange : float
        Energy components, hartree (exchange is negative).
    converged : bool
    iterations : int
    residual : float
        Final orbital change: max over orbitals of the L2 norm of the change of P(r) in the last
        iteration (an estimate of the remaining orbital error).
    commutator : float
        Final largest element of F D - D F (its floor is round-off in the ~1e8 hartree kinetic
        eigenvalues of the innermost elements, so it is reported, not tested).
    energy_change : float
        Final |Delta E|, hartree.
    history : tuple of (iteration, energy, energy change, orbital change)
    strategy : str
        What finally ran: "diis" or "damped-diis".
    message : str
        What stopped the loop: "converged", "iteration limit reached" or "non-finite values
        (NaN or Inf) in the Fock matrix at iteration k" (then the energies are NaN: no number
        from a broken solve).
    """

    shells: OccupiedShells
    orbital_energies: np.ndarray
    kinetic: float
    nuclear_attraction: float
    coulomb: float
    exchange: float
    converged: bool
    iterations: int
    residual: float
    commutator: float
    energy_change: float
    history: tuple[tuple[int, float, float, float], ...]
    strategy: str
    message: str

    @property
    def total_energy(self) -> float:
        return self.kinetic + self.nuclear_attraction + self.coulomb + self.exchange


def model_potential(r: np.ndarray, nuclear_charge: float, electrons: int) -> np.ndarray:
    """Screened-nucleus starting potential, hartree.

    .. math:: V(r) = -\\frac{1}{r}\\left[(Z - N + 1) + (N - 1)\\,\\phi(r/b)\\right],

    with the Thomas–Fermi screening function phi in Tietz's form and b = 0.88534 Z^(-1/3): the bare
    nucleus at small r and the charge Z - N + 1 seen by the outermost electron at large r.
    """
    length = THOMAS_FERMI_LENGTH * nuclear_charge ** (-1.0 / 3.0)
    screening = 1.0 / (1.0 + TIETZ_A * r / length) ** 2
    return -((nuclear_charge - electrons + 1) + (electrons - 1) * screening) / r


def _fix_sign(vector: np.ndarray) -> np.ndarray:
    """Sign convention: P(r) > 0 at small r (first coefficient above round-off is positive)."""
    significant = np.flatnonzero(np.abs(vector) > 1e-7 * np.abs(vector).max())
    return -vector if vector[significant[0]] < 0.0 else vector


def _occupied_from_fock(
    fock: dict[int, np.ndarray], specs: Sequence[ShellSpec]
) -> tuple[np.ndarray, np.ndarray]:
    """Diagonalise each F_l; return orbitals (m, n) and eigenvalues (m,) in ``specs`` order."""
    size = next(iter(fock.values())).shape[0]
    orbitals = np.empty((len(specs), size))
    energies = np.empty(len(specs))
    for l, matrix in fock.items():
        indices = [(i, s.n - l - 1) for i, s in enumerate(specs) if s.l == l]
        top = max(j for _, j in indices)
        values, vectors = np.linalg.eigh(matrix)  # all pairs: cheap at these sizes, and no scipy import
        for i, j in indices:
            orbitals[i] = _fix_sign(vectors[:, j])
            energies[i] = values[j]
    return orbitals, energies


def solve_scf(
    grid: RadialGrid,
    nuclear_charge: float,
    specs: Sequence[ShellSpec],
    settings: ScfSettings = ScfSettings(),
    kernels: np.ndarray | None = None,
) -> ScfSolution:
    """Solve the closed-shell radial HF equations on ``grid``.

    Parameters
    ----------
    grid : RadialGrid
    nuclear_charge : float
        Z, in units of the elementary charge (point nucleus).
    specs : sequence of ShellSpec
        Occupied subshells (each closed, or one electron in total).
    settings : ScfSettings
    kernels : ndarray, optional
        Precomputed Coulomb kernels with k_max >= 2 max(l).

    Returns
    -------
    ScfSolution
        ``converged`` is False (never an exception) when both strategies fail; the caller decides.
    """
    l_values = np.array([s.l for s in specs], dtype=int)
    occupations = np.array([s.occupation for s in specs], dtype=float)
    electrons = int(round(occupations.sum()))
    if kernels is None:
        kernels = coulomb_kernels(grid, 2 * int(l_values.max()))
    blocks = sorted(set(int(l) for l in l_values))
    kinetic = {l: one_electron_operator(grid, 0.0, l) for l in blocks}
    nuclear = -nuclear_charge / grid.r

    guess_potential = model_potential(grid.r, nuclear_charge, electrons)
    guess = {l: kinetic[l] + np.diag(guess_potential) for l in blocks}
    orbitals, _ = _occupied_from_fock(guess, specs)
    previous_orbitals = np.zeros_like(orbitals)

    history: list[tuple[int, float, float, float]] = []
    iteration = 0
    for strategy in ("diis", "damped-diis"):
        diis = Diis(settings.diis_size)
        previous_energy = np.inf
        previous_fock: dict[int, np.ndarray] | None = None
        for _ in range(settings.max_iterations):
            iteration += 1
            shells = OccupiedShells(l_values, occupations, orbitals)
            state = _fock_state(kernels, kinetic, nuclear, shells)
            energy = sum(state.components.values())
            change = abs(energy - previous_energy)
            orbital_change = float(np.max(np.linalg.norm(orbitals - previous_orbitals, axis=1)))
            previous_orbitals = orbitals
            history.append((iteration, energy, change, orbital_change))
            logger.debug("scf %4d  E = %.12f  dE = %.3e  orbital change = %.3e  commutator = %.3e",
                         iteration, energy, change, orbital_change, state.residual)
            energy_floor = max(settings.energy_tolerance, ENERGY_ROUNDOFF * abs(energy))
            converged = change < energy_floor and orbital_change < settings.residual_tolerance
            finite = math.isfinite(energy) and all(np.isfinite(m).all() for m in state.fock.values())
            if converged or not finite or iteration == 2 * settings.max_iterations:
                message = ("converged" if converged else "iteration limit reached" if finite else
                           f"non-finite values (NaN or Inf) in the Fock matrix at iteration {iteration}")
                components = state.components if finite else dict.fromkeys(state.components, math.nan)
                return ScfSolution(
                    shells=shells,
                    orbital_energies=state.orbital_energies if finite else np.full(len(specs), math.nan),
                    **components,
                    converged=converged,
                    iterations=iteration,
                    residual=orbital_change,
                    commutator=state.residual,
                    energy_change=change,
                    history=tuple(history),
                    strategy=strategy,
                    message=message,
                )
            previous_energy = energy
            fock = state.fock
            if strategy == "damped-diis" and previous_fock is not None and state.residual > DAMPING_RESIDUAL:
                fock = {l: (1 - settings.damping) * fock[l] + settings.damping * previous_fock[l] for l in blocks}
            previous_fock = fock
            packed = diis.update(np.concatenate([fock[l].ravel() for l in blocks]), state.error)
            extrapolated = {
                l: m.reshape(grid.size, grid.size) for l, m in zip(blocks, np.split(packed, len(blocks)))
            }
            orbitals, _ = _occupied_from_fock(extrapolated, specs)
        logger.info("scf strategy %s did not converge in %d iterations", strategy, settings.max_iterations)
    raise AssertionError("unreachable: the last iteration returns")


#: Relative round-off floor of the total energy (sums of ~1e8 hartree kinetic matrix elements):
#: energy changes below ENERGY_ROUNDOFF * |E| are noise, seen at 1e-10 hartree for Xe.
ENERGY_ROUNDOFF = 1e-13

#: Below this residual the damped strategy stops damping and lets DIIS finish.
DAMPING_RESIDUAL = 1e-4


@dataclass(frozen=True, eq=False)
class _FockState:
    fock: dict[int, np.ndarray]
    error: np.ndarray
    residual: float
    components: dict[str, float]
    orbital_energies: np.ndarray


def _fock_state(
    kernels: np.ndarray, kinetic: dict[int, np.ndarray], nuclear: np.ndarray, shells: OccupiedShells
) -> _FockState:
    """Fock matrices, DIIS error, energy components and orbital energies for given orbitals."""
    hartree = direct_potential(kernels, shells)
    fock, errors = {}, []
    components = dict(kinetic=0.0, nuclear_attraction=0.0, coulomb=0.0, exchange=0.0)
    orbital_energies = np.empty(len(shells.l))
    diagonal = np.diag_indices(len(nuclear))
    for l, kinetic_l in kinetic.items():
        exchange = exchange_operator(kernels, shells, l)
        matrix = kinetic_l - exchange
        matrix[diagonal] += nuclear + hartree
        fock[l] = matrix
        members = np.flatnonzero(shells.l == l)
        occupied = shells.orbitals[members]
        commutator = matrix @ (occupied.T @ occupied)
        errors.append((commutator - commutator.T).ravel())
        for i in members:
            p, q = shells.orbitals[i], shells.occupations[i]
            exchange_energy = p @ exchange @ p
            components["kinetic"] += q * (p @ kinetic_l @ p)
            components["nuclear_attraction"] += q * (p * p) @ nuclear
            components["coulomb"] += 0.5 * q * (p * p) @ hartree
            components["exchange"] -= 0.5 * q * exchange_energy
            orbital_energies[i] = p @ matrix @ p
    error = np.concatenate(errors)
    return _FockState(fock, error, float(np.abs(error).max()), components, orbital_energies)
