"""The generated documentation is current and says what the code does (common practice, no source).

The deck reference is checked against the validators themselves: every accepted key is documented,
every documented bound is accepted and every value just beyond it refused.
"""

import dataclasses
import re
from pathlib import Path

import pytest

from tdhf import deck as deck_module
from tdhf.deck import build_deck
from tdhf.errors import InputError
from tdhf.reference_docs import DECK_KEYS, DOCUMENTS, default_of, undocumented_fields

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("name", sorted(DOCUMENTS))
def test_committed_documents_are_current(name):
    assert (ROOT / name).read_text(encoding="utf-8") == DOCUMENTS[name](), \
        f"{name} is out of date; run python -m tdhf.reference_docs"


def test_every_result_field_is_documented():
    assert undocumented_fields() == []


def test_every_deck_key_is_documented():
    accepted = {"schema", "accuracy", "grid.preset"}
    sections = {"atom": deck_module.AtomSection, "grid": deck_module.GridSettings, "scf": deck_module.ScfSettings,
                "response": deck_module.ResponseSection, "dispersion": deck_module.DispersionSection}
    for table, cls in sections.items():
        accepted |= {f"{table}.{field.name}" for field in dataclasses.fields(cls)}
    assert {spec.key for spec in DECK_KEYS} == accepted


def _deck(key, value):
    table, _, name = key.rpartition(".")
    data = {"atom": {"element": "He"}}
    if not table:
        data[name] = value
    else:
        data.setdefault(table, {})[name] = value
    if table == "dispersion" and name == "quadrature_points":
        data["dispersion"]["partners"] = ["He"]
    return data


def _accepts(key, value):
    try:
        build_deck(_deck(key, value))
    except InputError:
        return False
    return True


@pytest.mark.parametrize("spec", [s for s in DECK_KEYS if s.low is not None], ids=lambda s: s.key)
def test_documented_ranges_are_the_validators(spec):
    array = spec.kind.startswith("array")
    integer = "integer" in spec.kind
    wrap = (lambda v: [v]) if array else (lambda v: v)
    for bound, open_, outward in ((spec.low, spec.low_open, -1), (spec.high, spec.high_open, +1)):
        bound = int(bound) if integer else float(bound)
        step = 1 if integer else max(abs(bound), 1.0) * 1e-9
        assert _accepts(spec.key, wrap(bound)) is not open_, f"{spec.key} = {bound}"
        assert not _accepts(spec.key, wrap(bound + outward * step)), f"{spec.key} = {bound + outward * step}"


@pytest.mark.parametrize("spec", [s for s in DECK_KEYS if s.choices], ids=lambda s: s.key)
def test_documented_choices_are_the_validators(spec):
    for choice in spec.choices:
        assert _accepts(spec.key, choice)
    assert not _accepts(spec.key, "nonsense" if isinstance(spec.choices[0], str) else 99)


def test_documented_defaults_are_what_a_deck_gets():
    deck = build_deck({"atom": {"element": "He"}, "response": {}, "dispersion": {"partners": ["He"]}})
    for spec in DECK_KEYS:
        table, _, name = spec.key.rpartition(".")
        if spec.required or not table or name == "preset" or (table == "dispersion" and name != "quadrature_points"):
            continue
        assert getattr(getattr(deck, table), name) == default_of(spec), spec.key


def test_the_python_example_in_the_readme_runs(capsys):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    (code,) = re.findall(r"## Python API\n\n```python\n(.*?)```", text, re.DOTALL)
    assert len(code.strip().splitlines()) <= 6
    exec(compile(code, "README.md", "exec"), {})
    # Ne coupled Hartree-Fock alpha_1(0) = 2.3767 bohr^3 (numerical CHF literature; from memory)
    assert "2.3767" in capsys.readouterr().out
