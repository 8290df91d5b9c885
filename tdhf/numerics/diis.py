"""Pulay's direct inversion in the iterative subspace (DIIS), physics-free.

Given trial vectors :math:`x_i` and their error vectors :math:`e_i`, DIIS returns
:math:`\\sum_i c_i x_i` with the coefficients that minimise :math:`\\|\\sum_i c_i e_i\\|` subject to
:math:`\\sum_i c_i = 1` (P. Pulay, Chem. Phys. Lett. 73, 393 (1980)).
"""

from __future__ import annotations

from collections import deque

import numpy as np

__all__ = ["Diis"]


class Diis:
    """Keep the last ``size`` (vector, error) pairs and extrapolate.

    Vectors and errors are flat float arrays; callers pack and unpack their own structures.
    """

    def __init__(self, size: int = 8) -> None:
        if size < 1:
            raise ValueError("DIIS subspace size must be >= 1")
        self._vectors: deque[np.ndarray] = deque(maxlen=size)
        self._errors: deque[np.ndarray] = deque(maxlen=size)

    def __len__(self) -> int:
        return len(self._vectors)

    def reset(self) -> None:
        self._vectors.clear()
        self._errors.clear()

    def update(self, vector: np.ndarray, error: np.ndarray) -> np.ndarray:
        """Store a pair and return the extrapolated vector."""
        self._vectors.append(np.array(vector, dtype=float, copy=True))
        self._errors.append(np.array(error, dtype=float, copy=True))
        count = len(self._vectors)
        if count == 1:
            return self._vectors[0].copy()
        errors = np.array(self._errors)
        system = np.zeros((count + 1, count + 1))
        system[:count, :count] = errors @ errors.T
        system[:count, count] = system[count, :count] = -1.0
        right = np.zeros(count + 1)
        right[count] = -1.0
        # Normalise the error overlaps: near convergence they span many decades.
        scale = np.max(np.abs(np.diag(system[:count, :count])))
        if scale > 0.0:
            system[:count, :count] /= scale
        try:
            solution = np.linalg.solve(system, right)
        except np.linalg.LinAlgError:
            solution = np.linalg.lstsq(system, right, rcond=None)[0]
        coefficients = solution[:count]
        return np.tensordot(coefficients, np.array(self._vectors), axes=1)
