"""Benchmark a basis-set code: a user's numbers against the numerical limit of the same model.

:func:`compare` takes the checked rows of a user's CSV (:mod:`tdhf.user_values`), computes each
distinct system once with a deck that asks for every number its rows name
(:func:`reference_decks`; certified by default, so every reference carries its uncertainty), and
pairs each row with its reference:

* per row (:class:`ComparisonRow`): ``reference``, ``deviation = value - reference``,
  ``relative_deviation = deviation / |reference|`` and ``reference_uncertainty``; a row without a
  reference says why in ``status`` (the frequency was refused at a pole, the system failed, the
  line is not bound in the box ...);
* per label (:class:`LabelSummary`, e.g. one per basis set): the number of rows compared, the
  largest and the root-mean-square relative deviation, ranked by the rms (rank 1 is closest to
  the numerical limit).

The reference is TDHF/RPA with the same nonrelativistic Hamiltonian and point nucleus, so the
deviations measure the basis set (and whatever else differs in the user's method), not
correlation or relativity.  Everything is in atomic units.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

from tdhf.certify import certified
from tdhf.deck import Deck, build_deck, parse_system_name
from tdhf.driver import ProgramInfo, program_info, run_deck
from tdhf.errors import InputError
from tdhf.numerics.tasks import TaskMap, serial
from tdhf.quantities import Quantity, key_of, quantities
from tdhf.user_values import UserValue

__all__ = ["ComparisonRow", "LabelSummary", "SystemReference", "Comparison", "compare", "reference_decks",
           "compute_reference", "RESPONSE_PROPERTIES"]

#: User properties answered by the [response] table of the reference deck.
RESPONSE_PROPERTIES = ("polarizability", "polarizability_velocity_form", "dipole_shielding", "quadrupole_shielding",
                       "sum_rule", "excitation_energy", "oscillator_strength")



@dataclass(frozen=True)
class ComparisonRow:
    """One user number next to its reference (atomic units; ``unit`` in words).

    Attributes
    ----------
    label : str
        The user's label (e.g. the basis set), "unlabelled" if the file has none.
    system, partner, property, multipole, frequency, imaginary, level, k, orbital, index
        What the number is (:class:`tdhf.quantities.Quantity`).
    value : float
        The user's number, converted to atomic units.
    reference, reference_uncertainty : float or None
        The numerical-limit value and its certified absolute uncertainty (None if not certified
        or not computed).
    deviation, relative_deviation : float or None
        value - reference and deviation / |reference|.
    line : int
        Line of the user's file.
    status : str
        "ok"; "not converged" (the reference is flagged); or why there is no reference.
    """

    label: str
    system: str
    partner: str | None
    property: str
    multipole: int | None
    frequency: float | None
    imaginary: bool | None
    level: str | None
    k: int | None
    orbital: str | None
    index: int | None
    value: float
    reference: float | None
    deviation: float | None
    relative_deviation: float | None
    reference_uncertainty: float | None
    unit: str
    line: int
    status: str


@dataclass(frozen=True)
class LabelSummary:
    """How close one label's numbers are, ranked by the rms relative deviation.

    Attributes
    ----------
    label : str
        The user's label (e.g. a basis set).
    count : int
        Rows compared (rows without a reference are not counted).
    max_relative_deviation, rms_relative_deviation : float or None
        Largest |relative deviation| and its root mean square; None without rows.
    rank : int
        1 is the closest to the numerical limit.
    """

    label: str
    count: int
    max_relative_deviation: float | None
    rms_relative_deviation: float | None
    rank: int


@dataclass(frozen=True)
class SystemReference:
    """The reference run of one system (its numbers are not written to JSON).

    Attributes
    ----------
    system : str
        The system's name.
    status : str
        "ok", "not converged", "rejected" (some frequencies refused) or "input error".
    message : str
        Why, when the status is not "ok".
    certified : bool
        The references carry certified uncertainties.
    warnings : tuple of str
        The run's notes.
    """

    system: str
    status: str
    message: str
    certified: bool
    warnings: tuple[str, ...] = ()
    quantities: tuple[Quantity, ...] = field(default=(), repr=False, metadata={"json": False})


@dataclass(frozen=True)
class Comparison:
    """The result of ``tdhf compare`` (field names are the JSON keys).

    Attributes
    ----------
    comparison : tuple of ComparisonRow
        One per row of the user's file, in file order.
    summary : tuple of LabelSummary
        One per label, ranked.
    systems : tuple of SystemReference
        One per distinct system.
    program : ProgramInfo
        The program and version that computed the references.
    model : str
        What the references are.
    """

    comparison: tuple[ComparisonRow, ...]
    summary: tuple[LabelSummary, ...]
    systems: tuple[SystemReference, ...]
    program: ProgramInfo = field(default_factory=program_info)
    model: str = "TDHF/RPA reference at the numerical limit (nonrelativistic Hartree-Fock, point nucleus)"

    @property
    def problems(self) -> tuple[str, ...]:
        """One line per row without a usable reference."""
        return tuple(f"line {row.line}: {row.system} {row.property}: {row.status}" for row in self.comparison
                     if row.status != "ok")


def reference_decks(values: Sequence[UserValue], accuracy: str = "default") -> dict[str, Deck]:
    """One deck per distinct system asking for every number its rows name (systems in file order).

    Raises
    ------
    InputError
        If a deck cannot be built (the message names the system and the lines that asked for it).
    """
    decks = {}
    for system in dict.fromkeys(value.system for value in values):
        rows = [value for value in values if value.system == system]
        element, charge = parse_system_name(system)
        data: dict[str, Any] = {"accuracy": accuracy, "atom": {"element": element, "charge": charge}}
        response = [row for row in rows if row.property in RESPONSE_PROPERTIES]
        if response:
            table: dict[str, Any] = {"multipoles": sorted({row.multipole for row in response})}
            real = sorted({row.frequency for row in response if row.frequency is not None and not row.imaginary})
            imaginary = sorted({row.frequency for row in response if row.frequency is not None and row.imaginary})
            if real or imaginary:
                table |= {"frequencies": real, "imaginary_frequencies": imaginary}
            lines = [row.index for row in response if row.index is not None]
            if lines:
                table["excitations"] = max(lines)
            data["response"] = table
        partners = list(dict.fromkeys(row.partner for row in rows if row.partner is not None))
        if partners:
            data["dispersion"] = {"partners": partners}
        try:
            decks[system] = build_deck(data)
        except InputError as err:
            where = ", ".join(str(row.line) for row in rows[:5]) + (" ..." if len(rows) > 5 else "")
            raise InputError(f"lines {where} ({system}): {err}") from None
    return decks


def compute_reference(system: str, deck: Deck, certify: bool = True) -> SystemReference:
    """Run (and certify) one reference deck; failures become the status, never an exception."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # kept in the result's notes
            result = run_deck(deck)
            if certify and result.ground_state.converged:
                result = certified(result, deck)
    except InputError as err:
        return SystemReference(system, "input error", str(err), False)
    problems = result.convergence_problems()
    status = "rejected" if result.rejected else "not converged" if problems else "ok"
    return SystemReference(system, status, "; ".join(result.rejected or problems), bool(result.certification),
                           tuple(result.warnings), quantities(result))


def _missing_reason(value: UserValue, reference: SystemReference) -> str:
    if reference.status == "input error":
        return f"no reference: {reference.message}"
    if value.frequency is not None and not value.imaginary and reference.status == "rejected":
        return f"no reference: {reference.message}"
    if value.property in ("excitation_energy", "oscillator_strength"):
        return "no reference: the reference lists fewer bound lines of this multipole (see the warnings)"
    return "no reference: not among the computed numbers"


def _row(value: UserValue, reference: SystemReference, computed: dict[tuple, Quantity]) -> ComparisonRow:
    found = computed.get(value.key())
    common = dict(label=value.label, system=value.system, partner=value.partner, property=value.property,
                  multipole=value.multipole, frequency=value.frequency, imaginary=value.imaginary, level=value.level,
                  k=value.k, orbital=value.orbital, index=value.index, value=value.value, unit=value.unit,
                  line=value.line)
    if found is None:
        return ComparisonRow(**common, reference=None, deviation=None, relative_deviation=None,
                             reference_uncertainty=None, status=_missing_reason(value, reference))
    deviation = value.value - found.value
    relative = deviation / abs(found.value) if found.value != 0.0 else None
    return ComparisonRow(**common, reference=found.value, deviation=deviation, relative_deviation=relative,
                         reference_uncertainty=found.uncertainty, status="ok" if found.converged else "not converged")


def _summaries(rows: Sequence[ComparisonRow]) -> tuple[LabelSummary, ...]:
    stats = []
    for label in dict.fromkeys(row.label for row in rows):
        relative = [row.relative_deviation for row in rows
                    if row.label == label and row.status == "ok" and row.relative_deviation is not None]
        largest = max(map(abs, relative)) if relative else None
        rms = math.sqrt(sum(x * x for x in relative) / len(relative)) if relative else None
        stats.append((label, len(relative), largest, rms))
    ranked = sorted(stats, key=lambda s: (s[3] is None, s[3] if s[3] is not None else 0.0, s[0]))
    return tuple(LabelSummary(label, count, largest, rms, rank)
                 for rank, (label, count, largest, rms) in enumerate(ranked, start=1))


def compare(
    values: Sequence[UserValue],
    accuracy: str = "default",
    certify: bool = True,
    map_tasks: TaskMap | None = None,
    progress: Callable[[str], None] | None = None,
) -> Comparison:
    """Compare ``values`` with references computed at the numerical limit (module docstring).

    ``map_tasks(function, tasks)`` runs the independent system references (in order); by default
    they run one after the other in this process (:mod:`tdhf.execution` supplies pools).

    Raises
    ------
    InputError
        If a reference deck cannot be built (before anything is computed).
    """
    decks = reference_decks(values, accuracy)
    report = progress or (lambda stage: None)
    tasks = [(system, deck, certify) for system, deck in decks.items()]
    references: dict[str, SystemReference] = {}
    for number, reference in enumerate((map_tasks or serial)(compute_reference, tasks), start=1):
        references[reference.system] = reference
        report(f"reference {number}/{len(tasks)}: {reference.system} ({reference.status})")
    computed = {system: {key_of(q): q for q in reference.quantities} for system, reference in references.items()}
    rows = tuple(_row(value, references[value.system], computed[value.system]) for value in values)
    return Comparison(rows, _summaries(rows), tuple(references[system] for system in decks))
