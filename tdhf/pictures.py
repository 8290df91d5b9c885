"""What the pictures of a result show, as typed data: read from the result file or recomputed from it.

A result file holds numbers, not functions.  The pictures that need functions of r or a dense
frequency axis recompute them from the result's own system and settings (same grid, same SCF
and solver tolerances, so the same ground state to the last digit):

* :func:`densities`: the radial density D(r) = sum_a q_a P_a(r)^2 (electrons per bohr, integrating
  to N) and each subshell's share;
* :func:`first_order_functions`: the radial first-order functions rho_t = rho_t^+ + rho_t^- of
  every channel (occupied subshell a -> l') at one real frequency (the response to a unit field
  of multipole L, atomic units);
* :func:`real_axis`: alpha_L(omega) on a dense real axis between the bound poles, below the
  ionization threshold, with the poles (visible RPA lines) and the threshold.

Everything else (alpha(i omega) tables, lines, the S(0) split, compare deviations) is read from
the JSON object as it is.  Nothing here draws: :mod:`tdhf.report.plots` does.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from typing import Any, Iterator, Mapping

import numpy as np

from tdhf.errors import InputError
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.properties.spectrum import VISIBLE_STRENGTH, rpa_spectrum
from tdhf.radial.mesh import GridSettings
from tdhf.response.solver import ResponseSolver, ResponseTolerances
from tdhf.scf import ScfSettings
from tdhf.system import System

__all__ = ["Series", "RadialPlot", "RealAxisPlot", "ground_state_of", "densities", "first_order_functions", "figures",
           "real_axis", "CURVE_POINTS"]

#: Frequencies of a dense alpha(omega) curve (spread over the intervals between poles).
CURVE_POINTS = 160
#: Each interval between poles is sampled this fraction away from its ends (alpha diverges there).
POLE_MARGIN = 0.01


@dataclass(frozen=True)
class Series:
    """One curve: a legend label and its points."""

    label: str
    x: tuple[float, ...]
    y: tuple[float, ...]


@dataclass(frozen=True)
class RadialPlot:
    """Functions of r (bohr): a ``title``, what they are with their unit (``quantity``), the ``curves``."""

    title: str
    quantity: str
    curves: tuple[Series, ...]


@dataclass(frozen=True)
class RealAxisPlot:
    """alpha_L(omega) on the real axis (hartree, bohr^(2L+1)).

    ``segments`` are the dense curve between consecutive poles; ``points`` the values the result
    file holds; ``poles`` the roots of visible strength below the threshold (hartree) and ``threshold`` the ionization
    threshold -epsilon_HOMO above which alpha is complex (the continuum).
    """

    system: str
    multipole: int
    segments: tuple[Series, ...]
    points: Series
    poles: tuple[float, ...]
    threshold: float


def ground_state_of(data: Mapping[str, Any], r_max: float | None = None) -> GroundState:
    """The ground state of a result file's system, recomputed with its grid and SCF settings.

    ``r_max`` (bohr) asks for the box a response was computed in, if the run enlarged it.
    """
    atom, settings = data["atom"], data["settings"]
    try:
        system = System.from_input(atom["Z"], atom["charge"], atom.get("configuration"))
        grid = GridSettings(**settings["grid"])
        if r_max is not None and r_max != data["ground_state"]["r_max"]:
            grid = replace(grid, r_max=r_max)  # as tdhf.properties.response_properties enlarges it
        scf = ScfSettings(**settings["scf"])
    except (KeyError, TypeError) as err:
        raise InputError(f"the result file has no usable atom or settings ({err}); rerun it with this tdhf") from None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the run already reported them
        return solve_ground_state(system, grid, scf)


def _tolerances(data: Mapping[str, Any]) -> ResponseTolerances:
    return ResponseTolerances(**(data["settings"].get("tolerances") or {}))


def _values(state: GroundState, coefficients: np.ndarray) -> np.ndarray:
    """Function values at the grid nodes from DVR coefficients (f_i = sqrt(w_i) f(r_i))."""
    return coefficients / np.sqrt(state.grid.weights)


def densities(state: GroundState) -> RadialPlot:
    """D(r) = sum_a q_a P_a(r)^2 and each subshell's q_a P_a(r)^2 (electrons per bohr)."""
    r = tuple(map(float, state.grid.r))
    parts = [q * _values(state, p) ** 2 for q, p in zip(state.shells.occupations, state.shells.orbitals)]
    curves = [Series("total", r, tuple(map(float, np.sum(parts, axis=0))))]
    curves += [Series(orbital.label, r, tuple(map(float, part))) for orbital, part in zip(state.orbitals, parts)]
    return RadialPlot(f"{state.system.name}: Hartree-Fock radial density", "D(r) (electrons/bohr)", tuple(curves))


def first_order_functions(state: GroundState, multipole: int, frequency: float,
                          tolerances: ResponseTolerances = ResponseTolerances()) -> RadialPlot:
    """rho_t(r) = rho_t^+ + rho_t^- of every channel a -> l' at the real ``frequency`` (hartree)."""
    solver = ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, multipole)
    if not 0.0 <= frequency < solver.ionization_threshold:
        raise InputError(f"--frequency: {frequency:g} hartree must be in [0, {solver.ionization_threshold:.6f}),"
                         " below the ionization threshold")
    solution = solver.solve(frequency, True, tolerances=tolerances)
    if not solution.converged:
        raise InputError(f"--frequency: the response at {frequency:g} hartree did not converge"
                         f" ({solution.status.describe()}); choose a frequency further from a pole")
    r = tuple(map(float, state.grid.r))
    total = (solution.plus + solution.minus).real
    curves = tuple(
        Series(f"{state.orbitals[c.shell].label} -> {'spdfghik'[c.l_prime]}", r,
               tuple(map(float, _values(state, total[t]))))
        for t, c in enumerate(solver.channels)
    )
    return RadialPlot(f"{state.system.name}: first-order functions rho+ + rho-, L = {multipole},"
                      f" omega = {frequency:g} hartree", "rho_t(r) (a.u. per unit field)", curves)


def real_axis(state: GroundState, multipole: int, data: Mapping[str, Any], points: int = CURVE_POINTS) -> RealAxisPlot:
    """alpha_L(omega) between 0 and the threshold, on a dense axis that stops short of each pole."""
    tolerances = _tolerances(data)
    solver = ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, multipole)
    threshold = solver.ionization_threshold
    spectrum = rpa_spectrum(solver, minimum_roots=8, tolerance=tolerances.eigen_tolerance)
    # Every root with visible strength is a pole of alpha in this box, listed line or not.
    visible = (spectrum.strengths >= VISIBLE_STRENGTH) & (spectrum.energies < threshold)
    poles = tuple(map(float, spectrum.energies[visible]))
    edges = [0.0, *poles, threshold]
    width = threshold
    segments = []
    for low, high in zip(edges[:-1], edges[1:]):
        count = max(int(points * (high - low) / width), 4)
        margin = POLE_MARGIN * (high - low)
        start = low + margin if low > 0.0 else 0.0
        omegas = np.linspace(start, high - margin, count)
        values = []
        for omega in omegas:
            solution = solver.solve(float(omega), True, tolerances=tolerances)
            values.append(float(solver.polarizability(solution).real) if solution.converged else float("nan"))
        segments.append(Series(f"{low:.4f}-{high:.4f}", tuple(map(float, omegas)), tuple(values)))
    rows = [row for row in data.get("polarizabilities", ())
            if row["multipole"] == multipole and not row["imaginary"] and not row.get("broadening")]
    marked = Series("result file", tuple(row["frequency"] for row in rows), tuple(row["coupled"] for row in rows))
    return RealAxisPlot(state.system.name, multipole, tuple(segments), marked, poles, threshold)


def _caption(data: Mapping[str, Any]) -> str:
    program = data.get("program") or {}
    return f"{data['atom']['name']}; {program.get('name', 'tdhf')} {program.get('version', '')}".strip()


def figures(data: Mapping[str, Any], multipole: int | None = None, frequency: float | None = None) -> Iterator[tuple[str, Any]]:
    """The pictures of a result file's JSON object ``data``, as (name, matplotlib Figure), drawn lazily.

    Always the radial densities; alpha(omega) on the real axis for each multipole with real
    frequencies; the photoionization cross sections (total, velocity form, uncoupled, partials); alpha(i omega) for the systems of a dispersion table; the lines with the S(0)
    split; the first-order functions at ``frequency`` (default: the first real frequency of the
    result, else 0) for ``multipole`` (default: the first of the response).

    Raises
    ------
    InputError
        Without matplotlib (naming the install command), or for a frequency at or above the threshold.
    """
    from tdhf.report import plots  # drawing lives in the report layer

    plots.require_matplotlib()
    caption = _caption(data)
    state = ground_state_of(data)
    yield "densities", plots.radial_figure(densities(state), caption)
    rows = [row for row in data.get("polarizabilities") or () if not row["imaginary"] and not row.get("broadening")]

    def response_state(L: int) -> GroundState:  # the box the run used for this multipole's responses
        boxes = [row["r_max"] for row in rows if row["multipole"] == L and row.get("r_max")]
        return ground_state_of(data, max(boxes)) if boxes and max(boxes) != state.r_max else state

    for L in sorted({row["multipole"] for row in rows}):
        yield f"alpha_real_L{L}", plots.real_axis_figure(real_axis(response_state(L), L, data), caption)
    if data.get("polarizability_tables"):
        yield "alpha_imaginary", plots.imaginary_axis_figure(data["polarizability_tables"], caption)
    if data.get("photoionization"):
        thresholds = (data.get("continuum") or {}).get("thresholds") or ()
        yield "photoionization", plots.cross_section_figure(data["photoionization"], thresholds,
                                                            data.get("resonances") or (), caption)
    if data.get("excitations") or data.get("strength_distribution"):
        yield "spectrum", plots.spectrum_figure(data.get("excitations") or (), data.get("strength_distribution") or (),
                                                caption)
    response = (data.get("settings") or {}).get("response")
    if response or multipole is not None or frequency is not None:
        L = multipole if multipole is not None else (response or {}).get("multipoles", [1])[0]
        omega = frequency if frequency is not None else next((row["frequency"] for row in rows), 0.0)
        functions = first_order_functions(response_state(L), L, omega, _tolerances(data))
        yield f"first_order_L{L}", plots.radial_figure(functions, caption)
