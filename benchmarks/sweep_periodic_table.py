"""Periodic-table sweep: every closed-shell neutral atom Z <= 118 and the closed-shell ions of the
He, Ne, Ar, Kr, Xe and Rn isoelectronic sequences (from the monoanion up to +10), each at default
settings with its static dipole alpha, certified by ``tdhf.driver.certify``.

Prints one row per system: converged (every solve), SCF iterations, wall time of the run and of
the certification, E (hartree), alpha_1(0) (bohr^3), the certified digits of E and alpha
(-log10 of the relative change under certification), and notes (warnings) shortened.

    python benchmarks/sweep_periodic_table.py                 # everything, ~25 min on 2 cores
    python benchmarks/sweep_periodic_table.py --no-certify    # convergence and alpha only
    python benchmarks/sweep_periodic_table.py --systems He Ne Xe6+
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import time
import warnings

from tdhf.deck import build_deck, parse_system_name
from tdhf.certify import certify
from tdhf.driver import run_deck
from tdhf.elements import closed_shell_atoms, ion_name, isoelectronic_sequence

#: Electron counts of the noble-gas isoelectronic sequences, and the highest charge swept.
SEQUENCES = (2, 10, 18, 36, 54, 86)
HIGHEST_CHARGE = 10


def sweep_systems() -> list[tuple[int, int]]:
    """(Z, charge): the neutral closed-shell atoms, then each sequence's ions, no repeats."""
    systems = [(z, 0) for z in closed_shell_atoms()]
    for electrons in SEQUENCES:
        systems += [member for member in isoelectronic_sequence(electrons, HIGHEST_CHARGE) if member[1] != 0]
    return systems


def digits(result, name: str) -> str:
    rows = [row for row in result.certification if row.quantity == name]
    if not rows:
        return "-"
    change = rows[0].relative_difference
    return ">15" if change < 1e-15 else f"{math.floor(-math.log10(change))}"


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-certify", action="store_true")
    parser.add_argument("--systems", nargs="+", help='names such as "Ne" or "Ca10+" (default: the whole sweep)')
    args = parser.parse_args()
    systems = ([(z, q) for z, q in (_z_charge(name) for name in args.systems)] if args.systems
               else sweep_systems())
    header = (f"{'system':8} {'conv':>4} {'iter':>4} {'run s':>6} {'cert s':>6} {'E (hartree)':>20}"
              f" {'alpha1(0)':>16} {'dE':>3} {'da':>3}  notes")
    print(header)
    print("-" * len(header))
    failures = 0
    for z, charge in systems:
        deck = build_deck({"atom": {"element": z, "charge": charge},
                           "response": {"multipoles": [1], "frequencies": [0.0]}})
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            start = time.perf_counter()
            result = run_deck(deck)
            run_time = time.perf_counter() - start
            cert_time = 0.0
            if not args.no_certify:
                start = time.perf_counter()
                result = dataclasses.replace(result, certification=certify(result, deck))
                cert_time = time.perf_counter() - start
        alpha = result.polarizabilities[0].coupled if result.polarizabilities else math.nan
        converged = result.converged and bool(result.polarizabilities)
        failures += not converged
        notes = "; ".join(note[:60] for note in result.warnings)
        print(f"{ion_name(z, charge):8} {'yes' if converged else 'NO':>4} {result.ground_state.iterations:4d}"
              f" {run_time:6.2f} {cert_time:6.2f} {result.ground_state.total_energy:20.10f} {alpha:16.10f}"
              f" {digits(result, 'ground_state.total_energy'):>3} {digits(result, 'polarizabilities[0].coupled'):>3}"
              f"  {notes}", flush=True)
    print(f"{len(systems)} systems, {failures} not converged")
    return 1 if failures else 0


def _z_charge(name: str) -> tuple[int, int]:
    from tdhf.elements import atomic_number

    element, charge = parse_system_name(name, "--systems")
    return atomic_number(element), charge


if __name__ == "__main__":
    sys.exit(main())
