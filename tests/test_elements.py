"""Tests of tdhf.elements: symbols, subshells, configurations and the closed-shell check."""

from __future__ import annotations

import pytest

from tdhf.elements import (
    L_LETTERS,
    SYMBOLS,
    Subshell,
    atomic_number,
    closed_shell_charges,
    default_configuration,
    electron_count,
    format_configuration,
    ion_name,
    neutral_configuration,
    parse_configuration,
    require_closed_shell,
    symbol,
)
from tdhf.errors import ConfigurationError, InputError, OpenShellError, UnknownElementError

# ground-state configuration, from memory (standard periodic-table data)
NOBLE_GAS_CORES = {
    "He": "1s2",
    "Ne": "1s2 2s2 2p6",
    "Ar": "1s2 2s2 2p6 3s2 3p6",
    "Kr": "1s2 2s2 2p6 3s2 3p6 3d10 4s2 4p6",
    "Xe": "1s2 2s2 2p6 3s2 3p6 3d10 4s2 4p6 4d10 5s2 5p6",
    "Rn": "1s2 2s2 2p6 3s2 3p6 3d10 4s2 4p6 4d10 4f14 5s2 5p6 5d10 6s2 6p6",
}


def fmt(text: str) -> str:
    """Canonical full string of an expected configuration written with a core, e.g. "[Ar]3d10"."""
    return format_configuration(parse_configuration(text))


def config(element: str, charge: int = 0) -> str:
    return format_configuration(default_configuration(atomic_number(element), charge))


# --- symbols and lookup ---------------------------------------------------------------------


def test_symbols_count_and_unique():
    assert len(SYMBOLS) == 118
    assert len(set(SYMBOLS)) == 118
    assert L_LETTERS == "spdfghik"


@pytest.mark.parametrize(
    "z, sym",
    [(1, "H"), (2, "He"), (10, "Ne"), (26, "Fe"), (54, "Xe"), (74, "W"), (79, "Au"), (92, "U"),
     (102, "No"), (110, "Ds"), (112, "Cn"), (113, "Nh"), (114, "Fl"), (115, "Mc"), (116, "Lv"),
     (117, "Ts"), (118, "Og")],
)
def test_symbol_spot_checks(z, sym):
    assert SYMBOLS[z - 1] == sym
    assert symbol(z) == sym
    assert atomic_number(sym) == z


@pytest.mark.parametrize("text", ["ne", "NE", "Ne", "nE", " Ne ", "10", " 10", 10])
def test_atomic_number_case_insensitive_and_numeric(text):
    assert atomic_number(text) == 10


@pytest.mark.parametrize("bad", ["Xx", 0, 119, -1, "", "  ", "0", "119", True, False, None, 10.0,
                                 "N e", "Neon"])
def test_unknown_element(bad):
    with pytest.raises(UnknownElementError) as info:
        atomic_number(bad)
    message = str(info.value)
    assert isinstance(info.value, InputError) and isinstance(info.value, ValueError)
    assert message.startswith("atom.element: ")
    assert repr(bad) in message
    assert '"Ne"' in message and "1-118" in message


def test_unknown_element_message_exact():
    with pytest.raises(UnknownElementError, match=r"^atom\.element: 'Xx' is not a known element; "
                       r'give a symbol such as "Ne" or an atomic number 1-118$'):
        atomic_number("Xx")


@pytest.mark.parametrize("bad", [0, 119, True, "Ne", 2.0])
def test_symbol_rejects_bad_z(bad):
    with pytest.raises(UnknownElementError):
        symbol(bad)


# --- Subshell -------------------------------------------------------------------------------


def test_subshell_properties():
    p = Subshell(2, 1, 6)
    assert (p.capacity, p.is_closed, p.label, str(p)) == (6, True, "2p", "2p6")
    d = Subshell(3, 2, 4)
    assert (d.capacity, d.is_closed, d.label, str(d)) == (10, False, "3d", "3d4")
    assert Subshell(8, 7, 30).label == "8k"  # 'j' is skipped
    assert Subshell(5, 4, 0).capacity == 18


@pytest.mark.parametrize("n, l, occ", [(0, 0, 1), (1, 1, 1), (2, -1, 1), (2, 0, 3), (2, 1, -1),
                                       (2, 1, 7), (9, 8, 1), (1.0, 0, 1), (True, 0, 1)])
def test_subshell_invalid(n, l, occ):
    with pytest.raises(ConfigurationError, match=r"^atom\.configuration: [^\n]+$"):
        Subshell(n, l, occ)


# --- neutral atoms --------------------------------------------------------------------------


@pytest.mark.parametrize("z", range(1, 119))
def test_neutral_configuration_is_consistent(z):
    cfg = neutral_configuration(z)
    assert electron_count(cfg) == z
    assert [(s.n, s.l) for s in cfg] == sorted((s.n, s.l) for s in cfg)
    assert all(s.occupation > 0 for s in cfg)


# ground-state configuration, from memory (standard periodic-table data)
CLOSED_NEUTRALS = [
    ("He", "1s2"), ("Be", "[He]2s2"), ("Ne", "[Ne]"), ("Mg", "[Ne]3s2"), ("Ar", "[Ar]"),
    ("Ca", "[Ar]4s2"), ("Zn", "[Ar]3d10 4s2"), ("Kr", "[Ar]3d10 4s2 4p6"), ("Sr", "[Kr]5s2"),
    ("Pd", "[Kr]4d10"), ("Cd", "[Kr]4d10 5s2"), ("Xe", "[Kr]4d10 5s2 5p6"), ("Ba", "[Xe]6s2"),
    ("Yb", "[Xe]4f14 6s2"), ("Hg", "[Xe]4f14 5d10 6s2"), ("Rn", "[Xe]4f14 5d10 6s2 6p6"),
    ("No", "[Rn]5f14 7s2"),
]


@pytest.mark.parametrize("element, expected", CLOSED_NEUTRALS)
def test_closed_shell_neutral_atoms(element, expected):
    cfg = neutral_configuration(atomic_number(element))
    assert format_configuration(cfg) == fmt(expected)
    assert all(s.is_closed for s in cfg)
    require_closed_shell(atomic_number(element), 0, cfg)


def test_palladium_has_no_5s():
    # ground-state configuration, from memory (standard periodic-table data)
    labels = [s.label for s in neutral_configuration(46)]
    assert labels[-1] == "4d" and "5s" not in labels


def test_set_of_closed_shell_neutrals():
    # ground-state configuration, from memory (standard periodic-table data): Ra, Cn and Og are
    # closed as well (Cn and Og by Madelung filling).
    closed = {z for z in range(1, 119) if all(s.is_closed for s in neutral_configuration(z))}
    expected = {atomic_number(e) for e, _ in CLOSED_NEUTRALS} | {88, 112, 118}
    assert closed == expected


# ground-state configuration, from memory (standard periodic-table data)
@pytest.mark.parametrize("element, expected", [
    ("H", "1s1"), ("O", "[He]2s2 2p4"), ("Fe", "[Ar]3d6 4s2"),
    ("Cr", "[Ar]3d5 4s1"), ("Cu", "[Ar]3d10 4s1"), ("Nb", "[Kr]4d4 5s1"), ("Mo", "[Kr]4d5 5s1"),
    ("Ru", "[Kr]4d7 5s1"), ("Rh", "[Kr]4d8 5s1"), ("Ag", "[Kr]4d10 5s1"),
    ("La", "[Xe]5d1 6s2"), ("Ce", "[Xe]4f1 5d1 6s2"), ("Gd", "[Xe]4f7 5d1 6s2"),
    ("Pt", "[Xe]4f14 5d9 6s1"), ("Au", "[Xe]4f14 5d10 6s1"), ("Ac", "[Rn]6d1 7s2"),
    ("Th", "[Rn]6d2 7s2"), ("Pa", "[Rn]5f2 6d1 7s2"), ("U", "[Rn]5f3 6d1 7s2"),
    ("Np", "[Rn]5f4 6d1 7s2"), ("Cm", "[Rn]5f7 6d1 7s2"),
    ("Lr", "[Rn]5f14 6d1 7s2"),  # Madelung kept (7s2 7p1 is disputed)
    ("Og", "[Rn]5f14 6d10 7s2 7p6"),
])
def test_neutral_exceptions_and_madelung(element, expected):
    assert config(element) == fmt(expected)


# --- ions -----------------------------------------------------------------------------------


# ground-state configuration, from memory (standard periodic-table data)
@pytest.mark.parametrize("element, charge, expected", [
    ("Zn", 2, "[Ar]3d10"), ("Cu", 1, "[Ar]3d10"), ("Ag", 1, "[Kr]4d10"),
    ("Tl", 1, "[Xe]4f14 5d10 6s2"), ("Pb", 2, "[Xe]4f14 5d10 6s2"), ("La", 3, "[Xe]"),
    ("Ce", 4, "[Xe]"), ("Na", 1, "[Ne]"), ("Mg", 2, "[Ne]"), ("K", 1, "[Ar]"), ("Ca", 2, "[Ar]"),
    ("Hg", 2, "[Xe]4f14 5d10"), ("Li", 1, "1s2"), ("Be", 2, "1s2"),
    ("H", -1, "1s2"), ("F", -1, "[Ne]"), ("Cl", -1, "[Ar]"), ("Br", -1, "[Kr]"), ("I", -1, "[Xe]"),
    ("Li", -1, "1s2 2s2"), ("Au", -1, "[Xe]4f14 5d10 6s2"), ("O", -2, "[Ne]"), ("N", -3, "[Ne]"),
])
def test_default_ion_configurations(element, charge, expected):
    assert config(element, charge) == fmt(expected)
    assert all(s.is_closed for s in default_configuration(atomic_number(element), charge))


@pytest.mark.parametrize("element, charge", [("H", 0), ("He", 1), ("Li", 2), ("Og", 117)])
def test_one_electron_systems(element, charge):
    assert config(element, charge) == "1s1"


@pytest.mark.parametrize("z, charge", [(11, 11), (11, 12), (1, 1)])
def test_default_configuration_needs_an_electron(z, charge):
    with pytest.raises(ConfigurationError, match=r"^atom\.charge: .*at most"):
        default_configuration(z, charge)


@pytest.mark.parametrize("charge", [1.0, "1", True, None])
def test_default_configuration_rejects_non_integer_charge(charge):
    with pytest.raises(ConfigurationError, match=r"^atom\.charge: "):
        default_configuration(11, charge)


@pytest.mark.parametrize("z, charge, name", [(10, 0, "Ne"), (11, 1, "Na+"), (12, 2, "Mg2+"),
                                             (9, -1, "F-"), (8, -2, "O2-"), (92, 91, "U91+")])
def test_ion_name(z, charge, name):
    assert ion_name(z, charge) == name


# --- parsing and formatting -----------------------------------------------------------------


@pytest.mark.parametrize("text, expected", [
    ("1s2 2s2 2p6", "1s2 2s2 2p6"), ("1s2.2s2.2p6", "1s2 2s2 2p6"), ("1s2. 2s2", "1s2 2s2"),
    ("  1s2   2s2\t2p6 ", "1s2 2s2 2p6"), ("2p6 1s2 2s2", "1s2 2s2 2p6"), ("1s", "1s1"),
    ("1s2 2s 2p", "1s2 2s1 2p1"), ("[Ne] 3s2", "1s2 2s2 2p6 3s2"), ("[Ne]3s2", "1s2 2s2 2p6 3s2"),
    ("[ne] 3s2", "1s2 2s2 2p6 3s2"), ("[He]", "1s2"), ("1s2 2p0", "1s2"), ("10s2", "10s2"),
    ("[Xe]4f14 5d10 6s2", "1s2 2s2 2p6 3s2 3p6 3d10 4s2 4p6 4d10 4f14 5s2 5p6 5d10 6s2"),
])
def test_parse_configuration(text, expected):
    cfg = parse_configuration(text)
    assert format_configuration(cfg) == expected
    assert [(s.n, s.l) for s in cfg] == sorted((s.n, s.l) for s in cfg)


@pytest.mark.parametrize("core, expected", sorted(NOBLE_GAS_CORES.items()))
def test_parse_noble_gas_cores(core, expected):
    assert format_configuration(parse_configuration(f"[{core}]")) == expected
    assert format_configuration(neutral_configuration(atomic_number(core))) == expected


@pytest.mark.parametrize("text, fragment", [
    ("", "empty"), ("   ", "empty"), ("1s2 1s2", "'1s2'"), ("1s2 1s1", "given in '1s2'"),
    ("[Ne] 2p6", "[Ne] core"), ("1p2", "'1p2'"), ("2d1", "start at 3d"), ("2p7", "'2p7'"),
    ("3d11", "at most 10"), ("4j2", "'j'"), ("2x1", "'x'"), ("s2", "'s2'"), ("2p-1", "'2p-1'"),
    ("[Na] 3s1", "[Na]"), ("1s2 [Ne]", "'[Ne]'"), ("0s1", "'0s1'"), ("1s2,2s2", "'1s2,2s2'"),
])
def test_parse_configuration_errors(text, fragment):
    with pytest.raises(ConfigurationError) as info:
        parse_configuration(text)
    message = str(info.value)
    assert message.startswith("atom.configuration: ")
    assert fragment in message
    assert "\n" not in message


def test_format_and_count():
    cfg = (Subshell(2, 1, 6), Subshell(1, 0, 2), Subshell(2, 0, 2))
    assert format_configuration(cfg) == "1s2 2s2 2p6"
    assert electron_count(cfg) == 10
    assert electron_count(()) == 0


# --- closed-shell check ---------------------------------------------------------------------


@pytest.mark.parametrize("z, charge, text", [(10, 0, "[Ne]"), (11, 1, "[He]2s2 2p6"),
                                             (9, -1, "1s2 2s2 2p6"), (4, 0, "1s2 2s2")])
def test_require_closed_shell_accepts_closed(z, charge, text):
    require_closed_shell(z, charge, parse_configuration(text))


@pytest.mark.parametrize("z, charge, text", [(1, 0, "1s1"), (2, 1, "1s1"), (3, 2, "1s"),
                                             (92, 91, "1s1"), (1, 0, "2p1")])
def test_require_closed_shell_accepts_one_electron(z, charge, text):
    require_closed_shell(z, charge, parse_configuration(text))


# Suggested charge states follow default_configuration; that F- = Na+ = [Ne], Li+ = 1s2, O2- = [Ne]
# and Mg2+ = [Ne] are closed: ground-state configuration, from memory (standard periodic-table data)
@pytest.mark.parametrize("z, charge, text, open_part, suggestions", [
    (9, 0, "[He]2s2 2p5", "2p5", ["F- (charge -1)", "F5+ (charge 5)"]),
    (11, 0, "[Ne]3s1", "3s1", ["Na+ (charge 1)", "Na- (charge -1)"]),
    (3, 0, "1s2 2s1", "2s1", ["Li+ (charge 1)", "Li- (charge -1)"]),
    (8, 0, "[He]2s2 2p4", "2p4", ["O4+ (charge 4)"]),  # not O2-: HF does not bind it (LOWEST_BOUND_CHARGE)
    (12, 0, "[Ne]3s1 3p1", "3s1 3p1", ["Mg (charge 0)", "Mg2+ (charge 2)"]),
])
def test_require_closed_shell_open_shell(z, charge, text, open_part, suggestions):
    with pytest.raises(OpenShellError) as info:
        require_closed_shell(z, charge, parse_configuration(text))
    message = str(info.value)
    assert isinstance(info.value, ConfigurationError)
    assert message.startswith("atom.configuration: ")
    assert open_part in message
    for item in suggestions:
        assert item in message
    listed = message.split(": ")[-1].split(";")[0].split(", ")
    assert 1 <= len(listed) <= 4
    assert "2-" not in message


@pytest.mark.slow
def test_suggested_anions_are_the_ones_hartree_fock_binds():
    """Self-consistency of LOWEST_BOUND_CHARGE: a suggested anion solves, the dianion below it does not."""
    from tdhf.radial.mesh import GridSettings, build_grid
    from tdhf.scf import solve_scf

    def homo(z: int, charge: int) -> float:  # the SCF alone: System refuses dianions up front
        grid = build_grid(GridSettings(), z, 80.0)
        return float(solve_scf(grid, z, default_configuration(z, charge)).orbital_energies.max())

    for z in (8, 16):  # O2-, S2- (closed shells): the outermost orbital is in the (box) continuum
        assert homo(z, -2) > 0.0
        with pytest.raises(ConfigurationError, match="binds no anion"):
            require_closed_shell(z, -2, default_configuration(z, -2))
    assert homo(17, -1) < -0.1  # Cl-: bound, epsilon -0.150 (measured)


def test_open_shell_suggestions_are_the_nearest_four():
    # Cs20+ (35 electrons) is open; by the default rule Cs19+ = [Kr], Cs25+ = [Ar]3d10 4s2,
    # Cs27+ = [Ar]3d10 and Cs9+ = [Kr]4d10 are the nearest closed ones (Cs7+, Cs37+ are farther).
    with pytest.raises(OpenShellError) as info:
        require_closed_shell(55, 20, default_configuration(55, 20))
    listed = str(info.value).split(": ")[-1].split(";")[0].split(", ")
    assert listed == ["Cs9+ (charge 9)", "Cs19+ (charge 19)", "Cs25+ (charge 25)",
                      "Cs27+ (charge 27)"]
    assert "4p5" in str(info.value)


def test_require_closed_shell_electron_count_mismatch():
    with pytest.raises(ConfigurationError) as info:
        require_closed_shell(11, 0, parse_configuration("[Ne]"))
    message = str(info.value)
    assert not isinstance(info.value, OpenShellError)
    assert "atom.configuration" in message and "atom.charge" in message
    assert "10" in message and "11" in message


def test_closed_shell_charges():
    # ground-state configuration, from memory (standard periodic-table data) for Na- = [Ne]3s2,
    # Na+ = [Ne]; the others are [He]2s2, 1s2 and the one-electron ion.
    assert closed_shell_charges(11) == (-1, 1, 7, 9, 10)
    assert closed_shell_charges(1) == (-1, 0)


@pytest.mark.parametrize("z", range(1, 119))
def test_closed_shell_charges_are_closed(z):
    charges = closed_shell_charges(z)
    assert charges[-1] == z - 1 and all(-3 <= q <= z - 1 for q in charges)
    for q in charges[:-1]:
        assert all(s.is_closed for s in default_configuration(z, q))
        require_closed_shell(z, q, default_configuration(z, q))
