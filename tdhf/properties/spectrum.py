"""Discrete RPA excitations: energies and oscillator strengths, by two routes.

1. **RPA eigenproblem** in the space of particle–hole pairs (channel t = a -> l', virtual
   eigenvector v of F_l') with excitation energies :math:`\\varepsilon_v - \\varepsilon_a` up to a
   cutoff.  With the channel weights W absorbed (:math:`\\tilde A = W^{1/2} A W^{-1/2}`, symmetric)
   the excitation energies are the square roots of the eigenvalues of
   :math:`M = (\\tilde A - \\tilde B)^{1/2} (\\tilde A + \\tilde B) (\\tilde A - \\tilde B)^{1/2}`
   and, for eigenvectors :math:`z_n`, the oscillator strengths are
   :math:`f_n = 2 [z_n^T (\\tilde A - \\tilde B)^{1/2} \\tilde b]^2`, so that
   :math:`\\alpha_L(\\omega) = \\sum_n f_n / (\\omega_n^2 - \\omega^2)` and
   :math:`\\sum_n f_n = S(0)`.  Only moderate excitation energies enter M (the cutoff), so squaring
   does not lose the low excitations to round-off.
2. **Poles of the full response**: :math:`1/\\alpha_L(\\omega)` is smooth through a pole and vanishes
   there; a bracketed root search refines each eigenvalue of route 1 in the complete discrete
   space, and the residue gives :math:`f_n = -2\\omega_n / (d\\alpha^{-1}/d\\omega)`.

Oscillator strengths are those of the M = 0 component, :math:`f_n = 2\\omega_n
|\\langle n|\\sum_i r_i^L C_{L0}|0\\rangle|^2` (dimensionless for L = 1; the TRK sum is N).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from tdhf.numerics.threads import single_blas_thread
from tdhf.response.solver import ResponseSolver

__all__ = [
    "Excitation",
    "StrengthDistribution",
    "rpa_eigen_excitations",
    "refine_pole",
    "lowest_excitations",
    "strength_distribution",
]

#: Default cutoff on particle-hole energies for route 1, hartree.  Squared energies up to 1e6
#: keep M well conditioned (round-off ~1e-16 * 1e6 in omega^2); the low excitations then sit
#: within ~1e-11 of the complete-space poles for He and Ne (1e-6 at 100 hartree), and route 2
#: confirms them.
EIGEN_CUTOFF = 1000.0


@dataclass(frozen=True)
class Excitation:
    """One discrete excitation of multipole L (hartree; dimensionless f).

    ``energy`` and ``oscillator_strength`` come from the pole of the full response (``refined``);
    ``eigen_energy`` and ``eigen_oscillator_strength`` from the RPA eigenproblem (route 1),
    kept as a cross-check.  If the pole search fails, ``refined`` is False and the route-1 values
    are repeated (never silently dropped).  ``bound`` is False above the ionization threshold (there the
    state is a pseudo-state of the discretized continuum).
    """

    multipole: int
    energy: float
    oscillator_strength: float
    eigen_energy: float
    eigen_oscillator_strength: float
    bound: bool
    refined: bool = True


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
            c_plus, c_minus = solver.coupling(plus, np.zeros_like(plus))
            for t, (vectors, _) in enumerate(blocks):
                rows = slice(offsets[t], offsets[t + 1])
                a_matrix[rows, chunk] -= (c_plus[:, t, :] @ vectors).T
                b_matrix[rows, chunk] = -(c_minus[:, t, :] @ vectors).T
        scale = np.sqrt(weights)
        a_matrix = scale[:, None] * a_matrix / scale[None, :]
        b_matrix = scale[:, None] * b_matrix / scale[None, :]
        a_matrix = 0.5 * (a_matrix + a_matrix.T)
        b_matrix = 0.5 * (b_matrix + b_matrix.T)
    difference_values, difference_vectors = scipy.linalg.eigh(a_matrix - b_matrix)
    root = (difference_vectors * np.sqrt(np.clip(difference_values, 0.0, None))) @ difference_vectors.T
    squared, vectors = scipy.linalg.eigh(root @ (a_matrix + b_matrix) @ root)
    energies = np.sqrt(np.clip(squared, 0.0, None))
    strengths = 2.0 * (vectors.T @ (root @ b)) ** 2
    return energies, strengths


def refine_pole(
    solver: ResponseSolver,
    guess: float,
    coupled: bool = True,
    bounds: tuple[float, float] | None = None,
) -> tuple[float, float]:
    r"""Route 2: the pole of alpha_L(omega) near ``guess`` and its oscillator strength.

    Near a pole :math:`g(x) = 1/\alpha` with :math:`x = \omega^2` is nearly linear,
    :math:`g \approx (\omega_n^2 - x)/f_n`, so secant steps in x converge in a few response solves
    without evaluating the ill-conditioned equations right at the pole.

    ``bounds`` (hartree) is the interval the pole must stay in (default: guess/2 to 2 guess);
    callers pass the midpoints to the neighbouring eigenvalues so no pole is found twice.

    Raises
    ------
    RuntimeError
        If the secant iteration leaves the bounds or does not settle.
    """
    low, high = bounds if bounds is not None else (0.5 * guess, 2.0 * guess)
    # Start well inside the bounds: neighbouring poles bend 1/alpha away from a straight line.
    offset = min(POLE_OFFSET, 0.1 * min(guess - low, high - guess) / guess)

    def inverse(x: float) -> float:
        with np.errstate(divide="ignore", invalid="ignore"):
            # Next to the pole round-off caps the reachable residual; a looser solve loses nothing.
            value = solver.polarizability(solver.solve(float(np.sqrt(x)), coupled, tolerance=1e-10, max_cycles=2))
        # Exactly at a pole (an uncoupled or one-electron guess is exact) alpha is infinite: g = 0.
        return 1.0 / value if np.isfinite(value) and value != 0.0 else 0.0

    x0, x1 = (guess * (1.0 + offset)) ** 2, (guess * (1.0 - offset)) ** 2
    g0, g1 = inverse(x0), inverse(x1)
    for _ in range(POLE_MAX_STEPS):
        slope = (g1 - g0) / (x1 - x0)
        x2 = x1 - g1 / slope
        if g1 == 0.0:
            x2 = x1
            break
        if not low**2 < x2 < high**2:
            raise RuntimeError(f"no pole of the response near {guess:.6f} hartree")
        if abs(x2 - x1) < POLE_TOLERANCE * x2:
            break
        x0, g0 = x1, g1
        x1, g1 = x2, inverse(x2)
    else:
        raise RuntimeError(f"the pole near {guess:.6f} hartree did not settle")
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
    eigen: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[Excitation, ...]:
    """The ``count`` lowest bound excitations with f > 1e-10, refined as poles of the full response.

    Only states below the ionization threshold (-epsilon_HOMO) are returned: above it the box
    discretizes a continuum and its pseudo-states depend on the box radius.
    ``eigen`` reuses a route-1 result (energies, strengths) instead of recomputing it.
    """
    ionization = solver.ionization_threshold
    energies, strengths = eigen if eigen is not None else rpa_eigen_excitations(solver, coupled=coupled)
    found = []
    visible = [(e, f) for e, f in zip(energies, strengths) if f >= 1e-10 and 0.0 < e < ionization]
    for i, (energy, strength) in enumerate(visible):
        below = 0.5 * (visible[i - 1][0] + energy) if i else 0.5 * energy
        above = 0.5 * (visible[i + 1][0] + energy) if i + 1 < len(visible) else 2.0 * energy
        try:
            pole, residue = refine_pole(solver, float(energy), coupled, bounds=(below, above))
            refined = True
        except RuntimeError:
            pole, residue, refined = float(energy), float(strength), False
        found.append(
            Excitation(solver.multipole, pole, residue, float(energy), float(strength), pole < ionization, refined)
        )
        if len(found) == count:
            break
    return tuple(found)


@dataclass(frozen=True)
class StrengthDistribution:
    """Where the oscillator strength of multipole L sits (route-1 spectrum, dimensionless sums).

    ``continuum_threshold`` (hartree) is the ionization energy -epsilon_HOMO: route-1 states above
    it are pseudo-states of the box-discretized continuum.  ``discrete_sum`` + ``continuum_sum``
    cover the states below the cutoff; ``beyond_cutoff`` = ``total`` - both, where ``total`` is the
    exact S(0) of the same discrete space (so the split always adds up to the sum rule).
    """

    multipole: int
    continuum_threshold: float
    discrete_states: int
    discrete_sum: float
    continuum_sum: float
    beyond_cutoff: float
    total: float
    cutoff: float


def strength_distribution(
    solver: ResponseSolver, eigen: tuple[np.ndarray, np.ndarray], total: float, cutoff: float = EIGEN_CUTOFF
) -> StrengthDistribution:
    """Split S(0) = ``total`` into bound states, discretized continuum below the cutoff, and the rest."""
    energies, strengths = eigen
    threshold = solver.ionization_threshold
    bound = energies < threshold
    discrete, continuum = float(strengths[bound].sum()), float(strengths[~bound].sum())
    return StrengthDistribution(
        solver.multipole, threshold, int(bound.sum()), discrete, continuum, total - discrete - continuum, total, cutoff
    )
