"""Run a validated deck: ground state, then the optional response and dispersion calculations.

The driver only sequences library calls and collects their typed results into a
:class:`RunResult`; it does no numerics of its own, no printing and no file I/O.

Non-convergence policy: a ground state that does not converge is *returned* with
``converged=False`` (and the library's RuntimeWarning), never raised, so the caller can still
write the results; the calculations that depend on it are skipped with a warning.  The command
line turns :meth:`RunResult.convergence_problems` into exit code 3.

>>> from tdhf.deck import parse_deck
>>> result = run_deck(parse_deck('[atom]\\nelement = "He"\\n'))
>>> print(result.converged, f"{result.ground_state.total_energy:.6f}")
True -2.861680
>>> sorted(result_to_json(result))
['atom', 'ground_state', 'program', 'settings', 'warnings']
"""

from __future__ import annotations

import dataclasses
import importlib.metadata
import logging
import warnings
from dataclasses import dataclass, field
from typing import Any, Callable

from tdhf.deck import Deck, DispersionSection, ResponseSection, parse_system_name
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.properties.dispersion import compute_dispersion, dispersion_table
from tdhf.properties.photoionization import CROSS_SECTION_CONVENTION, PhotoionizationSection, compute_photoionization
from tdhf.properties.response_properties import NORMALIZATION, compute_response
from tdhf.radial.mesh import GridSettings
from tdhf.report.serialize import to_jsonable
from tdhf.scf import ScfSettings
from tdhf.system import System

__all__ = ["ProgramInfo", "RunSettings", "RunResult", "run_deck", "result_to_json", "program_info",
           "RESPONSE_FIELDS"]

logger = logging.getLogger(__name__)

#: RunResult fields filled by :func:`tdhf.properties.response_properties.compute_response`, in JSON order.
RESPONSE_FIELDS = (
    "polarizabilities", "shielding", "quadrupole_shielding", "sum_rules", "excitations", "strength_distribution",
)

Progress = Callable[[str], None]


@dataclass(frozen=True)
class Conventions:
    """The units and normalizations of every number in a result, written into the JSON."""

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
    photoionization: str = CROSS_SECTION_CONVENTION


@dataclass(frozen=True)
class ProgramInfo:
    """Name and installed version of the program that made a result."""

    name: str
    version: str


def program_info() -> ProgramInfo:
    """``ProgramInfo("tdhf", <installed version>)``; version "unknown" if tdhf is not installed."""
    try:
        version = importlib.metadata.version("tdhf")
    except importlib.metadata.PackageNotFoundError:
        version = "unknown"
    return ProgramInfo(name="tdhf", version=version)


@dataclass(frozen=True)
class RunSettings:
    """Every effective option of a run (defaults filled in), stored with the results."""

    grid: GridSettings
    scf: ScfSettings
    response: ResponseSection | None
    dispersion: DispersionSection | None
    schema: int
    photoionization: PhotoionizationSection | None = None


@dataclass(frozen=True, kw_only=True)
class RunResult:
    """Everything a run computed.  The field names are the keys of the JSON output.

    Attributes
    ----------
    atom : System
        The system of the ``[atom]`` table.
    ground_state : GroundState
        Its Hartree-Fock ground state (hartree, bohr); check ``converged``.
    polarizabilities, shielding, quadrupole_shielding, sum_rules, excitations : tuple
        Rows from :func:`tdhf.properties.response_properties.compute_response` (empty without ``[response]``).
    dispersion : tuple
        Dispersion-coefficient rows, one per partner (empty without ``[dispersion]``).
    photoionization, resonances, continuum
        Rows, resonances and the summary (thresholds, sum rules, grid) of
        :func:`tdhf.properties.photoionization.compute_photoionization` (``[photoionization]``).
    warnings : tuple of str
        One-line notes from every stage (box too small, not converged, skipped stages ...).
    settings : RunSettings
        The effective options.
    program : ProgramInfo
    partner_ground_states : tuple of GroundState
        Ground states of the dispersion partners (not written to JSON).
    """

    atom: System
    ground_state: GroundState
    polarizabilities: tuple[Any, ...] = ()
    shielding: tuple[Any, ...] = ()
    quadrupole_shielding: tuple[Any, ...] = ()
    sum_rules: tuple[Any, ...] = ()
    excitations: tuple[Any, ...] = ()
    strength_distribution: tuple[Any, ...] = ()
    dispersion: tuple[Any, ...] = ()
    polarizability_tables: tuple[Any, ...] = ()
    certification: tuple["Certification", ...] = ()
    warnings: tuple[str, ...] = ()
    rejected: tuple[str, ...] = ()
    photoionization: tuple[Any, ...] = ()
    resonances: tuple[Any, ...] = ()
    continuum: Any = None
    settings: RunSettings
    program: ProgramInfo = field(default_factory=program_info)
    conventions: Conventions = field(default_factory=Conventions)
    partner_ground_states: tuple[GroundState, ...] = field(default=(), repr=False, metadata={"json": False})

    @property
    def converged(self) -> bool:
        """True if every ground state of the run converged."""
        return not self.convergence_problems()

    def convergence_problems(self) -> tuple[str, ...]:
        """One line per unconverged ground state or coupled response solve."""
        response = tuple(
            f"{self.atom.name}: coupled L={row.multipole} response at {row.frequency:g} hartree"
            f"{' (imaginary)' if row.imaginary else ''} did not converge (GMRES)"
            for row in self.polarizabilities
            if not row.converged
        ) + tuple(
            f"{self.atom.name}: photoionization at {row.photon_energy:g} hartree did not converge"
            for row in self.photoionization
            if not row.converged
        )
        return response + tuple(
            f"{state.system.name}: Hartree-Fock did not converge after {state.iterations} iterations "
            f"(DIIS, then damped DIIS; last: {state.scf_strategy}); final orbital change "
            f"{state.orbital_change:.1e}, energy change {state.energy_change:.1e} hartree"
            for state in (self.ground_state, *self.partner_ground_states)
            if not state.converged
        )


@dataclass(frozen=True)
class Certification:
    """One number recomputed on a clearly finer grid (``GridSettings.refined()``).

    ``quantity`` is the number's key path in the JSON result, e.g. ``polarizabilities[0].coupled``.
    """

    quantity: str
    value: float
    refined: float
    difference: float
    relative_difference: float


#: Relative change on the refined grid above which a certified number is reported as unconverged.
CERTIFICATION_TOLERANCE = 1e-7
#: Result lists compared in full, and the ground-state numbers compared.
_CERTIFIED_LISTS = (*RESPONSE_FIELDS, "dispersion")
_CERTIFIED_GROUND_STATE = ("total_energy", "virial_ratio")
#: Bookkeeping fields that are not results of the physics (they may differ between grids).
_NOT_CERTIFIED = {"frequency", "broadening", "r_max", "krylov_iterations", "multipole", "k", "cutoff",
                  "continuum_threshold", "discrete_states", "eigen_energy", "eigen_oscillator_strength",
                  "C6_error", "C8_error", "C10_error", "beyond_cutoff", "continuum_sum", "discrete_sum",
                  "difference"}


def certify(result: RunResult, deck: Deck, progress: Progress | None = None) -> tuple[Certification, ...]:
    """Recompute the deck on ``deck.grid.refined()`` and compare every result number.

    Returns one row per number; a warning names those whose relative change exceeds
    ``CERTIFICATION_TOLERANCE`` (their digits beyond that are not trustworthy).
    """
    refined_deck = dataclasses.replace(deck, grid=deck.grid.refined())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the same notes were given for the main run
        refined = run_deck(refined_deck, progress)
    base, fine = to_jsonable(result), to_jsonable(refined)
    pairs = [(f"ground_state.{key}", base["ground_state"][key], fine["ground_state"][key])
             for key in _CERTIFIED_GROUND_STATE]
    pairs += [(f"ground_state.orbitals[{i}].energy", a["energy"], b["energy"])
              for i, (a, b) in enumerate(zip(base["ground_state"]["orbitals"], fine["ground_state"]["orbitals"]))]
    for name in _CERTIFIED_LISTS:
        for i, (a, b) in enumerate(zip(base[name], fine[name])):
            pairs += [(f"{name}[{i}].{key}", value, b.get(key)) for key, value in a.items()
                      if key not in _NOT_CERTIFIED and isinstance(value, float) and isinstance(b.get(key), float)
                      and (value, b.get(key)) != (0.0, 0.0)]
    rows = tuple(
        Certification(path, value, other, other - value, abs(other - value) / max(abs(value), 1e-300))
        for path, value, other in pairs
    )
    loose = [row for row in rows if row.relative_difference > CERTIFICATION_TOLERANCE]
    if loose:
        worst = max(loose, key=lambda row: row.relative_difference)
        warnings.warn(
            f"certification: {len(loose)} numbers change by more than {CERTIFICATION_TOLERANCE:g} relative on a"
            f" refined grid (worst {worst.quantity}: {worst.relative_difference:.1e}); use [grid] preset = \"tight\"",
            RuntimeWarning, stacklevel=2,
        )
    return rows


def run_deck(deck: Deck, progress: Progress | None = None) -> RunResult:
    """Compute everything a deck asks for.

    Parameters
    ----------
    deck : Deck
        A validated deck (:func:`tdhf.deck.load_deck`).
    progress : callable, optional
        Called with a short description (e.g. ``"ground state of Ne"``) as each stage starts.

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
    settings = RunSettings(deck.grid, deck.scf, deck.response, deck.dispersion, deck.schema, deck.photoionization)
    for name in ("grid", "scf", "response", "dispersion", "photoionization"):
        logger.info("option %s: %s", name, getattr(settings, name))
    report(f"ground state of {system.name}")
    ground_state = solve_ground_state(system, deck.grid, deck.scf)
    notes = list(ground_state.warnings)
    own_notes: list[str] = []  # written here, so warned here; the library warns its own
    fields: dict[str, Any] = {}
    if not ground_state.converged:
        own_notes += [f"{name}: skipped; the ground state of {system.name} did not converge"
                      for name in ("response", "dispersion") if getattr(deck, name) is not None]
    else:
        if deck.response is not None:
            report(f"response of {system.name}")
            response_fields, library_notes, driver_notes = _run_response(ground_state, deck.response)
            fields |= response_fields
            notes += library_notes
            own_notes += driver_notes
        if deck.dispersion is not None:
            dispersion_fields, library_notes = _run_dispersion(ground_state, deck.dispersion, deck.grid, deck.scf, report)
            fields |= dispersion_fields
            notes += library_notes
        if deck.photoionization is not None:
            report(f"photoionization of {system.name}")
            continuum = compute_photoionization(ground_state, deck.photoionization)
            fields |= {"photoionization": continuum.photoionization, "resonances": continuum.resonances,
                       "continuum": continuum.continuum,
                       "rejected": tuple(fields.get("rejected", ())) + continuum.rejected}
            notes += continuum.warnings
    for note in own_notes:
        warnings.warn(note, RuntimeWarning, stacklevel=2)
    return RunResult(atom=system, ground_state=ground_state, warnings=tuple(notes + own_notes),
                     settings=settings, **fields)


def _run_response(
    ground_state: GroundState, section: ResponseSection
) -> tuple[dict[str, tuple[Any, ...]], tuple[str, ...], tuple[str, ...]]:
    """Response rows by RunResult field, the notes of tdhf.response, and the driver's notes."""
    results = compute_response(
        ground_state,
        multipoles=section.multipoles,
        frequencies=section.frequencies,
        imaginary_frequencies=section.imaginary_frequencies,
        coupled=section.coupled,
        broadening=section.broadening,
    )
    fields = {name: tuple(getattr(results, name)) for name in RESPONSE_FIELDS}
    fields["rejected"] = tuple(results.rejected)
    return fields, tuple(results.warnings), ()


def _run_dispersion(
    ground_state: GroundState,
    section: DispersionSection,
    grid: GridSettings,
    scf: ScfSettings,
    report: Progress,
) -> tuple[dict[str, tuple[Any, ...]], tuple[str, ...]]:
    """Dispersion rows, alpha(i w) tables and partner ground states by RunResult field, and the notes.

    Each other system is solved with the deck's grid and SCF settings (the atom's own ground state
    is reused).  A system whose ground state or response fails only marks its own pairs.
    """
    names = section.partners or section.systems
    others = []
    for name in names:
        system = System.from_input(*parse_system_name(name))
        if system == ground_state.system:
            others.append(ground_state)
            continue
        report(f"ground state of {name}")
        others.append(solve_ground_state(system, grid, scf))
    notes = tuple(note for state in others if state is not ground_state for note in state.warnings)

    def count(done: int, total: int) -> None:
        report(f"dispersion: imaginary-frequency responses {done}/{total}")

    if section.partners:
        results = compute_dispersion(ground_state, tuple(others), quadrature_points=section.quadrature_points)
    else:
        series = [ground_state] + [state for state in others if state is not ground_state]
        results = dispersion_table(series, quadrature_points=section.quadrature_points, progress=count)
    fields = {
        "dispersion": tuple(results.coefficients),
        "polarizability_tables": tuple(results.polarizability_tables),
        "partner_ground_states": tuple(others),
    }
    return fields, notes + tuple(results.warnings)


def result_to_json(result: RunResult) -> dict[str, Any]:
    """The JSON object of a run: RunResult fields as keys.

    The response lists are left out when the deck had no ``[response]`` table, ``dispersion``
    when it had no ``[dispersion]`` table; otherwise they are present, possibly empty.
    """
    data = to_jsonable(result)
    if result.settings.response is None and result.settings.photoionization is None:
        del data["rejected"]
    if result.settings.response is None:
        for name in RESPONSE_FIELDS:
            del data[name]
    if result.settings.dispersion is None:
        del data["dispersion"]
        del data["polarizability_tables"]
    if result.settings.photoionization is None:
        for name in ("photoionization", "resonances", "continuum"):
            del data[name]
    if not result.certification:
        del data["certification"]
    return data
