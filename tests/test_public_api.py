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


#: The numerical core: it computes and returns typed results, nothing else.
CORE = [*PACKAGE.glob("radial/*.py"), *PACKAGE.glob("response/*.py"), *PACKAGE.glob("properties/*.py"),
        *PACKAGE.glob("numerics/*.py"),
        *(PACKAGE / name for name in ("angular.py", "potentials.py", "scf.py", "ground_state.py", "elements.py",
                                      "system.py", "accuracy.py"))]
#: What the core never imports: terminals, decks, the layers above it, files and processes.
FORBIDDEN_IN_CORE = ("rich", "tdhf.deck", "tdhf.driver", "tdhf.cli", "tdhf.report", "tdhf.execution", "tomllib",
                     "os", "pathlib", "csv", "tempfile", "shutil", "io", "multiprocessing", "concurrent",
                     "subprocess", "signal", "dask", "distributed", "matplotlib")


def _is_forbidden(module: str) -> bool:
    return any(module == name or module.startswith(f"{name}.") for name in FORBIDDEN_IN_CORE)


def test_numerical_core_imports_no_files_processes_terminal_or_cli():
    """Common practice, no source: the numerical layers never touch files, processes or terminals, nor
    import the layers above them (tdhf.execution supplies process pools through a task map)."""
    assert len(CORE) > 20
    for path in CORE:
        bad = sorted(name for name in _imports(path) if _is_forbidden(name))
        assert not bad, f"{path.relative_to(PACKAGE)} imports {bad}"


def test_the_layering_check_catches_a_forbidden_import():
    """The check above must be able to fail: the execution layer itself imports processes."""
    assert _is_forbidden("concurrent.futures") and _is_forbidden("os") and not _is_forbidden("osmium")
    assert any(_is_forbidden(name) for name in _imports(PACKAGE / "execution.py"))


def test_the_command_line_imports_no_numerics_until_a_command_runs():
    """Common practice, no source: ``tdhf --help`` must not pay for numpy, scipy and rich (speed is
    measured in benchmarks/bench_startup.py; this only checks which modules load)."""
    import subprocess
    import sys

    probe = "import sys, tdhf.cli; print(sorted(m for m in ('numpy', 'scipy', 'rich', 'tdhf.deck') if m in sys.modules))"
    loaded = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    assert loaded.strip() == "[]"


def test_the_installed_version_is_the_one_in_the_package():
    """Common practice, no source: pyproject.toml reads the version from tdhf.version, so the
    metadata of the installation and the version written into every result agree."""
    import importlib.metadata

    from tdhf.version import VERSION, program_info

    assert importlib.metadata.version("tdhf") == VERSION == program_info().version


def test_the_codata_factors_load_when_first_used():
    """Common practice, no source: importing scipy.constants costs ~0.1 s of start-up, paid only by
    a run that converts a unit; the factors then are scipy's CODATA values."""
    import subprocess
    import sys

    probe = ("import sys, tdhf.units, tdhf.constants as c; before = 'scipy.constants' in sys.modules;"
             " one = tdhf.units.parse_frequency('27.211386245988 eV', 'f');"
             " from scipy.constants import physical_constants as p;"
             " print(before, round(one, 12), c.HARTREE_EV == p['Hartree energy in eV'][0])")
    loaded = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    assert loaded.split() == ["False", "1.0", "True"]


def test_the_command_lines_copies_of_the_choices_match_the_library():
    """Common practice, no source: tdhf.commands repeats two lists so that --help imports no numerics."""
    from tdhf import commands
    from tdhf.units import UNIT_SYSTEMS
    from tdhf.user_values import COMPARABLE

    assert commands._UNIT_SYSTEMS == UNIT_SYSTEMS
    assert commands._PROPERTIES == tuple(COMPARABLE)
