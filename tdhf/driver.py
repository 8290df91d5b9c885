"""Run a validated deck: ground state, then the optional response and dispersion calculations.

The driver only sequences library calls and collects their typed results into a
:class:`RunResult`; it does no numerics of its own, no printing and no file I/O.

Non-convergence policy (:mod:`tdhf.numerics.status`): a ground state that does not converge is
*returned* with ``converged=False`` (and the library's RuntimeWarning), never raised, so the caller
can still write the results; the calculations that depend on it are skipped with a warning.
Every response row carries ``converged``; :meth:`RunResult.convergence_problems` lists every
failed solve, and the command line turns a non-empty list into exit code 3.

>>> from tdhf.deck import parse_deck
>>> result = run_deck(parse_deck('[atom]\\nelement = "He"\\n'))
>>> print(result.converged, f"{result.ground_state.total_energy:.6f}")
True -2.861680
"""

from __future__ import annotations

import logging
import warnings
from dataclasses import dataclass, field
from typing import Callable

from tdhf.deck import Deck, DispersionSection, ResponseSection, deck_digest, parse_system_name
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.numerics.tasks import TaskMap
from tdhf.properties.dispersion import (
    DispersionCoefficients,
    ImaginaryFrequencyTable,
    partner_pairs,
    start_dispersion,
    table_pairs,
)
from tdhf.properties.polarizability import DipoleShielding, Polarizability, QuadrupoleShielding
from tdhf.properties.photoionization_rows import (
    CROSS_SECTION_CONVENTION,
    ContinuumSummary,
    PhotoionizationPoint,
    PhotoionizationSection,
    Resonance,
)
from tdhf.properties.response_properties import NORMALIZATION, compute_response
from tdhf.properties.spectrum import Excitation, StrengthDistribution
from tdhf.properties.sum_rules import SumRule
from tdhf.radial.exterior_scaling import ContinuumGridSettings
from tdhf.radial.mesh import GridSettings
from tdhf.response.solver import ResponseTolerances
from tdhf.scf import ScfSettings
from tdhf.system import System
from tdhf.version import ProgramInfo, program_info

__all__ = ["ProgramInfo", "RunSettings", "RunResult", "Certification", "Conventions", "run_deck", "program_info",
           "RESPONSE_FIELDS"]

logger = logging.getLogger(__name__)

#: RunResult fields filled by :func:`tdhf.properties.response_properties.compute_response`, in JSON order.
RESPONSE_FIELDS = (
    "polarizabilities", "shielding", "quadrupole_shielding", "sum_rules", "excitations", "strength_distribution",
)

Progress = Callable[[str], None]


@dataclass(frozen=True)
class Conventions:
    """The units and normalizations of every number in a result, written into the JSON.

    Attributes
    ----------
    units : str
        Atomic units of every number.
    polarizability : str
        The normalization of alpha_L.
    dipole_shielding, quadrupole_shielding : str
        What beta and gamma_inf are.
    oscillator_strength : str
        The definition of f and its sum rule.
    uncoupled : str
        What the uncoupled numbers are.
    dispersion : str
        The Casimir-Polder formulas of C6, C8, C10.
    uncertainty : str
        What ``<key>_uncertainty`` and ``certification`` mean.
    photoionization : str
        Units and definitions of the cross sections.
    """

    units: str = "atomic units: hartree, bohr; alpha_L in bohr^(2L+1); C_n in hartree bohr^n"
    polarizability: str = NORMALIZATION
    dipole_shielding: str = "beta = field at the nucleus from the induced density per unit applied field; beta(0) = N/Z"
    quadrupole_shielding: str = (
        "gamma_inf: field gradient at the nucleus = (1 - gamma_inf) x applied gradient (negative: antishielding)"
    )
    oscillator_strength: str = "f_n = 2 omega_n |<n|sum_i r_i^L P_L(cos theta_i)|0>|^2; sum_n f_n = S(0) (= N for L = 1)"
    uncoupled: str = "uncoupled: no induced Coulomb/exchange; sum over the virtual spectrum of the ground-state Fock operator"
    dispersion: str = (
        "C6 = (3/pi) int a1 a1, C8 = (15/(2 pi)) int (a1 a2 + a2 a1), C10 = (14/pi) int (a1 a3 + a3 a1)"
        " + (35/pi) int a2 a2, a_L = alpha_L(i w)"
    )
    uncertainty: str = (
        "certification[].difference: the largest change of the number when the grid is refined, the box"
        " enlarged 1.5x, the SCF/Krylov/eigensolver tolerances tightened 100x and (C_n) the quadrature enlarged;"
        " <key>_uncertainty = 2 |difference| (absolute, same unit); absent when the run was not certified"
    )
    photoionization: str = CROSS_SECTION_CONVENTION


@dataclass(frozen=True)
class RunSettings:
    """Every effective option of a run (defaults filled in), stored with the results.

    ``deck_digest`` is :func:`tdhf.deck.deck_digest` of the deck (resume checks it).

    Attributes
    ----------
    accuracy : str
        The accuracy preset ("default" or "tight") the other settings started from.
    grid, scf, tolerances : GridSettings, ScfSettings, ResponseTolerances
        Radial grid, SCF and response-solver settings.
    response, dispersion : ResponseSection, DispersionSection or None
        The deck's [response] and [dispersion] tables with defaults filled in (None if absent).
    schema : int
        The deck format version.
    deck_digest : str
        SHA-256 of the normalized deck.
    photoionization : PhotoionizationSection or None
        The deck's [photoionization] table (None if absent).
    """

    accuracy: str
    grid: GridSettings
    scf: ScfSettings
    tolerances: ResponseTolerances
    response: ResponseSection | None
    dispersion: DispersionSection | None
    schema: int
    deck_digest: str = ""
    photoionization: PhotoionizationSection | None = None


@dataclass(frozen=True)
class Certification:
    """One number recomputed with every approximation varied (:mod:`tdhf.certify`).

    ``quantity`` is the number's key path in the JSON result, e.g. ``polarizabilities[0].coupled``;
    ``refined`` its value in the variation that moved it most (``approximation``: "grid", "box",
    "tolerances" or "quadrature"), ``difference`` = refined - value.  ``uncertainty`` =
    :data:`tdhf.certify.UNCERTAINTY_FACTOR` x |difference|: it covers the error of ``value`` when
    every variation at least halves the error of its approximation.  ``converged`` is False if
    the number or a variation did not converge; ``relative_difference`` = |difference| / |value|.
    """

    quantity: str
    value: float
    refined: float
    difference: float
    relative_difference: float
    approximation: str = "grid"
    converged: bool = True
    uncertainty: float = 0.0


@dataclass(frozen=True, kw_only=True)
class RunResult:
    """Everything a run computed.  The field names are the keys of the JSON output.

    Attributes
    ----------
    atom : System
        The system of the ``[atom]`` table.
    ground_state : GroundState
        Its Hartree-Fock ground state (hartree, bohr); check ``converged``.
    polarizabilities, shielding, quadrupole_shielding, sum_rules, excitations, strength_distribution : tuple
        Rows from :func:`tdhf.properties.response_properties.compute_response` (empty without ``[response]``).
    dispersion : tuple of DispersionCoefficients
        One row per pair (empty without ``[dispersion]``).
    polarizability_tables : tuple of ImaginaryFrequencyTable
        alpha_L(i w) of each system of the pairs on the quadrature nodes, and its static alpha_L(0).
    certification : tuple of Certification
        Empty unless the run was certified.
    photoionization, resonances, continuum
        Rows, resonances and the summary (thresholds, sum rules, grid) of
        :func:`tdhf.properties.photoionization.compute_photoionization` (``[photoionization]``).
    warnings : tuple of str
        One-line notes from every stage (box too small, not converged, skipped stages ...).
    rejected : tuple of str
        Real frequencies refused (at a pole, above the threshold), each naming its deck key.
    settings : RunSettings
        The effective options.
    program : ProgramInfo
        The program and version that made the result.
    conventions : Conventions
        Units and normalizations of every number, in words.
    partner_ground_states : tuple of GroundState
        Ground states of every system of the dispersion pairs, in the order of the deck (the
        atom's own among them if it is paired); absent from JSON without [dispersion].
    """

    atom: System
    ground_state: GroundState
    polarizabilities: tuple[Polarizability, ...] = ()
    shielding: tuple[DipoleShielding, ...] = ()
    quadrupole_shielding: tuple[QuadrupoleShielding, ...] = ()
    sum_rules: tuple[SumRule, ...] = ()
    excitations: tuple[Excitation, ...] = ()
    strength_distribution: tuple[StrengthDistribution, ...] = ()
    dispersion: tuple[DispersionCoefficients, ...] = ()
    polarizability_tables: tuple[ImaginaryFrequencyTable, ...] = ()
    certification: tuple[Certification, ...] = ()
    warnings: tuple[str, ...] = ()
    rejected: tuple[str, ...] = ()
    photoionization: tuple[PhotoionizationPoint, ...] = ()
    resonances: tuple[Resonance, ...] = ()
    continuum: ContinuumSummary | None = None
    settings: RunSettings
    program: ProgramInfo = field(default_factory=program_info)
    conventions: Conventions = field(default_factory=Conventions)
    partner_ground_states: tuple[GroundState, ...] = field(default=(), repr=False)

    @property
    def converged(self) -> bool:
        """True if every ground state and every solve behind a reported number converged."""
        return not self.convergence_problems()

    def convergence_problems(self) -> tuple[str, ...]:
        """One line per unconverged ground state, response row, sum rule, line or pair."""
        problems = [
            f"{self.atom.name}: L={row.multipole} polarizability at {row.frequency:g} hartree"
            f"{' (imaginary)' if row.imaginary else ''} did not converge"
            for row in self.polarizabilities if not row.converged
        ]
        problems += [f"{self.atom.name}: sum rule S_{row.multipole}({row.k}) did not converge"
                     for row in self.sum_rules if not row.converged]
        problems += [f"{self.atom.name}: L={row.multipole} excitation at {row.energy:.6f} hartree did not converge"
                     for row in self.excitations if not row.converged]
        problems += [f"{'-'.join(row.pair)}: dispersion coefficients not converged"
                     for row in self.dispersion if not row.converged]
        problems += [f"certification: {row.quantity} did not converge in a variation"
                     for row in self.certification if not row.converged]
        problems += [f"{self.atom.name}: photoionization at {row.photon_energy:g} hartree did not converge"
                     for row in self.photoionization if not row.converged]
        problems += [
            f"{state.system.name}: Hartree-Fock did not converge after {state.iterations} iterations "
            f"(DIIS, then damped DIIS; last: {state.scf_strategy}); final orbital change "
            f"{state.orbital_change:.1e}, energy change {state.energy_change:.1e} hartree"
            for state in (self.ground_state, *self.partner_ground_states)
            if not state.converged
        ]
        return tuple(problems)

    def uncertainties(self) -> dict[str, float]:
        """Absolute uncertainty of each certified number by its JSON key path (empty if not certified)."""
        return {row.quantity: row.uncertainty for row in self.certification}


def run_deck(deck: Deck, progress: Progress | None = None, map_tasks: TaskMap | None = None) -> RunResult:
    """Compute everything a deck asks for.

    Parameters
    ----------
    deck : Deck
        A validated deck (:func:`tdhf.deck.load_deck`).
    progress : callable, optional
        Called with a short description (e.g. ``"ground state of Ne"``) as each stage starts.
    map_tasks : callable, optional
        Where the independent responses of a dispersion table run (:mod:`tdhf.execution`);
        by default here.  The numbers are the same either way.

    Returns
    -------
    RunResult
        Also when a solver did not converge: ``result.convergence_problems()`` lists the SCF and
        coupled-response solves that did not, and real frequencies refused at or above an
        excitation are in ``result.rejected`` (the other frequencies are computed).

    Raises
    ------
    InputError
        A request found impossible before anything is computed (e.g. an anion whose outermost
        orbital is unbound).
    """
    report = progress or (lambda stage: None)
    system = deck.atom.to_system()
    settings = RunSettings(deck.accuracy, deck.grid, deck.scf, deck.tolerances, deck.response, deck.dispersion,
                           deck.schema, deck_digest(deck), deck.photoionization)
    for name in ("accuracy", "grid", "scf", "tolerances", "response", "dispersion", "photoionization"):
        logger.info("option %s: %s", name, getattr(settings, name))
    report(f"ground state of {system.name}")
    ground_state = solve_ground_state(system, deck.grid, deck.scf)
    notes = list(ground_state.warnings)
    own_notes: list[str] = []  # written here, so warned here; the library warns its own
    fields: dict[str, tuple] = {}
    if not ground_state.converged:
        own_notes += [f"{name}: skipped; the ground state of {system.name} did not converge"
                      for name in ("response", "dispersion") if getattr(deck, name) is not None]
    else:
        # The dispersion responses are handed to the task map first, so that a pool runs them while
        # the response section is solved (on two workers a Rn deck's workers no longer idle between
        # them); serially they run when collected, after it.
        finish_dispersion = (_start_dispersion(ground_state, deck.dispersion, deck, report, map_tasks)
                             if deck.dispersion is not None else None)
        if deck.response is not None:
            report(f"response of {system.name}")
            response_fields, library_notes, driver_notes = _run_response(ground_state, deck.response, deck.tolerances,
                                                                         deck.continuum_grid, map_tasks)
            fields |= response_fields
            notes += library_notes
            own_notes += driver_notes
        if finish_dispersion is not None:
            dispersion_fields, library_notes = finish_dispersion()
            fields |= dispersion_fields
            notes += library_notes
        if deck.photoionization is not None:
            report(f"photoionization of {system.name}")
            from tdhf.properties.photoionization import compute_photoionization  # the continuum solver, when asked

            continuum = compute_photoionization(ground_state, deck.photoionization, deck.continuum_grid,
                                                map_tasks=map_tasks)
            fields |= {"photoionization": continuum.photoionization, "resonances": continuum.resonances,
                       "continuum": continuum.continuum,
                       "rejected": tuple(fields.get("rejected", ())) + continuum.rejected}
            notes += continuum.warnings
    for note in own_notes:
        warnings.warn(note, RuntimeWarning, stacklevel=2)
    return RunResult(atom=system, ground_state=ground_state, warnings=tuple(notes + own_notes),
                     settings=settings, **fields)


def _run_response(
    ground_state: GroundState, section: ResponseSection, tolerances: ResponseTolerances,
    continuum_grid: ContinuumGridSettings,
    map_tasks: TaskMap | None = None,
) -> tuple[dict[str, tuple], tuple[str, ...], tuple[str, ...]]:
    """Response rows by RunResult field, the notes of tdhf.response, and the driver's notes."""
    results = compute_response(
        ground_state,
        multipoles=section.multipoles,
        frequencies=section.frequencies,
        imaginary_frequencies=section.imaginary_frequencies,
        coupled=section.coupled,
        broadening=section.broadening,
        excitation_count=section.excitations,
        tolerances=tolerances,
        eigen_tolerance=tolerances.eigen_tolerance,
        continuum_grid=continuum_grid,
        map_tasks=map_tasks,
    )
    fields = {name: tuple(getattr(results, name)) for name in RESPONSE_FIELDS}
    fields["rejected"] = tuple(results.rejected)
    return fields, tuple(results.warnings), ()


def _start_dispersion(
    ground_state: GroundState,
    section: DispersionSection,
    deck: Deck,
    report: Progress,
    map_tasks: TaskMap | None = None,
) -> Callable[[], tuple[dict[str, tuple], tuple[str, ...]]]:
    """Start the dispersion section; the function returned gives its RunResult fields and notes.

    The fields are the dispersion rows, the alpha(i w) tables and the partner ground states.  Each
    other system is solved here, now, with the deck's grid and SCF settings (the atom's own ground
    state is reused); its responses go to ``map_tasks`` (:func:`start_dispersion`).  A system whose
    ground state or response fails only marks its own pairs.
    """
    names = section.names
    others = []
    for name in names:
        system = System.from_input(*parse_system_name(name))
        if system == ground_state.system:
            others.append(ground_state)
            continue
        report(f"ground state of {name}")
        others.append(solve_ground_state(system, deck.grid, deck.scf))
    notes = tuple(note for state in others if state is not ground_state for note in state.warnings)

    def count(done: int, total: int) -> None:
        report(f"dispersion: imaginary-frequency responses {done}/{total}")

    if section.partners:
        states = [ground_state, *others]
        pairs = partner_pairs(len(states))
        counter = None
    elif section.pairs:
        states = others
        index = {name: k for k, name in enumerate(names)}
        pairs = [tuple(index[name] for name in pair.split(":")) for pair in section.pairs]
        counter = count
    else:
        states = [ground_state] + [state for state in others if state is not ground_state]
        pairs = table_pairs(len(states))
        counter = count
    results = start_dispersion(states, pairs, quadrature_points=section.quadrature_points, progress=counter,
                               tolerances=deck.tolerances, map_tasks=map_tasks)

    def finish() -> tuple[dict[str, tuple], tuple[str, ...]]:
        done = results()
        fields = {
            "dispersion": tuple(done.coefficients),
            "polarizability_tables": tuple(done.polarizability_tables),
            "partner_ground_states": tuple(others),
        }
        return fields, notes + tuple(done.warnings)

    return finish
