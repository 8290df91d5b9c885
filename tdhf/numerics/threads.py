"""One BLAS thread for the dense linear algebra of a few hundred unknowns.

Measured here (2 cores): multithreaded OpenBLAS makes the SCF and response solves 2-10x slower,
and erratic when the machine is busy; one thread is never slower at these matrix sizes.

Setting a limit costs ~1 ms (threadpoolctl inspects the loaded libraries), so only the outermost
decorated call sets it; nested decorated calls (a property calling the solver hundreds of times)
run inside it at no cost.
"""

from __future__ import annotations

import functools
import threading
from typing import Callable, TypeVar

from threadpoolctl import threadpool_limits

__all__ = ["single_blas_thread"]

F = TypeVar("F", bound=Callable)

_state = threading.local()


def single_blas_thread(function: F) -> F:
    """Run ``function`` with BLAS limited to one thread (restored afterwards)."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        if getattr(_state, "inside", False):
            return function(*args, **kwargs)
        with threadpool_limits(limits=1, user_api="blas"):
            _state.inside = True
            try:
                return function(*args, **kwargs)
            finally:
                _state.inside = False

    return wrapper  # type: ignore[return-value]
