"""Whole-process timings of the workloads users wait for, against an outside reference in the same run.

Run from the repository root (a script, not a test)::

    python benchmarks/bench_workloads.py               # every workload, 3 repeats each
    python benchmarks/bench_workloads.py --only ne xe --repeats 5

Workloads (each a fresh process, so imports and start-up count):

``help``       ``tdhf --help``
``ne``         ``tdhf run`` of a deck asking for the static dipole polarizability of Ne
``xe``, ``rn`` ``tdhf run`` of a deck with multipoles 1-3, frequencies 0, 0.05, 0.1 hartree, one
               imaginary frequency 0.5 and two dispersion partners (He, Ar)
``pairs``      ``tdhf pairs`` of He, Ne, Ar, Kr, Xe, Be, Mg, Ca, Zn, Cd (55 pairs, C6/C8/C10 with errors)
``reference``  the outside workload the goals are ratios to: a Gaussian-basis RHF + coupled-perturbed
               HF static polarizability of Ne in aug-cc-pVQZ (PySCF, a general-purpose library from the
               test extra; 2 % off the numerical limit), whole process

For each: the median and best wall time over the repeats, the CPU time of the best run, the peak
resident memory (``ru_maxrss`` of that child, from ``os.wait4``), the ratio of the median wall time
to the reference's median, and the same ratio of CPU times (steadier when other jobs share the
cores).  The machine's absolute speed drifts: compare ratios measured in one run.
Goals (issue: "Ten times faster where users wait"): ne <= 0.3, xe <= 3, rn <= 5, pairs <= 8,
help < 0.25 s, every run below 1 GB.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HEAVY_DECK = """[atom]
element = "{element}"
[response]
multipoles = [1, 2, 3]
frequencies = [0.0, 0.05, 0.1]
imaginary_frequencies = [0.5]
[dispersion]
partners = ["He", "Ar"]
"""
NEON_DECK = """[atom]
element = "Ne"
[response]
multipoles = [1]
frequencies = [0.0]
"""
REFERENCE = r"""
import numpy as np
from pyscf import gto, scf
from pyscf.scf import cphf
mol = gto.M(atom="Ne 0 0 0", basis="aug-cc-pvqz", verbose=0)
mf = scf.RHF(mol).run()
occ = mf.mo_occ > 0
orbo, orbv = mf.mo_coeff[:, occ], mf.mo_coeff[:, ~occ]
h1 = np.einsum("xpq,pi,qj->xij", mol.intor("int1e_r", comp=3), orbv, orbo)
def fvind(x):
    x = x.reshape(-1, orbv.shape[1], orbo.shape[1])
    dm = np.einsum("xai,pa,qi->xpq", x, orbv, orbo)
    v = mf.get_veff(mol, 2 * (dm + dm.transpose(0, 2, 1)))
    return np.einsum("xpq,pa,qi->xai", v, orbv, orbo).ravel()
mo1 = cphf.solve(fvind, mf.mo_energy, mf.mo_occ, h1, None, max_cycle=50, tol=1e-10)[0]
print(-4 * np.einsum("xai,yai->xy", h1, mo1)[0, 0])
"""
PAIRS = ("He", "Ne", "Ar", "Kr", "Xe", "Be", "Mg", "Ca", "Zn", "Cd")
GOALS = {"help": ("s", 0.25), "ne": ("x", 0.3), "xe": ("x", 3.0), "rn": ("x", 5.0), "pairs": ("x", 8.0)}


def _commands(folder: Path) -> dict[str, list[str]]:
    tdhf = [sys.executable, "-m", "tdhf"]
    (folder / "ne.toml").write_text(NEON_DECK)
    for element in ("Xe", "Rn"):
        (folder / f"{element.lower()}.toml").write_text(HEAVY_DECK.format(element=element))
    (folder / "reference.py").write_text(REFERENCE)
    return {
        "reference": [sys.executable, str(folder / "reference.py")],
        "help": [*tdhf, "--help"],
        "ne": [*tdhf, "run", str(folder / "ne.toml"), "-q"],
        "xe": [*tdhf, "run", str(folder / "xe.toml"), "-q"],
        "rn": [*tdhf, "run", str(folder / "rn.toml"), "-q"],
        "pairs": [*tdhf, "pairs", *PAIRS, "-q"],
    }


def _run(command: list[str], folder: Path) -> tuple[float, float, float]:
    """Wall seconds, CPU seconds and peak resident memory (MB) of one child process (os.wait4: its own rusage).

    The child runs in ``folder``, as a user runs tdhf from a working folder of their own (not in
    this source tree, which would put it first on every import search).
    """
    start = time.perf_counter()
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, cwd=folder)
    _, status, usage = os.wait4(process.pid, 0)
    wall = time.perf_counter() - start
    code = os.waitstatus_to_exitcode(status)
    if code not in (0, 3):
        raise SystemExit(f"{' '.join(command)} failed ({code}): {process.stderr.read().strip()}")
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024.0


def _compile_tdhf() -> None:
    """Write tdhf's bytecode, as ``pip install`` does for a regular installation (and for the
    reference's PySCF).  An editable installation run with PYTHONDONTWRITEBYTECODE set (as on this
    machine) would otherwise compile every module again at each start: ~0.1 s of the Ne run."""
    import compileall
    import importlib.util

    (folder,) = importlib.util.find_spec("tdhf").submodule_search_locations
    compileall.compile_dir(folder, quiet=1)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--only", nargs="+", choices=["help", "ne", "xe", "rn", "pairs"], default=None)
    args = parser.parse_args(argv)
    _compile_tdhf()
    with tempfile.TemporaryDirectory() as folder:
        commands = _commands(Path(folder))
        names = ["reference", *(args.only or ["help", "ne", "xe", "rn", "pairs"])]
        print(f"# {os.cpu_count()} cores; {args.repeats} repeats; median and best wall s, CPU s of the best run,"
              " peak MB, ratio = median / reference median")
        rows = {}
        for repeat in range(args.repeats):  # interleaved, so a busy spell hits every workload alike
            for name in names:
                rows.setdefault(name, []).append(_run(commands[name], Path(folder)))
        reference = statistics.median(wall for wall, _, _ in rows["reference"])
        reference_cpu = statistics.median(cpu for _, cpu, _ in rows["reference"])
        print(f"{'workload':10s} {'median':>8s} {'best':>8s} {'cpu':>8s} {'peak MB':>8s} {'ratio':>7s} {'cpu ratio':>9s}  goal")
        for name in names:
            walls = [wall for wall, _, _ in rows[name]]
            best = min(rows[name])
            median = statistics.median(walls)
            peak = max(memory for _, _, memory in rows[name])
            goal = GOALS.get(name)
            if goal is None:
                verdict = ""
            elif goal[0] == "s":
                verdict = f"< {goal[1]} s: {'ok' if median < goal[1] else 'MISSED'}"
            else:
                verdict = f"<= {goal[1]}x: {'ok' if median / reference <= goal[1] else 'MISSED'}"
            cpu_ratio = statistics.median(cpu for _, cpu, _ in rows[name]) / reference_cpu
            print(f"{name:10s} {median:8.2f} {best[0]:8.2f} {best[1]:8.2f} {peak:8.0f} {median / reference:7.2f}"
                  f" {cpu_ratio:9.2f}  {verdict}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
