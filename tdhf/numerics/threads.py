"""One BLAS thread for the dense linear algebra of a few hundred unknowns.

Measured here (2 cores): multithreaded OpenBLAS makes the SCF and response solves 2-10x slower,
and erratic when the machine is busy; one thread is never slower at these matrix sizes.
"""

from __future__ import annotations

import functools
from typing import Callable, TypeVar

from threadpoolctl import threadpool_limits

__all__ = ["single_blas_thread"]

F = TypeVar("F", bound=Callable)


def single_blas_thread(function: F) -> F:
    """Run ``function`` with BLAS limited to one thread (restored afterwards)."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with threadpool_limits(limits=1, user_api="blas"):
            return function(*args, **kwargs)

    return wrapper  # type: ignore[return-value]
