"""Second-order vibrational perturbation theory (VPT2) from cubic and semi-diagonal quartic force
constants: pure functions, no gradients.

Formulas for an asymmetric top (Mills 1972, in *Molecular Spectroscopy: Modern Research*; the
partial-fraction form of Barone, J. Chem. Phys. 122, 014108 (2005)), force constants in cm^-1 over
dimensionless normal coordinates q_i = Q_i sqrt(omega_i / hbar):

    x_ii = k_iiii / 16 - sum_j k_iij^2 / 16 * [2/w_j - 1/(2(2w_i - w_j)) + 1/(2(2w_i + w_j))]
    x_ij = k_iijj / 4 - sum_k k_iik k_jjk / (4 w_k)
           + sum_k k_ijk^2 / 8 * [1/(w_i + w_j - w_k) - 1/(w_i + w_j + w_k)
                                  + 1/(w_i - w_j - w_k) - 1/(w_i - w_j + w_k)]
           + sum_a B_a zeta^a_ij^2 (w_i/w_j + w_j/w_i)
    nu_i = w_i + 2 x_ii + 1/2 sum_(j != i) x_ij

A term whose denominator nearly vanishes (a Fermi resonance, 2w_i ~ w_j or w_i + w_j ~ w_k) is left
out when Martin's test (Martin et al., J. Phys. Chem. 99, 17031 (1995)) says the second-order
estimate of its effect exceeds 1 cm^-1 (deperturbed VPT2). Degenerate modes are treated as two
non-degenerate ones, which is approximate (the l-type terms of symmetric tops are missing).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

_HARTREE_J = sc.physical_constants["Hartree energy"][0]
_BOHR_M = sc.physical_constants["Bohr radius"][0]
_AMU_KG = sc.physical_constants["atomic mass constant"][0]
_CM1_J = sc.h * sc.c * 100.0

#: Largest small denominator (cm^-1) that may be a resonance.
RESONANCE_WINDOW_CM1 = 200.0
#: Martin's threshold (cm^-1) on the second-order estimate of a resonant term.
MARTIN_THRESHOLD_CM1 = 1.0


@dataclass(frozen=True)
class AnharmonicResult:
    """VPT2 of one molecule.

    Attributes:
        harmonic_cm1: harmonic wavenumbers w_i (M,), cm^-1.
        fundamentals_cm1: VPT2 fundamentals nu_i (M,), cm^-1.
        x_cm1: anharmonicity constants x_ij (M, M), cm^-1.
        resonances: the terms left out, as (kind, i, j, k) with kind "2w_i=w_j" or "w_i+w_j=w_k".
    """

    harmonic_cm1: np.ndarray
    fundamentals_cm1: np.ndarray
    x_cm1: np.ndarray
    resonances: tuple[tuple[str, int, int, int], ...]

    @property
    def corrections_cm1(self) -> np.ndarray:
        """nu_i - w_i (M,), cm^-1."""
        return self.fundamentals_cm1 - self.harmonic_cm1


def dimensionless_force_constants(harmonic_cm1, cubic_au, quartic_au) -> tuple[np.ndarray, np.ndarray]:
    """Convert force constants over mass-weighted normal coordinates (Bohr amu^1/2) to cm^-1 over
    dimensionless ones.

    Args:
        harmonic_cm1: harmonic wavenumbers w_i (M,), cm^-1, positive (they set each coordinate's scale).
        cubic_au: phi_ijk (M, M, M), Eh/(Bohr^3 amu^3/2).
        quartic_au: semi-diagonal phi_iijj (M, M), Eh/(Bohr^4 amu^2).
    Returns: (k_ijk in cm^-1, k_iijj in cm^-1).
    """
    omega = 2 * np.pi * sc.c * 100.0 * np.asarray(harmonic_cm1, dtype=float)  # rad/s
    length = np.sqrt(sc.hbar / omega) / (_BOHR_M * np.sqrt(_AMU_KG))  # Bohr amu^1/2 per unit q
    cubic = np.asarray(cubic_au) * np.einsum("i,j,k->ijk", length, length, length) * _HARTREE_J / _CM1_J
    quartic = np.asarray(quartic_au) * np.outer(length ** 2, length ** 2) * _HARTREE_J / _CM1_J
    return cubic, quartic


def coriolis_zetas(modes_mass_weighted, axes) -> np.ndarray:
    """Coriolis coupling constants zeta^a_ij (3, M, M) of orthonormal mass-weighted modes
    (M, N, 3) about the principal axes (3, 3), rows the axes: zeta^a_ij = sum_n (l_in x l_jn) . e_a."""
    l = np.asarray(modes_mass_weighted, dtype=float)
    cross = np.cross(l[:, None, :, :], l[None, :, :, :]).sum(axis=2)  # (M, M, 3)
    return np.einsum("ijc,ac->aij", cross, np.asarray(axes, dtype=float))


def rotation_terms(positions_angstrom, masses_amu, modes_mass_weighted) -> tuple[np.ndarray, np.ndarray]:
    """(B_a (3,) in cm^-1, zeta^a_ij (3, M, M)) about the principal axes in order of ascending
    moment; the axis of a linear molecule (zero moment) gets B = 0, i.e. is left out."""
    from ..gas_phase import rotational_constants_cm1
    from ..inertia import principal_axes

    b = rotational_constants_cm1(None, positions_angstrom, masses_amu)  # A >= B >= C: ascending moments
    axes = principal_axes(positions_angstrom, masses_amu)
    return np.where(np.isfinite(b), b, 0.0), coriolis_zetas(modes_mass_weighted, axes)


def _resonant(k: float, denominator: float, factor: float) -> bool:
    """Martin's test: k^4 / (factor * D^3) > threshold, inside the resonance window."""
    d = abs(denominator)
    return d < RESONANCE_WINDOW_CM1 and k ** 4 / (factor * max(d, 1e-6) ** 3) > MARTIN_THRESHOLD_CM1


def _x_diagonal(i: int, w, k3, k4, resonances: list) -> float:
    """x_ii (cm^-1), its 2w_i = w_j resonant terms left out (and listed in ``resonances``)."""
    total = k4[i, i] / 16.0
    for j in range(len(w)):
        kij = k3[i, i, j]
        terms = 2.0 / w[j] + 1.0 / (2.0 * (2 * w[i] + w[j]))
        if _resonant(kij, 2 * w[i] - w[j], 256.0):
            resonances.append(("2w_i=w_j", i, j, j))
        else:
            terms -= 1.0 / (2.0 * (2 * w[i] - w[j]))
        total -= kij ** 2 / 16.0 * terms
    return total


def _x_off_diagonal(i: int, j: int, w, k3, k4, resonances: list) -> float:
    """x_ij (cm^-1) without the Coriolis term, its w_i + w_j = w_k type resonant terms left out."""
    total = k4[i, j] / 4.0 - np.sum(k3[i, i, :] * k3[j, j, :] / w) / 4.0
    for k in range(len(w)):
        kijk = k3[i, j, k]
        if kijk == 0.0:
            continue
        terms = -1.0 / (w[i] + w[j] + w[k])
        for sign_j, sign_k in ((1, -1), (-1, -1), (-1, 1)):
            d = w[i] + sign_j * w[j] + sign_k * w[k]
            if _resonant(kijk, d, 64.0):
                resonances.append(("w_i+w_j=w_k", i, j, k))
                continue
            terms += (1.0 if sign_k < 0 else -1.0) / d
        total += kijk ** 2 / 8.0 * terms
    return total


def vpt2(harmonic_cm1, cubic_cm1, quartic_cm1, rotational_constants_cm1=None, zetas=None) -> AnharmonicResult:
    """VPT2 fundamentals (see the module docstring).

    Args:
        harmonic_cm1: w_i (M,), cm^-1, all positive.
        cubic_cm1: k_ijk (M, M, M), cm^-1, symmetric.
        quartic_cm1: k_iijj (M, M), cm^-1, symmetric.
        rotational_constants_cm1: B_a (3,), cm^-1 (0 leaves an axis out), optional.
        zetas: zeta^a_ij (3, M, M), with the rotational constants.
    """
    w = np.asarray(harmonic_cm1, dtype=float)
    k3 = np.asarray(cubic_cm1, dtype=float)
    k4 = np.asarray(quartic_cm1, dtype=float)
    m = len(w)
    x = np.zeros((m, m))
    resonances: list = []
    coriolis = np.zeros((m, m))
    if rotational_constants_cm1 is not None:
        b = np.asarray(rotational_constants_cm1, dtype=float)
        coriolis = np.einsum("a,aij->ij", b, np.asarray(zetas, dtype=float) ** 2) * (w[:, None] / w[None, :]
                                                                                      + w[None, :] / w[:, None])
    for i in range(m):
        x[i, i] = _x_diagonal(i, w, k3, k4, resonances)
        for j in range(i + 1, m):
            x[i, j] = x[j, i] = _x_off_diagonal(i, j, w, k3, k4, resonances) + coriolis[i, j]
    nu = w + 2 * np.diag(x) + 0.5 * (x.sum(axis=1) - np.diag(x))
    return AnharmonicResult(w, nu, x, tuple(resonances))
