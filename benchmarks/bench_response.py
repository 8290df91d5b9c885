"""Wall-clock benchmark of the TDHF (RPA) response solver (a script, not a test).

Run from the repository root::

    python benchmarks/bench_response.py                 # both BLAS modes, ~1-5 minutes on 2 cores
    python benchmarks/bench_response.py --modes single --repeats 5

What it measures (every ground state is solved once, untimed, before its cases):

* Ne static dipole polarizability: ``ResponseSolver(...)`` set-up plus one coupled solve at
  omega = 0 and ``polarizability`` (target < 0.3 s);
* alpha_1 at 32 imaginary frequencies for Kr (< 5 s) and Xe (< 10 s): one set-up, 32 coupled
  solves on the Gauss–Legendre mapped grid nu = nu0 (1 + x)/(1 - x) used for Casimir–Polder
  integrals;
* quadrupole/dipole cost ratio: the same 32-frequency sweep for L = 2 over L = 1 (< 2x);
* time against the number of frequencies (1, 4, 16, 32) for Kr, with the number of SCF solves
  made during the sweeps (must be 0: the ground state is solved once and reused), and the
  least-squares split t(n) = set-up + n * per-frequency.

Each case gets one untimed warm-up run, then the median (and minimum) of ``--repeats`` timed runs
(``time.perf_counter``).  Two BLAS modes: ``library`` leaves BLAS threading as the library sets it
(ResponseSolver does not limit it), ``single`` wraps each case in ``threadpool_limits(1)`` as
solve_ground_state does internally.  Results go to stdout; nothing is written to disk.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import platform
import statistics
import sys
import time
from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_info, threadpool_limits

import tdhf.ground_state
from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.response.solver import ResponseSolver
from tdhf.system import System

#: Number of imaginary frequencies of a Casimir–Polder quadrature, and its scale nu0 (hartree).
N_FREQUENCIES = 32
NU0 = 0.5
FREQUENCY_COUNTS = (1, 4, 16, 32)
#: Targets, seconds (ratio: dimensionless).
TARGETS = {"ne_static": 0.3, "kr_sweep": 5.0, "xe_sweep": 10.0, "ratio": 2.0}
MODES = ("library", "single")


def imaginary_frequencies(count: int) -> np.ndarray:
    """Gauss–Legendre nodes x mapped to nu = nu0 (1 + x)/(1 - x) on (0, inf), hartree."""
    x, _ = np.polynomial.legendre.leggauss(count)
    return NU0 * (1.0 + x) / (1.0 - x)


class ScfCounter:
    """Counts calls of the SCF kernel used by solve_ground_state (measurement only)."""

    def __init__(self) -> None:
        self.calls = 0
        self._original = tdhf.ground_state.solve_scf

    def __enter__(self) -> "ScfCounter":
        def counted(*args, **kwargs):
            self.calls += 1
            return self._original(*args, **kwargs)

        tdhf.ground_state.solve_scf = counted
        return self

    def __exit__(self, *exc) -> None:
        tdhf.ground_state.solve_scf = self._original


def blas_mode(mode: str):
    return threadpool_limits(limits=1, user_api="blas") if mode == "single" else contextlib.nullcontext()


@dataclass(frozen=True)
class Timing:
    median: float
    best: float
    result: object


def timed(function, repeats: int, mode: str) -> Timing:
    """One untimed warm-up call, then ``repeats`` timed calls; returns the last result."""
    with blas_mode(mode):
        result = function()
        times = []
        for _ in range(repeats):
            start = time.perf_counter()
            result = function()
            times.append(time.perf_counter() - start)
    return Timing(statistics.median(times), min(times), result)


def make_solver(state: GroundState, multipole: int) -> ResponseSolver:
    return ResponseSolver(state.grid, state.system.Z, state.shells, state.orbital_energies, multipole)


def static_alpha(state: GroundState):
    solver = make_solver(state, 1)
    return solver.polarizability(solver.solve(0.0))


def sweep(state: GroundState, multipole: int, count: int = N_FREQUENCIES):
    """Set-up plus ``count`` coupled solves at imaginary frequencies; returns (alpha values, Krylov steps)."""
    solver = make_solver(state, multipole)
    values, steps = [], 0
    for nu in imaginary_frequencies(count):
        first_order = solver.solve(1j * nu)
        values.append(solver.polarizability(first_order).real)
        steps += first_order.krylov_iterations
    return np.array(values), steps


def status(value: float, target: float) -> str:
    return "ok" if value < target else "SLOW"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per case (default 3)")
    parser.add_argument("--modes", nargs="+", choices=MODES, default=list(MODES), help="BLAS modes to run")
    args = parser.parse_args(argv)

    blas = ", ".join(f"{i['internal_api']} {i.get('version', '')} ({i['num_threads']} threads)" for i in threadpool_info())
    print(f"# tdhf response benchmark: python {platform.python_version()}, {os.cpu_count()} CPUs, BLAS: {blas}")
    print(f"# OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}; load average "
          f"{' '.join(f'{x:.2f}' for x in os.getloadavg())}; median of {args.repeats} after one warm-up")

    with ScfCounter() as counter:
        states = {}
        for element in ("Ne", "Kr", "Xe"):
            start = time.perf_counter()
            states[element] = solve_ground_state(System.from_input(element))
            print(f"# ground state {element}: {states[element].grid.size} points, "
                  f"{time.perf_counter() - start:.3f} s (solved once, not timed below)")
        scf_calls_for_ground_states = counter.calls

        rows = []
        scaling = {}
        for mode in args.modes:
            ne = timed(lambda: static_alpha(states["Ne"]), args.repeats, mode)
            rows.append((mode, "Ne static alpha_1 (set-up + 1 solve)", ne, TARGETS["ne_static"], f"alpha={ne.result:.6f}"))
            for element, key in (("Kr", "kr_sweep"), ("Xe", "xe_sweep")):
                dipole = timed(lambda: sweep(states[element], 1), args.repeats, mode)
                quadrupole = timed(lambda: sweep(states[element], 2), args.repeats, mode)
                rows.append((mode, f"{element} alpha_1 at {N_FREQUENCIES} imaginary nu", dipole, TARGETS[key],
                             f"{dipole.result[1]} Krylov steps"))
                rows.append((mode, f"{element} alpha_2 at {N_FREQUENCIES} imaginary nu", quadrupole, None,
                             f"{quadrupole.result[1]} Krylov steps"))
                ratio = quadrupole.median / dipole.median
                rows.append((mode, f"{element} quadrupole/dipole cost ratio", Timing(ratio, ratio, None), TARGETS["ratio"], "ratio of medians"))
            before = counter.calls
            scaling[mode] = [(n, timed(lambda n=n: sweep(states["Kr"], 1, n), args.repeats, mode)) for n in FREQUENCY_COUNTS]
            scaling[mode + "_scf_calls"] = counter.calls - before

    print()
    print(f"{'BLAS':8s} {'case':40s} {'median':>9s} {'best':>9s} {'target':>8s}  status  notes")
    for mode, case, timing, target, note in rows:
        is_ratio = "ratio" in case
        unit = "x" if is_ratio else "s"
        target_text = f"<{target:g}{unit}" if target is not None else "-"
        flag = status(timing.median, target) if target is not None else "-"
        print(f"{mode:8s} {case:40s} {timing.median:8.3f}{unit} {timing.best:8.3f}{unit} {target_text:>8s}  {flag:6s}  {note}")

    print()
    print(f"# Kr alpha_1: time against the number of imaginary frequencies (one solver set-up per run); "
          f"SCF kernel calls while solving the {len(states)} ground states: {scf_calls_for_ground_states}")
    print(f"{'BLAS':8s} {'n_freq':>6s} {'median s':>9s} {'s/freq':>8s}")
    for mode in args.modes:
        for n, timing in scaling[mode]:
            print(f"{mode:8s} {n:6d} {timing.median:9.3f} {timing.median / n:8.4f}")
        counts = np.array([n for n, _ in scaling[mode]], dtype=float)
        medians = np.array([t.median for _, t in scaling[mode]])
        slope, intercept = np.polyfit(counts, medians, 1)
        print(f"{mode:8s} fit t(n) = {intercept:.3f} s set-up + {slope:.4f} s/frequency; "
              f"SCF kernel calls during these sweeps: {scaling[mode + '_scf_calls']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
