"""Wall-clock benchmark of a C6/C8/C10 table at default accuracy (a script, not a test).

Run from the repository root::

    python benchmarks/bench_dispersion.py                  # 10 atoms, 55 pairs, ~1 minute on 2 cores
    python benchmarks/bench_dispersion.py --atoms He Ne Ar --points 16

What it measures
----------------
* the Hartree–Fock ground states of all atoms (``GridSettings()``, ``ScfSettings()``);
* :func:`tdhf.properties.dispersion.dispersion_table` on them: the time of each atom's
  imaginary-frequency response (L = 1, 2, 3 on the union of the two rules' nodes), attributed
  from the ``progress`` callback (atoms are solved one after the other), and the time of the
  pair sums (everything after the last response solve);
* the total, against the target of 60 s on 2 cores for the default ten atoms.

``--workers 2`` runs the responses in two processes (the per-atom split is then not available).

Printed to stdout: one row per pair (C6, C8, C10 in atomic units, the largest relative error
estimate, converged), then the timing split.  Nothing is written to disk.
"""

from __future__ import annotations

import argparse
import platform
import sys
import time

from tdhf.execution import task_map
from tdhf.ground_state import solve_ground_state
from tdhf.properties.dispersion import DEFAULT_QUADRATURE_POINTS, companion_points, dispersion_table
from tdhf.system import System

ATOMS = ("He", "Ne", "Ar", "Kr", "Xe", "Be", "Mg", "Ca", "Zn", "Cd")
#: Wall-clock target for the default ten-atom table, seconds (ground states included).
TARGET_SECONDS = 60.0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--atoms", nargs="+", default=list(ATOMS))
    parser.add_argument("--points", type=int, default=DEFAULT_QUADRATURE_POINTS,
                        help="base quadrature rule size n (the companion rule has n + n//2)")
    parser.add_argument("--workers", type=int, default=1,
                        help="processes for the responses (the per-atom split needs 1)")
    args = parser.parse_args(argv)

    print(f"# python {platform.python_version()}, {platform.machine()}; base rule {args.points} points,"
          f" companion {companion_points(args.points)}")
    start = time.perf_counter()
    states, ground_times = [], []
    for name in args.atoms:
        t0 = time.perf_counter()
        states.append(solve_ground_state(System.from_input(name)))
        ground_times.append(time.perf_counter() - t0)
    ground_done = time.perf_counter()

    marks: list[tuple[int, float]] = []

    def progress(done: int, total: int) -> None:
        marks.append((done, time.perf_counter()))

    with task_map(args.workers) as map_tasks:
        results = dispersion_table(states, args.points, progress=progress,
                                   map_tasks=None if args.workers == 1 else map_tasks)
    end = time.perf_counter()

    print(f"{'pair':<8} {'C6 (Eh a0^6)':>16} {'C8 (Eh a0^8)':>16} {'C10 (Eh a0^10)':>18} {'max rel err':>11}  conv")
    for row in results.coefficients:
        worst = max(row.C6_error / abs(row.C6), row.C8_error / abs(row.C8), row.C10_error / abs(row.C10))
        print(f"{'-'.join(row.pair):<8} {row.C6:16.8g} {row.C8:16.8g} {row.C10:18.8g} {worst:11.1e}  {row.converged}")
    for note in results.warnings:
        print(f"warning: {note}")

    # Serial runs solve the atoms one after the other: atom k is done at (k + 1) * solves_per_atom.
    total_solves = marks[-1][0] if marks else 0
    per_atom = total_solves // len(states)
    finish = {done: stamp for done, stamp in marks}
    print()
    print(f"{'atom':<5} {'grid':>5} {'ground s':>9} {'response s':>11} {'solves':>7} {'ms/solve':>9}")
    previous = ground_done
    for k, (state, ground_time) in enumerate(zip(states, ground_times)):
        response = "-"
        per_solve = "-"
        if args.workers == 1:
            stamp = finish[(k + 1) * per_atom]
            response, per_solve = f"{stamp - previous:.3f}", f"{1e3 * (stamp - previous) / per_atom:.2f}"
            previous = stamp
        print(f"{state.system.name:<5} {state.grid_points:5d} {ground_time:9.3f} {response:>11} {per_atom:7d}"
              f" {per_solve:>9}")
    previous = marks[-1][1] if marks else ground_done
    response_total = previous - ground_done
    pair_time = end - previous
    total = end - start
    print()
    print(f"ground states {ground_done - start:8.2f} s")
    print(f"responses     {response_total:8.2f} s  ({total_solves} frequency solves, {args.workers} worker(s))")
    print(f"pair sums     {pair_time:8.4f} s  ({len(results.coefficients)} pairs)")
    verdict = ""
    if tuple(args.atoms) == ATOMS and args.points == DEFAULT_QUADRATURE_POINTS:
        verdict = f"  target < {TARGET_SECONDS:.0f} s: {'ok' if total < TARGET_SECONDS else 'SLOW'}"
    print(f"total         {total:8.2f} s{verdict}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
