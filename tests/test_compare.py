"""tdhf compare: a user's numbers against the numerical limit, per row and ranked per label.

The perturbation tests build user values as reference x (1 + delta) from an independent run of
the same deck and check that compare returns delta (an identity of the arithmetic, no
outside source; the tolerance 1e-10 relative to delta allows the rounding of x (1 + delta)).
"""

import csv
import math

import pytest

from tdhf.compare import compare, reference_decks
from tdhf.deck import build_deck
from tdhf.driver import run_deck
from tdhf.errors import InputError
from tdhf.quantities import quantities
from tdhf.user_values import read_user_values

#: The numbers the user file names: (system, property, identifiers).
ROWS = [
    ("He", "total_energy", {}),
    ("He", "orbital_energy", {"orbital": "1s"}),
    ("He", "polarizability", {"multipole": 1, "frequency": 0.0}),
    ("He", "polarizability", {"multipole": 1, "frequency": 0.1}),
    ("He", "polarizability", {"multipole": 1, "frequency": 0.5, "imaginary": True}),
    ("He", "polarizability", {"multipole": 1, "frequency": 0.1, "level": "uncoupled"}),
    ("He", "sum_rule", {"multipole": 1, "k": -4}),
    ("He", "dipole_shielding", {"multipole": 1, "frequency": 0.1}),
    ("He", "C6", {"partner": "He"}),
    ("Be", "total_energy", {}),
    ("Be", "polarizability", {"multipole": 1, "frequency": 0.0}),
    ("Be", "C6", {"partner": "He"}),
]
COLUMNS = ("label", "system", "property", "value", "partner", "multipole", "frequency", "imaginary", "level", "k",
           "orbital")


def _direct_references():
    """The same decks compare builds, run directly: key -> value."""
    decks = {
        "He": {"atom": {"element": "He"}, "response": {"multipoles": [1], "frequencies": [0.0, 0.1],
                                                      "imaginary_frequencies": [0.5]},
               "dispersion": {"partners": ["He"]}},
        "Be": {"atom": {"element": "Be"}, "response": {"multipoles": [1], "frequencies": [0.0],
                                                      "imaginary_frequencies": []},
               "dispersion": {"partners": ["He"]}},
    }
    values = {}
    for system, data in decks.items():
        result = run_deck(build_deck({"accuracy": "default", **data}))
        for q in quantities(result):
            values[(q.system, q.partner, q.property, q.multipole, q.frequency, q.imaginary, q.level, q.k, q.orbital,
                    q.index)] = q.value
    return values


def _key(system, prop, ids):
    frequency = ids.get("frequency")
    has_frequency = prop in ("polarizability", "dipole_shielding")
    return (system, ids.get("partner"), prop, ids.get("multipole"),
            frequency if has_frequency else None, ids.get("imaginary", False) if has_frequency else None,
            None if prop in ("total_energy", "orbital_energy") else ids.get("level", "coupled"),
            ids.get("k"), ids.get("orbital"), None)


def _write(path, rows):
    with path.open("w", newline="") as stream:
        writer = csv.DictWriter(stream, COLUMNS)
        writer.writeheader()
        writer.writerows(rows)


@pytest.fixture(scope="module")
def references():
    return _direct_references()


def test_compare_returns_the_perturbations_and_ranks_the_labels(tmp_path, references):
    perturbations = {"wide basis": 1e-5, "small basis": 3e-3}
    rows, expected = [], []
    for label, size in perturbations.items():
        for number, (system, prop, ids) in enumerate(ROWS):
            delta = size * (1 + number % 3) * (-1) ** number
            reference = references[_key(system, prop, ids)]
            rows.append({"label": label, "system": system, "property": prop, "value": repr(reference * (1 + delta)),
                         **{k: (str(v).lower() if isinstance(v, bool) else v) for k, v in ids.items()}})
            expected.append(delta * math.copysign(1.0, reference))  # relative to |reference|
    path = tmp_path / "user.csv"
    _write(path, rows)
    result = compare(read_user_values(path), certify=False)
    assert [row.status for row in result.comparison] == ["ok"] * len(rows)
    for row, delta in zip(result.comparison, expected):
        assert abs(row.relative_deviation - delta) <= 1e-10 * abs(delta), (row, delta)
        assert row.deviation == pytest.approx(row.value - row.reference, rel=1e-15)
    best, worst = result.summary
    assert (best.label, best.rank, worst.label, worst.rank) == ("wide basis", 1, "small basis", 2)
    assert best.count == worst.count == len(ROWS)
    assert best.max_relative_deviation == pytest.approx(3e-5, rel=1e-9)
    # rms of (1, 2, 3, 1, 2, 3, ...) x size over the twelve rows: sqrt(14/3) x size
    assert worst.rms_relative_deviation == pytest.approx(math.sqrt(14 / 3) * 3e-3, rel=1e-9)
    assert [system.system for system in result.systems] == ["He", "Be"]


def test_reference_decks_ask_for_every_number_once_per_system(tmp_path):
    path = tmp_path / "user.csv"
    path.write_text("system,property,value,frequency,index,multipole,partner\n"
                    "Ne,polarizability,2.3,1064 nm,,,\n"
                    "Ne,polarizability,2.4,0.1,,2,\n"
                    "Ne,excitation_energy,0.67,,2,,\n"
                    "Ne,C6,6.3,,,,Ne\n"
                    "He,total_energy,-2.8,,,,\n")
    decks = reference_decks(read_user_values(path))
    assert list(decks) == ["Ne", "He"]
    ne = decks["Ne"]
    assert ne.response.multipoles == (1, 2) and ne.response.excitations == 2
    assert ne.response.frequencies == (pytest.approx(0.0428227, rel=1e-6), 0.1)
    assert ne.dispersion.partners == ("Ne",)
    assert decks["He"].response is None and decks["He"].dispersion is None


def test_a_frequency_on_a_pole_keeps_the_other_rows(tmp_path):
    """The pole is this code's own lowest He 1P line; the static row still gets its reference."""
    path = tmp_path / "user.csv"
    probe = run_deck(build_deck({"atom": {"element": "He"}, "response": {"excitations": 1}}))
    pole = probe.excitations[0].energy
    path.write_text(f"system,property,value,frequency\nHe,polarizability,1.3,0\nHe,polarizability,9,{pole!r}\n")
    result = compare(read_user_values(path), certify=False)
    first, second = result.comparison
    assert first.status == "ok" and first.reference == pytest.approx(probe.polarizabilities[0].coupled, rel=1e-10)
    assert second.reference is None and second.status.startswith("no reference: response.frequencies[1]")
    assert result.summary[0].count == 1 and len(result.problems) == 1


def test_certified_references_carry_their_uncertainty(tmp_path):
    path = tmp_path / "user.csv"
    path.write_text("system,property,value\nHe,total_energy,-2.86\n")
    (row,) = compare(read_user_values(path)).comparison
    # Certified: the grid, box and tolerance variations move E(He) by ~1e-13 hartree (measured);
    # the uncertainty is positive and far below the 1e-9 hartree the default grid promises.
    assert row.reference_uncertainty is not None and 0.0 < row.reference_uncertainty < 1e-9


@pytest.mark.parametrize("text, fragment", [
    ("system,property\nHe,total_energy\n", ":1: missing column 'value'"),
    ("system,property,value\nHe,polarisability,1\n", ":2: column property: 'polarisability' is not a property"
                                                   " tdhf compares; did you mean 'polarizability'?"),
    ("system,property,value\nNa,total_energy,1\n", ":2: column system: 'Na': open"),
    ("system,property,value\nQq,total_energy,1\n", ":2: column system: 'Qq'"),
    ("system,property,value\nHe,total_energy,1.2.3\n", ":2: column value: '1.2.3' is not a finite number"),
    ("system,property,value,frequency\nHe,polarizability,1,3 mm\n", ":2: column frequency: unknown frequency unit"),
    ("system,property,value\nHe,C6,1\n", ":2: column partner: empty; C6, C8 and C10 need it"),
    ("system,property,value,multipole\nHe,total_energy,1,1\n", ":2: column multipole: total_energy has no multipole"),
    ("system,property,value,orbital\nNe,orbital_energy,1,3s\n", ":2: column orbital: Ne has no occupied '3s'"),
    ("system,property,value,k\nNe,sum_rule,1,2\n", ":2: column k: S(2) is not computed"),
    ("system,property,value,unit\nNe,polarizability,1,m^3\n", ":2: column unit: 'm^3' is not a unit of polarizability"),
    ("system,property,value,level\nNe,C6,1,uncoupled\n", ":2: column level: 'uncoupled' is not a level of C6"),
    ("", ":1: empty file"),
])
def test_bad_user_files_name_file_line_and_column(tmp_path, text, fragment):
    path = tmp_path / "user.csv"
    path.write_text(text)
    with pytest.raises(InputError) as error:
        read_user_values(path)
    message = str(error.value)
    assert message.startswith(str(path)) and fragment in message and "\n" not in message


def test_units_and_extra_columns_of_a_user_file(tmp_path):
    path = tmp_path / "user.csv"
    path.write_text("comment,label,system,property,value,unit,frequency,frequency_unit\n"
                    "x,A,He,polarizability,0.2,angstrom^3,0.05,eV\n"
                    "y,,He,excitation_energy,21.0,eV,,\n")
    # the second row has no index: an excitation needs its line number
    with pytest.raises(InputError, match=":3: column index: empty"):
        read_user_values(path)
    path.write_text("label,system,property,value,unit,frequency,frequency_unit\n"
                    "A,He,polarizability,0.2,angstrom^3,0.05,eV\n")
    (value,) = read_user_values(path)
    # CODATA via scipy.constants: 1 bohr = 0.529177210544 angstrom, 1 hartree = 27.211386245981 eV
    assert value.value == pytest.approx(0.2 / 0.529177210544**3, rel=1e-12)
    assert value.frequency == pytest.approx(0.05 / 27.211386245981, rel=1e-12)
    assert (value.label, value.multipole, value.imaginary, value.level) == ("A", 1, False, "coupled")
