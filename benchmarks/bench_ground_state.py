"""Wall-clock benchmark of default-accuracy Hartree–Fock ground states (a script, not a test).

Run from the repository root::

    python benchmarks/bench_ground_state.py            # full run, ~1 minute on 2 cores
    python benchmarks/bench_ground_state.py --repeats 3 --no-cold

What it measures
----------------
* warm timings: for each atom, one untimed warm-up solve, then the median (and minimum) of
  ``--repeats`` solves timed with ``time.perf_counter``;
* cold timings: the first solve in a fresh interpreter (``python -c``), separately from the import
  time of tdhf (caches of LGL rules etc. are empty there);
* the time of building the Coulomb kernels alone on the final grid (part of each solve);
* how time grows with Z (least-squares slope of log t against log Z) and with grid size (Kr at
  orders 8..16, slope of log t against log n).

Targets printed beside the warm medians: He < 0.05 s, Ne < 0.2 s, Kr < 1 s, Xe and Rn < 3 s.
Results go to stdout; nothing is written to disk.
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import subprocess
import sys
import time
from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_info, threadpool_limits

from tdhf.ground_state import GroundState, solve_ground_state
from tdhf.radial.mesh import GridSettings
from tdhf.radial.poisson import coulomb_kernels
from tdhf.system import System

ATOMS = ("He", "Ne", "Ar", "Kr", "Xe", "Rn")
#: Wall-clock targets for a warm default-accuracy solve, seconds.
TARGETS = {"He": 0.05, "Ne": 0.2, "Kr": 1.0, "Xe": 3.0, "Rn": 3.0}
SCALING_ATOM = "Kr"
SCALING_ORDERS = (8, 10, 12, 14, 16)

COLD_SCRIPT = """
import time
start = time.perf_counter()
from tdhf.ground_state import solve_ground_state
from tdhf.system import System
imported = time.perf_counter()
solve_ground_state(System.from_input({element!r}))
done = time.perf_counter()
print(imported - start, done - imported)
"""


@dataclass(frozen=True)
class Timing:
    element: str
    z: int
    grid_points: int
    iterations: int
    median: float
    best: float
    kernels: float
    total_energy: float


def time_calls(function, repeats: int) -> list[float]:
    """Wall-clock seconds of ``repeats`` calls of ``function()`` (after no warm-up)."""
    seconds = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        seconds.append(time.perf_counter() - start)
    return seconds


def warm_timing(element: str, repeats: int, settings: GridSettings = GridSettings()) -> Timing:
    system = System.from_input(element)
    state: GroundState = solve_ground_state(system, settings)  # warm-up, untimed
    seconds = time_calls(lambda: solve_ground_state(system, settings), repeats)
    with threadpool_limits(limits=1, user_api="blas"):  # as inside solve_ground_state
        kernel_seconds = time_calls(lambda: coulomb_kernels(state.grid, 2 * system.max_l), repeats)
    return Timing(
        element=element,
        z=system.Z,
        grid_points=state.grid_points,
        iterations=state.iterations,
        median=statistics.median(seconds),
        best=min(seconds),
        kernels=statistics.median(kernel_seconds),
        total_energy=state.total_energy,
    )


def cold_timing(element: str) -> tuple[float, float]:
    """(import seconds, first-solve seconds) in a fresh interpreter."""
    output = subprocess.run(
        [sys.executable, "-c", COLD_SCRIPT.format(element=element)],
        check=True,
        capture_output=True,
        text=True,
    ).stdout
    imported, solved = (float(v) for v in output.split())
    return imported, solved


def slope(x, y) -> float:
    """Least-squares slope of log y against log x."""
    return float(np.polyfit(np.log(x), np.log(y), 1)[0])


def describe_environment() -> str:
    blas = [f"{p.get('internal_api')} {p.get('version')} ({p.get('num_threads')} threads)" for p in threadpool_info()]
    return (
        f"python {platform.python_version()}, numpy {np.__version__}, {os.cpu_count()} cpus, "
        f"BLAS: {'; '.join(blas) or 'unknown'}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '-')}"
        " (solves use 1 BLAS thread)"
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5, help="timed repeats per case (default 5)")
    parser.add_argument("--no-cold", action="store_true", help="skip the fresh-interpreter first-call timings")
    parser.add_argument("--atoms", nargs="+", default=list(ATOMS), help="element symbols (default: %(default)s)")
    args = parser.parse_args(argv)

    print("tdhf ground-state benchmark: default GridSettings() and ScfSettings()")
    print(describe_environment())
    print(f"warm: median and best of {args.repeats} after one warm-up; cold: first solve in a fresh interpreter")
    print()

    timings = [warm_timing(element, args.repeats) for element in args.atoms]
    cold = {} if args.no_cold else {t.element: cold_timing(t.element) for t in timings}

    header = (
        f"{'atom':<4} {'Z':>3} {'points':>6} {'iter':>4} {'median s':>9} {'best s':>8} {'kernels s':>9}"
        f" {'import s':>8} {'cold s':>7} {'target s':>8}  {'':4} {'E (hartree)':>19}"
    )
    print(header)
    print("-" * len(header))
    for t in timings:
        target = TARGETS.get(t.element)
        verdict = "" if target is None else ("ok" if t.median < target else "SLOW")
        imported, first = cold.get(t.element, (float("nan"), float("nan")))
        print(
            f"{t.element:<4} {t.z:>3} {t.grid_points:>6} {t.iterations:>4} {t.median:>9.4f} {t.best:>8.4f}"
            f" {t.kernels:>9.4f} {imported:>8.3f} {first:>7.3f} {target if target else '-':>8}  {verdict:<4}"
            f" {t.total_energy:>19.9f}"
        )
    print()

    if len(timings) >= 2:
        z = [t.z for t in timings]
        print(
            f"growth with Z (default grids, {timings[0].element}..{timings[-1].element}):"
            f" t ~ Z^{slope(z, [t.median for t in timings]):.2f},"
            f" grid points ~ Z^{slope(z, [t.grid_points for t in timings]):.2f},"
            f" t per iteration ~ Z^{slope(z, [t.median / t.iterations for t in timings]):.2f}"
        )
        print()

    scaling = [
        warm_timing(SCALING_ATOM, args.repeats, GridSettings(order=order)) for order in SCALING_ORDERS
    ]
    print(f"growth with grid size ({SCALING_ATOM}, default growth 1.9, order varied):")
    print(f"{'order':>5} {'points':>6} {'iter':>4} {'median s':>9} {'kernels s':>9} {'s/iter':>8} {'E (hartree)':>19}")
    for order, t in zip(SCALING_ORDERS, scaling):
        print(
            f"{order:>5} {t.grid_points:>6} {t.iterations:>4} {t.median:>9.4f} {t.kernels:>9.4f}"
            f" {t.median / t.iterations:>8.4f} {t.total_energy:>19.9f}"
        )
    n = [t.grid_points for t in scaling]
    print(
        f"t ~ n^{slope(n, [t.median for t in scaling]):.2f}, kernels ~ n^{slope(n, [t.kernels for t in scaling]):.2f},"
        f" t per iteration ~ n^{slope(n, [t.median / t.iterations for t in scaling]):.2f}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
