"""The request and result types of photoionization (light: decks, drivers and reports use them
without loading the continuum solver of :mod:`tdhf.properties.photoionization`)."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "CROSS_SECTION_CONVENTION",
    "PhotoionizationSection",
    "PartialCrossSection",
    "PhotoionizationPoint",
    "Resonance",
    "Threshold",
    "SpectralSumRule",
    "KramersKronigCheck",
    "ContinuumGrid",
    "ContinuumSummary",
    "PhotoionizationResults",
    "ContinuumPolarizability",
]

CROSS_SECTION_CONVENTION = (
    "sigma = (4 pi omega / c) Im alpha_1(omega) in bohr^2 (length form; velocity form from -d/dz; uncoupled:"
    " V^N continuum of the ground-state Fock operator); partial: outgoing flux into the channels of each open"
    " subshell; df/domega = c sigma / (2 pi^2) per hartree; resonances: poles E - i width/2, hartree"
)


@dataclass(frozen=True)
class PhotoionizationSection:
    """``[photoionization]``: fixed photon energies and/or an adaptive ``range`` (hartree).

    Attributes
    ----------
    photon_energies : tuple of float
        Fixed photon energies, hartree, each above the first ionization threshold.
    range : tuple of float or None
        (low, high) of an adaptive photon-energy grid, hartree; resonances are searched in it.
    sum_rules : bool
        Also evaluate S(0), S(-1), S(-2) over bound lines and continuum and the Kramers–Kronig
        check (~150 extra solves).
    """

    photon_energies: tuple[float, ...] = ()
    range: tuple[float, float] | None = None
    sum_rules: bool = True


@dataclass(frozen=True)
class PartialCrossSection:
    """Cross section into the channels of one hole subshell (bohr^2).

    Attributes
    ----------
    subshell : str
        The hole, e.g. "3p".
    cross_section : float
        The outgoing flux into that hole's channels as a cross section, bohr^2; the partials add
        up to the total.
    """

    subshell: str
    cross_section: float


@dataclass(frozen=True)
class PhotoionizationPoint:
    """Everything at one photon energy (hartree); cross sections in bohr^2.

    Attributes
    ----------
    photon_energy : float
        Photon energy omega, hartree.
    cross_section, cross_section_velocity : float
        Coupled (TDHF/RPA) cross section sigma = (4 pi omega / c) Im alpha_1 in the length and
        velocity forms, bohr^2 (equal in a complete basis; their difference measures the grid).
    cross_section_uncoupled : float
        The same without induced potentials (V^N continuum of the ground-state Fock operator).
    partial : tuple of PartialCrossSection
        Per open hole subshell, from the outgoing flux.
    oscillator_strength_density : float
        df/domega = c sigma / (2 pi^2), per hartree.
    polarizability, polarizability_imaginary_part : float
        Real and imaginary part of the coupled complex alpha_1(omega), bohr^3.
    converged : bool
        Both coupled solves (length and velocity, one Krylov solve) converged.
    krylov_iterations : int
        Krylov steps of that solve.
    residual : float
        The larger relative residual of the two.
    """

    photon_energy: float
    cross_section: float
    cross_section_velocity: float
    cross_section_uncoupled: float
    partial: tuple[PartialCrossSection, ...]
    oscillator_strength_density: float
    polarizability: float
    polarizability_imaginary_part: float
    converged: bool
    krylov_iterations: int
    residual: float


@dataclass(frozen=True)
class Resonance:
    """An autoionizing resonance: the pole E - i Gamma/2 of alpha_1.

    Attributes
    ----------
    energy : float
        Position E, hartree.
    width : float
        Full width Gamma, hartree.
    subshell : str
        The hole subshell of the resonant excitation.
    """

    energy: float
    width: float
    subshell: str


@dataclass(frozen=True)
class Threshold:
    """Ionization threshold -epsilon_a of one subshell.

    Attributes
    ----------
    subshell : str
        The subshell, e.g. "3p".
    energy : float
        -epsilon_a, hartree (Koopmans).
    """

    subshell: str
    energy: float


@dataclass(frozen=True)
class SpectralSumRule:
    """:math:`S(k) = \\sum_n f_n \\omega_n^k + \\int (df/d\\omega) \\omega^k d\\omega` by parts (module docstring).

    Attributes
    ----------
    k : int
        The power of omega.
    bound : float
        The bound lines' part (a contour below the first threshold).
    continuum : float
        The continuum up to the end of the real-axis part.
    remainder : float
        Everything above it (a vertical contour).
    total : float
        bound + continuum + remainder.
    exact : float
        N for k = 0; alpha(0) for k = -2; the imaginary-axis integral for k = -1.
    relative_difference : float
        |total - exact| / |exact|.
    converged : bool
        Every solve on the path reached the residual limit (and the ground state on the
        continuum grid converged).
    """

    k: int
    bound: float
    continuum: float
    remainder: float
    total: float
    exact: float
    relative_difference: float
    converged: bool = True


@dataclass(frozen=True)
class KramersKronigCheck:
    """alpha_1(i nu) rebuilt from the spectrum (Kramers–Kronig) and solved directly.

    Attributes
    ----------
    imaginary_frequency : float
        nu, hartree.
    rebuilt : float
        From the bound lines and the continuum, bohr^3.
    direct : float
        The imaginary-axis solve, bohr^3.
    relative_difference : float
        |rebuilt - direct| / |direct|.
    converged : bool
        Every solve behind both numbers converged.
    """

    imaginary_frequency: float
    rebuilt: float
    direct: float
    relative_difference: float
    converged: bool = True


@dataclass(frozen=True)
class ContinuumGrid:
    """The exterior-complex-scaled grid used, and how its inner ground state compares with the given one.

    Attributes
    ----------
    inner_radius : float
        R_i, bohr: the occupied orbitals have decayed there; the coupling lives inside.
    scaling_radius : float
        R_0, bohr: complex scaling starts there (a real flux region lies between R_i and R_0).
    scaling_angle : float
        theta, radians.
    r_max : float
        Outer end of the scaled region, bohr.
    points, inner_points : int
        Grid points in all and inside R_i.
    order : int
        Element polynomial order.
    largest_momentum : float
        The largest photoelectron momentum the element sizes resolve, bohr^-1.
    total_energy_difference : float
        HF total energy on the inner grid minus the given ground state's, hartree.
    """

    inner_radius: float
    scaling_radius: float
    scaling_angle: float
    r_max: float
    points: int
    inner_points: int
    order: int
    largest_momentum: float
    total_energy_difference: float


@dataclass(frozen=True)
class ContinuumSummary:
    """Thresholds, whole-spectrum sum rules and Kramers–Kronig checks, and the grid.

    Attributes
    ----------
    thresholds : tuple of Threshold
        One per occupied subshell, lowest first.
    sum_rules : tuple of SpectralSumRule
        S(0), S(-1), S(-2) over bound lines and continuum (empty without ``sum_rules``).
    kramers_kronig : tuple of KramersKronigCheck
        alpha_1(i nu) rebuilt from the spectrum against the direct value, at three nu.
    grid : ContinuumGrid or None
        The continuum grid (None if nothing was solved).
    convention : str
        Units and definitions of the cross sections.
    """

    thresholds: tuple[Threshold, ...]
    sum_rules: tuple[SpectralSumRule, ...]
    kramers_kronig: tuple[KramersKronigCheck, ...]
    grid: ContinuumGrid | None
    convention: str = CROSS_SECTION_CONVENTION


@dataclass(frozen=True)
class PhotoionizationResults:
    """The rows of a ``[photoionization]`` request."""

    photoionization: tuple[PhotoionizationPoint, ...]
    resonances: tuple[Resonance, ...]
    continuum: ContinuumSummary
    warnings: tuple[str, ...]
    rejected: tuple[str, ...]


@dataclass(frozen=True)
class ContinuumPolarizability:
    """Complex alpha_L at a real frequency above threshold (bohr^(2L+1)), with its solve status."""

    multipole: int
    frequency: float
    coupled: bool
    real_part: float
    imaginary_part: float
    converged: bool
    krylov_iterations: int
    residual: float
