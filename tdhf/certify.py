"""Certificates: every reported number recomputed with each approximation varied.

A number is only as good as the least converged approximation behind it, so the certificate
reruns the deck once per approximation and takes, for each number, the largest change:

``grid``
    :meth:`GridSettings.refined` (element order + 4, growth 0.75 x (g - 1) + 1), and the scaled
    continuum grid refined (:meth:`ContinuumGridSettings.refined`: order + 2, another scaling
    angle, longer real and absorbing regions);
``box``
    a fixed box :data:`BOX_FACTOR` times the largest box the run used (ground state and every
    response box), so Rydberg lines and near-resonance responses feel it;
``tolerances``
    SCF, Krylov and RPA-eigensolver tolerances 100 times tighter (round-off floors kept);
``quadrature``
    for C6, C8, C10: the imaginary-frequency quadrature 1.5 times larger, combined with the
    companion-rule error estimate the result already carries.

The largest change :math:`\\max_v |x_v - x|` over the variations is the number's ``difference``
and twice it (:data:`UNCERTAINTY_FACTOR`) its uncertainty: if each variation at least halves the
error of its approximation (true of the exponentially converging box, grid and tolerances here;
measured: the 1.5x box leaves 2e-4 of a near-resonance box error), the true error is below the
uncertainty.  A number missing
from a variation (e.g. a line that no longer fits) or not converged in it is reported as not
converged.  :data:`CERTIFICATION_TOLERANCE` is the relative change above which a warning names the
number.  Cost: three to four extra runs (measured 2-4x the run time).
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from typing import Callable

from tdhf.deck import Deck
from tdhf.driver import Certification, RunResult, run_deck
from tdhf.numerics.tasks import TaskMap
from tdhf.properties.dispersion import QUADRATURE_RANGE
from tdhf.quantities import Quantity, key_of, quantities

__all__ = ["certify", "certified", "variations", "CERTIFICATION_TOLERANCE", "BOX_FACTOR", "UNCERTAINTY_FACTOR"]

#: Uncertainty = this factor x the largest change (module docstring).
UNCERTAINTY_FACTOR = 2.0
#: Relative change above which a certified number is named in a warning.
CERTIFICATION_TOLERANCE = 1e-7
#: The box of the box variation, relative to the largest box of the run.
BOX_FACTOR = 1.5
#: Tolerances of the tolerance variation, relative to the run's.
TOLERANCE_FACTOR = 0.01
#: The largest box the box variation asks for (bohr), within GridSettings' limit.
MAX_VARIATION_BOX = 2000.0


def variations(deck: Deck, result: RunResult) -> dict[str, Deck]:
    """The varied decks by approximation name."""
    boxes = [result.ground_state.r_max, *(row.r_max for row in result.polarizabilities),
             *(state.r_max for state in result.partner_ground_states)]
    box = min(BOX_FACTOR * max(boxes), MAX_VARIATION_BOX)
    out = {
        "grid": dataclasses.replace(deck, grid=deck.grid.refined(), continuum_grid=deck.continuum_grid.refined()),
        "box": dataclasses.replace(deck, grid=dataclasses.replace(deck.grid, r_max=box)),
        "tolerances": dataclasses.replace(deck, scf=deck.scf.tightened(TOLERANCE_FACTOR),
                                          tolerances=deck.tolerances.tightened(TOLERANCE_FACTOR)),
    }
    if deck.dispersion is not None:
        points = min(deck.dispersion.quadrature_points * 3 // 2, QUADRATURE_RANGE[1])
        out["quadrature"] = dataclasses.replace(
            deck, dispersion=dataclasses.replace(deck.dispersion, quadrature_points=points))
    return out


def certify(
    result: RunResult, deck: Deck, progress: Callable[[str], None] | None = None, map_tasks: TaskMap | None = None
) -> tuple[Certification, ...]:
    """Rerun ``deck`` once per approximation (:func:`variations`) and bound every number of ``result``.

    Returns one row per number (JSON key path, value, the most different variation's value, the
    difference, which approximation it was).  A warning names the numbers whose relative change
    exceeds CERTIFICATION_TOLERANCE.  ``map_tasks`` is passed to each rerun (:func:`run_deck`).
    """
    report = progress or (lambda stage: None)
    base = quantities(result)
    varied: dict[str, dict[tuple, Quantity]] = {}
    for name, varied_deck in variations(deck, result).items():
        report(f"certificate: {name} variation")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # the same notes were given for the main run
            other = run_deck(varied_deck, map_tasks=map_tasks)
        varied[name] = {key_of(q): q for q in quantities(other)}
    quadrature_errors = {(row.pair, order): error for row in result.dispersion
                         for order, error in (("C6", row.C6_error), ("C8", row.C8_error), ("C10", row.C10_error))}
    rows = [_certify_one(quantity, varied, quadrature_errors) for quantity in base]
    loose = [row for row in rows if row.relative_difference > CERTIFICATION_TOLERANCE or not row.converged]
    if loose:
        worst = max(loose, key=lambda row: (not row.converged, row.relative_difference))
        warnings.warn(
            f"certification: {len(loose)} numbers change by more than {CERTIFICATION_TOLERANCE:g} relative when an"
            f" approximation is varied (worst {worst.quantity}: {worst.relative_difference:.1e}, {worst.approximation});"
            " their digits beyond that are not trustworthy",
            RuntimeWarning, stacklevel=2,
        )
    return tuple(rows)


def _certify_one(quantity: Quantity, varied: dict[str, dict[tuple, Quantity]], quadrature_errors) -> Certification:
    key = key_of(quantity)
    largest, refined, approximation, converged = -1.0, quantity.value, "grid", quantity.converged
    for name, table in varied.items():
        other = table.get(key)
        if other is None or not other.converged or not math.isfinite(other.value):
            converged = False
            continue
        change = abs(other.value - quantity.value)
        if change > largest:
            largest, refined, approximation = change, other.value, name
    if quantity.property in ("C6", "C8", "C10"):
        error = quadrature_errors.get(((quantity.system, quantity.partner), quantity.property), 0.0)
        if math.isfinite(error) and error > largest:
            largest, approximation = error, "quadrature"
            refined = quantity.value + math.copysign(error, refined - quantity.value or 1.0)
    difference = refined - quantity.value
    scale = abs(quantity.value)
    relative = abs(difference) / scale if scale > 0.0 else (0.0 if difference == 0.0 else math.inf)
    return Certification(quantity.path, quantity.value, refined, difference, relative, approximation, converged,
                         UNCERTAINTY_FACTOR * abs(difference))


def certified(result: RunResult, deck: Deck, progress: Callable[[str], None] | None = None,
              map_tasks: TaskMap | None = None) -> RunResult:
    """``result`` with its certificate attached."""
    return dataclasses.replace(result, certification=certify(result, deck, progress, map_tasks))
