"""CODATA conversion factors for the edges of tdhf (reports and file output).

Everything inside tdhf is in Hartree atomic units (hartree, bohr, e, m_e); these factors are used
only where numbers leave the program, e.g. an orbital-energy column in eV.  Every value is read
from :data:`scipy.constants.physical_constants` (the CODATA set of the installed SciPy), never
typed in.

>>> round(HARTREE_EV, 3)
27.211
>>> round(BOHR_ANGSTROM, 4)
0.5292
"""

from __future__ import annotations

import math
import sys

__all__ = [
    "HARTREE_EV",
    "BOHR_ANGSTROM",
    "POLARIZABILITY_SI",
    "POLARIZABILITY_ANGSTROM3",
    "HARTREE_J",
    "BOHR_M",
    "HARTREE_INVERSE_METER",
    "HARTREE_HERTZ",
    "hartree_to_ev",
    "CODATA_KEYS",
    "BOHR2_MEGABARN",
]

#: The CODATA entries used, by the name scipy gives them.
CODATA_KEYS = {
    "hartree_ev": "Hartree energy in eV",
    "bohr_m": "Bohr radius",
    "polarizability_si": "atomic unit of electric polarizability",
    "hartree_j": "Hartree energy",
    "hartree_inverse_meter": "hartree-inverse meter relationship",
    "hartree_hertz": "hartree-hertz relationship",
}

# The factors are read when first used (PEP 562 module __getattr__): importing scipy.constants
# costs ~0.1 s of start-up (its array-API layer), which a run that prints nothing in SI or eV
# units need not pay.  Their meanings:
#   HARTREE_EV               one hartree in electronvolt
#   HARTREE_J                one hartree in joule
#   BOHR_M                   one bohr in metre
#   HARTREE_INVERSE_METER    the wavenumber of one hartree, m^-1 (wavelength = 1 / (E x this))
#   HARTREE_HERTZ            the frequency E/h of one hartree, Hz
#   BOHR2_MEGABARN           one bohr^2 in megabarn (1 Mb = 1e-22 m^2), cross sections in tables
#   BOHR_ANGSTROM            one bohr in angstrom
#   POLARIZABILITY_SI        the atomic unit of dipole polarizability e^2 a0^2 / E_h in C m^2 / V
#   POLARIZABILITY_ANGSTROM3 bohr^3 in angstrom^3: the "polarizability volume" alpha / (4 pi eps0),
#                            which is a0^3 for one atomic unit


def _factors() -> dict[str, float]:
    from scipy.constants import physical_constants

    def codata(key: str) -> float:
        return physical_constants[CODATA_KEYS[key]][0]

    bohr_angstrom = codata("bohr_m") * 1e10
    return {
        "HARTREE_EV": codata("hartree_ev"),
        "HARTREE_J": codata("hartree_j"),
        "BOHR_M": codata("bohr_m"),
        "HARTREE_INVERSE_METER": codata("hartree_inverse_meter"),
        "HARTREE_HERTZ": codata("hartree_hertz"),
        "BOHR2_MEGABARN": codata("bohr_m") ** 2 / 1e-22,
        "BOHR_ANGSTROM": bohr_angstrom,
        "POLARIZABILITY_SI": codata("polarizability_si"),
        "POLARIZABILITY_ANGSTROM3": math.pow(bohr_angstrom, 3),
    }


def __getattr__(name: str) -> float:
    if name in _FACTOR_NAMES:
        globals().update(_factors())  # later reads find the module attribute itself
        return globals()[name]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


_FACTOR_NAMES = frozenset(__all__) - {"hartree_to_ev", "CODATA_KEYS"}


def hartree_to_ev(energy_hartree: float) -> float:
    """Convert an energy from hartree to eV.

    >>> round(hartree_to_ev(-0.5), 4)
    -13.6057
    """
    return energy_hartree * sys.modules[__name__].HARTREE_EV
