"""First-order (TDHF / RPA) orbitals of a closed-shell atom in a multipole field.

Perturbation (electron potential energy) :math:`v = f(r) C_{L0}(\\hat r)`, oscillating as
:math:`e^{-i\\omega t} + e^{i\\omega t}`; by default :math:`f = r^L`.  Each occupied orbital
:math:`\\phi_a` acquires first-order parts :math:`\\chi^\\pm_a`, expanded in channels
:math:`a \\to l'` (:mod:`tdhf.angular`, ``response_exchange_factors``), whose radial functions obey

.. math:: (F_{l'} - \\varepsilon_a \\mp \\omega)\\, \\rho^\\pm_{al'}
          = -Q_{l'} \\big[(f + u)\\, P_a - X^\\pm_{al'}\\big],

with :math:`F_{l'}` the ground-state Fock operator, :math:`Q_{l'}` the projector on the virtual
space of symmetry l', :math:`u(r) = \\sum_{b l''} \\tfrac{q_b}{2l_b+1} A_{l_b l''}
Y^L[P_b(\\rho^+_{bl''} + \\rho^-_{bl''})](r)/r` the induced Coulomb potential and :math:`X^\\pm` the
induced exchange.  Without u and X (``coupled=False``) this is the uncoupled HF response: a sum
over the virtual spectrum of the same Fock operator (the V^N virtuals).

The multipole response of the density is
:math:`\\int g(r) C_{L0}\\,\\delta n\\,d^3r = \\sum_{t} w_t \\int g P_a (\\rho^+_t + \\rho^-_t) dr`
with channel weights :math:`w_t = \\tfrac{q_a}{2l_a+1} A_{l_a l'}`, so the polarizability is
:math:`\\alpha_L(\\omega) = -\\sum_t w_t \\langle r^L P_a | \\rho^+_t + \\rho^-_t\\rangle`, normalised as
:math:`\\alpha_L = 2\\sum_n |\\langle 0|\\sum_i r_i^L C_{L0}(\\hat r_i)|n\\rangle|^2 / (E_n - E_0)`.

Each resolvent :math:`(F_{l'} - \\varepsilon_a \\mp \\omega)^{-1} Q_{l'}` is applied through the
eigen-decomposition of :math:`F_{l'}` (computed once per atom and reused at every frequency, real,
imaginary or complex); the coupling is made self-consistent by GMRES on
:math:`(1 - G C)\\rho = G b`, a matrix-free Krylov solve.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np

from tdhf.angular import multipole_weight, response_exchange_factors
from tdhf.errors import InputError
from tdhf.numerics.krylov import gmres
from tdhf.numerics.status import EXACT, SolveStatus
from tdhf.numerics.threads import single_blas_thread
from tdhf.potentials import OccupiedShells, direct_potential, exchange_operator, one_electron_operator
from tdhf.radial.mesh import RadialGrid
from tdhf.radial.poisson import coulomb_kernels

__all__ = ["Channel", "FirstOrderOrbitals", "ResponseSolver", "ResponseTolerances"]

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class ResponseTolerances:
    """Stopping rules of the coupled first-order solves (the accuracy presets set them).

    Attributes
    ----------
    krylov_tolerance : float
        Relative residual at which GMRES stops.  The polarizability error is at most the
        residual times the condition number of the coupled operator (measured: alpha's relative
        error is below ~60x the residual for Ne, Ca, Xe away from poles).
    max_krylov_iterations : int
        Krylov steps before a solve is reported as not converged.
    eigen_tolerance : float
        Preconditioned residual at which an RPA root counts as converged
        (:func:`tdhf.numerics.davidson.rpa_davidson`): the error of its oscillator strength is of
        this order, that of its energy second order.
    """

    krylov_tolerance: float = 1e-12
    max_krylov_iterations: int = 480
    eigen_tolerance: float = 1e-10

    def __post_init__(self) -> None:
        if not 0.0 < self.krylov_tolerance < 1e-3:
            raise InputError(f"response tolerance: krylov_tolerance {self.krylov_tolerance!r} must be in (0, 1e-3)")
        if isinstance(self.max_krylov_iterations, bool) or not 1 <= self.max_krylov_iterations <= 100000:
            raise InputError(f"response tolerance: max_krylov_iterations {self.max_krylov_iterations!r} must be in 1..100000")
        if not 0.0 < self.eigen_tolerance < 1e-3:
            raise InputError(f"response tolerance: eigen_tolerance {self.eigen_tolerance!r} must be in (0, 1e-3)")

    def tightened(self, factor: float = 0.01) -> "ResponseTolerances":
        """Tolerances ``factor`` times smaller (round-off floors kept), twice the iterations (for certification)."""
        return ResponseTolerances(max(self.krylov_tolerance * factor, KRYLOV_FLOOR), 2 * self.max_krylov_iterations,
                                  max(self.eigen_tolerance * factor, EIGEN_FLOOR))


#: Smallest useful tolerances: the residual of a double-precision solve with operators of norm
#: ~1e9 (the innermost elements) cannot be pushed much below ~1e-14 relative.
KRYLOV_FLOOR = 1e-14
EIGEN_FLOOR = 1e-13


#: Restart length of GMRES (Krylov vectors kept).
KRYLOV_RESTART = 60
#: Imaginary frequencies above this multiple of the largest particle-hole energy use the
#: asymptotic series of the response (remainder below ASYMPTOTIC_RATIO^-4 = 1e-12 relative).
ASYMPTOTIC_RATIO = 1e3


@dataclass(frozen=True)
class Channel:
    """Excitation channel: occupied subshell index ``shell`` (angular momentum ``l``) to ``l_prime``."""

    shell: int
    l: int
    l_prime: int
    weight: float


@dataclass(frozen=True, eq=False)
class FirstOrderOrbitals:
    """Radial first-order orbitals at one frequency.

    Attributes
    ----------
    multipole : int
    frequency : complex
        Frequency in hartree (real, imaginary i*nu, or complex).
    coupled : bool
    plus, minus : ndarray, shape (n_channels, n)
        DVR coefficients of :math:`\\rho^+_t` and :math:`\\rho^-_t`.
    status : SolveStatus
        How the coupled solve ended (``EXACT`` for uncoupled and one-electron solves, which are
        direct resolvent applications).
    """

    multipole: int
    frequency: complex
    coupled: bool
    plus: np.ndarray
    minus: np.ndarray
    status: SolveStatus = EXACT

    @property
    def converged(self) -> bool:
        return self.status.converged

    @property
    def krylov_iterations(self) -> int:
        return self.status.iterations

    @property
    def residual(self) -> float:
        return self.status.residual


class ResponseSolver:
    """Solve the first-order equations of one atom for one multipole L at many frequencies.

    Parameters
    ----------
    grid : RadialGrid
    nuclear_charge : float
    shells : OccupiedShells
        Converged ground-state orbitals.
    orbital_energies : ndarray, shape (m,)
    multipole : int
        L >= 1.
    """

    @single_blas_thread
    def __init__(
        self,
        grid: RadialGrid,
        nuclear_charge: float,
        shells: OccupiedShells,
        orbital_energies: np.ndarray,
        multipole: int,
    ) -> None:
        if multipole < 1:
            raise InputError(f"response.multipoles: {multipole} is not >= 1")
        self.grid = grid
        self.shells = shells
        self.multipole = L = multipole
        self.orbital_energies = np.asarray(orbital_energies, dtype=float)
        self.interacting = shells.interacting
        l_max = int(shells.l.max())
        self.channels: tuple[Channel, ...] = tuple(
            Channel(a, int(l_a), l_t, float(q_a) / (2 * l_a + 1) * multipole_weight(L, int(l_a), l_t))
            for a, (l_a, q_a) in enumerate(zip(shells.l, shells.occupations))
            for l_t in range(abs(int(l_a) - L), int(l_a) + L + 1)
            if (int(l_a) + L + l_t) % 2 == 0
        )
        self.kernels = coulomb_kernels(grid, 2 * l_max + L)
        # Channels grouped by final symmetry l': the rows and the orbital energies of their holes.
        self.channel_groups = {
            l_t: (rows, self.orbital_energies[[self.channels[t].shell for t in rows]])
            for l_t in sorted({c.l_prime for c in self.channels})
            for rows in [[t for t, c in enumerate(self.channels) if c.l_prime == l_t]]
        }
        self._build_spectra(nuclear_charge)
        self._build_coupling()

    # ----------------------------------------------------------------- setup
    def _build_spectra(self, nuclear_charge: float) -> None:
        """Eigen-decomposition of every F_l' and the mask of its occupied eigenvectors."""
        hartree = direct_potential(self.kernels, self.shells)
        self.spectra: dict[int, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        overlap_with_occupied = {}
        for l_t in self.channel_groups:
            fock = one_electron_operator(self.grid, nuclear_charge, l_t) - exchange_operator(self.kernels, self.shells, l_t)
            fock[np.diag_indices(self.grid.size)] += hartree
            values, vectors = np.linalg.eigh(fock)
            virtual = np.ones(values.size, dtype=bool)
            occupied = self.shells.orbitals[self.shells.l == l_t]
            if occupied.size:
                # The occupied orbitals are eigenvectors of F (to SCF tolerance): find them by overlap.
                overlaps = np.abs(occupied @ vectors)
                virtual[np.argmax(overlaps, axis=1)] = False
                overlap_with_occupied[l_t] = float(overlaps.max(axis=1).min())
            self.spectra[l_t] = (values, vectors, virtual)
        self.occupied_overlap = overlap_with_occupied

    def _build_coupling(self) -> None:
        r"""Angular factors as dense tensors over (k, target channel, source channel).

        ``_first[t, s]`` is :math:`\sum_k s_1 Y^k[P_a P_b]/r` at the nodes (ground-state
        exchange potentials times angular factors); the second kind, with factors :math:`s_2`, is stored
        per k as the (a, s) pairs it needs and a scatter matrix onto target channels.
        """
        L = self.multipole
        p = self.shells.orbitals
        count = len(self.channels)
        k_count = self.kernels.shape[0]
        self._first = np.zeros((count, count, self.grid.size))
        second = np.zeros((k_count, count, count))
        pair_potentials: dict[tuple[int, int, int], np.ndarray] = {}
        for t, target in enumerate(self.channels):
            for s, source in enumerate(self.channels):
                for k, s1, s2 in response_exchange_factors(L, target.l, target.l_prime, source.l, source.l_prime):
                    second[k, t, s] = s2
                    if s1:
                        key = (min(target.shell, source.shell), max(target.shell, source.shell), k)
                        if key not in pair_potentials:
                            pair_potentials[key] = self.kernels[k] @ (p[key[0]] * p[key[1]])
                        self._first[t, s] += s1 * pair_potentials[key]
        self._target_shell = np.array([c.shell for c in self.channels])
        self._weights = np.array([c.weight for c in self.channels])
        # Second-kind exchange, per k: the (target shell a, source channel s) pairs whose
        # Y^k[P_a rho_s] is needed, and the matrix scattering them onto target channels.
        self._second_terms = []
        for k in range(k_count):
            pairs = sorted({(self._target_shell[t], s) for t, s in zip(*np.nonzero(second[k]))})
            if not pairs:
                continue
            index = {pair: r for r, pair in enumerate(pairs)}
            scatter = np.zeros((count, len(pairs)))
            for t, s in zip(*np.nonzero(second[k])):
                scatter[t, index[(self._target_shell[t], s)]] = second[k, t, s]
            shells_of_rows = np.array([a for a, _ in pairs])
            sources_of_rows = np.array([s for _, s in pairs])
            source_orbitals = p[self._target_shell[sources_of_rows]]  # P_b of each row's source channel
            self._second_terms.append((k, shells_of_rows, sources_of_rows, scatter, source_orbitals))

    @property
    def ionization_threshold(self) -> float:
        """-epsilon_HOMO in hartree: the onset of the (box-discretized) continuum."""
        return -float(self.orbital_energies.max())

    def uncoupled_poles(self) -> np.ndarray:
        """Ascending excitation energies eps_v - eps_a of every channel (hartree): the poles of the uncoupled response."""
        poles = [values[virtual] - self.orbital_energies[c.shell]
                 for c in self.channels for values, _, virtual in [self.spectra[c.l_prime]]]
        return np.sort(np.concatenate(poles))

    @property
    def largest_excitation(self) -> float:
        """The largest particle-hole energy of the discrete space (hartree), ~1/(2 h^2) of the innermost element.

        Above ~1000 times this, alpha(i nu) equals its asymptotic series S(0)/nu^2 - S(2)/nu^4 to
        round-off in the same discrete space.
        """
        if not hasattr(self, "_largest_excitation"):
            self._largest_excitation = float(self.uncoupled_poles()[-1])
        return self._largest_excitation

    # ----------------------------------------------------------------- operators
    def perturbation(self, radial: np.ndarray | None = None) -> np.ndarray:
        """Right-hand sides :math:`-f(r_i) p_{a,i}` per channel, shape (n_channels, n); f = r^L by default."""
        f = self.grid.r**self.multipole if radial is None else radial
        return np.array([-f * self.shells.orbitals[c.shell] for c in self.channels])

    def velocity_perturbation(self) -> np.ndarray:
        r"""Right-hand sides of the dipole velocity form, :math:`-\partial_z \phi_a` per channel (projected).

        The gradient formula gives, with the same angular factors as :math:`z = r C_{10}`, the radial
        functions :math:`P' - (l+1)P/r` for l' = l + 1 and :math:`P' + l P/r` for l' = l - 1.
        """
        if self.multipole != 1:
            raise InputError("the velocity form is defined here for the dipole (L = 1) only")
        p = self.shells.orbitals
        slope = p @ self.grid.derivative.T  # DVR coefficients of P'
        rows = []
        for c in self.channels:
            centrifugal = -(c.l + 1) if c.l_prime == c.l + 1 else c.l
            rows.append(-(slope[c.shell] + centrifugal * p[c.shell] / self.grid.r))
        return self.project(np.array(rows))

    def resolvent(self, rhs: np.ndarray, frequency: complex, sign: int) -> np.ndarray:
        """Apply :math:`(F_{l'} - \\varepsilon_a - s\\omega)^{-1} Q_{l'}` to each channel row of ``rhs``."""
        dtype = np.result_type(rhs, frequency)
        out = np.empty(rhs.shape, dtype=dtype)
        # Complex data through real matrix products: the eigenvectors are real, so the real and
        # imaginary parts are transformed together as one real block (half the work of complex GEMM).
        parts = np.stack([rhs.real, rhs.imag]) if np.iscomplexobj(rhs) else rhs[None]
        for l_t, (values, vectors, virtual) in self.spectra.items():
            rows, hole_energies = self.channel_groups[l_t]
            projected = parts[..., rows, :] @ vectors
            if projected.shape[0] == 2:
                projected = projected[0] + 1j * projected[1]
            else:
                projected = projected[0]
            denominators = values[None, :] - (hole_energies + sign * frequency)[:, None]
            projected = np.where(virtual[None, :], projected / np.where(virtual, denominators, 1.0), 0.0)
            if np.iscomplexobj(projected):
                back = np.stack([projected.real, projected.imag]) @ vectors.T
                out[..., rows, :] = back[0] + 1j * back[1]
            else:
                out[..., rows, :] = projected @ vectors.T
        return out

    def coupling(self, plus: np.ndarray, minus: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        r"""Induced-potential terms :math:`-u P_a + X^\pm` of the right-hand sides for (rho+, rho-).

        ``plus`` and ``minus`` have shape (..., n_channels, n): leading axes are a batch;
        ``minus=None`` stands for zero (and skips its exchange products).
        """
        direct = self._direct(plus if minus is None else plus + minus)
        out_plus = direct + np.einsum("tsn,...sn->...tn", self._first, plus)
        out_minus = direct.copy()
        if minus is not None:
            out_plus += self._second_kind(minus)
            out_minus += np.einsum("tsn,...sn->...tn", self._first, minus)
        out_minus += self._second_kind(plus)
        return out_plus, out_minus

    def coupling_plus(self, plus: np.ndarray, minus: np.ndarray) -> np.ndarray:
        """Only the rho+ part of :meth:`coupling` (half the exchange products): c+(rho+, rho-)."""
        return self._direct(plus + minus) + np.einsum("tsn,...sn->...tn", self._first, plus) + self._second_kind(minus)

    def _direct(self, total: np.ndarray) -> np.ndarray:
        """-u P_a with u the induced Coulomb potential of rho+ + rho- = ``total``."""
        p_target = self.shells.orbitals[self._target_shell]  # (T, n)
        density = np.einsum("t,tn,...tn->...n", self._weights, p_target, total)
        induced = density @ self.kernels[self.multipole]  # kernels are symmetric
        return -induced[..., None, :] * p_target

    def _second_kind(self, source: np.ndarray) -> np.ndarray:
        r"""Exchange terms :math:`\sum_k s_2\,Y^k[P_a \rho_s]/r\,P_b` fed by ``source`` (the other sign's functions)."""
        p = self.shells.orbitals
        out = np.zeros(source.shape, dtype=source.dtype)
        for k, shells_of_rows, sources_of_rows, scatter, source_orbitals in self._second_terms:
            # Y^k[P_a rho_s]/r for the needed (a, s) pairs: one matrix product per k.
            pair = (p[shells_of_rows] * source[..., sources_of_rows, :]) @ self.kernels[k]
            out += scatter @ (pair * source_orbitals)
        return out

    def project(self, rhs: np.ndarray) -> np.ndarray:
        """Remove the occupied components of symmetry l' from each channel row (leading axes: a batch)."""
        out = np.array(rhs, copy=True)
        for l_t, (_, vectors, virtual) in self.spectra.items():
            rows, _ = self.channel_groups[l_t]
            occupied = vectors[:, ~virtual]
            out[..., rows, :] -= (out[..., rows, :] @ occupied) @ occupied.T
        return out

    def diagonal(self, vectors: np.ndarray) -> np.ndarray:
        r"""Apply :math:`(F_{l'} - \varepsilon_a) Q_{l'}` to each channel row (leading axes: a batch)."""
        out = np.empty_like(vectors)
        for l_t, (values, eigenvectors, virtual) in self.spectra.items():
            rows, hole_energies = self.channel_groups[l_t]
            projected = (vectors[..., rows, :] @ eigenvectors) * np.where(virtual, 1.0, 0.0)[None, :]
            out[..., rows, :] = (projected * (values[None, :] - hole_energies[:, None])) @ eigenvectors.T
        return out

    def apply_difference(self, vectors: np.ndarray, coupled: bool = True) -> np.ndarray:
        """(A - B) v for projected channel functions v (leading axes: a batch); D v when uncoupled.

        From the coupling, :math:`c^+(v, -v) = -(A - D) v + B v`, so (A - B) v = D v - Q c^+(v, -v).
        """
        if not coupled or not self.interacting:
            return self.diagonal(vectors)
        return self.diagonal(vectors) - self.project(self.coupling_plus(vectors, -vectors))

    def apply_sum(self, vectors: np.ndarray, coupled: bool = True) -> np.ndarray:
        """(A + B) v = D v - Q c^+(v, v) for projected channel functions v; D v when uncoupled."""
        if not coupled or not self.interacting:
            return self.diagonal(vectors)
        return self.diagonal(vectors) - self.project(self.coupling_plus(vectors, vectors))

    def weighted_dot(self, left: np.ndarray, right: np.ndarray) -> complex:
        r""":math:`\sum_t w_t \langle l_t | r_t \rangle` over channels (unconjugated)."""
        value = np.einsum("t,tn,tn->", self._weights, left, right)
        return complex(value) if np.iscomplexobj(value) else float(value)

    # ----------------------------------------------------------------- solve
    @single_blas_thread
    def solve(
        self,
        frequency: complex = 0.0,
        coupled: bool = True,
        radial: np.ndarray | None = None,
        rhs: tuple[np.ndarray, np.ndarray] | None = None,
        tolerances: ResponseTolerances = ResponseTolerances(),
        guess: FirstOrderOrbitals | None = None,
    ) -> FirstOrderOrbitals:
        """First-order orbitals at ``frequency`` (hartree; complex allowed: i*nu is imaginary frequency).

        ``radial`` replaces the perturbation f(r) = r^L; ``rhs`` gives the two right-hand sides
        (b+, b-) channel by channel directly (used for the sum-rule moments and the velocity form).
        ``guess`` (a solution at a nearby frequency) starts the Krylov solve.  The result's
        ``status`` says whether the coupled solve converged; it never raises for non-convergence.

        Raises
        ------
        InputError
            If the frequency is not a finite number.
        """
        frequency = complex(frequency)
        if not (np.isfinite(frequency.real) and np.isfinite(frequency.imag)):
            raise InputError(f"response frequency {frequency!r} is not finite")
        if rhs is None:
            rhs_plus = rhs_minus = self.perturbation(radial)
        else:
            rhs_plus, rhs_minus = rhs
        if frequency.imag == 0.0:
            frequency = frequency.real
        if frequency.real == 0.0 and frequency.imag != 0.0 and rhs_plus is rhs_minus and not np.iscomplexobj(rhs_plus):
            if abs(frequency.imag) > ASYMPTOTIC_RATIO * self.largest_excitation:
                return self._asymptotic_imaginary_axis(frequency, rhs_plus, coupled)
            return self._solve_imaginary_axis(frequency, rhs_plus, coupled, tolerances, guess)
        if frequency == 0.0 and coupled and self.interacting and not np.iscomplexobj(rhs_plus):
            for parity in (1.0, -1.0):
                if rhs_minus is rhs_plus or np.array_equal(rhs_minus, parity * rhs_plus):
                    return self._solve_static(rhs_plus, parity, tolerances, guess)
        plus0 = self.resolvent(rhs_plus, frequency, +1)
        minus0 = self.resolvent(rhs_minus, frequency, -1)
        if not coupled or not self.interacting:
            return FirstOrderOrbitals(self.multipole, frequency, coupled, plus0, minus0, EXACT)
        shape = plus0.shape
        size = plus0.size

        def apply(vector: np.ndarray) -> np.ndarray:
            plus = vector[:size].reshape(shape)
            minus = vector[size:].reshape(shape)
            c_plus, c_minus = self.coupling(plus, minus)
            return vector - np.concatenate(
                [self.resolvent(c_plus, frequency, +1).ravel(), self.resolvent(c_minus, frequency, -1).ravel()]
            )

        start = np.concatenate([plus0.ravel(), minus0.ravel()])
        initial = start if guess is None else np.concatenate([guess.plus.ravel(), guess.minus.ravel()])
        solution, status = gmres(apply, start, x0=initial.astype(start.dtype, copy=False),
                                 tolerance=tolerances.krylov_tolerance,
                                 max_iterations=tolerances.max_krylov_iterations, restart=KRYLOV_RESTART)
        logger.debug("response L=%d omega=%s: %s", self.multipole, frequency, status.describe())
        return FirstOrderOrbitals(
            self.multipole, frequency, True, solution[:size].reshape(shape), solution[size:].reshape(shape), status
        )

    def _solve_static(self, rhs: np.ndarray, parity: float, tolerances: ResponseTolerances,
                      guess: FirstOrderOrbitals | None) -> FirstOrderOrbitals:
        """At omega = 0 with b- = parity * b+, rho- = parity * rho+: solve for rho+ only (half the work).

        Both resolvents coincide at zero frequency, so rho+ = G(0) [b + c+(rho+, parity rho+)].
        """
        plus0 = self.resolvent(rhs, 0.0, +1)
        shape = plus0.shape

        def apply(vector: np.ndarray) -> np.ndarray:
            plus = vector.reshape(shape)
            return vector - self.resolvent(self.coupling_plus(plus, parity * plus), 0.0, +1).ravel()

        start = plus0.ravel()
        initial = start if guess is None else np.real(guess.plus).ravel()
        solution, status = gmres(apply, start, x0=initial, tolerance=tolerances.krylov_tolerance,
                                 max_iterations=tolerances.max_krylov_iterations, restart=KRYLOV_RESTART)
        plus = solution.reshape(shape)
        logger.debug("response L=%d omega=0 (parity %+d): %s", self.multipole, parity, status.describe())
        return FirstOrderOrbitals(self.multipole, 0.0, True, plus, parity * plus, status)

    def _solve_imaginary_axis(
        self, frequency: complex, rhs: np.ndarray, coupled: bool, tolerances: ResponseTolerances,
        guess: FirstOrderOrbitals | None,
    ) -> FirstOrderOrbitals:
        r"""At omega = i nu with a real right-hand side, rho- = conj(rho+): solve for rho+ only.

        The coupling is real-linear, so with rho+ = x + i y it splits into real products,
        :math:`c^+(\rho^+, \rho^-) = c^+(x, x) + i\,c^+(y, -y)`, and GMRES runs on the real pair
        (x, y): half the unknowns of the general complex solve, and no complex kernel products.

        For nu above the lowest particle-hole energy :math:`\Delta`, x ~ Delta b/nu^2 (all that
        alpha needs) is much smaller than y ~ b/nu, so a residual relative to the whole vector would
        leave x with a relative error ~ tolerance nu/Delta.  GMRES therefore runs on
        (s x, y) with s = max(1, nu/Delta), which balances the two parts.
        """
        plus0 = self.resolvent(rhs, frequency, +1)
        if not coupled or not self.interacting:
            return FirstOrderOrbitals(self.multipole, frequency, coupled, plus0, plus0.conj(), EXACT)
        shape, size = plus0.shape, plus0.size
        scale = max(1.0, abs(frequency.imag) / self._lowest_gap)

        def apply(vector: np.ndarray) -> np.ndarray:
            x, y = vector[:size].reshape(shape) / scale, vector[size:].reshape(shape)
            c_plus = self.coupling_plus(np.stack([x, y]), np.stack([x, -y]))
            image = self.resolvent(c_plus[0] + 1j * c_plus[1], frequency, +1)
            return vector - np.concatenate([scale * image.real.ravel(), image.imag.ravel()])

        start = np.concatenate([scale * plus0.real.ravel(), plus0.imag.ravel()])
        initial = start if guess is None else np.concatenate([scale * guess.plus.real.ravel(), guess.plus.imag.ravel()])
        solution, status = gmres(apply, start, x0=initial, tolerance=tolerances.krylov_tolerance,
                                 max_iterations=tolerances.max_krylov_iterations, restart=KRYLOV_RESTART)
        plus = (solution[:size] / scale + 1j * solution[size:]).reshape(shape)
        logger.debug("response L=%d omega=%s: %s", self.multipole, frequency, status.describe())
        return FirstOrderOrbitals(self.multipole, frequency, True, plus, plus.conj(), status)

    def _asymptotic_imaginary_axis(self, frequency: complex, rhs: np.ndarray, coupled: bool) -> FirstOrderOrbitals:
        r"""Far above every particle-hole energy: the series of the first-order orbitals in 1/nu^2.

        With S = A - B, T = A + B and the projected right-hand side b, the symmetric part is
        :math:`\rho^+ + \rho^- = 2[T + \nu^2 S^{-1}]^{-1} b
        = (2/\nu^2)\,(S b - S T S b/\nu^2) + O(\nu^{-6})`, i.e.
        :math:`\alpha(i\nu) = S(0)/\nu^2 - S(2)/\nu^4 + \dots`, and :math:`\rho^+ - \rho^- = 2 i b/\nu + O(\nu^{-3})`.
        The relative remainder is below :math:`(\Delta_{max}/\nu)^4`, under 1e-12 beyond
        ``ASYMPTOTIC_RATIO`` times the largest particle-hole energy, where a Krylov solve would
        only add round-off.  Written with one power of nu at a time, so nothing overflows below
        nu ~ 1e150 (the deck caps frequencies far below).
        """
        nu = abs(frequency.imag)
        b = self.project(rhs)
        first = self.apply_difference(b, coupled)
        second = self.apply_difference(self.apply_sum(first, coupled), coupled)
        symmetric = ((first - (second / nu) / nu) / nu) / nu
        plus = symmetric + 1j * (np.sign(frequency.imag) * b / nu)
        remainder = (self.largest_excitation / nu) ** 4
        status = SolveStatus(True, 0, remainder, remainder, "asymptotic series")
        return FirstOrderOrbitals(self.multipole, frequency, coupled, plus, plus.conj(), status)

    @property
    def _lowest_gap(self) -> float:
        """The smallest particle-hole energy eps_v - eps_a (hartree), the scale of the imaginary-axis balance."""
        if not hasattr(self, "_lowest_gap_value"):
            self._lowest_gap_value = float(max(self.uncoupled_poles()[0], 1e-3))
        return self._lowest_gap_value

    # ----------------------------------------------------------------- observables
    def expectation(self, first_order: FirstOrderOrbitals, radial: np.ndarray) -> complex:
        r""":math:`\int g(r) C_{L0}\,\delta n\,d^3r` for the radial function g at the nodes."""
        p = self.shells.orbitals
        total = first_order.plus + first_order.minus
        value = np.einsum("t,tn,tn->", self._weights, radial * p[self._target_shell], total)
        return complex(value) if np.iscomplexobj(value) else float(value)

    def polarizability(self, first_order: FirstOrderOrbitals) -> complex:
        r""":math:`\alpha_L(\omega) = -\int r^L C_{L0}\,\delta n` (a.u., normalization in the module docstring)."""
        return -self.expectation(first_order, self.grid.r**self.multipole)
