"""Tests of tdhf.deck: parsing, defaults, round trips, partner names and the bad-deck fixtures."""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

import pytest

from tdhf.deck import (
    AtomSection,
    Deck,
    DispersionSection,
    ResponseSection,
    build_deck,
    format_deck,
    load_deck,
    parse_deck,
    parse_system_name,
)
from tdhf.errors import (
    ConfigurationError,
    DeckError,
    FrequencyError,
    GridError,
    InputError,
    OpenShellError,
    UnknownElementError,
)
from tdhf.radial.mesh import GridSettings
from tdhf.scf import ScfSettings

BAD_DECKS = Path(__file__).parent / "bad_decks"
INPUTS = Path(__file__).parent.parent / "inputs"

FULL_DECK = """
schema = 1

[atom]
element = "Mg"
charge = 2
configuration = "1s2 2s2 2p6"

[grid]
order = 12
growth = 1.6
first_element = 0.005
r_max = 50.0

[scf]
energy_tolerance = 1e-11
residual_tolerance = 1e-8
max_iterations = 80
diis_size = 6
damping = 0.3

[response]
multipoles = [1, 2, 3]
frequencies = [0.0, 0.1]
imaginary_frequencies = [0.25, 1]
coupled = false

[dispersion]
partners = ["He", "Na+", "Cl-", "Mg2+"]
quadrature_points = 16
"""


def test_minimal_deck_has_the_documented_defaults():
    deck = parse_deck('[atom]\nelement = "He"\n')
    assert deck == Deck(atom=AtomSection("He"), grid=GridSettings(), scf=ScfSettings(), response=None,
                        dispersion=None, schema=1)


def test_full_deck_reads_every_key():
    deck = parse_deck(FULL_DECK)
    assert deck.atom == AtomSection("Mg", 2, "1s2 2s2 2p6")
    assert deck.grid == GridSettings(order=12, growth=1.6, first_element=0.005, r_max=50.0)
    assert deck.scf == ScfSettings(1e-11, 1e-8, 80, 6, 0.3)
    assert deck.response == ResponseSection((1, 2, 3), (0.0, 0.1), (0.25, 1.0), False)
    assert deck.dispersion == DispersionSection(partners=("He", "Na+", "Cl-", "Mg2+"), quadrature_points=16)


@pytest.mark.parametrize("text", [FULL_DECK, '[atom]\nelement = 10\n[response]\n',
                                  '[atom]\nelement = "Ne"\n[grid]\npreset = "tight"\n[dispersion]\npartners = ["ne"]\n'],
                         ids=["full", "atomic-number", "tight-preset"])
def test_format_deck_round_trips(text):
    deck = parse_deck(text)
    again = parse_deck(format_deck(deck))
    assert again == deck
    assert format_deck(again) == format_deck(deck)


def test_integers_are_accepted_for_floats_and_stored_as_floats():
    deck = parse_deck('[atom]\nelement = "He"\n[grid]\ngrowth = 2\nr_max = 30\n[response]\nfrequencies = [0, 1]\n')
    assert type(deck.grid.growth) is float and deck.grid.growth == 2.0
    assert type(deck.grid.r_max) is float
    assert all(type(w) is float for w in deck.response.frequencies)


def test_tight_preset_with_an_override():
    deck = parse_deck('[atom]\nelement = "He"\n[grid]\npreset = "tight"\nr_max = 30.0\n')
    assert deck.grid == dataclasses.replace(GridSettings.tight(), r_max=30.0)


def test_empty_response_table_means_static_dipole():
    assert parse_deck('[atom]\nelement = "He"\n[response]\n').response == ResponseSection((1,), (0.0,), (), True)


def test_imaginary_frequencies_alone_are_enough():
    deck = parse_deck('[atom]\nelement = "He"\n[response]\nfrequencies = []\nimaginary_frequencies = [0.5]\n')
    assert deck.response.frequencies == () and deck.response.imaginary_frequencies == (0.5,)


def test_build_deck_validates_like_parse_deck():
    with pytest.raises(FrequencyError, match=r"^response\.frequencies\[0\]: -1\.0 is negative"):
        build_deck({"atom": {"element": "He"}, "response": {"frequencies": [-1.0]}})


def test_load_deck_reads_a_file_and_names_it_in_syntax_errors(tmp_path):
    good = tmp_path / "he.toml"
    good.write_text('[atom]\nelement = "He"\n')
    assert load_deck(good).atom.element == "He"
    bad = tmp_path / "broken.toml"
    bad.write_text('[atom]\nelement = "He"\nelement = "Ne"\n')
    with pytest.raises(DeckError, match=r"broken\.toml:\d+:\d+: malformed TOML"):
        load_deck(bad)


def test_missing_deck_file(tmp_path):
    with pytest.raises(DeckError, match="no such deck file"):
        load_deck(tmp_path / "absent.toml")


def test_non_utf8_deck(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(b'[atom]\nelement = "\xe9"\n')
    with pytest.raises(DeckError, match="not a UTF-8 text file"):
        load_deck(path)


@pytest.mark.parametrize(
    ("text", "expected"),
    [("He", ("He", 0)), ("Na+", ("Na", 1)), ("Cl-", ("Cl", -1)), ("Mg2+", ("Mg", 2)), ("O2-", ("O", -2)),
     ("ne", ("Ne", 0)), (" Ar ", ("Ar", 0)), ("Ca1+", ("Ca", 1))],
)
def test_parse_system_name(text, expected):
    assert parse_system_name(text) == expected


@pytest.mark.parametrize(("text", "error"), [
    ("Mg+2", DeckError), ("Na++", DeckError), ("2He", DeckError), ("", DeckError), ("Na0+", DeckError),
    ("Xx", UnknownElementError), ("Qq+", UnknownElementError),
])
def test_parse_system_name_rejects(text, error):
    with pytest.raises(error, match=r"^dispersion\.partners\[3\]: "):
        parse_system_name(text, "dispersion.partners[3]")


def test_partner_names_are_stored_canonically():
    deck = parse_deck('[atom]\nelement = "He"\n[dispersion]\npartners = ["ne", "na1+"]\n')
    assert deck.dispersion.partners == ("Ne", "Na+")


# File name -> (exception class, fragments the message must contain).  Every message is a single
# line starting with the first fragment: the key path it names.
BAD_DECK_ERRORS: dict[str, tuple[type[InputError], tuple[str, ...]]] = {
    "malformed_toml.toml": (DeckError, ("malformed_toml.toml:3:14: malformed TOML", "Illegal character")),
    "unknown_key.toml": (DeckError, ("grid.growht: unknown key", "did you mean grid.growth?")),
    "unknown_table.toml": (DeckError, ("respons: unknown table", "did you mean [response]?")),
    "unknown_top_level_key.toml": (DeckError, ("element: unknown key", "[atom]")),
    "missing_atom.toml": (DeckError, ("atom: missing table [atom]",)),
    "table_as_value.toml": (DeckError, ("grid: expected a table [grid], got integer 12",)),
    "schema_2.toml": (DeckError, ("schema: 2 is not supported", "schema 1")),
    "unknown_element.toml": (UnknownElementError, ("atom.element: 'Xx' is not a known element",)),
    "open_shell.toml": (OpenShellError, ("atom.configuration: open (partially filled) subshell 2p5",
                                         "F- (charge -1)")),
    "charge_mismatch.toml": (ConfigurationError, ("atom.configuration: '1s2 2s2 2p6' has 10 electrons",
                                                  "atom.charge 1 has 9")),
    "charge_not_integer.toml": (DeckError, ("atom.charge: expected an integer, got float 1.0",)),
    "negative_r_max.toml": (GridError, ("grid.r_max: -20.0 bohr must be in [5, 2000]",)),
    "order_99.toml": (GridError, ("grid.order: 99 is not an integer in 4..24",)),
    "unknown_preset.toml": (DeckError, ("grid.preset: 'tighter' is unknown", '"tight"')),
    "bool_for_int.toml": (DeckError, ("scf.max_iterations: expected an integer, got boolean true",)),
    "negative_damping.toml": (DeckError, ("scf.damping: -0.2 must be in [0, 1)",)),
    "negative_frequency.toml": (FrequencyError, (
        "response.frequencies[2]: -0.1 is negative; frequencies are in hartree and must be >= 0",)),
    "infinite_frequency.toml": (DeckError, ("response.imaginary_frequencies[1]: inf is not a finite number",)),
    "multipole_4.toml": (DeckError, ("response.multipoles[1]: 4 is not in 1..3", "quadrupole")),
    "no_frequencies.toml": (DeckError, ("response: both frequencies and imaginary_frequencies are empty",)),
    "empty_partners.toml": (DeckError, ("dispersion.partners: empty array",)),
    "duplicate_partners.toml": (DeckError, ('dispersion.partners[2]: "He" repeats dispersion.partners[0]',)),
    "unreadable_partner.toml": (DeckError, ("dispersion.partners[1]: cannot read 'Mg+2'", '"Mg2+"')),
    "open_shell_partner.toml": (OpenShellError, ("dispersion.partners[0]: 'F': open (partially filled)",
                                                 "F- (charge -1)")),
    "quadrature_points_4.toml": (DeckError, ("dispersion.quadrature_points: 4 is not in 8..96",)),
}


def test_every_bad_deck_fixture_has_an_expected_error():
    assert sorted(p.name for p in BAD_DECKS.glob("*.toml")) == sorted(BAD_DECK_ERRORS)


@pytest.mark.parametrize("name", sorted(BAD_DECK_ERRORS))
def test_bad_deck(name):
    error, fragments = BAD_DECK_ERRORS[name]
    with pytest.raises(InputError) as caught:
        load_deck(BAD_DECKS / name)
    message = str(caught.value)
    assert type(caught.value) is error
    assert "\n" not in message
    for fragment in fragments:
        assert fragment in message
    # the message starts with the key path (TOML syntax errors: with file:line:column)
    assert message.removeprefix(f"{BAD_DECKS}{os.sep}").startswith(fragments[0])


@pytest.mark.parametrize("path", sorted(INPUTS.glob("*.toml")), ids=lambda p: p.name)
def test_example_inputs_load(path):
    deck = load_deck(path)
    assert parse_deck(format_deck(deck)) == deck


def test_dispersion_takes_partners_or_systems_or_pairs():
    deck = parse_deck('[atom]\nelement = "He"\n[dispersion]\nsystems = ["Ne", "Ar"]\n')
    assert deck.dispersion == DispersionSection(systems=("Ne", "Ar"))
    with pytest.raises(InputError, match=r"^dispersion: give one of partners .*, systems .* or pairs"):
        parse_deck('[atom]\nelement = "He"\n[dispersion]\nsystems = ["Ne"]\npartners = ["Ar"]\n')


def test_explicit_pairs_are_canonical_and_given_once():
    deck = parse_deck('[atom]\nelement = "He"\n[dispersion]\npairs = ["na1+:Ne", "Ar:Kr"]\n')
    assert deck.dispersion.pairs == ("Na+:Ne", "Ar:Kr") and deck.dispersion.names == ("Na+", "Ne", "Ar", "Kr")
    for text, fragment in (('["He:Ne", "Ne:He"]', 'dispersion.pairs[1]: \'Ne:He\' repeats He:Ne'),
                           ('["He"]', "dispersion.pairs[0]: 'He' is not a pair"),
                           ('["He:Na"]', "dispersion.pairs[0]: 'Na': open")):
        with pytest.raises(InputError) as error:
            parse_deck(f'[atom]\nelement = "He"\n[dispersion]\npairs = {text}\n')
        assert str(error.value).startswith(fragment)


def test_frequencies_may_carry_units():
    """CODATA via scipy.constants: 2.5 eV = 2.5 / 27.211386245981 hartree."""
    deck = parse_deck('[atom]\nelement = "He"\n[response]\nfrequencies = [0.1, "2.5 eV"]\n')
    assert deck.response.frequencies == (0.1, pytest.approx(2.5 / 27.211386245981, rel=1e-12))
    with pytest.raises(InputError, match=r"^response.frequencies\[1\]: unknown frequency unit 'mm'; use one of"):
        parse_deck('[atom]\nelement = "He"\n[response]\nfrequencies = [0.1, "3 mm"]\n')
