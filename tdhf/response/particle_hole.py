"""Coordinates of first-order orbitals on the virtual eigenvectors of each channel.

A channel t = (a -> l') function rho_t(r) with no occupied component is
:math:`\\rho_t = \\sum_v c_{tv}\\, \\phi_v` over the virtual eigenvectors :math:`\\phi_v` of
:math:`F_{l'}` (:attr:`tdhf.response.solver.ResponseSolver.spectra`).  In these coordinates the
particle-hole energies :math:`D_{tv} = \\varepsilon_v - \\varepsilon_a` are diagonal, the
resolvents of the first-order equations are elementwise divisions and the occupied space is absent
by construction.  With ``symmetric=True`` the coordinates are :math:`\\sqrt{w_t}\\,c_{tv}` (channel
weights w_t), in which the RPA matrices A and B are symmetric.
"""

from __future__ import annotations

import numpy as np

__all__ = ["ParticleHoleBasis"]


class ParticleHoleBasis:
    """Map channel functions (DVR coefficients) to and from particle-hole coordinates."""

    def __init__(self, solver, symmetric: bool = False) -> None:
        self.solver = solver
        self.blocks = []  # per channel: (virtual eigenvectors (n, m_t), particle-hole energies (m_t,))
        for channel in solver.channels:
            values, vectors, virtual = solver.spectra[channel.l_prime]
            self.blocks.append((vectors[:, virtual], values[virtual] - solver.orbital_energies[channel.shell]))
        sizes = [gaps.size for _, gaps in self.blocks]
        self.offsets = np.concatenate(([0], np.cumsum(sizes))).astype(int)
        if symmetric:
            self.scale = np.concatenate([np.full(m, np.sqrt(c.weight)) for m, c in zip(sizes, solver.channels)])
        else:
            self.scale = np.ones(int(self.offsets[-1]))
        self.energies = np.concatenate([gaps for _, gaps in self.blocks])

    @property
    def size(self) -> int:
        return int(self.offsets[-1])

    def to_grid(self, coordinates: np.ndarray) -> np.ndarray:
        """(m, size) coordinates -> (m, n_channels, n) DVR coefficients of the channel functions."""
        plain = coordinates / self.scale
        out = np.empty((coordinates.shape[0], len(self.blocks), self.solver.grid.size), dtype=plain.dtype)
        for t, (vectors, _) in enumerate(self.blocks):
            out[:, t] = plain[:, self.offsets[t]:self.offsets[t + 1]] @ vectors.T
        return out

    def from_grid(self, functions: np.ndarray) -> np.ndarray:
        """(m, n_channels, n) DVR coefficients -> (m, size) coordinates (projection on the virtuals)."""
        out = np.empty((functions.shape[0], self.size), dtype=functions.dtype)
        for t, (vectors, _) in enumerate(self.blocks):
            out[:, self.offsets[t]:self.offsets[t + 1]] = functions[:, t] @ vectors
        return out * self.scale
