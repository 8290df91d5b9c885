"""Exterior complex scaling (ECS) of the FE-DVR radial grid, for outgoing-wave (continuum) solutions.

Beyond a radius :math:`R_0` that is an element boundary the radial coordinate is continued into
the complex plane,

.. math:: z(r) = r \\quad (r \\le R_0), \\qquad z(r) = R_0 + (r - R_0)\\,e^{i\\theta} \\quad (r > R_0),

so that an outgoing wave :math:`e^{ikz}` decays as :math:`e^{-k (r - R_0)\\sin\\theta}` in the scaled
region while nothing changes for :math:`r \\le R_0` (McCurdy, Baertschy and Rescigno,
J. Phys. B 37, R137 (2004); Rescigno and McCurdy, Phys. Rev. A 62, 032706 (2000); both from
memory).  Because :math:`R_0` is an element boundary, each scaled element is an ordinary
Lobatto element of complex length :math:`h e^{i\\theta}`: its nodes are :math:`z_i`, its weights
:math:`w_i e^{i\\theta}` and its stiffness block :math:`e^{-i\\theta}` times the real one
(:math:`d/dz = e^{-i\\theta} d/dr`, :math:`dz = e^{i\\theta} dr`).  Potentials are evaluated at the
complex nodes.

The matrices use the unconjugated bilinear form :math:`\\int f g\\,dz`: with DVR coefficients
:math:`f_i = \\sqrt{w_i} f(z_i)` (principal square root) the overlap is the identity and the
Hamiltonian is complex *symmetric*, not Hermitian.  The last node (r = r_max) is removed
(Dirichlet), like r = 0; a wave reaching it has been damped by the scaling.
"""

from __future__ import annotations

import dataclasses

from dataclasses import dataclass

import numpy as np

from tdhf.radial.lobatto import lobatto_derivative_matrix, lobatto_rule
from tdhf.radial.mesh import RadialGrid

__all__ = ["ScaledGrid", "ContinuumGridSettings", "uniform_boundaries", "continuum_boundaries"]


@dataclass(frozen=True, eq=False)
class ScaledGrid:
    """FE-DVR grid on [0, r_max] whose part beyond ``scaling_radius`` is rotated by ``angle``.

    Attributes
    ----------
    boundaries : ndarray, shape (n_elements + 1,)
        Element end points in the real parameter r (bohr), 0 to r_max.
    order : int
        Polynomial order p of each element.
    scaling_radius : float
        :math:`R_0` in bohr, one of the boundaries.
    angle : float
        Scaling angle :math:`\\theta` in radians, 0 < theta < pi/2.
    r : ndarray, shape (n,)
        Real parameter of the nodes (r = 0 and r = r_max excluded).
    z : ndarray of complex, shape (n,)
        Complex coordinate of the nodes (equal to r up to R_0).
    weights : ndarray of complex, shape (n,)
        Lobatto weights in the complex coordinate.
    stiffness : ndarray of complex, shape (n, n)
        :math:`\\int \\chi_i'(z) \\chi_j'(z)\\,dz` in DVR coefficients: the matrix of
        :math:`-d^2/dz^2`, complex symmetric.
    """

    boundaries: np.ndarray
    order: int
    scaling_radius: float
    angle: float
    r: np.ndarray
    z: np.ndarray
    weights: np.ndarray
    stiffness: np.ndarray

    @classmethod
    def from_boundaries(cls, boundaries: np.ndarray, order: int, scaling_radius: float, angle: float) -> "ScaledGrid":
        """Build the grid; ``scaling_radius`` must be one of ``boundaries`` (not the last one)."""
        boundaries = np.asarray(boundaries, dtype=float)
        if boundaries[0] != 0.0 or np.any(np.diff(boundaries) <= 0.0):
            raise ValueError("element boundaries must start at 0 and increase strictly")
        if not np.any(boundaries[:-1] == scaling_radius):
            raise ValueError(f"the scaling radius {scaling_radius} is not an inner element boundary")
        if not 0.0 < angle < 0.5 * np.pi:
            raise ValueError(f"the scaling angle {angle} must be in (0, pi/2)")
        x, w = lobatto_rule(order)
        derivative = lobatto_derivative_matrix(order)
        stiffness_ref = derivative.T @ (w[:, None] * derivative)
        phase = np.exp(1j * angle)
        n_elements = len(boundaries) - 1
        n_full = n_elements * order + 1
        r_full = np.zeros(n_full)
        z_full = np.zeros(n_full, dtype=complex)
        w_full = np.zeros(n_full, dtype=complex)
        stiffness_full = np.zeros((n_full, n_full), dtype=complex)
        for k in range(n_elements):
            left, right = boundaries[k], boundaries[k + 1]
            scaled = left >= scaling_radius
            half = 0.5 * (right - left) * (phase if scaled else 1.0)
            start = scaling_radius + (left - scaling_radius) * phase if scaled else left
            block = slice(k * order, k * order + order + 1)
            r_full[block] = left + 0.5 * (right - left) * (x + 1.0)
            z_full[block] = start + half * (x + 1.0)
            w_full[block] += half * w
            stiffness_full[block, block] += stiffness_ref / half
        scale = 1.0 / np.sqrt(w_full)
        stiffness_full *= scale[:, None] * scale[None, :]
        inner = slice(1, n_full - 1)
        return cls(
            boundaries=boundaries,
            order=order,
            scaling_radius=float(scaling_radius),
            angle=float(angle),
            r=r_full[inner].copy(),
            z=z_full[inner].copy(),
            weights=w_full[inner].copy(),
            stiffness=stiffness_full[inner, inner].copy(),
        )

    @property
    def size(self) -> int:
        return self.r.size

    @property
    def r_max(self) -> float:
        return float(self.boundaries[-1])

    def node_at(self, radius: float) -> int:
        """Index of the node at the element boundary ``radius`` (bohr)."""
        if not np.any(self.boundaries[1:-1] == radius):
            raise ValueError(f"{radius} bohr is not an inner element boundary of the grid")
        return int(np.flatnonzero(self.boundaries == radius)[0]) * self.order - 1

    def real_grid(self, radius: float) -> RadialGrid:
        """The real FE-DVR grid of the elements inside ``radius`` <= R_0, with P(radius) = 0.

        Its nodes are the first ``node_at(radius)`` nodes of this grid, with the same weights.
        """
        if radius > self.scaling_radius:
            raise ValueError(f"{radius} bohr lies beyond the scaling radius {self.scaling_radius} bohr")
        count = int(np.flatnonzero(self.boundaries == radius)[0])
        return RadialGrid.from_boundaries(self.boundaries[: count + 1], self.order)

    def to_values(self, coefficients: np.ndarray) -> np.ndarray:
        """Function values f(z_i) from DVR coefficients (last axis)."""
        return coefficients / np.sqrt(self.weights)


def uniform_boundaries(start: float, stop: float, largest: float) -> np.ndarray:
    """Boundaries from ``start`` to ``stop`` (both included) in equal elements no larger than ``largest``."""
    count = max(1, int(np.ceil((stop - start) / largest - 1e-9)))
    return np.linspace(start, stop, count + 1)


@dataclass(frozen=True)
class ContinuumGridSettings:
    """How to build the scaled grid for photoelectrons up to a given momentum.

    Attributes
    ----------
    order : int
        Polynomial order of the elements.
    growth : float
        Largest ratio of neighbouring element sizes near the nucleus.
    first_element : float or None
        Innermost element size in bohr (None: 0.1/Z, as for the ground state).
    resolution : float or None
        Largest k h (local momentum times element size); None: 0.9 p - 2, measured to keep the
        hydrogen cross section within ~1e-8 of the exact one for p = 8 ... 16.
    angle : float
        Scaling angle theta in radians.
    extension : float
        Length of the real region between the inner radius R_i and the scaling radius R_0, bohr.
    absorbing_length : float
        Smallest length of the scaled region, bohr; it grows as 15 / (k_min sin theta) for slow
        photoelectrons.
    scaled_growth : float
        Ratio of neighbouring element sizes in the scaled region (the waves decay there).
    """

    order: int = 12
    growth: float = 1.6
    first_element: float | None = None
    resolution: float | None = None
    angle: float = 0.8
    extension: float = 60.0
    absorbing_length: float = 120.0
    scaled_growth: float = 1.4

    @property
    def momentum_resolution(self) -> float:
        return self.resolution if self.resolution is not None else 0.9 * self.order - 2.0

    def refined(self) -> "ContinuumGridSettings":
        """A clearly different and finer scaled grid for certificates: order + 2, slower growth,
        another scaling angle (0.6 for 0.8), and longer real and absorbing regions."""
        return dataclasses.replace(
            self, order=min(self.order + 2, 24), growth=1.0 + 0.75 * (self.growth - 1.0),
            angle=0.75 * self.angle, extension=1.25 * self.extension, absorbing_length=1.25 * self.absorbing_length,
        )


def continuum_boundaries(
    settings: ContinuumGridSettings,
    nuclear_charge: float,
    inner_radius: float,
    largest_momentum: float,
    smallest_momentum: float,
) -> tuple[np.ndarray, float, float]:
    """Element boundaries for outgoing waves: (boundaries, R_i, R_0).

    From the nucleus the elements grow by ``growth`` but stay below ``resolution / k(r)`` with the
    local momentum :math:`k(r) = \\sqrt{k_{max}^2 + 2Z/r}` (an upper bound: the unscreened
    nucleus); R_i is the first boundary at or beyond ``inner_radius``; the real region continues
    by ``extension`` to R_0, then the scaled elements grow by ``scaled_growth`` over at least
    ``max(absorbing_length, 15 / (k_min sin theta))``.
    """
    resolution = settings.momentum_resolution
    size = settings.first_element or max(0.1 / nuclear_charge, 1e-4)
    boundaries = [0.0, size]

    def capped(radius: float) -> float:
        return resolution / np.sqrt(largest_momentum**2 + 2.0 * nuclear_charge / radius)

    while boundaries[-1] < inner_radius - 1e-9:
        size = min(settings.growth * size, capped(boundaries[-1]))
        boundaries.append(boundaries[-1] + size)
    r_inner = boundaries[-1]
    if settings.extension > 0.0:
        boundaries.extend(uniform_boundaries(r_inner, r_inner + settings.extension, capped(r_inner))[1:])
    r_scaling = boundaries[-1]
    length = max(settings.absorbing_length, 15.0 / (max(smallest_momentum, 1e-3) * np.sin(settings.angle)))
    size = capped(r_scaling)
    while boundaries[-1] < r_scaling + length:
        boundaries.append(boundaries[-1] + size)
        size *= settings.scaled_growth
    return np.array(boundaries), float(r_inner), float(r_scaling)
