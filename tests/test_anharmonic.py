"""VPT2 (vibest.analysis.anharmonic) and its force constants (vibest.calculation.anharmonic_forces)
against closed forms: the Morse oscillator and a polynomial potential."""

import numpy as np
import pytest
from ase.units import Bohr
from scipy import constants as sc

from vibest.analysis.anharmonic import dimensionless_force_constants, rotation_terms, vpt2
from vibest.analysis.harmonic import eigenvalues_to_wavenumbers, harmonic_analysis
from vibest.calculation.anharmonic_forces import mode_force_constants
from vibest.calculation.driver import calculation_options, compute_record
from vibest.calculation.engine import Engine, Evaluation, EngineSettings, make_engine
from vibest.calculation.methods import METHODS
from vibest.structure import build_molecule

_EH_CM1 = sc.physical_constants["hartree-inverse meter relationship"][0] / 100.0


class PolynomialEngine(Engine):
    """Energy of a function of the Cartesian coordinates (Bohr): ``energy_and_gradient(x)``;
    a gradient-only engine, like the tight-binding ones."""

    settings = EngineSettings()

    def __init__(self, energy_and_gradient):
        self.f = energy_and_gradient

    def evaluate(self, positions_bohr):
        e, g = self.f(np.asarray(positions_bohr, dtype=float).ravel())
        return Evaluation(float(e), np.asarray(g).reshape(-1, 3), np.zeros(3))

    def copy(self):
        return PolynomialEngine(self.f)


def _morse(depth_hartree, a_per_bohr, r0_bohr):
    def f(x):
        d = x[3:] - x[:3]
        r = np.linalg.norm(d)
        u = np.exp(-a_per_bohr * (r - r0_bohr))
        dv = 2 * depth_hartree * a_per_bohr * (1 - u) * u
        g = dv * d / r
        return depth_hartree * (1 - u) ** 2, np.concatenate([-g, g])
    return f


def test_vpt2_is_exact_for_a_morse_oscillator():
    """For V = D (1 - exp(-a x))^2, w_e x_e = w_e^2 / (4 D) (Morse 1929; Herzberg, Spectra of
    Diatomic Molecules), and VPT2 gives it exactly. Derivatives at the minimum: 2Da^2, -6Da^3, 14Da^4."""
    depth, a, mu = 0.17, 1.0, 0.98  # Eh, 1/Bohr, amu: roughly HCl (values from memory)
    w = eigenvalues_to_wavenumbers([2 * depth * a ** 2 / mu])
    k3, k4 = dimensionless_force_constants(w, np.array([[[-6 * depth * a ** 3 / mu ** 1.5]]]),
                                           np.array([[14 * depth * a ** 4 / mu ** 2]]))
    res = vpt2(w, k3, k4)
    wexe = w[0] ** 2 / (4 * depth * _EH_CM1)
    assert abs(res.x_cm1[0, 0] + wexe) < 1e-6 * wexe
    assert abs(res.fundamentals_cm1[0] - (w[0] - 2 * wexe)) < 1e-6 * w[0]
    assert not res.resonances


def test_finite_difference_force_constants_reproduce_the_morse_anharmonicity():
    """The whole chain (Hessians at displaced geometries, projection, VPT2) on a Morse diatomic
    engine: x within 1 % (0.6 cm^-1) of w_e^2 / (4 D) = 62 cm^-1 (Morse 1929); the error is the O(step^2)
    of the central differences (0.4 cm^-1 at the default step)."""
    depth, a, r0 = 0.17, 1.0, 2.4
    numbers, masses = [17, 1], np.array([35.0, 1.0])
    x = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, r0 * Bohr]])
    h = np.zeros((6, 6))
    k = 2 * depth * a ** 2
    h[2, 2] = h[5, 5] = k
    h[2, 5] = h[5, 2] = -k
    modes = harmonic_analysis(numbers, x, h, masses_amu=masses)
    f = mode_force_constants(PolynomialEngine(_morse(depth, a, r0)), numbers, x, masses, modes.modes_mass_weighted)
    assert f.hessians == 3
    w = eigenvalues_to_wavenumbers(f.eigenvalues_au)
    assert abs(w[0] - modes.wavenumbers_cm1[0]) < 0.05
    k3, k4 = dimensionless_force_constants(w, f.cubic_au, f.quartic_au)
    res = vpt2(w, k3, k4)
    assert abs(res.x_cm1[0, 0] + w[0] ** 2 / (4 * depth * _EH_CM1)) < 0.6


def test_force_constants_of_a_polynomial_potential_along_given_modes():
    """A quartic polynomial in the Cartesian coordinates of three atoms: phi_ijk and phi_iijj along
    orthonormal mass-weighted directions equal the tensors contracted with those directions
    (calculus; the central differences are exact for a cubic term and O(step^2) for a quartic)."""
    rng = np.random.default_rng(7)
    n = 9

    k2 = rng.normal(size=(n, n))
    k2 = k2 @ k2.T / n + np.eye(n)
    t3 = _symmetrised(rng.normal(size=(n, n, n))) * 0.3
    t4 = _symmetrised(rng.normal(size=(n, n, n, n))) * 0.2

    def f(x):
        e = 0.5 * x @ k2 @ x + np.einsum("abc,a,b,c", t3, x, x, x) / 6 + np.einsum("abcd,a,b,c,d", t4, x, x, x, x) / 24
        g = k2 @ x + np.einsum("abc,b,c->a", t3, x, x) / 2 + np.einsum("abcd,b,c,d->a", t4, x, x, x) / 6
        return e, g

    masses = np.array([12.0, 1.0, 16.0])
    q, _ = np.linalg.qr(rng.normal(size=(n, 3)))
    modes = q.T.reshape(3, 3, 3)
    x0 = np.zeros((3, 3))
    got = mode_force_constants(PolynomialEngine(f), [6, 1, 8], x0, masses, modes)
    b = np.repeat(1 / np.sqrt(masses), 3)[:, None] * q  # Cartesian Bohr per mass-weighted coordinate
    cubic = np.einsum("abc,ai,bj,ck->ijk", t3, b, b, b)
    quartic = np.einsum("abcd,ai,bi,cj,dj->ij", t4, b, b, b, b)
    np.testing.assert_allclose(got.cubic_au, cubic, atol=1e-5 * np.abs(cubic).max())
    np.testing.assert_allclose(got.quartic_au, quartic, atol=2e-3 * np.abs(quartic).max())
    np.testing.assert_allclose(got.eigenvalues_au, np.diag(b.T @ k2 @ b), rtol=1e-6)


def _symmetrised(t):
    import itertools
    import math

    return sum(np.transpose(t, p) for p in itertools.permutations(range(t.ndim))) / math.factorial(t.ndim)


@pytest.mark.slow
def test_b3lyp_vpt2_corrections_of_water_match_its_measured_anharmonicity():
    """Water's fundamentals minus its harmonic wavenumbers, both from experiment (Benedict, Gailar &
    Plyler, J. Chem. Phys. 24, 1139 (1956); values from memory): bend 1594.75 - 1648.5, symmetric
    stretch 3657.05 - 3832.2, antisymmetric 3755.93 - 3942.5 cm^-1. VPT2 on the shipped B3LYP
    (analytic Hessians at displaced geometries) gives them within 20 cm^-1 (measured: 4, 4 and
    7 cm^-1 off); no correction would be 54-187 cm^-1 off."""
    pytest.importorskip("pyscf")
    record, converged, _ = compute_record(build_molecule("O"), calculation_options("b3lyp", workers=None))
    assert converged
    modes = harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2)
    engine = make_engine(record.numbers, np.asarray(record.positions_angstrom) / Bohr, 0, 0,
                         EngineSettings.for_method(METHODS["b3lyp"]))
    f = mode_force_constants(engine, record.numbers, record.positions_angstrom, modes.masses_amu,
                             modes.modes_mass_weighted)
    w = modes.wavenumbers_cm1
    k3, k4 = dimensionless_force_constants(w, f.cubic_au, f.quartic_au)
    b, zetas = rotation_terms(record.positions_angstrom, modes.masses_amu, modes.modes_mass_weighted)
    shifts = vpt2(w, k3, k4, b, zetas).corrections_cm1
    measured = np.array([1594.75 - 1648.5, 3657.05 - 3832.2, 3755.93 - 3942.5])
    np.testing.assert_allclose(shifts, measured, atol=20.0)
