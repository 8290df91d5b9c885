"""How an iterative solve ended: the one convergence record every tdhf solver returns.

Policy (the same everywhere in tdhf):

* a solver never raises because it did not converge; it returns its result together with a
  :class:`SolveStatus` whose ``converged`` is False and whose ``message`` says what stopped it;
* every number derived from a solve carries the status of that solve (or the worst of several,
  :func:`combine`), so nothing that failed becomes a number without a flag;
* non-finite values (NaN, inf) met inside a solve stop it at once with ``converged=False``.

>>> ok = SolveStatus(True, 7, 3e-13, 1e-12, "converged")
>>> bad = SolveStatus(False, 480, 2e-6, 1e-12, "iteration limit reached")
>>> combine(ok, bad).message
'iteration limit reached'
>>> combine(ok, ok).converged
True
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["SolveStatus", "combine", "EXACT"]


@dataclass(frozen=True)
class SolveStatus:
    """The end of one iterative solve (SciPy-style convergence record).

    Attributes
    ----------
    converged : bool
        True if ``residual <= tolerance`` was reached with finite values throughout.
    iterations : int
        Iterations (Krylov steps, SCF cycles, eigensolver sweeps) used.
    residual : float
        Final residual in the solver's own measure (relative residual norm for linear solves);
        ``inf`` if non-finite values appeared.
    tolerance : float
        The residual asked for.
    message : str
        What stopped the solver: "converged", "iteration limit reached", "stagnated",
        "non-finite values", or a solver-specific reason.
    """

    converged: bool
    iterations: int
    residual: float
    tolerance: float
    message: str

    def describe(self) -> str:
        """One line for warnings: ``"converged in 7 steps (residual 3.0e-13)"`` or the failure."""
        outcome = "converged" if self.converged else f"not converged: {self.message}"
        return f"{outcome} after {self.iterations} iterations (residual {self.residual:.1e}, tolerance {self.tolerance:.0e})"


#: The status of a computation that has no iteration (a closed form, a direct factorization).
EXACT = SolveStatus(True, 0, 0.0, 0.0, "direct")


def combine(*statuses: SolveStatus) -> SolveStatus:
    """The status of a number derived from several solves: the worst of them.

    Not converged beats converged; among equals the largest residual relative to its tolerance
    wins; iterations are summed.
    """
    if not statuses:
        return EXACT
    iterations = sum(s.iterations for s in statuses)

    def badness(status: SolveStatus) -> tuple[bool, float]:
        ratio = status.residual / status.tolerance if status.tolerance > 0.0 else status.residual
        return (not status.converged, ratio)

    worst = max(statuses, key=badness)
    return SolveStatus(worst.converged, iterations, worst.residual, worst.tolerance, worst.message)
