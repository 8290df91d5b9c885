"""Exceptions raised by tdhf.

Every exception carries a one-line, user-facing message that names the offending input (a deck key
path such as ``atom.element`` where there is one) and the fix.  The CLI maps the two families to
distinct exit codes:

* :class:`InputError` and subclasses: the request itself is wrong (exit code 2);
* :class:`ConvergenceError`: the request was valid but a solver did not converge (exit code 3);
* :class:`OutputError`: the results were computed but a result file could not be written
  (exit code 4); the message names the file, and the results are still printed.

Exit codes of the command line (``tdhf.cli``): 0 success, 1 internal error (a bug), 2 input,
3 not converged, 4 output failure, 130 interrupted.
"""

from __future__ import annotations

__all__ = [
    "TdhfError",
    "InputError",
    "DeckError",
    "UnknownElementError",
    "ConfigurationError",
    "OpenShellError",
    "GridError",
    "FrequencyError",
    "ConvergenceError",
    "OutputError",
]


class TdhfError(Exception):
    """Base class of all errors raised on purpose by tdhf."""


class InputError(TdhfError, ValueError):
    """The request is invalid: a deck value, an argument, a configuration."""


class DeckError(InputError):
    """A deck could not be read or violates the schema (unknown key, wrong type, bad value)."""


class UnknownElementError(InputError):
    """An element symbol or atomic number that does not exist (Z outside 1..118)."""


class ConfigurationError(InputError):
    """An electron configuration that cannot be parsed or contradicts the charge."""


class OpenShellError(ConfigurationError):
    """A configuration with a partially filled subshell; tdhf treats closed shells only."""


class GridError(InputError):
    """Radial grid settings that are negative, inconsistent or absurd."""


class FrequencyError(InputError):
    """A frequency that is negative, non-numeric, or at/above an excitation for a real response."""


class ConvergenceError(TdhfError, RuntimeError):
    """An iterative solver (SCF, response coupling) did not reach its tolerance."""


class OutputError(TdhfError, OSError):
    """A result file cannot be written (missing folder, not writable, not a regular file, disk full)."""
