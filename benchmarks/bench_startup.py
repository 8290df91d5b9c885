"""Start-up cost of the command line: ``tdhf --help``, ``import tdhf.cli`` and ``tdhf --version``
in fresh interpreters (wall clock, median of ``--repeats``), against the target of 0.25 s for
``--help``; and which heavy modules ``import tdhf.cli`` loads (none should: numpy, scipy, rich
and the numerical package are imported when a command runs).

    python benchmarks/bench_startup.py
    python benchmarks/bench_startup.py --repeats 21
    python -X importtime -m tdhf --help 2> importtime.txt    # the per-module breakdown
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

TARGET_HELP = 0.25
HEAVY = ("numpy", "scipy", "rich", "tdhf.deck", "tdhf.driver", "tdhf.ground_state")


def wall(command: list[str], repeats: int) -> tuple[float, float]:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        subprocess.run(command, check=True, capture_output=True)
        times.append(time.perf_counter() - start)
    return statistics.median(times), min(times)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=11)
    args = parser.parse_args()
    python = sys.executable
    rows = [
        ("python -c pass (interpreter alone)", [python, "-c", "pass"]),
        ("import tdhf.cli", [python, "-c", "import tdhf.cli"]),
        ("tdhf --help", [python, "-m", "tdhf", "--help"]),
        ("tdhf --version", [python, "-m", "tdhf", "--version"]),
        ("import tdhf.driver (what a run needs)", [python, "-c", "import tdhf.driver, tdhf.report.terminal"]),
    ]
    print(f"{'command':40} {'median s':>9} {'best s':>8}")
    help_median = None
    for label, command in rows:
        median, best = wall(command, args.repeats)
        if label == "tdhf --help":
            help_median = median
        print(f"{label:40} {median:9.3f} {best:8.3f}")
    probe = "import sys, tdhf.cli; print(' '.join(m for m in %r if m in sys.modules))" % (HEAVY,)
    loaded = subprocess.run([python, "-c", probe], check=True, capture_output=True, text=True).stdout.split()
    print(f"heavy modules loaded by import tdhf.cli: {', '.join(loaded) or 'none'}")
    verdict = "ok" if help_median is not None and help_median < TARGET_HELP else "SLOW"
    print(f"tdhf --help median {help_median:.3f} s, target < {TARGET_HELP} s: {verdict}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
