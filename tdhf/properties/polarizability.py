r"""Polarizabilities and nuclear shielding factors at one frequency: the result rows and the velocity form.

Conventions (atomic units):

* :math:`\alpha_L(\omega) = 2\sum_n \omega_n |\langle 0|\sum_i r_i^L C_{L0}(\hat r_i)|n\rangle|^2
  / (\omega_n^2 - \omega^2)` with :math:`C_{L0} = P_L(\cos\theta)` (hydrogen: 9/2, 15, 131.25);
* dipole shielding :math:`\beta(\omega) = -\int \delta n_1\, C_{10}/r^2\,d^3r` per unit field, with
  the acceleration-form identity :math:`\beta(\omega) = (N + \omega^2\alpha_1(\omega))/Z`;
* quadrupole shielding :math:`\gamma_\infty = -\int \delta n_2\, C_{20}/r^3\,d^3r` (the field gradient at
  the nucleus is :math:`1 - \gamma_\infty` times the applied one; antishielding is negative).

Velocity form of the dipole polarizability
------------------------------------------
With :math:`d_n = \langle n|\partial_z|0\rangle = -\omega_n z_{n0}`,
:math:`\alpha_V(\omega) = \sum_n 2|d_n|^2/(\omega_n(\omega_n^2 - \omega^2))`, equal to the length form
in a complete basis (their difference measures the grid).  In RPA matrices (S = A - B, T = A + B,
b the projected velocity perturbation) the solve with right-hand sides (b, -b) gives
:math:`R(\omega) = 2b^T W G(\omega) b` with :math:`G = [S - \omega^2 T^{-1}]^{-1}`, and
:math:`G(\omega) - S^{-1} = \omega^2 G(\omega) T^{-1} S^{-1}`, so

.. math:: \alpha_V(\omega) = \frac{R(\omega) - R(0)}{\omega^2} = 2\,b^T W\,G(\omega)\,z,
          \qquad z = T^{-1} S^{-1} b,

computed as one dynamic solve with right-hand sides (z, -z) after two static ones: no
cancellation at small omega (the difference quotient loses ~eps/omega^2 and is not used).
"""

from __future__ import annotations

from dataclasses import dataclass

from tdhf.numerics.status import SolveStatus, combine
from tdhf.response.solver import ResponseSolver, ResponseTolerances

__all__ = ["Polarizability", "DipoleShielding", "QuadrupoleShielding", "VelocityForm"]


@dataclass(frozen=True)
class Polarizability:
    """alpha_L at one frequency (bohr^(2L+1)); ``frequency`` is nu for ``imaginary`` (omega = i nu).

    With ``broadening`` eta > 0 the frequency is omega + i eta and the imaginary parts are
    non-zero; above the ionization threshold (``method`` "outgoing waves") they are the
    absorption of the continuum; otherwise they are 0.  ``uncoupled`` is None at an uncoupled pole.
    ``velocity_form`` is the coupled dipole value from the velocity-gauge perturbation (equal to
    ``coupled`` in a complete basis; None for L > 1, broadened and asymptotic rows).
    ``pole_below`` and ``pole_above`` (hartree) are the neighbouring excitations of a real
    frequency (None where there is none or for imaginary frequencies).  ``method`` is how the
    coupled value was obtained: "krylov" (GMRES), "asymptotic series" (S(0)/nu^2 - S(2)/nu^4 far
    above every excitation), "direct" (uncoupled or one-electron: no coupling to solve) or
    "outgoing waves" (above the ionization threshold, exterior complex scaling).
    ``converged`` is False if any solve behind the row's numbers did not converge; ``residual``
    is the largest relative residual of those solves.

    Attributes
    ----------
    multipole : int
        L (1 dipole, 2 quadrupole, 3 octupole).
    frequency : float
        omega in hartree (real axis) or nu (``imaginary``: omega = i nu).
    imaginary : bool
        True on the imaginary axis.
    coupled, uncoupled : float
        alpha_L in bohr^(2L+1): TDHF (coupled Hartree-Fock) and uncoupled (no induced field);
        the real part for a broadened frequency or above the ionization threshold.
    broadening : float
        eta in hartree (0: none); the frequency is then omega + i eta.
    coupled_imaginary_part, uncoupled_imaginary_part : float
        Im alpha_L at omega + i eta, or at a real omega above the ionization threshold (the
        absorption; 0 otherwise), bohr^(2L+1).
    converged : bool
        Every solve behind the row converged.
    krylov_iterations : int
        GMRES steps of the coupled solve.
    r_max : float
        Box radius of the solve, bohr (larger than the ground state's when the response needed it).
    velocity_form : float or None
        The dipole velocity-form alpha (bohr^3), equal to ``coupled`` in a complete basis.
    residual : float
        Largest relative residual of the solves behind the row.
    pole_below, pole_above : float or None
        Neighbouring excitation energies of a real frequency, hartree.
    method : str
        "krylov", "asymptotic series", "direct" or "outgoing waves" (see above).
    """

    multipole: int
    frequency: float
    imaginary: bool
    coupled: float
    uncoupled: float | None
    broadening: float = 0.0
    coupled_imaginary_part: float = 0.0
    uncoupled_imaginary_part: float = 0.0
    converged: bool = True
    krylov_iterations: int = 0
    r_max: float = 0.0
    velocity_form: float | None = None
    residual: float = 0.0
    pole_below: float | None = None
    pole_above: float | None = None
    method: str = "krylov"


@dataclass(frozen=True)
class DipoleShielding:
    """beta at one frequency: from the induced density (``direct``) and from (N + w^2 alpha)/Z.

    Attributes
    ----------
    frequency : float
        omega or nu (``imaginary``), hartree.
    imaginary : bool
        True on the imaginary axis.
    direct : float
        beta = -integral of the induced density times C_10/r^2, per unit field (dimensionless).
    from_polarizability : float
        The same from the acceleration-form identity (N + omega^2 alpha_1)/Z.
    difference : float
        direct - from_polarizability: a measure of the grid (0 in a complete basis).
    converged : bool
        The coupled solve behind ``direct`` converged.
    """

    frequency: float
    imaginary: bool
    direct: float
    from_polarizability: float
    difference: float
    converged: bool = True


@dataclass(frozen=True)
class QuadrupoleShielding:
    """Sternheimer-type gamma_inf at one real or imaginary frequency, coupled and uncoupled.

    Attributes
    ----------
    frequency : float
        omega or nu (``imaginary``), hartree.
    imaginary : bool
        True on the imaginary axis.
    coupled, uncoupled : float
        gamma_inf (dimensionless; negative: antishielding); uncoupled is None at an uncoupled pole.
    converged : bool
        The coupled solve converged.
    """

    frequency: float
    imaginary: bool
    coupled: float
    uncoupled: float | None
    converged: bool = True


class VelocityForm:
    """The dipole velocity-form polarizability of one solver; the two static solves are done once."""

    def __init__(self, solver: ResponseSolver, tolerances: ResponseTolerances = ResponseTolerances()) -> None:
        self.solver = solver
        self.tolerances = tolerances
        self.perturbation = solver.velocity_perturbation()
        b = self.perturbation
        antisymmetric = solver.solve(0.0, True, rhs=(b, -b), tolerances=tolerances)
        y = antisymmetric.plus  # S^-1 b
        symmetric = solver.solve(0.0, True, rhs=(y, y), tolerances=tolerances)
        self.z = symmetric.plus.real  # T^-1 S^-1 b
        self.static_status = combine(antisymmetric.status, symmetric.status)

    def polarizability(self, frequency: complex) -> tuple[float | complex, SolveStatus]:
        """alpha_V(omega) = 2 b^T W G(omega) z and the combined status of the three solves."""
        z = self.z
        dynamic = self.solver.solve(frequency, True, rhs=(z, -z), tolerances=self.tolerances)
        value = self.solver.weighted_dot(self.perturbation, dynamic.plus - dynamic.minus)
        frequency = complex(frequency)
        if isinstance(value, complex) and (frequency.real == 0.0 or frequency.imag == 0.0):
            value = value.real  # real on both axes; complex only for omega + i eta
        return value, combine(self.static_status, dynamic.status)
