"""A certified 10-system series with static alpha and its C6 table: serial against ``--workers N``.

Run from the repository root (a script, not a test)::

    python benchmarks/bench_series.py                  # --workers 1 against --workers 2
    python benchmarks/bench_series.py --workers 2 --systems He Ne Ar

Two whole processes per worker count, each timed from outside (wall clock, and the CPU time of the
process and its children from ``resource.getrusage(RUSAGE_CHILDREN)``):

``series``  ``tdhf series`` of one deck per system (static dipole alpha), ``--certify``, with a
            ``--table`` CSV: one task per deck;
``pairs``   ``tdhf pairs`` of the same systems (55 pairs for 10), ``--certify``: one task per
            (system, multipole) response, three times (run, grid and tolerance variations) plus
            the box and quadrature variations.

It then checks that every result file and table of the parallel runs equals the serial one byte
for byte.  The machine may be shared: the CPU time shows what the work cost, the wall time what a
user waits.
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SYSTEMS = ("He", "Be", "Ne", "Mg", "Ar", "Ca", "Zn", "Kr", "Na+", "K+")
DECK = '[atom]\nelement = "{element}"\ncharge = {charge}\n[response]\nfrequencies = [0.0]\n'


def _deck_files(folder: Path, systems: list[str]) -> list[Path]:
    paths = []
    for name in systems:
        element, charge = (name[:-1], 1) if name.endswith("+") else (name, 0)
        path = folder / f"{element.lower()}{'_ion' if charge else ''}.toml"
        path.write_text(DECK.format(element=element, charge=charge))
        paths.append(path)
    return paths


def _timed(command: list[str]) -> tuple[float, float, int]:
    """(wall s, CPU s of the process and its children, exit code)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    code = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True).returncode
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, code


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", nargs="+", default=list(SYSTEMS))
    parser.add_argument("--workers", type=int, default=2, help="the parallel run's worker count (default 2)")
    args = parser.parse_args(argv)
    tdhf = [sys.executable, "-m", "tdhf"]
    with tempfile.TemporaryDirectory() as scratch:
        root = Path(scratch)
        (root / "decks").mkdir()
        decks = [str(p) for p in _deck_files(root / "decks", args.systems)]
        print(f"# {len(decks)} systems: {' '.join(args.systems)}; certified; workers 1 against {args.workers}")
        print(f"{'workload':<8} {'workers':>7} {'wall s':>8} {'CPU s':>8} {'exit':>4}")
        for workers in (1, args.workers):
            out = root / f"w{workers}"
            out.mkdir()
            runs = {
                "series": tdhf + ["series", *decks, "--out", str(out / "series"), "--certify", "--table",
                                  str(out / "table.csv"), "--workers", str(workers), "-q"],
                "pairs": tdhf + ["pairs", *args.systems, "--certify", "--json", str(out / "pairs.json"),
                                 "--workers", str(workers), "-q"],
            }
            for name, command in runs.items():
                wall, cpu, code = _timed(command)
                print(f"{name:<8} {workers:>7} {wall:8.1f} {cpu:8.1f} {code:>4}")
        serial, parallel = root / "w1", root / f"w{args.workers}"
        files = sorted(p.relative_to(serial) for p in serial.rglob("*") if p.is_file())
        different = [str(p) for p in files if (serial / p).read_bytes() != (parallel / p).read_bytes()]
        print(f"# {len(files)} files compared: " + ("all identical" if not different else f"DIFFER: {different}"))
    return 0 if not different else 1


if __name__ == "__main__":
    raise SystemExit(main())
