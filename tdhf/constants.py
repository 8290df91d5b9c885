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

from scipy.constants import physical_constants

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

#: One hartree in electronvolt.
HARTREE_EV: float = physical_constants[CODATA_KEYS["hartree_ev"]][0]

#: One hartree in joule.
HARTREE_J: float = physical_constants[CODATA_KEYS["hartree_j"]][0]

#: One bohr in metre.
BOHR_M: float = physical_constants[CODATA_KEYS["bohr_m"]][0]

#: The wavenumber of one hartree, m^-1 (a photon of energy E has wavelength 1 / (E x this)).
HARTREE_INVERSE_METER: float = physical_constants[CODATA_KEYS["hartree_inverse_meter"]][0]

#: The frequency E/h of one hartree, Hz.
HARTREE_HERTZ: float = physical_constants[CODATA_KEYS["hartree_hertz"]][0]

#: One bohr^2 in megabarn (1 Mb = 1e-22 m^2): cross sections in the terminal and tables.
BOHR2_MEGABARN: float = physical_constants[CODATA_KEYS["bohr_m"]][0] ** 2 / 1e-22

#: One bohr in angstrom.
BOHR_ANGSTROM: float = physical_constants[CODATA_KEYS["bohr_m"]][0] * 1e10

#: The atomic unit of dipole polarizability, e^2 a0^2 / E_h, in C m^2 / V (= C^2 m^2 / J).
POLARIZABILITY_SI: float = physical_constants[CODATA_KEYS["polarizability_si"]][0]

#: The atomic unit of dipole polarizability as a volume, bohr^3 in angstrom^3 (the "polarizability
#: volume" alpha / (4 pi epsilon_0), which is a0^3 for one atomic unit).
POLARIZABILITY_ANGSTROM3: float = BOHR_ANGSTROM**3


def hartree_to_ev(energy_hartree: float) -> float:
    """Convert an energy from hartree to eV.

    >>> round(hartree_to_ev(-0.5), 4)
    -13.6057
    """
    return energy_hartree * HARTREE_EV
