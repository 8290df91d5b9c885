"""He: our numerical-grid TDHF against Gaussian-basis TDHF from a general-purpose library (PySCF).

The claim tested: the He-He C6 (and, on the way, the HF energy, alpha_1(0) and the lowest 1P
excitation) agrees with a large-basis TDHF computation by a general-purpose Gaussian-basis code
within that basis's own error, which shrinks as the basis grows; our value is the limit the basis
sequence approaches.  Evidence of two kinds: cross-implementation agreement and convergence.

Reference library: PySCF (Q. Sun et al., "PySCF: the Python-based simulations of chemistry
framework", WIREs Comput. Mol. Sci. 8, e1340 (2018); from memory).  PySCF supplies the Gaussian
integrals (libcint), the RHF ground state and, for a cross-check, its own TDHF solver; the RPA
matrices, spectrum, oscillator strengths, alpha(i w) and C6 are built here from its integrals with
numpy (transparent, and no Davidson convergence question: every root is an eigenvalue of a dense
matrix).

Physics of the reference (closed-shell singlet RPA, real orbitals, i occupied, a virtual):

    A_ia,jb = (e_a - e_i) delta_ij delta_ab + 2 (ia|jb) - (ij|ab),
    B_ia,jb = 2 (ia|jb) - (ib|ja),
    (A - B)^1/2 (A + B) (A - B)^1/2 Z_n = w_n^2 Z_n,
    f_n = (4/3) sum_{x,y,z} [d_x^T (A - B)^1/2 Z_n]^2,   d_x,ia = <i|x|a>,
    alpha(i w) = sum_n f_n / (w_n^2 + w^2),   C6 = (3/pi) int_0^inf alpha(i w)^2 dw.

f_n is PySCF's per-root length-gauge oscillator strength (the three m components of a 1P level
are three roots; their f add to the level's strength, which is what our code reports).  For He
1s^2 the singlet excited states are 1s -> l-virtual, L = l: A and B are block diagonal in the l of
the virtual orbital (checked, off-block elements ~1e-15 .. 1e-10) and each block is diagonalized
alone.  This is the complete spectrum, all nocc*nvir roots, but without the round-off that a
single dense matrix would spread from its largest roots (w^2 ~ 1e9 hartree^2 for the tightest s
functions) onto the dipole block, where only 1P roots carry strength (measured with one dense
matrix: 1e-7 to 1e-6 relative noise in alpha, varying from run to run, on sets like the largest one
below).  C6 is integrated by Gauss-Legendre on w = w0 (1+t)/(1-t) and checked against the closed
London double sum C6 = (3/2) sum_nm f_n f_m / (w_n w_m (w_n + w_m)), which the sum over poles
allows.

Basis sequences (units: hartree, bohr; C6 in hartree bohr^6):

* the correlation-consistent augmented sets aug-cc-pVXZ, X = D, T, Q, 5 (T. H. Dunning, Jr.,
  J. Chem. Phys. 90, 1007 (1989); D. E. Woon and T. H. Dunning, Jr., J. Chem. Phys. 100, 2975
  (1994) for He; from memory), from PySCF's basis library.  Measured, and the reason for the next
  sequence: their HF energies converge monotonically, but alpha_1(0) and C6 do NOT: aug-cc-pV5Z is
  further from the limit than aug-cc-pVQZ (alpha -7.5e-4 against -5.2e-4 relative, C6 -2.0e-3
  against -3.8e-4).  Confirmed independently by finite-field RHF in PySCF (aug-cc-pV5Z alpha
  1.3212460, aug-cc-pVQZ 1.3215482).  These sets are optimized for correlation energies; for He
  only their s and p functions matter here (d, f, g functions do not mix into 1s^2 or its dipole
  response; measured: dropping them changes no digit printed, 8 to 10), and the s set's tail and
  the p set's coverage give errors of opposite sign that shift from one X to the next (5Z's s set
  with a saturated even-tempered p set gives alpha +6.5e-4 relative).  No d-aug sets are in PySCF's
  library; built by the even-tempered extension of Woon and Dunning they bring the lowest 1P root
  to within 3e-3 to 6e-3 hartree of ours (t-aug: 5e-4) but do not make alpha and C6 converge
  (d-aug-cc-pV5Z: -9.0e-4 and -1.7e-3 relative).  The single diffuse set of aug-cc-pVXZ cannot
  hold the 2p Rydberg state: its lowest 1P root lies 0.08 to 0.24 hartree above our 1s -> 2p
  excitation, so that number is not compared for these sets.
* nested even-tempered sets of primitive s and p Gaussians, exponents 2^k (k stepping by 2, then
  by 1 with a wider range): each set contains the previous one, so the RHF energy cannot rise
  (variational), and the family approaches completeness as the range widens and the ratio falls to
  1 (only s and p functions enter for He).  This sequence is the convergence evidence: every error shrinks at every step and the largest set agrees with our
  numbers to ~1e-7.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")
from pyscf import ao2mo, gto, scf, tdscf  # noqa: E402

from tdhf.ground_state import GroundState  # noqa: E402
from tdhf.properties.dispersion import compute_dispersion  # noqa: E402
from tdhf.properties.spectrum import lowest_excitations  # noqa: E402
from tdhf.response.solver import ResponseSolver  # noqa: E402

#: He electrons (Thomas-Reiche-Kuhn: sum_n f_n -> N in a complete basis).
ELECTRONS = 2
#: RHF convergence in PySCF: energy and orbital gradient.  The gradient matters: the response
#: depends linearly on orbital errors, and PySCF's default gradient tolerance sqrt(conv_tol)
#: would allow orbital errors ~1e-6.
SCF_CONV_TOL = 1e-14
SCF_CONV_TOL_GRAD = 1e-10
#: Gauss-Legendre C6: mapping scale (hartree) and rule sizes (base, check).
FREQUENCY_SCALE = 0.5
QUADRATURE_POINTS = (64, 96)
#: The quadrature against the closed London sum (measured, relative: 1e-10 at 24 points, 1e-11 at
#: 32, 1e-13 at 48, 5e-15 at 64 and 96, for ET1, ET4 and aug-cc-pV5Z).
QUADRATURE_RTOL = 1e-12

#: Nested even-tempered s, p sets: exponents 2^k, k in range(lo, hi + 1, step), per l.
#: (name, step, s (lo, hi), p (lo, hi)); ET1 = 4^k, ET2 doubles its density on the same range,
#: ET3 and ET4 widen the range (2^-8 = 0.0039 to 2^15 = 32768 for s).
EVEN_TEMPERED = (
    ("ET1 (4^k)", 2, (-6, 12), (-6, 4)),
    ("ET2 (2^k)", 1, (-6, 12), (-6, 4)),
    ("ET3 (2^k)", 1, (-7, 13), (-7, 5)),
    ("ET4 (2^k)", 1, (-8, 15), (-8, 6)),
)
#: Largest even-tempered set against our numbers; measured differences beside each bound:
#: alpha_1(0) -5.0e-8, C6 +1.6e-7 (relative), lowest 1P -2.8e-8 hartree and its f +9e-8,
#: E_HF +1.45e-7 hartree (above ours, as it must be).
LARGEST_ALPHA_RTOL = 3e-7
LARGEST_C6_RTOL = 5e-7
LARGEST_EXCITATION_ATOL = 2e-7
LARGEST_STRENGTH_ATOL = 1e-6
LARGEST_ENERGY_ATOL = 1e-6

#: aug-cc-pVXZ from PySCF's basis library, smallest first.
AUG_CC = ("aug-cc-pvdz", "aug-cc-pvtz", "aug-cc-pvqz", "aug-cc-pv5z")
#: aug-cc-pVQZ and aug-cc-pV5Z against our alpha_1(0) and C6 (relative); measured worst:
#: 2.0e-3 (5Z C6).  The sequence is not monotone in these (module docstring).
AUG_CC_LARGE_RTOL = 2.5e-3

#: Our He numbers (SELF-REGRESSION of this code, default settings, 8 digits):
#: E_HF, alpha_1(0), C6, lowest 1P TDHF excitation.  The test uses the values computed below; these
#: only confirm the run reproduces the quoted numbers.
QUOTED_OURS = {"energy": -2.8616799956, "alpha": 1.3222337, "c6": 1.3756227, "excitation": 0.79697443}


# --------------------------------------------------------------------------------------------
# The Gaussian-basis reference


@dataclass(frozen=True)
class GaussianTDHF:
    """RHF + complete singlet RPA spectrum of He in one Gaussian basis (hartree, dimensionless f).

    ``energies``, ``strengths`` and ``multipoles`` (L of each root) cover all nocc*nvir roots.
    """

    n_ao: int
    total_energy: float
    energies: np.ndarray
    strengths: np.ndarray
    multipoles: np.ndarray
    largest_off_block: float

    def alpha(self, omega: np.ndarray | float) -> np.ndarray:
        """alpha_1(i omega) = sum_n f_n / (w_n^2 + omega^2), bohr^3."""
        omega = np.asarray(omega, dtype=float)
        return (self.strengths / (self.energies**2 + omega[..., None] ** 2)).sum(-1)

    def c6(self, points: int) -> float:
        """(3/pi) int_0^inf alpha(i w)^2 dw, Gauss-Legendre on w = s(1+t)/(1-t)."""
        t, w = np.polynomial.legendre.leggauss(points)
        nodes = FREQUENCY_SCALE * (1.0 + t) / (1.0 - t)
        weights = w * 2.0 * FREQUENCY_SCALE / (1.0 - t) ** 2
        return 3.0 / math.pi * float(weights @ self.alpha(nodes) ** 2)

    def c6_london(self) -> float:
        """The same integral in closed form: (3/2) sum_nm f_n f_m / (w_n w_m (w_n + w_m))."""
        w, f = self.energies, self.strengths
        return 1.5 * float(f @ (1.0 / (np.outer(w, w) * (w[:, None] + w[None, :]))) @ f)

    def lowest_dipole_level(self) -> tuple[float, float]:
        """Lowest 1P excitation energy and the summed f of its (three) degenerate roots."""
        dipole = self.multipoles == 1
        lowest = float(self.energies[dipole].min())
        level = dipole & (np.abs(self.energies - lowest) < 1e-8)
        return lowest, float(self.strengths[level].sum())


def helium_molecule(basis) -> gto.Mole:
    return gto.M(atom="He 0 0 0", basis=basis, unit="Bohr", verbose=0)


def new_rhf(mol: gto.Mole) -> scf.hf.RHF:
    """A PySCF RHF object at our tolerances, without a checkpoint file.

    PySCF opens a temporary checkpoint file for every SCF object; none is needed here, and one
    left to the garbage collector (e.g. held by a failed test's traceback) surfaces as a
    ResourceWarning in whatever test runs next, an error under filterwarnings = error.
    """
    mf = scf.RHF(mol)
    scratch = getattr(mf, "_chkfile", None)
    if scratch is not None:
        scratch.close()
    mf.chkfile = None
    mf.conv_tol, mf.conv_tol_grad = SCF_CONV_TOL, SCF_CONV_TOL_GRAD
    return mf


def helium_rhf(mol: gto.Mole) -> scf.hf.RHF:
    mf = new_rhf(mol)
    mf.kernel()
    assert mf.converged
    return mf


def rpa_matrices(mol: gto.Mole, mf: scf.hf.RHF) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Singlet A, B over pairs (i, a) (i slow) and the dipole integrals d (3, nocc*nvir)."""
    occupied = mf.mo_occ > 0
    c_occ, c_vir = mf.mo_coeff[:, occupied], mf.mo_coeff[:, ~occupied]
    e_occ, e_vir = mf.mo_energy[occupied], mf.mo_energy[~occupied]
    n_occ, n_vir = len(e_occ), len(e_vir)
    size = n_occ * n_vir
    ovov = ao2mo.general(mol, (c_occ, c_vir, c_occ, c_vir), compact=False).reshape(n_occ, n_vir, n_occ, n_vir)
    oovv = ao2mo.general(mol, (c_occ, c_occ, c_vir, c_vir), compact=False).reshape(n_occ, n_occ, n_vir, n_vir)
    gaps = (e_vir[None, :] - e_occ[:, None]).ravel()
    coulomb = ovov.reshape(size, size)  # (ia|jb)
    a = np.diag(gaps) + 2.0 * coulomb - oovv.transpose(0, 2, 1, 3).reshape(size, size)  # (ij|ab)
    b = 2.0 * coulomb - ovov.transpose(0, 3, 2, 1).reshape(size, size)  # (ib|ja)
    dipole = np.einsum("xpq,pi,qa->xia", mol.intor("int1e_r"), c_occ, c_vir).reshape(3, size)
    return a, b, dipole


def virtual_angular_momenta(mol: gto.Mole, mf: scf.hf.RHF) -> np.ndarray:
    """l of each virtual orbital: the l whose AOs carry its norm (purity asserted to 1e-8)."""
    l_of_ao = np.repeat([mol.bas_angular(i) for i in range(mol.nbas)], np.diff(mol.ao_loc_nr()))
    overlap = mol.intor("int1e_ovlp")
    c_vir = mf.mo_coeff[:, mf.mo_occ == 0]
    weights = []
    for l in range(l_of_ao.max() + 1):
        on_l = l_of_ao == l
        weights.append(np.einsum("pa,pq,qa->a", c_vir[on_l], overlap[np.ix_(on_l, on_l)], c_vir[on_l]))
    weights = np.array(weights)
    assert weights.max(axis=0).min() > 1.0 - 1e-8
    return weights.argmax(axis=0)


def rpa_roots(a: np.ndarray, b: np.ndarray, dipole: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """All roots w_n of one RPA (block) and their isotropic oscillator strengths f_n."""
    difference_values, difference_vectors = np.linalg.eigh(a - b)
    assert difference_values.min() > 0.0  # stable RHF: A - B (and A + B) positive definite
    root = (difference_vectors * np.sqrt(difference_values)) @ difference_vectors.T
    squared, vectors = np.linalg.eigh(root @ (a + b) @ root)
    assert squared.min() > 0.0
    return np.sqrt(squared), 4.0 / 3.0 * ((dipole @ root @ vectors) ** 2).sum(axis=0)


def gaussian_tdhf(basis) -> GaussianTDHF:
    """He RHF and its complete singlet RPA spectrum in ``basis`` (a PySCF basis name or shells)."""
    mol = helium_molecule(basis)
    return rpa_spectrum(mol, helium_rhf(mol))


def rpa_spectrum(mol: gto.Mole, mf: scf.hf.RHF) -> GaussianTDHF:
    """The complete singlet RPA spectrum on a converged He RHF, one l block at a time."""
    assert np.count_nonzero(mf.mo_occ) == 1
    a, b, dipole = rpa_matrices(mol, mf)
    l_pair = virtual_angular_momenta(mol, mf)  # one occupied orbital: pair index = virtual index
    energies, strengths, multipoles, off_block = [], [], [], 0.0
    for l in np.unique(l_pair):
        block, rest = l_pair == l, l_pair != l
        if rest.any():
            coupling = max(np.abs(a[np.ix_(block, rest)]).max(), np.abs(b[np.ix_(block, rest)]).max())
            off_block = max(off_block, coupling)
        w, f = rpa_roots(a[np.ix_(block, block)], b[np.ix_(block, block)], dipole[:, block])
        energies.append(w)
        strengths.append(f)
        multipoles.append(np.full(w.size, l))
    return GaussianTDHF(
        n_ao=mol.nao,
        total_energy=float(mf.e_tot),
        energies=np.concatenate(energies),
        strengths=np.concatenate(strengths),
        multipoles=np.concatenate(multipoles),
        largest_off_block=float(off_block),
    )


def even_tempered_shells(step: int, s_range: tuple[int, int], p_range: tuple[int, int]) -> list:
    """PySCF shells: one primitive s (p) Gaussian per exponent 2^k, k in range(lo, hi + 1, step)."""
    ranges = ((0, s_range), (1, p_range))
    return [[l, [2.0**k, 1.0]] for l, (lo, hi) in ranges for k in range(lo, hi + 1, step)]


def even_tempered_exponents(step, s_range, p_range) -> set[tuple[int, float]]:
    return {(shell[0], shell[1][0]) for shell in even_tempered_shells(step, s_range, p_range)}


def properties(result: GaussianTDHF) -> dict[str, float]:
    excitation, strength = result.lowest_dipole_level()
    return {
        "energy": result.total_energy,
        "alpha": float(result.alpha(0.0)),
        "c6": result.c6(QUADRATURE_POINTS[1]),
        "excitation": excitation,
        "strength": strength,
        "trk": float(result.strengths.sum()),
    }


# --------------------------------------------------------------------------------------------
# Fixtures


@pytest.fixture(scope="module")
def ours(helium: GroundState) -> dict[str, float]:
    """Our numerical-limit He values (default grid and settings)."""
    solver = ResponseSolver(helium.grid, 2, helium.shells, helium.orbital_energies, 1)
    lowest = lowest_excitations(solver, 1)[0]
    values = {
        "energy": float(helium.total_energy),
        "alpha": float(solver.polarizability(solver.solve(0.0))),
        "c6": float(compute_dispersion(helium, (helium,)).coefficients[0].C6),
        "excitation": float(lowest.energy),
        "strength": float(lowest.oscillator_strength),
    }
    for key, quoted in QUOTED_OURS.items():
        assert values[key] == pytest.approx(quoted, rel=1e-7), key
    return values


@pytest.fixture(scope="module")
def even_tempered() -> list[GaussianTDHF]:
    return [gaussian_tdhf({"He": even_tempered_shells(step, s, p)}) for _, step, s, p in EVEN_TEMPERED]


@pytest.fixture(scope="module")
def aug_cc() -> list[GaussianTDHF]:
    return [gaussian_tdhf(name) for name in AUG_CC]


# --------------------------------------------------------------------------------------------
# 1. the reference computation itself


@pytest.mark.slow
def test_reference_rpa_agrees_with_pyscf_tdhf_finite_field_and_one_dense_matrix():
    """aug-cc-pVTZ: our RPA build against PySCF's TDHF, finite-field RHF and the unblocked matrix."""
    mol = helium_molecule("aug-cc-pvtz")
    mf = helium_rhf(mol)
    result = rpa_spectrum(mol, mf)
    order = np.argsort(result.energies)
    energies, strengths = result.energies[order], result.strengths[order]

    # The l blocks are exact: A, B vanish between them, and one dense matrix gives the same roots.
    assert result.largest_off_block < 1e-12
    a, b, dipole = rpa_matrices(mol, mf)
    dense_energies, dense_strengths = rpa_roots(a, b, dipole)
    assert dense_energies.size == energies.size == mol.nao - 1
    np.testing.assert_allclose(dense_energies, energies, rtol=1e-11)
    np.testing.assert_allclose(dense_strengths, strengths, rtol=0, atol=1e-11)
    assert np.all(result.strengths[result.multipoles != 1] < 1e-20)  # only 1P roots are bright

    # PySCF's own TDHF (Davidson) for the lowest roots: energies and length-gauge f per root.
    td = tdscf.TDHF(mf)
    td.nstates, td.conv_tol = 8, 1e-10
    td.kernel()
    assert np.all(td.converged)
    np.testing.assert_allclose(td.e, energies[:8], rtol=1e-8)
    np.testing.assert_allclose(td.oscillator_strength(gauge="length"), strengths[:8], rtol=0, atol=1e-8)

    # alpha_1(0) = sum f/w^2 against -d2E/dF2 of RHF in a field F z (five-point rule, error
    # ~h^4 alpha'''' ~ 1e-11 and SCF noise ~1e-14 / h^2 = 1e-8).
    step = 1e-3
    hcore, z = scf.hf.get_hcore(mol), mol.intor("int1e_r")[2]
    energy = {}
    for k in (-2, -1, 0, 1, 2):
        field_mf = new_rhf(mol)
        field_mf.get_hcore = lambda *args, field=k * step: hcore + field * z
        energy[k] = field_mf.kernel()
    second = -energy[2] + 16 * energy[1] - 30 * energy[0] + 16 * energy[-1] - energy[-2]
    finite_field = -second / (12 * step**2)
    assert float(result.alpha(0.0)) == pytest.approx(finite_field, rel=1e-7)

    # The C6 quadrature has converged: both rule sizes reproduce the closed London sum.
    for points in QUADRATURE_POINTS:
        assert result.c6(points) == pytest.approx(result.c6_london(), rel=QUADRATURE_RTOL)


# --------------------------------------------------------------------------------------------
# 2. convergence of the Gaussian basis to our numerical limit


def test_even_tempered_sets_are_nested():
    """Each set contains the previous one, so its RHF energy is variationally no higher."""
    for (_, *smaller), (_, *larger) in zip(EVEN_TEMPERED, EVEN_TEMPERED[1:]):
        assert even_tempered_exponents(*smaller) < even_tempered_exponents(*larger)


@pytest.mark.slow
def test_even_tempered_sequence_converges_to_our_values(ours, even_tempered):
    """Every basis error shrinks at every step; the largest set agrees with ours to ~1e-7."""
    table = [properties(result) for result in even_tempered]
    for result, row in zip(even_tempered, table):
        assert result.largest_off_block < 1e-9
        assert row["energy"] > ours["energy"]  # variational: the basis energy is above the limit
        assert result.c6(QUADRATURE_POINTS[0]) == pytest.approx(result.c6_london(), rel=QUADRATURE_RTOL)
        assert row["c6"] == pytest.approx(result.c6_london(), rel=QUADRATURE_RTOL)
    for key in ("energy", "alpha", "c6", "excitation"):
        errors = [abs(row[key] - ours[key]) for row in table]
        assert all(later < earlier for earlier, later in zip(errors, errors[1:])), (key, errors)
    trk = [abs(row["trk"] - ELECTRONS) for row in table]  # TRK sum rule, exact in a complete basis
    assert all(later < earlier for earlier, later in zip(trk, trk[1:])), trk

    largest = table[-1]
    assert 0.0 < largest["energy"] - ours["energy"] < LARGEST_ENERGY_ATOL
    assert largest["alpha"] == pytest.approx(ours["alpha"], rel=LARGEST_ALPHA_RTOL)
    assert largest["c6"] == pytest.approx(ours["c6"], rel=LARGEST_C6_RTOL)
    assert largest["excitation"] == pytest.approx(ours["excitation"], abs=LARGEST_EXCITATION_ATOL)
    assert largest["strength"] == pytest.approx(ours["strength"], abs=LARGEST_STRENGTH_ATOL)


@pytest.mark.slow
def test_aug_cc_sets_converge_in_energy_and_agree_to_their_accuracy(ours, aug_cc):
    """aug-cc-pVXZ, X = D..5: energies above ours and converging; alpha, C6 within 2.5e-3 at Q, 5.

    alpha_1(0) and C6 are not monotone in X (module docstring), so only a bound is asserted.
    """
    table = [properties(result) for result in aug_cc]
    for result, row in zip(aug_cc, table):
        assert result.largest_off_block < 1e-12
        assert row["energy"] > ours["energy"]
        assert row["c6"] == pytest.approx(result.c6_london(), rel=QUADRATURE_RTOL)
    errors = [row["energy"] - ours["energy"] for row in table]
    assert all(later < earlier for earlier, later in zip(errors, errors[1:])), errors
    for row in table[2:]:
        assert row["alpha"] == pytest.approx(ours["alpha"], rel=AUG_CC_LARGE_RTOL)
        assert row["c6"] == pytest.approx(ours["c6"], rel=AUG_CC_LARGE_RTOL)
