"""Hartree–Fock Coulomb and exchange operators of a closed-shell atom on the FE-DVR grid.

Orbitals are stored as DVR coefficient vectors of :math:`P_{nl}(r) = r R_{nl}(r)` (see
:mod:`tdhf.radial.mesh`).  For closed subshells b with occupations :math:`q_b = 2(2l_b+1)` the
Fock operator acting on a radial function of angular momentum l is

.. math:: F_l P = \\Big[-\\tfrac12 \\frac{d^2}{dr^2} + \\frac{l(l+1)}{2r^2} - \\frac{Z}{r}
          + \\sum_b q_b \\frac{Y^0_{bb}(r)}{r}\\Big] P
          - \\sum_b q_b \\sum_k \\tfrac12 \\begin{pmatrix} l & k & l_b\\\\0&0&0\\end{pmatrix}^2
            \\frac{Y^k[P P_b](r)}{r} P_b(r),

in hartree.  In DVR coefficients the direct term is diagonal and the exchange term is the dense
matrix :math:`K_{ij} = \\sum_{b,k} c_{lkl_b} q_b\\, p_{b,i} V^k_{ij} p_{b,j}`.

A single electron (hydrogen-like system) has no electron–electron interaction: both operators
vanish, which is the exact one-electron limit of HF.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tdhf.angular import exchange_coefficient
from tdhf.radial.mesh import RadialGrid

__all__ = ["OccupiedShells", "one_electron_operator", "direct_potential", "exchange_operator"]


@dataclass(frozen=True, eq=False)
class OccupiedShells:
    """Occupied radial orbitals of a closed-shell atom.

    Attributes
    ----------
    l : ndarray of int, shape (m,)
        Orbital angular momentum of each subshell.
    occupations : ndarray of float, shape (m,)
        Electrons in each subshell (2(2l+1) when closed; 1 for a hydrogen-like system).
    orbitals : ndarray, shape (m, n)
        DVR coefficients of P(r), normalised to 1.
    """

    l: np.ndarray
    occupations: np.ndarray
    orbitals: np.ndarray

    @property
    def interacting(self) -> bool:
        """False for a single electron, where HF has no two-electron terms."""
        return float(self.occupations.sum()) > 1.0 + 1e-12


def one_electron_operator(grid: RadialGrid, nuclear_charge: float, l: int) -> np.ndarray:
    """Matrix of :math:`-\\tfrac12 d^2/dr^2 + l(l+1)/(2r^2) - Z/r` in hartree, shape (n, n)."""
    operator = 0.5 * grid.stiffness.copy()
    operator[np.diag_indices(grid.size)] += 0.5 * l * (l + 1) / grid.r**2 - nuclear_charge / grid.r
    return operator


def direct_potential(kernels: np.ndarray, shells: OccupiedShells) -> np.ndarray:
    """Hartree potential :math:`\\sum_b q_b Y^0_{bb}(r_i)/r_i` at the nodes, hartree, shape (n,)."""
    if not shells.interacting:
        return np.zeros(kernels.shape[-1])
    density = shells.occupations @ shells.orbitals**2
    return kernels[0] @ density


def exchange_operator(kernels: np.ndarray, shells: OccupiedShells, l: int) -> np.ndarray:
    """Exchange matrix K for angular momentum l (to be subtracted from the Fock matrix)."""
    size = kernels.shape[-1]
    exchange = np.zeros((size, size))
    if not shells.interacting:
        return exchange
    l_values = sorted(set(shells.l.tolist()))  # (np.unique would import numpy.ma: 8 ms of start-up)
    for k in range(kernels.shape[0]):
        weighted = np.zeros((size, size))
        touched = False
        for l_b in l_values:
            coefficient = exchange_coefficient(l, k, int(l_b))
            if coefficient == 0.0:
                continue
            members = shells.l == l_b
            block = shells.orbitals[members]
            weighted += (coefficient * shells.occupations[members] * block.T) @ block
            touched = True
        if touched:
            exchange += kernels[k] * weighted
    return exchange
