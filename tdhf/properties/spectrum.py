"""Discrete RPA excitations: energies and oscillator strengths, by three routes.

1. **Davidson roots in the complete discrete space** (the default, :func:`rpa_spectrum`): the
   lowest roots of the RPA problem :math:`(A+B)(X+Y) = \\omega (X-Y)`,
   :math:`(A-B)(X-Y) = \\omega (X+Y)` over every particle-hole pair of the grid (channel
   t = a -> l', all virtual eigenvectors of F_l'), found matrix-free with the coupling operator of
   :class:`~tdhf.response.solver.ResponseSolver` and preconditioned by its resolvent
   (:func:`tdhf.numerics.davidson.rpa_davidson`).  Oscillator strengths
   :math:`f_n = 2\\omega_n [b^T W (X+Y)_n]^2` with :math:`(X+Y)^T W (X-Y) = 1`, so that
   :math:`\\alpha_L(\\omega) = \\sum_n f_n / (\\omega_n^2 - \\omega^2)` and
   :math:`\\sum_n f_n = S(0)`.  A root is converged when its residual is below
   ``eigen_tolerance``: the energy error is then second order in it, the error of f first order.
2. **Truncated RPA eigenproblem** (:func:`rpa_eigen_excitations`, a cross-check): the same matrices
   restricted to particle-hole energies below a cutoff, diagonalised densely.  With the channel
   weights absorbed (:math:`\\tilde A = W^{1/2} A W^{-1/2}`) the energies are the square roots of
   the eigenvalues of :math:`M = (\\tilde A - \\tilde B)^{1/2} (\\tilde A + \\tilde B)
   (\\tilde A - \\tilde B)^{1/2}`.  Only moderate excitation energies enter M (the cutoff), so
   squaring does not lose the low excitations to round-off.
3. **Poles of the full response** (:func:`refine_pole`, a cross-check): :math:`1/\\alpha_L(\\omega)`
   is smooth through a pole and vanishes there; secant steps in :math:`\\omega^2` find it, and the
   residue gives :math:`f_n = -2\\omega_n / (d\\alpha^{-1}/d\\omega)`.

Oscillator strengths are those of the M = 0 component, :math:`f_n = 2\\omega_n
|\\langle n|\\sum_i r_i^L C_{L0}|0\\rangle|^2` (dimensionless for L = 1; the TRK sum is N).

Only roots below the ionization threshold (-epsilon_HOMO) are bound excitations: above it the box
discretizes a continuum.  A bound line is listed only if its excited orbital has decayed at the
wall (``box_fraction`` below :data:`BOX_FRACTION`); Rydberg lines that the box squeezes are not
listed as lines (the caller may enlarge the box).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tdhf.numerics.davidson import rpa_davidson
from tdhf.numerics.status import EXACT, SolveStatus
from tdhf.numerics.threads import single_blas_thread
from tdhf.errors import ConvergenceError
from tdhf.response.particle_hole import ParticleHoleBasis
from tdhf.response.solver import ResponseSolver, ResponseTolerances

__all__ = [
    "Excitation",
    "Spectrum",
    "StrengthDistribution",
    "rpa_spectrum",
    "rpa_eigen_excitations",
    "refine_pole",
    "lowest_excitations",
    "strength_distribution",
    "BOX_FRACTION",
    "VISIBLE_STRENGTH",
]

#: Default cutoff on particle-hole energies for route 2, hartree.  Squared energies up to 1e6
#: keep M well conditioned (round-off ~1e-16 * 1e6 in omega^2); the low excitations then sit
#: within ~1e-11 of the complete-space roots for He and Ne (1e-6 at 100 hartree).
EIGEN_CUTOFF = 1000.0
#: A line's excited orbital must fall below this fraction of its maximum beyond 0.75 R to be
#: listed as a bound line (the box does not squeeze it).  Measured against a 300-bohr box (He
#: 1s2p..1s4p, Ne 2p->3s, 4s, 3d in boxes of 40..200 bohr): f moves by ~0.01 x fraction^2 and
#: the energy by less, so 2e-4 keeps f within ~4e-10 and the energy within ~1e-12 hartree.
BOX_FRACTION = 2e-4
#: Roots with smaller f are dark for the multipole (e.g. other-symmetry pseudo-states, f ~ 1e-30).
VISIBLE_STRENGTH = 1e-10
#: Roots asked of the Davidson iteration beyond those wanted: they converge the wanted ones faster.
EXTRA_ROOTS = 3
#: Roots first asked beyond twice the particle-hole energies below the limit (the coupled
#: spectrum has a Rydberg series there that the V^N virtuals lack; Xe 1P: 7 roots, none uncoupled).
INITIAL_ROOTS = 6


@dataclass(frozen=True)
class Excitation:
    """One discrete excitation of multipole L (hartree; dimensionless f).

    ``energy`` and ``oscillator_strength`` are the RPA root in the complete discrete space
    (Davidson, residual ``residual`` against ``converged``).  ``bound`` is False above the
    ionization threshold (a pseudo-state of the discretized continuum); ``box_fraction`` is the
    largest |excited orbital| beyond 0.75 R relative to its maximum (lines are listed only if it
    is below :data:`BOX_FRACTION`).

    Attributes
    ----------
    multipole : int
        L of the transition (1: 1P lines of a 1S atom).
    energy : float
        Excitation energy, hartree.
    oscillator_strength : float
        f = 2 omega |<n|sum r^L P_L|0>|^2, dimensionless for L = 1 (bohr^(2L-2) otherwise).
    bound : bool
        Below the ionization threshold.
    converged : bool
        The root's residual is within the eigensolver tolerance.
    residual : float
        Preconditioned residual of the root.
    box_fraction : float
        Largest |excited orbital| beyond 0.75 R over its maximum (the box holds the line if small).
    """

    multipole: int
    energy: float
    oscillator_strength: float
    bound: bool
    converged: bool = True
    residual: float = 0.0
    box_fraction: float = 0.0


@dataclass(frozen=True, eq=False)
class Spectrum:
    """Every RPA root of one multipole below ``energy_limit`` (hartree) and the first one above.

    ``energies`` ascending with ``strengths`` f; ``box_fractions`` as in :class:`Excitation`;
    ``status`` of the eigensolver; ``threshold`` is the ionization energy -epsilon_HOMO.
    """

    multipole: int
    coupled: bool
    energies: np.ndarray
    strengths: np.ndarray
    box_fractions: np.ndarray
    residuals: np.ndarray
    threshold: float
    energy_limit: float
    status: SolveStatus

    def lines(self, count: int | None = None) -> tuple[Excitation, ...]:
        """Visible bound lines (f > VISIBLE_STRENGTH, below threshold, decayed at the wall), lowest first."""
        found = []
        for energy, strength, fraction, residual in zip(self.energies, self.strengths, self.box_fractions, self.residuals):
            if count is not None and len(found) == count:
                break
            if strength < VISIBLE_STRENGTH or not energy < self.threshold:
                continue
            if fraction > BOX_FRACTION:
                break  # this line and every higher one are squeezed by the box
            found.append(Excitation(self.multipole, float(energy), float(strength), True,
                                    bool(residual <= self.status.tolerance), float(residual), float(fraction)))
        return tuple(found)

    def squeezed(self, count: int) -> bool:
        """True if fewer than ``count`` lines are listed because the box squeezes the next one."""
        lines = self.lines(count)
        if len(lines) == count:
            return False
        visible = (self.strengths >= VISIBLE_STRENGTH) & (self.energies < self.threshold)
        return bool(np.any(visible & (self.box_fractions > BOX_FRACTION)))

    def poles_around(self, frequency: float) -> tuple[float | None, float | None]:
        """The visible roots just below and just above ``frequency`` (None where there is none)."""
        visible = self.energies[self.strengths >= VISIBLE_STRENGTH]
        below = visible[visible <= frequency]
        above = visible[visible > frequency]
        return (float(below[-1]) if below.size else None, float(above[0]) if above.size else None)


@single_blas_thread
def rpa_spectrum(
    solver: ResponseSolver,
    energy_limit: float | None = None,
    minimum_roots: int = 3,
    coupled: bool = True,
    tolerance: float = 1e-10,
) -> Spectrum:
    """Route 1: every RPA root below ``energy_limit`` (default: the ionization threshold) and one above.

    The Davidson iteration runs on the virtual eigenvectors of each channel in symmetric
    coordinates :math:`\\sqrt{w_t}\\,c_t` (where A and B are symmetric and D is diagonal); A v and
    B v come from one coupling application per vector, :math:`A v = D v - c^+(v,0)`,
    :math:`B v = -c^-(v,0)`.  The number of roots grows until the highest one lies above the limit.
    Uncoupled (or one-electron) roots are the particle-hole energies themselves.
    """
    threshold = solver.ionization_threshold
    limit = threshold if energy_limit is None else float(energy_limit)
    space = ParticleHoleBasis(solver, symmetric=True)
    b = space.from_grid(solver.perturbation()[None])[0]
    if not coupled or not solver.interacting:
        return _uncoupled_spectrum(solver, space, b, limit, minimum_roots)

    def both(block: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        functions = space.to_grid(block)
        c_plus, c_minus = solver.coupling(functions, None)
        a_block = space.energies * block - space.from_grid(c_plus)
        b_block = -space.from_grid(c_minus)
        return a_block + b_block, a_block - b_block

    def precondition(residual: np.ndarray, omega: float) -> np.ndarray:
        denominators = space.energies - omega
        # Exactly at a particle-hole energy keep the correction direction instead of dividing by zero.
        tiny = np.abs(denominators) < PRECONDITIONER_FLOOR
        return residual / np.where(tiny, np.copysign(PRECONDITIONER_FLOOR, denominators), denominators)

    # Roots below the limit: at least the particle-hole energies below it, usually more (the
    # coupled excited electron sees the ion and has a Rydberg series).  A restart with more roots
    # starts from the roots already found.
    roots = max(minimum_roots, 2 * int(np.count_nonzero(space.energies < limit)) + INITIAL_ROOTS)
    order = np.argsort(space.energies)
    found = np.zeros((0, space.size))
    while True:
        wanted = min(roots + EXTRA_ROOTS, space.size)
        guesses = np.concatenate([found, _unit_rows(order[:wanted], space.size)])
        result = rpa_davidson(both, precondition, guesses, wanted, tolerance=tolerance)
        energies = result.energies  # every root asked for is converged, the extra ones too
        enough = energies.size == wanted and (energies[-1] > limit or wanted >= space.size)
        if not result.status.converged or enough:
            break
        found = result.p
        roots = min(2 * roots, space.size)
    p = result.p[: energies.size]
    strengths = 2.0 * energies * (p @ b) ** 2
    fractions = np.array([_box_fraction(solver, function) for function in space.to_grid(p)])
    return Spectrum(solver.multipole, True, energies, strengths, fractions, result.residuals[: energies.size],
                    threshold, limit, result.status)


#: Smallest |eps_v - eps_a - omega| used by the preconditioner (hartree).
PRECONDITIONER_FLOOR = 1e-8


def _uncoupled_spectrum(solver: ResponseSolver, space: ParticleHoleBasis, b: np.ndarray, limit: float,
                        minimum_roots: int) -> Spectrum:
    """Particle-hole energies D and f = 2 D b^2 (b in symmetric coordinates)."""
    order = np.argsort(space.energies)
    keep = order[: max(minimum_roots, int(np.searchsorted(space.energies[order], limit, side="right")) + 1)]
    unit = _unit_rows(keep, space.size)
    fractions = np.array([_box_fraction(solver, function) for function in space.to_grid(unit)])
    energies = space.energies[keep]
    return Spectrum(solver.multipole, False, energies, 2.0 * energies * b[keep] ** 2, fractions,
                    np.zeros(keep.size), solver.ionization_threshold, limit, EXACT)


def _unit_rows(indices: np.ndarray, size: int) -> np.ndarray:
    """The rows ``indices`` of the identity of order ``size`` (without making the whole identity:
    a heavy atom's particle-hole space has ~7000 states, whose identity took 0.4 GB and 0.25 s)."""
    rows = np.zeros((len(indices), size))
    rows[np.arange(len(indices)), indices] = 1.0
    return rows


def _box_fraction(solver: ResponseSolver, vector: np.ndarray) -> float:
    """Largest |function| beyond 0.75 R relative to its largest value (rows of DVR coefficients)."""
    values = np.abs(vector) / np.sqrt(solver.grid.weights)
    outer = solver.grid.r > 0.75 * solver.grid.r_max
    peak = values.max()
    return float(values[..., outer].max() / peak) if outer.any() and peak > 0.0 else 0.0


def _particle_hole_basis(solver: ResponseSolver, cutoff: float):
    """Per channel: the virtual eigenvectors of F_l' (columns) with excitation energy below ``cutoff``."""
    blocks = []
    for channel in solver.channels:
        values, vectors, virtual = solver.spectra[channel.l_prime]
        gaps = values - solver.orbital_energies[channel.shell]
        keep = virtual & (gaps < cutoff)
        blocks.append((vectors[:, keep], gaps[keep]))
    return blocks


#: Basis vectors pushed through the coupling operator at once when building A and B.
COUPLING_BATCH = 64


@single_blas_thread
def rpa_eigen_excitations(solver: ResponseSolver, cutoff: float | None = None, coupled: bool = True):
    """Route 1: excitation energies and oscillator strengths from the truncated RPA eigenproblem.

    Returns
    -------
    energies, strengths : ndarray
        Ascending energies (hartree) with their f; ``sum(strengths)`` -> S(0) as cutoff -> inf.

    Notes
    -----
    Only the sum of f is reliable for cutoffs far above the default: squaring particle-hole
    energies of ~1e7 hartree (the innermost grid elements) loses the low lines to round-off.
    """
    cutoff = EIGEN_CUTOFF if cutoff is None else cutoff
    blocks = _particle_hole_basis(solver, cutoff)
    sizes = [vectors.shape[1] for vectors, _ in blocks]
    offsets = np.concatenate(([0], np.cumsum(sizes)))
    size = int(offsets[-1])
    weights = np.concatenate([np.full(n, c.weight) for n, c in zip(sizes, solver.channels)])
    rhs = solver.perturbation()
    b = np.concatenate([vectors.T @ rhs[t] for t, (vectors, _) in enumerate(blocks)]) * np.sqrt(weights)
    a_matrix = np.diag(np.concatenate([gaps for _, gaps in blocks]))
    b_matrix = np.zeros((size, size))
    if coupled and solver.interacting:
        # Columns of A - D and B from the matrix-free coupling: c+(x, 0) = -(A - D) x, c-(x, 0) = -B x.
        n_channels, n = len(solver.channels), solver.grid.size
        owners = np.repeat(np.arange(n_channels), sizes)
        columns = np.concatenate([vectors.T for vectors, _ in blocks])  # (size, n)
        for start in range(0, size, COUPLING_BATCH):
            chunk = slice(start, min(start + COUPLING_BATCH, size))
            plus = np.zeros((chunk.stop - chunk.start, n_channels, n))
            plus[np.arange(plus.shape[0]), owners[chunk]] = columns[chunk]
            c_plus, c_minus = solver.coupling(plus, None)
            for t, (vectors, _) in enumerate(blocks):
                rows = slice(offsets[t], offsets[t + 1])
                a_matrix[rows, chunk] -= (c_plus[:, t, :] @ vectors).T
                b_matrix[rows, chunk] = -(c_minus[:, t, :] @ vectors).T
        scale = np.sqrt(weights)
        a_matrix = scale[:, None] * a_matrix / scale[None, :]
        b_matrix = scale[:, None] * b_matrix / scale[None, :]
        a_matrix = 0.5 * (a_matrix + a_matrix.T)
        b_matrix = 0.5 * (b_matrix + b_matrix.T)
    difference_values, difference_vectors = np.linalg.eigh(a_matrix - b_matrix)
    root = (difference_vectors * np.sqrt(np.clip(difference_values, 0.0, None))) @ difference_vectors.T
    squared, vectors = np.linalg.eigh(root @ (a_matrix + b_matrix) @ root)
    energies = np.sqrt(np.clip(squared, 0.0, None))
    strengths = 2.0 * (vectors.T @ (root @ b)) ** 2
    return energies, strengths


def refine_pole(
    solver: ResponseSolver,
    guess: float,
    coupled: bool = True,
    bounds: tuple[float, float] | None = None,
    tolerances: ResponseTolerances = ResponseTolerances(),
) -> tuple[float, float]:
    r"""Route 3: the pole of alpha_L(omega) near ``guess`` and its oscillator strength.

    Near a pole :math:`g(x) = 1/\alpha` with :math:`x = \omega^2` is nearly linear,
    :math:`g \approx (\omega_n^2 - x)/f_n`, so secant steps in x converge in a few response solves
    without evaluating the ill-conditioned equations right at the pole.

    ``bounds`` (hartree) is the interval the pole must stay in (default: guess/2 to 2 guess);
    callers pass the midpoints to the neighbouring roots so no pole is found twice.

    Raises
    ------
    ConvergenceError
        If a response solve does not converge or gives a non-finite or zero alpha, or the secant
        iteration leaves the bounds or does not settle.
    """
    low, high = bounds if bounds is not None else (0.5 * guess, 2.0 * guess)
    # Start well inside the bounds: neighbouring poles bend 1/alpha away from a straight line.
    offset = min(POLE_OFFSET, 0.1 * min(guess - low, high - guess) / guess)

    def inverse(x: float) -> float:
        first_order = solver.solve(float(np.sqrt(x)), coupled, tolerances=tolerances)
        value = complex(solver.polarizability(first_order)).real
        if not first_order.converged or not np.isfinite(value) or value == 0.0:
            raise ConvergenceError(
                f"pole search near {guess:.6f} hartree: the response at {np.sqrt(x):.9f} hartree gave alpha = {value!r}"
                f" ({first_order.status.describe()})"
            )
        return 1.0 / value

    x0, x1 = (guess * (1.0 + offset)) ** 2, (guess * (1.0 - offset)) ** 2
    g0, g1 = inverse(x0), inverse(x1)
    for _ in range(POLE_MAX_STEPS):
        if g1 == g0:
            raise ConvergenceError(f"pole search near {guess:.6f} hartree: 1/alpha is flat there (no pole)")
        x2 = x1 - g1 * (x1 - x0) / (g1 - g0)
        if not low**2 < x2 < high**2:
            raise ConvergenceError(f"pole search: no pole of the response near {guess:.6f} hartree")
        if abs(x2 - x1) < POLE_TOLERANCE * x2:
            break
        x0, g0 = x1, g1
        x1, g1 = x2, inverse(x2)
    else:
        raise ConvergenceError(f"pole search: the pole near {guess:.6f} hartree did not settle")
    # Residue from a symmetric difference a little away from the pole, where solves are well conditioned.
    step = RESIDUE_STEP * x2
    slope = (inverse(x2 + step) - inverse(x2 - step)) / (2.0 * step)
    return float(np.sqrt(x2)), float(-1.0 / slope)


#: Relative offset of the second starting point of the secant search.
POLE_OFFSET = 1e-5
#: Relative tolerance on omega^2 at a pole.
POLE_TOLERANCE = 1e-12
POLE_MAX_STEPS = 12
#: Relative step in omega^2 for the residue.
RESIDUE_STEP = 1e-6


def lowest_excitations(
    solver: ResponseSolver,
    count: int = 3,
    coupled: bool = True,
    tolerance: float = 1e-10,
) -> tuple[Excitation, ...]:
    """The ``count`` lowest visible bound lines (f > VISIBLE_STRENGTH) that the box holds.

    Only states below the ionization threshold (-epsilon_HOMO) whose excited orbital has decayed at
    the wall are returned; fewer than ``count`` if the box squeezes the next line (enlarge it) or
    the bound spectrum ends.
    """
    return rpa_spectrum(solver, minimum_roots=count, coupled=coupled, tolerance=tolerance).lines(count)


@dataclass(frozen=True)
class StrengthDistribution:
    """Where the oscillator strength of multipole L sits (dimensionless sums of f).

    ``continuum_threshold`` (hartree) is the ionization energy -epsilon_HOMO.  ``discrete_sum`` is
    the strength of the ``discrete_states`` roots below it (bound lines, including Rydberg
    pseudo-lines the box squeezes); ``continuum_sum`` = ``total`` - ``discrete_sum`` is the strength
    of the box-discretized continuum above it, where ``total`` is the exact S(0) of the same
    discrete space.

    Attributes
    ----------
    multipole : int
        L.
    continuum_threshold : float
        -epsilon_HOMO, hartree.
    discrete_states : int
        Roots of visible strength below the threshold.
    discrete_sum, continuum_sum, total : float
        Their summed f, the rest, and S(0).
    converged : bool
        The eigensolver converged.
    """

    multipole: int
    continuum_threshold: float
    discrete_states: int
    discrete_sum: float
    continuum_sum: float
    total: float
    converged: bool = True


def strength_distribution(spectrum: Spectrum, total: float) -> StrengthDistribution:
    """Split S(0) = ``total`` into the roots below the ionization threshold and the rest."""
    bound = (spectrum.energies < spectrum.threshold) & (spectrum.strengths >= VISIBLE_STRENGTH)
    discrete = float(spectrum.strengths[bound].sum())
    return StrengthDistribution(spectrum.multipole, spectrum.threshold, int(bound.sum()), discrete,
                                total - discrete, total, spectrum.status.converged)
