"""Accuracy presets: the one place that sets every approximation from the accuracy asked for.

A result depends on the radial grid (element order and growth), the box radius, the SCF
tolerances, the Krylov and eigensolver tolerances of the response, and the quadrature of the
Casimir–Polder integrals.  A preset fixes all of them together:

========  =====================================  ==========================  ======================
preset    grid                                   SCF (energy, orbitals)      response (Krylov, RPA)
========  =====================================  ==========================  ======================
default   order 10, growth 1.9 (~1e-9 hartree)   1e-12 hartree, 1e-9         1e-12, 1e-10
tight     order 14, growth 1.5 (~1e-10 hartree)  1e-13 hartree, 1e-11        1e-13, 1e-11
========  =====================================  ==========================  ======================

The box radius is chosen from the decay of the orbitals and first-order orbitals
(:mod:`tdhf.ground_state`, :mod:`tdhf.properties.response_properties`) and the quadrature size
is a [dispersion] key.  The certificate (:mod:`tdhf.certify`) measures what each approximation
contributes by varying it.

>>> ACCURACY_PRESETS["tight"].scf.residual_tolerance
1e-11
"""

from __future__ import annotations

from dataclasses import dataclass

from tdhf.radial.mesh import GridSettings
from tdhf.response.solver import ResponseTolerances
from tdhf.scf import ScfSettings

__all__ = ["Accuracy", "ACCURACY_PRESETS"]


@dataclass(frozen=True)
class Accuracy:
    """Grid, SCF and response-solver settings that belong together."""

    grid: GridSettings
    scf: ScfSettings
    tolerances: ResponseTolerances


#: The presets by name (deck key ``accuracy``).
ACCURACY_PRESETS: dict[str, Accuracy] = {
    "default": Accuracy(GridSettings(), ScfSettings(), ResponseTolerances()),
    "tight": Accuracy(
        GridSettings.tight(),
        ScfSettings(energy_tolerance=1e-13, residual_tolerance=1e-11),
        ResponseTolerances(krylov_tolerance=1e-13, eigen_tolerance=1e-11),
    ),
}
