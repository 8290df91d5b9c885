"""Units at the edges: frequencies read with units, numbers shown in SI and spectroscopic units.

Every reference value is recomputed here from scipy.constants (CODATA, a general-purpose
reference library) by a different route than tdhf.units takes (e.g. hc/lambda from h, c and
the hartree in joule, where tdhf uses the hartree-inverse-metre relationship); CODATA's
relationships agree to their ~1e-12 relative uncertainties, hence the tolerances.
"""

import math

import pytest
import scipy.constants as sc

from tdhf.errors import InputError
from tdhf.units import FREQUENCY_UNITS, UNIT_SYSTEMS, display_unit, frequency_unit, parse_frequency, to_atomic

HARTREE_J = sc.physical_constants["Hartree energy"][0]
BOHR_M = sc.physical_constants["Bohr radius"][0]
CODATA_RTOL = 1e-10


@pytest.mark.parametrize("text, joule", [
    ("1064 nm", sc.h * sc.c / 1064e-9),
    ("2.5 eV", 2.5 * sc.e),
    ("25 meV", 0.025 * sc.e),
    ("300 THz", sc.h * 300e12),
    ("9398 cm^-1", sc.h * sc.c * 939800.0),
    ("9398 cm-1", sc.h * sc.c * 939800.0),
    ("0.1 hartree", 0.1 * HARTREE_J),
])
def test_frequencies_with_units_are_photon_energies(text, joule):
    """CODATA via scipy.constants: E = h c / lambda, E = h nu, E = e x (volts)."""
    assert parse_frequency(text, "response.frequencies[0]") == pytest.approx(joule / HARTREE_J, rel=CODATA_RTOL)


def test_plain_numbers_are_hartree():
    assert parse_frequency(0.25, "key") == 0.25
    assert parse_frequency(3, "key") == 3.0
    assert parse_frequency(2.0, "key", unit="eV") == pytest.approx(2.0 * sc.e / HARTREE_J, rel=CODATA_RTOL)


@pytest.mark.parametrize("value, fragment", [
    ("3 mm", "unknown frequency unit 'mm'; use one of hartree"),
    ("fast", "cannot read 'fast'"),
    ("-1 eV", "must be finite and >= 0"),
    ("0 nm", "a wavelength of 0 nm has no photon energy"),
    (True, "expected a number in hartree"),
    (float("inf"), "must be finite"),
])
def test_bad_frequencies_name_the_key_and_the_accepted_units(value, fragment):
    with pytest.raises(InputError) as error:
        parse_frequency(value, "response.frequencies[2]")
    message = str(error.value)
    assert message.startswith("response.frequencies[2]: ") and fragment in message and "\n" not in message


def test_a_unit_given_twice_is_refused():
    with pytest.raises(InputError, match="also given"):
        parse_frequency("2 eV", "f.csv:3: column frequency", unit="nm")


def test_every_accepted_unit_reads_a_positive_number():
    for name in FREQUENCY_UNITS:
        assert parse_frequency(f"1 {name}", "key") > 0.0


@pytest.mark.parametrize("system, property, atomic, label, factor", [
    ("si", "polarizability", "bohr^3", "10^-41 C m^2 V^-1",
     sc.physical_constants["atomic unit of electric polarizability"][0] / 1e-41),
    ("si", "polarizability", "bohr^5", "10^-62 C m^4 V^-1", sc.e**2 * BOHR_M**4 / HARTREE_J / 1e-62),
    ("spectroscopic", "polarizability", "bohr^3", "angstrom^3", (BOHR_M / sc.angstrom) ** 3),
    ("si", "total_energy", "hartree", "10^-18 J", HARTREE_J / 1e-18),
    ("spectroscopic", "excitation_energy", "hartree", "eV", HARTREE_J / sc.e),
    ("spectroscopic", "C6", "hartree bohr^6", "meV angstrom^6", HARTREE_J / sc.e * 1e3 * (BOHR_M / sc.angstrom) ** 6),
    ("si", "C6", "hartree bohr^6", "10^-80 J m^6", HARTREE_J * BOHR_M**6 / 1e-80),
    ("spectroscopic", "sum_rule", "hartree^-2 bohr^2", "eV^-2 angstrom^2",
     (HARTREE_J / sc.e) ** -2 * (BOHR_M / sc.angstrom) ** 2),
    ("si", "dipole_shielding", "1", "1", 1.0),
    ("atomic", "C6", "hartree bohr^6", "hartree bohr^6", 1.0),
])
def test_display_units_follow_codata(system, property, atomic, label, factor):
    """CODATA via scipy.constants; alpha_L in SI is e^2 a0^(2L) / E_h (C m^(2L) V^-1)."""
    unit = display_unit(property, atomic, system)
    assert unit.label == label
    assert unit.factor == pytest.approx(factor, rel=CODATA_RTOL)
    assert to_atomic(2.5 * unit.factor, unit.label, property, atomic, "key") == pytest.approx(2.5, rel=1e-15)


def test_frequencies_take_the_energy_unit():
    assert frequency_unit("spectroscopic").label == "eV"
    assert frequency_unit("atomic").factor == 1.0
    assert {frequency_unit(system).label for system in UNIT_SYSTEMS} == {"hartree", "eV", "10^-18 J"}


def test_a_wrong_unit_lists_the_accepted_ones():
    with pytest.raises(InputError) as error:
        to_atomic(1.0, "m^3", "polarizability", "bohr^3", "f.csv:2: column unit")
    assert "'bohr^3', '10^-41 C m^2 V^-1', 'angstrom^3'" in str(error.value)
    with pytest.raises(InputError, match="--units: 'imperial' is unknown"):
        display_unit("C6", "hartree bohr^6", "imperial")


def test_si_scale_puts_one_atomic_unit_between_1_and_10():
    for atomic in ("hartree", "bohr^3", "hartree bohr^8", "hartree^-4"):
        factor = display_unit("sum_rule" if "^-" in atomic else "C8", atomic, "si").factor
        assert 1.0 <= factor < 10.0 and math.isfinite(factor)
