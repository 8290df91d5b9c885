"""The user reference generated from the code: every deck key, every result field.

* :func:`deck_reference`: every key of a deck with its type, default, allowed range or choices
  and unit (:data:`DECK_KEYS`; defaults are read from the deck dataclasses and the accuracy
  presets, and the test suite probes every documented range against the validators);
* :func:`field_reference`: every key of the JSON result files, the long table, the comparison
  and the alpha(i omega) CSV, from the ``Attributes`` sections (or the prose) of the result
  dataclasses' docstrings.

``python -m tdhf.reference_docs`` rewrites the committed files (:data:`DOCUMENTS`);
``--check`` exits 1 if they are out of date (the test suite runs the same comparison).
"""

from __future__ import annotations

import dataclasses
import inspect
import re
import sys
import types
import typing
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from tdhf import deck as deck_module
from tdhf.accuracy import ACCURACY_PRESETS
from tdhf.compare import Comparison
from tdhf.driver import RunResult
from tdhf.properties.dispersion import QUADRATURE_RANGE
from tdhf.quantities import Quantity
from tdhf.radial.mesh import MIN_FIRST_ELEMENT
from tdhf.report.tables import TableRow
from tdhf.units import FREQUENCY_UNITS

__all__ = ["KeySpec", "DECK_KEYS", "deck_reference", "field_reference", "undocumented_fields", "attribute_docs",
           "default_of", "DOCUMENTS", "main"]


@dataclass(frozen=True)
class KeySpec:
    """One deck key: TOML type, unit, meaning, and its allowed values.

    ``low``/``high`` bound a number (``low_open``/``high_open``: the bound itself is refused);
    ``choices`` lists the allowed strings; ``required`` keys have no default.
    """

    key: str
    kind: str
    unit: str
    meaning: str
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    choices: tuple[Any, ...] = ()
    required: bool = False


_FREQUENCY_TEXT = ("numbers in hartree, or strings with a unit such as \"1064 nm\" or \"2.5 eV\""
                   f" ({', '.join(FREQUENCY_UNITS)}); at most {deck_module.MAX_FREQUENCIES} entries")
_SYSTEMS_TEXT = f"; at most {deck_module.MAX_SYSTEMS} entries"

#: Every deck key, in the order of the reference.
DECK_KEYS = (
    KeySpec("schema", "integer", "", "deck format version", choices=(deck_module.SCHEMA_VERSION,)),
    KeySpec("accuracy", "string", "", "preset that sets grid, SCF and solver tolerances together",
            choices=tuple(ACCURACY_PRESETS)),
    KeySpec("atom.element", "string or integer", "", "element symbol or atomic number", required=True),
    KeySpec("atom.charge", "integer", "e", "net charge Z - N"),
    KeySpec("atom.configuration", "string", "", "closed-subshell configuration, e.g. \"1s2 2s2 2p6\";"
            " default: the ground-state configuration"),
    KeySpec("grid.preset", "string", "", "older spelling of the top-level accuracy",
            choices=tuple(ACCURACY_PRESETS)),
    KeySpec("grid.order", "integer", "", "polynomial order p in each finite element", 4, 24),
    KeySpec("grid.growth", "number", "", "ratio of neighbouring element sizes (smaller is finer)", 1.0, 4.0,
            low_open=True),
    KeySpec("grid.first_element", "number", "bohr", "size of the innermost element; default 0.1/Z",
            MIN_FIRST_ELEMENT, 1.0),
    KeySpec("grid.r_max", "number", "bohr", "box radius; default automatic (from the orbital decay)", 5.0, 2000.0),
    KeySpec("scf.energy_tolerance", "number", "hartree", "largest accepted energy change between iterations",
            0.0, 1.0, low_open=True, high_open=True),
    KeySpec("scf.residual_tolerance", "number", "", "largest accepted orbital change per iteration",
            0.0, 1.0, low_open=True, high_open=True),
    KeySpec("scf.max_iterations", "integer", "", "iterations per strategy (DIIS, then damped DIIS)", 1, 10000),
    KeySpec("scf.diis_size", "integer", "", "Fock matrices kept by DIIS", 1, 20),
    KeySpec("scf.damping", "number", "", "fraction of the previous Fock matrix kept by the fallback", 0.0, 1.0,
            high_open=True),
    KeySpec("response.multipoles", "array of integers", "", "multipole orders L (1 dipole, 2 quadrupole,"
            " 3 octupole)", *deck_module.MULTIPOLE_RANGE),
    KeySpec("response.frequencies", "array", "hartree", "real frequencies omega; " + _FREQUENCY_TEXT, 0.0,
            deck_module.MAX_FREQUENCY),
    KeySpec("response.imaginary_frequencies", "array", "hartree", "imaginary frequencies nu (omega = i nu); "
            + _FREQUENCY_TEXT, 0.0, deck_module.MAX_FREQUENCY),
    KeySpec("response.coupled", "boolean", "", "also solve the coupled (TDHF) equations, not only uncoupled"),
    KeySpec("response.broadening", "number", "hartree", "eta > 0: complex frequencies omega + i eta", 0.0, 1.0),
    KeySpec("response.excitations", "integer", "", "lowest bound lines listed per multipole", 0,
            deck_module.MAX_EXCITATIONS),
    KeySpec("dispersion.partners", "array of strings", "", "systems paired with [atom] (\"He\", \"Na+\", ...);"
            " give one of partners, systems, pairs" + _SYSTEMS_TEXT),
    KeySpec("dispersion.systems", "array of strings", "", "every pair among [atom] and these, like pairs"
            " included" + _SYSTEMS_TEXT),
    KeySpec("dispersion.pairs", "array of strings", "", "exactly these pairs, each \"A:B\" (e.g. \"He:Ne\")" + _SYSTEMS_TEXT),
    KeySpec("dispersion.quadrature_points", "integer", "", "points of the imaginary-frequency quadrature",
            *QUADRATURE_RANGE),
)

_SECTIONS = {"atom": deck_module.AtomSection, "response": deck_module.ResponseSection,
             "dispersion": deck_module.DispersionSection}


def default_of(spec: KeySpec) -> Any:
    """The default of a deck key, read from the deck dataclasses and the default preset."""
    table, _, name = spec.key.rpartition(".")
    preset = ACCURACY_PRESETS["default"]
    if not table:
        return {"schema": deck_module.SCHEMA_VERSION, "accuracy": "default"}[name]
    if table == "grid":
        return "default" if name == "preset" else getattr(preset.grid, name)
    if table == "scf":
        return getattr(preset.scf, name)
    field = {f.name: f for f in dataclasses.fields(_SECTIONS[table])}[name]
    return None if field.default is dataclasses.MISSING else field.default


def _range_text(spec: KeySpec) -> str:
    if spec.choices:
        return ", ".join(f'"{c}"' if isinstance(c, str) else str(c) for c in spec.choices)
    if spec.low is None:
        return ""
    if spec.kind.endswith("integers") or spec.kind == "integer":
        return f"{spec.low:g}..{spec.high:g}"
    return f"{'(' if spec.low_open else '['}{spec.low:g}, {spec.high:g}{')' if spec.high_open else ']'}"


def _toml(value: Any) -> str:
    if value is None:
        return "(none)"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, tuple):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    return f"{value:g}" if isinstance(value, float) else str(value)


def deck_reference() -> str:
    """The deck reference (Markdown)."""
    lines = [
        "# Deck reference",
        "",
        "Generated from the code by `python -m tdhf.reference_docs`; do not edit by hand.",
        "",
        "A deck is a TOML file; only `[atom]` is required.  Every key is checked: an unknown key, a"
        " wrong type (a boolean is not an integer; an integer is accepted where a number is expected)"
        " or a value outside its range is an error that names the key.  Defaults are those of the"
        " `default` accuracy preset; `accuracy = \"tight\"` changes the grid and every tolerance.",
        "",
        "| key | type | default | allowed | unit | meaning |",
        "|---|---|---|---|---|---|",
    ]
    for spec in DECK_KEYS:
        default = "required" if spec.required else _toml(default_of(spec))
        lines.append(f"| `{spec.key}` | {spec.kind} | {default} | {_range_text(spec)} | {spec.unit} |"
                     f" {spec.meaning} |")
    lines += ["", "Accuracy presets:", "", "| preset | grid order | grid growth | SCF energy (hartree) |"
              " SCF orbitals | Krylov | RPA eigensolver |", "|---|---|---|---|---|---|---|"]
    for name, preset in ACCURACY_PRESETS.items():
        lines.append(f"| {name} | {preset.grid.order} | {preset.grid.growth} | {preset.scf.energy_tolerance:g} |"
                     f" {preset.scf.residual_tolerance:g} | {preset.tolerances.krylov_tolerance:g} |"
                     f" {preset.tolerances.eigen_tolerance:g} |")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------------------------
# Result fields from docstrings

_SECTION_HEADER = re.compile(r"^(\w[\w ]*)\n-{3,}$", re.MULTILINE)


def attribute_docs(cls: type) -> dict[str, str]:
    """Field descriptions of a dataclass: its numpydoc ``Attributes`` entries, else the first
    sentence of its docstring that names the field in double backquotes."""
    doc = inspect.cleandoc(cls.__doc__ or "")
    found: dict[str, str] = {}
    match = re.search(r"^Attributes\n-{3,}\n(.*?)(?=^\w[\w ]*\n-{3,}$|\Z)", doc, re.MULTILINE | re.DOTALL)
    if match:
        names: list[str] = []
        for line in match.group(1).splitlines():
            if line and not line.startswith(" "):
                names = [name.strip() for name in line.split(":")[0].split(",")]
                for name in names:
                    found.setdefault(name, "")
            elif line.strip():
                for name in names:
                    found[name] = (found[name] + " " + line.strip()).strip()
    prose = " ".join(doc[:match.start()].split()) if match else " ".join(doc.split())
    sentences = re.split(r"(?<=[.;])\s+(?=[A-Z`(])", prose)
    for field in dataclasses.fields(cls):
        if found.get(field.name):
            continue
        mention = next((s for s in sentences if f"``{field.name}``" in s), None)
        if mention:
            found[field.name] = mention
    return found


_ROLE = re.compile(r":(?:func|mod|data|class|attr|meth):`~?([^`]+)`")
_MATH = re.compile(r":math:`([^`]+)`")


def _markdown(text: str) -> str:
    """reStructuredText markup of a docstring as Markdown: ``x`` and :func:`x` become `x`."""
    text = _ROLE.sub(r"`\1`", text)
    text = _MATH.sub(r"\1", text)
    return text.replace("``", "`").replace("|", "\\|")


def _type_text(annotation: Any, seen: list[type]) -> str:
    origin = typing.get_origin(annotation)
    arguments = typing.get_args(annotation)
    if origin in (typing.Union, types.UnionType):
        parts = [_type_text(a, seen) for a in arguments if a is not type(None)]
        return " or ".join(parts) + (" or null" if type(None) in arguments else "")
    if origin is tuple:
        if len(arguments) == 2 and arguments[1] is Ellipsis:
            return f"list of {_type_text(arguments[0], seen)}"
        return "list [" + ", ".join(_type_text(a, seen) for a in arguments) + "]"
    if origin is dict:
        return "object"
    if dataclasses.is_dataclass(annotation):
        if annotation not in seen:
            seen.append(annotation)
        return f"[{annotation.__name__}](#{annotation.__name__.lower()})"
    return {bool: "boolean", int: "integer", float: "number", str: "string", complex: "complex"}.get(
        annotation, getattr(annotation, "__name__", str(annotation)))


def _class_section(cls: type, seen: list[type]) -> list[str]:
    docs = attribute_docs(cls)
    summary = inspect.cleandoc(cls.__doc__ or "").split("\n\n")[0].replace("\n", " ")
    hints = typing.get_type_hints(cls)
    lines = [f"### {cls.__name__}", "", _markdown(summary), "", "| key | type | meaning |", "|---|---|---|"]
    for field in dataclasses.fields(cls):
        if not field.metadata.get("json", True):
            continue
        meaning = _markdown(" ".join(docs.get(field.name, "").split()))
        lines.append(f"| `{field.name}` | {_type_text(hints[field.name], seen)} | {meaning} |")
    return lines + [""]


def undocumented_fields(roots: tuple[type, ...] = ()) -> list[str]:
    """``Class.field`` of every JSON field without a description (the test suite wants none)."""
    missing, seen = [], list(roots or _ROOTS)
    index = 0
    while index < len(seen):
        cls = seen[index]
        docs = attribute_docs(cls)
        hints = typing.get_type_hints(cls)
        for field in dataclasses.fields(cls):
            if field.metadata.get("json", True):
                _type_text(hints[field.name], seen)
                if not docs.get(field.name):
                    missing.append(f"{cls.__name__}.{field.name}")
        index += 1
    return missing


#: The top-level objects of the files tdhf writes: a result, a long-table row, a comparison.
_ROOTS = (RunResult, Quantity, TableRow, Comparison)


def field_reference() -> str:
    """The JSON/CSV field reference (Markdown)."""
    from tdhf.report import json_result
    from tdhf.report.serialize import CSV_COLUMNS

    lines = [
        "# Result fields",
        "",
        "Generated from the docstrings of the result types by `python -m tdhf.reference_docs`;"
        " do not edit by hand.  Every number is in atomic units (hartree, bohr; alpha_L in"
        " bohr^(2L+1)); JSON `null` stands for a number that does not exist (or is not finite).",
        "",
        "## Files",
        "",
        "* `tdhf run/atom/pairs --json`, `tdhf series --out`: a [RunResult](#runresult) object:",
        *("  * " + _markdown(" ".join(item.split())) for item in
          inspect.cleandoc(json_result.__doc__ or "").split("\n\n", 1)[-1].split("* ") if item.strip()),
        "* `tdhf series/table --table FILE.csv`: one [TableRow](#tablerow) per line (the header names"
        " the columns); `.md` and `.tex` show the same rows with the certified digits only.",
        "* `tdhf compare --json`: a [Comparison](#comparison) object; `--csv`: one"
        " [ComparisonRow](#comparisonrow) per line.",
        f"* `tdhf run/pairs --csv`: alpha_L(i omega) on the quadrature nodes, columns `{', '.join(CSV_COLUMNS)}`"
        " (see"
        " [ImaginaryFrequencyTable](#imaginaryfrequencytable): `weight` is the quadrature weight in"
        " hartree, so sum(weight x alpha_A x alpha_B) x 3/pi is C6).",
        "",
        "## Types",
        "",
    ]
    seen = list(_ROOTS)
    index = 0
    while index < len(seen):
        lines += _class_section(seen[index], seen)
        index += 1
    return "\n".join(lines)


#: The committed files and the functions that make them (paths relative to the repository).
DOCUMENTS: dict[str, Callable[[], str]] = {
    "docs/deck_reference.md": deck_reference,
    "docs/result_fields.md": field_reference,
}


def main(argv: list[str] | None = None) -> int:
    """Write the documents under the current folder, or with ``--check`` report which are stale."""
    argv = sys.argv[1:] if argv is None else argv
    check = "--check" in argv
    stale = []
    for name, make in DOCUMENTS.items():
        path = Path(name)
        text = make()
        if check:
            if not path.exists() or path.read_text(encoding="utf-8") != text:
                stale.append(name)
        else:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8")
    for name in stale:
        print(f"{name} is out of date; run python -m tdhf.reference_docs", file=sys.stderr)
    return 1 if stale else 0


if __name__ == "__main__":
    raise SystemExit(main())
