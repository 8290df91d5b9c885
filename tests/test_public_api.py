"""The public namespace is a stable contract: pin it, and keep the layering (core knows no I/O)."""

import ast
from pathlib import Path

import tdhf

PACKAGE = Path(tdhf.__file__).parent


def test_public_names_are_pinned():
    assert sorted(tdhf.__all__) == sorted([
        "System", "GridSettings", "ScfSettings", "solve_ground_state", "GroundState", "OrbitalResult",
        "ResponseSolver", "compute_response", "lowest_excitations", "load_deck", "parse_deck", "run_deck",
        "InputError", "ConvergenceError", "certify",
    ])
    assert all(hasattr(tdhf, name) for name in tdhf.__all__)


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text())
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
        elif isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
    return names


def test_numerical_core_imports_no_files_terminal_or_cli():
    """Common practice, no source: the numerical layers never import rich, the deck, the driver or the CLI."""
    core = [*PACKAGE.glob("radial/*.py"), *PACKAGE.glob("response/*.py"), *PACKAGE.glob("properties/*.py"),
            *(PACKAGE / name for name in ("angular.py", "potentials.py", "scf.py", "ground_state.py", "elements.py"))]
    forbidden = ("rich", "tdhf.deck", "tdhf.driver", "tdhf.cli", "tdhf.report", "tomllib")
    for path in core:
        bad = [name for name in _imports(path) if name.startswith(forbidden)]
        assert not bad, f"{path.relative_to(PACKAGE)} imports {bad}"


def test_the_command_line_imports_no_numerics_until_a_command_runs():
    """Common practice, no source: ``tdhf --help`` must not pay for numpy, scipy and rich (speed is
    measured in benchmarks/bench_startup.py; this only checks which modules load)."""
    import subprocess
    import sys

    probe = "import sys, tdhf.cli; print(sorted(m for m in ('numpy', 'scipy', 'rich', 'tdhf.deck') if m in sys.modules))"
    loaded = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    assert loaded.strip() == "[]"
