"""Wall-clock benchmark of the photoionization cross sections (a script, not a test).

Run from the repository root::

    python benchmarks/bench_photoionization.py               # ~1 minute on 2 cores
    python benchmarks/bench_photoionization.py --repeats 3 --cases argon
    python benchmarks/bench_photoionization.py --workers 2   # photon energies in two processes

Cases (each ground state is solved once, untimed, on the default grid):

* ``argon``: 200 photon energies from 1.001 I_3p to 10 hartree, coupled (target < 10 s);
* ``xenon``: 100 photon energies over the 4d region, 2.8 to 6 hartree (target < 20 s).

Each case times :func:`tdhf.properties.photoionization.compute_photoionization` without the sum
rules: the SCF on the continuum grid, the channel operators, and at every photon energy the
coupled length and velocity solves, the uncoupled solve and the partial fluxes.  A second line
times the coupled length-form solves alone (sigma only) on the same continuum solver.  One
untimed warm-up, then the median and minimum of ``--repeats`` runs (``time.perf_counter``).
"""

from __future__ import annotations

import argparse
import platform
import statistics
import time

import numpy as np
from threadpoolctl import threadpool_info

from tdhf.ground_state import solve_ground_state
from tdhf.numerics.threads import single_blas_thread
from tdhf.execution import task_map
from tdhf.properties.photoionization import PhotoionizationSection, compute_photoionization, _solver_for
from tdhf.radial.exterior_scaling import ContinuumGridSettings
from tdhf.system import System

CASES = {
    "argon": ("Ar", None, 10.0, 200, 10.0),
    "xenon": ("Xe", 2.8, 6.0, 100, 20.0),
}


def energies(state, low, high, count):
    first = -state.homo_energy
    return tuple(np.linspace(low if low is not None else 1.001 * first, high, count))


def timed(function, repeats):
    function()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return statistics.median(times), min(times), result


@single_blas_thread
def length_only(state, photon_energies):
    solver, _, _ = _solver_for(state, 1, photon_energies, ContinuumGridSettings(), [])
    start = time.perf_counter()
    iterations = [solver.solve(omega).krylov_iterations for omega in photon_energies]
    return solver, time.perf_counter() - start, float(np.mean(iterations))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", nargs="+", choices=sorted(CASES), default=sorted(CASES))
    parser.add_argument("--repeats", type=int, default=1)
    parser.add_argument("--workers", type=int, default=1, help="processes for the photon energies")
    args = parser.parse_args()
    blas = ", ".join(f"{i['internal_api']} {i.get('version')}" for i in threadpool_info())
    print(f"# {platform.processor() or platform.machine()}, python {platform.python_version()}, {blas}")
    for name in args.cases:
        element, low, high, count, target = CASES[name]
        state = solve_ground_state(System.from_input(element))
        grid = energies(state, low, high, count)
        section = PhotoionizationSection(grid, None, False)
        with task_map(args.workers) as map_tasks:
            median, best, result = timed(lambda: compute_photoionization(state, section, map_tasks=map_tasks),
                                         args.repeats)
        info = result.continuum.grid
        iterations = np.mean([row.krylov_iterations for row in result.photoionization])
        flag = "ok" if median < target else "SLOW"
        print(f"{name:6s} {element} ({args.workers} worker{'s' if args.workers > 1 else ''}): {count} energies {grid[0]:.3f}..{grid[-1]:.3f} hartree, grid {info.points} points"
              f" ({info.inner_points} inner):"
              f" median {median:.2f} s, best {best:.2f} s ({1e3 * median / count:.0f} ms per energy,"
              f" {iterations:.1f} Krylov steps length+velocity), target {target:g} s {flag}")
        _, seconds, steps = length_only(state, grid)
        print(f"{'':6s} sigma only (coupled length solves, serial, after set-up): {seconds:.2f} s, {steps:.1f} Krylov steps")


if __name__ == "__main__":
    main()
