"""Finite-element discrete-variable representation (FE-DVR) of the radial coordinate.

The box [0, R] is cut into elements ``[r_{k-1}, r_k]`` whose sizes grow geometrically away from the
nucleus.  Inside each element the functions are polynomials of order ``p`` through the element's
Legendre–Gauss–Lobatto (LGL) nodes; neighbouring elements share their end node ("bridge"
functions), so functions are continuous.  The basis functions are

.. math:: \\chi_i(r) = \\ell_i(r) / \\sqrt{w_i},  \\qquad  \\chi_i(r_j) = \\delta_{ij} / \\sqrt{w_i},

with :math:`w_i` the LGL weight of node i (summed over the two elements at a shared node).  With LGL
quadrature the overlap matrix is the identity and every local operator (potential, centrifugal term)
is diagonal.  A function ``f`` is stored by its *DVR coefficients* ``f_i = sqrt(w_i) f(r_i)``, so
quadrature of a product is a plain dot product: :math:`\\int f g\\,dr \\approx \\sum_i f_i g_i`.

The radial functions used by tdhf are ``P(r) = r R(r)`` with ``P(0) = P(R) = 0``: the node at r = 0
and the node at r = R are removed, which imposes both Dirichlet conditions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tdhf.errors import GridError
from tdhf.radial.lobatto import lobatto_derivative_matrix, lobatto_rule

__all__ = ["RadialGrid", "GridSettings", "build_grid", "geometric_boundaries", "grid_size", "check_grid_size",
           "MAX_GRID_POINTS", "MAX_R_MAX"]


@dataclass(frozen=True, eq=False)
class RadialGrid:
    """FE-DVR radial grid.

    Attributes
    ----------
    boundaries : ndarray, shape (n_elements + 1,)
        Element end points in bohr, from 0 to ``r_max``.
    order : int
        Polynomial order p inside each element (p + 1 LGL nodes per element).
    r : ndarray, shape (n,)
        Interior nodes in bohr (r = 0 and r = r_max excluded), n = n_elements * p - 1.
    weights : ndarray, shape (n,)
        Quadrature weights of the interior nodes in bohr.
    stiffness : ndarray, shape (n, n)
        :math:`L_{ij} = \\int_0^R \\chi_i'(r) \\chi_j'(r) dr`, the DVR matrix of :math:`-d^2/dr^2`
        with Dirichlet conditions (exact: the integrand has degree 2p - 2).
    derivative : ndarray, shape (n, n)
        :math:`D_{ij} = \\int_0^R \\chi_i(r) \\chi_j'(r) dr`, the DVR matrix of d/dr
        (antisymmetric, exact by LGL quadrature).
    origin_slope : ndarray, shape (n,)
        Row vector giving :math:`P'(0)` from DVR coefficients: ``P'(0) = origin_slope @ p``.
    origin_curvature : ndarray, shape (n,)
        Row vector giving :math:`P''(0)` likewise (used for the Kato cusp check).
    """

    boundaries: np.ndarray
    order: int
    r: np.ndarray
    weights: np.ndarray
    stiffness: np.ndarray
    derivative: np.ndarray
    origin_slope: np.ndarray
    origin_curvature: np.ndarray

    @classmethod
    def from_boundaries(cls, boundaries: np.ndarray, order: int) -> "RadialGrid":
        """Build the grid and its exact FE-DVR operators from element end points."""
        boundaries = np.asarray(boundaries, dtype=float)
        if boundaries[0] != 0.0 or np.any(np.diff(boundaries) <= 0.0):
            raise ValueError("element boundaries must start at 0 and increase strictly")
        x, w = lobatto_rule(order)
        lagrange_derivative = lobatto_derivative_matrix(order)
        n_elements = len(boundaries) - 1
        n_full = n_elements * order + 1
        r_full = np.zeros(n_full)
        w_full = np.zeros(n_full)
        stiffness_full = np.zeros((n_full, n_full))
        derivative_full = np.zeros((n_full, n_full))
        # Element matrices on [-1, 1]: int l_i' l_j' dx and int l_i l_j' dx, both exact with LGL.
        stiffness_ref = lagrange_derivative.T @ (w[:, None] * lagrange_derivative)
        derivative_ref = w[:, None] * lagrange_derivative
        for k in range(n_elements):
            left, right = boundaries[k], boundaries[k + 1]
            half = 0.5 * (right - left)
            block = slice(k * order, k * order + order + 1)
            r_full[block] = left + half * (x + 1.0)
            w_full[block] += half * w
            stiffness_full[block, block] += stiffness_ref / half
            derivative_full[block, block] += derivative_ref
        r_full[-1] = boundaries[-1]
        scale = 1.0 / np.sqrt(w_full)
        stiffness_full *= scale[:, None] * scale[None, :]
        derivative_full *= scale[:, None] * scale[None, :]
        inner = slice(1, n_full - 1)
        first_half = 0.5 * (boundaries[1] - boundaries[0])
        origin_slope = np.zeros(n_full)
        origin_slope[: order + 1] = lagrange_derivative[0] / first_half * scale[: order + 1]
        origin_curvature = np.zeros(n_full)
        second = (lagrange_derivative @ lagrange_derivative)[0]
        origin_curvature[: order + 1] = second / first_half**2 * scale[: order + 1]
        return cls(
            boundaries=boundaries,
            order=order,
            r=r_full[inner].copy(),
            weights=w_full[inner].copy(),
            stiffness=stiffness_full[inner, inner].copy(),
            derivative=derivative_full[inner, inner].copy(),
            origin_slope=origin_slope[inner].copy(),
            origin_curvature=origin_curvature[inner].copy(),
        )

    @property
    def size(self) -> int:
        """Number of radial basis functions (interior nodes)."""
        return self.r.size

    @property
    def r_max(self) -> float:
        """Box radius R in bohr."""
        return float(self.boundaries[-1])

    @property
    def n_elements(self) -> int:
        return len(self.boundaries) - 1

    def to_coefficients(self, values: np.ndarray) -> np.ndarray:
        """DVR coefficients ``sqrt(w_i) f(r_i)`` of a function sampled at the nodes."""
        return np.sqrt(self.weights) * values

    def to_values(self, coefficients: np.ndarray) -> np.ndarray:
        """Function values ``f(r_i)`` at the nodes from DVR coefficients (last axis)."""
        return coefficients / np.sqrt(self.weights)

    def integrate(self, values: np.ndarray) -> np.ndarray:
        """LGL quadrature ``sum_i w_i f(r_i)`` over the last axis of sampled values."""
        return values @ self.weights


def geometric_boundaries(first_element: float, r_max: float, n_elements: int) -> np.ndarray:
    """Element end points ``r_k = h (g^k - 1) / (g - 1)`` with first size h and ``r_N = r_max``.

    The growth factor g >= 1 is found by bisection; g = 1 (uniform) when ``h * N >= r_max``.
    """
    if first_element * n_elements >= r_max:
        return np.linspace(0.0, r_max, n_elements + 1)
    target = r_max / first_element
    low, high = 1.0, 2.0
    while (high**n_elements - 1.0) / (high - 1.0) < target:
        high *= 2.0
    for _ in range(200):
        middle = 0.5 * (low + high)
        if (middle**n_elements - 1.0) / (middle - 1.0) < target:
            low = middle
        else:
            high = middle
    growth = 0.5 * (low + high)
    k = np.arange(n_elements + 1)
    boundaries = first_element * (growth**k - 1.0) / (growth - 1.0)
    boundaries[-1] = r_max
    return boundaries


#: Default first element size times Z, bohr: the 1s orbital of charge Z varies on 1/Z.
FIRST_ELEMENT_TIMES_Z = 0.1
#: Smallest element size anywhere, bohr: keeps the innermost kinetic eigenvalues (~1/h^2) modest.
MIN_FIRST_ELEMENT = 1e-4
#: Largest box radius, bohr, given or automatic.
MAX_R_MAX = 2000.0
#: Largest number of radial points.  Measured peak memory of a Rn ground state (4 symmetries, DIIS
#: history of 10): 1.9 GB at 1079 points, 3.6 GB at 1475, i.e. ~200 dense n x n float64 matrices,
#: most of them the DIIS history; the response adds little.  1000 points: ~1.6 GB, ~30 s.  The
#: default grids have 110-250 points, the tight preset up to ~500 and its refinement
#: (``--certify``) up to ~800 at the largest box.
MAX_GRID_POINTS = 1000
#: Dense n x n float64 matrices a run holds at its peak (for the memory estimate in messages).
_MATRICES_PER_RUN = 200


@dataclass(frozen=True)
class GridSettings:
    """How to build the radial grid (defaults reach ~1e-9 hartree in total energies through Rn).

    Attributes
    ----------
    order : int
        Polynomial order p in each element (p + 1 LGL nodes), 4..24.
    growth : float
        Ratio of neighbouring element sizes, 1 < growth <= 4; smaller is finer.
    first_element : float or None
        Size of the innermost element in bohr; None: ``0.1 / Z``.
    r_max : float or None
        Box radius in bohr; None: chosen from the decay of the outermost orbital (see
        :func:`tdhf.ground_state.solve_ground_state`), at least 40 bohr.
    """

    order: int = 10
    growth: float = 1.9
    first_element: float | None = None
    r_max: float | None = None

    def __post_init__(self) -> None:
        if isinstance(self.order, bool) or not isinstance(self.order, int) or not 4 <= self.order <= 24:
            raise GridError(f"grid.order: {self.order!r} is not an integer in 4..24; the default is 10")
        if not 1.0 < self.growth <= 4.0:
            raise GridError(f"grid.growth: {self.growth!r} must be in (1, 4]; the default is 1.9")
        if self.first_element is not None and not MIN_FIRST_ELEMENT <= self.first_element <= 1.0:
            raise GridError(
                f"grid.first_element: {self.first_element!r} bohr must be in [{MIN_FIRST_ELEMENT}, 1];"
                " leave it out for the default 0.1/Z"
            )
        if self.r_max is not None and not 5.0 <= self.r_max <= MAX_R_MAX:
            raise GridError(f"grid.r_max: {self.r_max!r} bohr must be in [5, {MAX_R_MAX:g}]; leave it out for automatic")

    @classmethod
    def tight(cls) -> "GridSettings":
        """Settings for ~1e-10 hartree where round-off allows: order 14, growth 1.5."""
        return cls(order=14, growth=1.5)

    def refined(self) -> "GridSettings":
        """A clearly finer grid for convergence checks: order + 4 and a slower growth."""
        return GridSettings(
            order=min(self.order + 4, 24),
            growth=1.0 + 0.75 * (self.growth - 1.0),
            first_element=self.first_element,
            r_max=self.r_max,
        )


def _first_element(settings: GridSettings, nuclear_charge: float, r_max: float) -> float:
    first = settings.first_element or max(FIRST_ELEMENT_TIMES_Z / nuclear_charge, MIN_FIRST_ELEMENT)
    return min(first, 0.5 * r_max)


def _reaches(first: float, growth: float, n_elements: int, r_max: float) -> bool:
    """True if ``n_elements`` elements growing by ``growth`` from ``first`` cover [0, r_max]."""
    return first * (growth**n_elements - 1.0) / (growth - 1.0) >= r_max


def grid_size(settings: GridSettings, nuclear_charge: float, r_max: float) -> tuple[int, int]:
    """(elements, radial points) of :func:`build_grid` for these arguments, without building it.

    The element count is the smallest N >= 2 with ``h (g^N - 1)/(g - 1) >= r_max`` (consecutive
    sizes grow by at most g), ``N ~ log(1 + r_max (g - 1)/h) / log g``; points = N p - 1.
    """
    first, growth = _first_element(settings, nuclear_charge, r_max), settings.growth
    estimate = math.log1p(r_max * (growth - 1.0) / first) / math.log1p(growth - 1.0)
    if estimate > MAX_GRID_POINTS:  # more elements than points allowed: the exact count (g^N may overflow) is moot
        n_elements = math.ceil(estimate)
    else:
        n_elements = max(2, math.ceil(estimate) - 1)
        while n_elements > 2 and _reaches(first, growth, n_elements - 1, r_max):
            n_elements -= 1
        while not _reaches(first, growth, n_elements, r_max):
            n_elements += 1
    return n_elements, n_elements * settings.order - 1


def check_grid_size(settings: GridSettings, nuclear_charge: float, r_max: float) -> tuple[int, int]:
    """:func:`grid_size`, after checking that the points stay within MAX_GRID_POINTS.

    Raises
    ------
    GridError
        Before anything is allocated, naming the points and memory the settings would need.
    """
    n_elements, points = grid_size(settings, nuclear_charge, r_max)
    if points > MAX_GRID_POINTS:
        gigabytes = _MATRICES_PER_RUN * 8.0 * float(points) ** 2 / 1e9
        raise GridError(
            f"grid: order {settings.order}, growth {settings.growth:g} and first element"
            f" {_first_element(settings, nuclear_charge, r_max):g} bohr need {points:.3g} radial points"
            f" (~{gigabytes:.2g} GB) to reach r = {r_max:g} bohr, above the limit of {MAX_GRID_POINTS};"
            " use a larger grid.growth or grid.first_element, or a lower grid.order (defaults: 10, 1.9, 0.1/Z)"
        )
    return n_elements, points


def build_grid(settings: GridSettings, nuclear_charge: float, r_max: float) -> RadialGrid:
    """Geometric FE-DVR grid for nuclear charge Z in a box of radius ``r_max`` bohr.

    Raises GridError (:func:`check_grid_size`) rather than allocate more than MAX_GRID_POINTS.
    """
    n_elements, _ = check_grid_size(settings, nuclear_charge, r_max)
    first = _first_element(settings, nuclear_charge, r_max)
    return RadialGrid.from_boundaries(geometric_boundaries(first, r_max, n_elements), settings.order)
