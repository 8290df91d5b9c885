"""Property-based tests (hypothesis): arbitrary decks, TOML documents and command lines never give
a traceback or an internal error (exit 1); they give a valid run or a one-line error naming the key.

Common practice, no source: this is the input contract of the README ("Exit codes").  Example
counts are fixed (``max_examples``) so the run is reproducible in size; real runs are tiny (He
with small grids); the command-line fuzz replaces the computation by a stored He result.
"""

from __future__ import annotations

import io
import json
import math
import re

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tdhf.cli
import tdhf.series  # imported before tdhf.driver.run_deck is patched, so it binds the real one
from tdhf.deck import build_deck, parse_deck
from tdhf.errors import InputError
from tdhf.radial.mesh import MAX_GRID_POINTS, GridSettings, build_grid, grid_size

#: A key path at the start of every deck error: "schema", "atom.element", "response.frequencies[2]", ...
KEY_PATH = re.compile(r'^(schema|atom|grid|scf|response|dispersion|"(?:[^"\\]|\\.)*"|[\w-]+|<string>)([.\[:]| |$)')

TABLE_KEYS = {
    "atom": ["element", "charge", "configuration"],
    "grid": ["preset", "order", "growth", "first_element", "r_max"],
    "scf": ["energy_tolerance", "residual_tolerance", "max_iterations", "diis_size", "damping"],
    "response": ["multipoles", "frequencies", "imaginary_frequencies", "coupled", "broadening"],
    "dispersion": ["partners", "systems", "quadrature_points"],
}

scalars = st.one_of(
    st.booleans(),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.sampled_from([0, 1, 2, 3, 4, 10, 24, 25, 96, 97, -1, -2, 118, 119]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, 1e-300, 1e-12, 0.1, 0.5, 1.0, 1.0000001, 1.9, 4.0, 40.0, 2000.0, 1e15, 1e16, 1e300]),
    st.text(max_size=8),
    st.sampled_from(["He", "H", "Ne", "Na+", "Cl-", "Mg2+", "O2-", "Xx", "1s2", "2p6", "1s2 2s2", "[Ne]", "tight",
                     "default", "../../etc/passwd", "/dev/zero"]),
)
values = st.recursive(scalars, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(st.text(max_size=4), inner, max_size=3), max_leaves=6)


@st.composite
def deck_data(draw):
    """Nested mappings shaped like decks: known tables and keys mostly, anything sometimes."""
    data = {}
    for table, keys in TABLE_KEYS.items():
        if draw(st.booleans()) or table == "atom" and draw(st.booleans()):
            known = draw(st.dictionaries(st.sampled_from(keys), values, max_size=len(keys)))
            extra = draw(st.dictionaries(st.text(max_size=6), values, max_size=1))
            data[table] = {**extra, **known} if draw(st.booleans()) else known
            if table == "atom" and draw(st.booleans()):
                data[table]["element"] = draw(st.sampled_from(["He", "H", 2, "Ne", 10]))
        elif draw(st.integers(0, 9)) == 0:
            data[table] = draw(values)
    if draw(st.integers(0, 5)) == 0:
        data[draw(st.text(max_size=6))] = draw(values)
    if draw(st.integers(0, 5)) == 0:
        data["schema"] = draw(values)
    return data


def assert_one_line_key_error(err: InputError) -> None:
    message = str(err)
    assert "\n" not in message and message, message
    assert KEY_PATH.match(message), message


@settings(max_examples=400, deadline=None)
@given(deck_data())
def test_any_deck_data_is_a_deck_or_a_one_line_error_naming_the_key(data):
    try:
        deck = build_deck(data)
    except InputError as err:
        assert_one_line_key_error(err)
    else:
        assert deck.atom.to_system().Z >= 1


def _toml(value) -> str:
    """TOML text of a value (a minimal writer for the test: inline tables and arrays)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    return "{" + ", ".join(f"{json.dumps(k)} = {_toml(v)}" for k, v in value.items()) + "}"


def _document(data) -> str:
    lines = [f"{json.dumps(k)} = {_toml(v)}" for k, v in data.items() if not isinstance(v, dict)]
    for key, table in data.items():
        if isinstance(table, dict):
            lines.append(f"[{json.dumps(key)}]")
            lines += [f"{json.dumps(k)} = {_toml(v)}" for k, v in table.items()]
    return "\n".join(lines) + "\n"


@settings(max_examples=300, deadline=None)
@given(deck_data() | st.dictionaries(st.text(max_size=5), values, max_size=4))
def test_any_toml_document_is_a_deck_or_a_one_line_error(data):
    try:
        parse_deck(_document(data))
    except InputError as err:
        assert_one_line_key_error(err)


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=200))
def test_any_text_is_a_deck_or_a_one_line_error(text):
    try:
        parse_deck(text)
    except InputError as err:
        assert_one_line_key_error(err)


@settings(max_examples=400, deadline=None)
@given(order=st.integers(4, 24), growth=st.floats(1.0 + 1e-12, 4.0), first=st.none() | st.floats(1e-4, 1.0),
       z=st.integers(1, 118), r_max=st.floats(5.0, 2000.0))
def test_grid_size_is_known_before_allocation_and_capped(order, growth, first, z, r_max):
    settings_ = GridSettings(order=order, growth=growth, first_element=first)
    elements, points = grid_size(settings_, z, r_max)
    if points > MAX_GRID_POINTS:
        with pytest.raises(InputError, match=rf"^grid: .* radial points .* above the limit of {MAX_GRID_POINTS}"):
            build_grid(settings_, z, r_max)
    else:
        grid = build_grid(settings_, z, r_max)
        assert (grid.n_elements, grid.size) == (elements, points) and grid.r_max == r_max
        sizes = grid.boundaries[1:] - grid.boundaries[:-1]
        assert (sizes[1:] / sizes[:-1] <= growth * (1 + 1e-9)).all()


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(order=st.integers(4, 12), growth=st.floats(1.3, 4.0), first=st.none() | st.floats(0.005, 0.5),
       r_max=st.none() | st.floats(15.0, 60.0), iterations=st.integers(1, 40), element=st.sampled_from(["He", "H"]))
def test_tiny_real_runs_end_in_a_documented_exit_code(tmp_path, order, growth, first, r_max, iterations, element):
    lines = [f'[atom]\nelement = "{element}"\n[grid]\norder = {order}\ngrowth = {growth!r}']
    lines += [f"first_element = {first!r}"] * (first is not None) + [f"r_max = {r_max!r}"] * (r_max is not None)
    lines += [f"[scf]\nmax_iterations = {iterations}"]
    deck = tmp_path / "deck.toml"
    deck.write_text("\n".join(lines) + "\n")
    out, err = io.StringIO(), io.StringIO()
    code = tdhf.cli.main(["run", str(deck), "--json", str(tmp_path / "out.json"), "-q"], stdout=out, stderr=err)
    assert code in (0, 3), err.getvalue()
    assert "Traceback" not in err.getvalue()
    data = json.loads((tmp_path / "out.json").read_text())
    assert data["ground_state"]["converged"] is (code == 0)


# --- command lines ------------------------------------------------------------------------------------

TOKENS = ["run", "atom", "pairs", "series", "He", "H", "Ne", "Xx", "Na", "Cl-", "O2-", "--json", "--csv", "--charge",
          "-1", "0", "1", "99999999999999999999", "--configuration", "1s2", "2p6", "--multipoles", "2", "4",
          "--frequencies", "0.1", "-0.1", "nan", "1e400", "1e15", "--imaginary", "--points", "8", "7", "--tight",
          "--certify", "-v", "-q", "--out", "--resume", "deck.toml", "missing.toml", "out.json", "alpha.csv",
          "results", "/dev/null", ".", "--help", "--version", "--bogus", ""]


@pytest.fixture(scope="module")
def helium_result():
    from tdhf.driver import run_deck

    return run_deck(parse_deck('[atom]\nelement = "He"\n'))


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.sampled_from(TOKENS) | st.text(max_size=6), max_size=9))
def test_any_command_line_gives_a_documented_exit_code(tmp_path, monkeypatch, helium_result, argv):
    """The computation is replaced by a stored He result; everything around it (arguments, decks,
    output checks, printing, writing, series bookkeeping) runs for real."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "deck.toml").write_text('[atom]\nelement = "He"\n')
    monkeypatch.setattr("tdhf.driver.run_deck", lambda deck, progress=None, map_tasks=None: helium_result)
    monkeypatch.setattr("tdhf.series.run_deck", lambda deck, progress=None, map_tasks=None: helium_result)
    monkeypatch.setattr("tdhf.certify.certify", lambda result, deck, progress=None: ())
    out, err = io.StringIO(), io.StringIO()
    code = tdhf.cli.main(argv, stdout=out, stderr=err)
    text = err.getvalue()
    assert code in (0, 2, 3, 4), (argv, text)
    assert "Traceback" not in text
    errors = [line for line in text.splitlines() if line.startswith("tdhf: error:")]
    if code == 2 and not argv[:1] == ["series"]:
        assert len(errors) == 1, (argv, text)
    assert all(line.startswith("tdhf: ") for line in text.splitlines()), (argv, text)
