"""Harmonic analysis of a Cartesian Hessian: pure functions, no gradients.

Steps (Wilson, Decius & Cross, *Molecular Vibrations*; E. B. Wilson 1955):
1. mass-weight: H_mw = M^-1/2 H M^-1/2 (masses in amu);
2. build the Eckart translation/rotation vectors at the centre of mass and take an orthonormal
   basis D of their complement (3N-6, or 3N-5 for a linear molecule);
3. diagonalise D^T H_mw D; eigenvalues -> wavenumbers, eigenvectors -> normal modes;
4. IR intensities from the dipole derivatives: A = N_A / (12 eps0 c^2) |d mu / d Q|^2.
Imaginary wavenumbers are returned as negative numbers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase.data import atomic_masses
from scipy import constants as sc

from ..rigid_body import is_linear, rigid_and_vibrational_bases

_HARTREE_J = sc.physical_constants["Hartree energy"][0]
_BOHR_M = sc.physical_constants["Bohr radius"][0]
_AMU_KG = sc.physical_constants["atomic mass constant"][0]
_ANGSTROM_M = sc.angstrom
#: sqrt(Eh / (Bohr^2 amu)) in rad/s -> wavenumber in cm^-1.
_AU_TO_CM1 = np.sqrt(_HARTREE_J / (_BOHR_M ** 2 * _AMU_KG)) / (2 * np.pi * sc.c * 100.0)
#: |d mu/dQ|^2 in e^2/amu -> integrated absorption coefficient in km/mol.
_E2_AMU_TO_KM_MOL = sc.N_A * sc.e ** 2 / (12 * sc.epsilon_0 * sc.c ** 2 * _AMU_KG) / 1000.0
#: Force constant Eh/Bohr^2 -> mdyn/Angstrom (1 mdyn/Angstrom = 100 N/m).
_AU_TO_MDYN_A = _HARTREE_J / _BOHR_M ** 2 / 100.0


def default_masses(numbers) -> np.ndarray:
    """Standard atomic weights (amu) of the elements, from ASE's table."""
    return np.array([atomic_masses[int(z)] for z in numbers], dtype=float)


@dataclass(frozen=True)
class HarmonicModes:
    """Harmonic vibrational modes.

    Attributes:
        wavenumbers_cm1: harmonic wavenumbers (M,), cm^-1, ascending; imaginary as negative.
        intensities_km_mol: IR intensities (M,), km/mol (None when no dipole derivatives).
        modes_mass_weighted: orthonormal mass-weighted eigenvectors (M, N, 3).
        displacements: Cartesian displacement vectors, each normalised to unit length (M, N, 3).
        reduced_masses_amu: reduced masses (M,), amu.
        force_constants_mdyn_angstrom: k = mu omega^2 (M,), mdyn/Angstrom.
        masses_amu: the masses used (N,).
        linear: whether the molecule was treated as linear (3N-5 modes).
        rigid_body_eigenvalues_au: eigenvalues of the unprojected mass-weighted Hessian that were
            identified as translations/rotations (Eh/(Bohr^2 amu)); for checks.
    """

    wavenumbers_cm1: np.ndarray
    intensities_km_mol: np.ndarray | None
    modes_mass_weighted: np.ndarray
    displacements: np.ndarray
    reduced_masses_amu: np.ndarray
    force_constants_mdyn_angstrom: np.ndarray
    masses_amu: np.ndarray
    linear: bool
    rigid_body_eigenvalues_au: np.ndarray

    @property
    def count(self) -> int:
        return len(self.wavenumbers_cm1)

    @property
    def imaginary(self) -> np.ndarray:
        """Indices of modes with imaginary wavenumber (negative numbers)."""
        return np.nonzero(self.wavenumbers_cm1 < 0)[0]


def eigenvalues_to_wavenumbers(eigenvalues_au) -> np.ndarray:
    """Mass-weighted Hessian eigenvalues (Eh/(Bohr^2 amu)) -> cm^-1 (negative for imaginary)."""
    ev = np.asarray(eigenvalues_au, dtype=float)
    return np.sign(ev) * np.sqrt(np.abs(ev)) * _AU_TO_CM1


def harmonic_analysis(numbers, positions_angstrom, hessian_hartree_bohr2, dipole_derivatives_e=None,
                      masses_amu=None, charge: int = 0) -> HarmonicModes:
    """Normal modes, wavenumbers, reduced masses, force constants and IR intensities.

    Args:
        numbers: atomic numbers (N,).
        positions_angstrom: geometry (N, 3), Angstrom (only directions matter for the projection).
        hessian_hartree_bohr2: Cartesian Hessian (3N, 3N), Eh/Bohr^2.
        dipole_derivatives_e: d mu / d x (3N, 3) in e (e*Bohr/Bohr), optional.
        masses_amu: masses (N,), amu; default the standard atomic weights (isotopologues: pass others).
        charge: total charge; for ions the dipole is taken about the centre of mass, so that
            intensities do not depend on the origin.
    """
    x = np.asarray(positions_angstrom, dtype=float)
    n = len(x)
    masses = default_masses(numbers) if masses_amu is None else np.asarray(masses_amu, dtype=float)
    if masses.shape != (n,) or np.any(masses <= 0):
        raise ValueError("masses_amu must be N positive numbers")
    hess = np.asarray(hessian_hartree_bohr2, dtype=float)
    if hess.shape != (3 * n, 3 * n):
        raise ValueError(f"Hessian must be {3 * n}x{3 * n} for {n} atoms, got {hess.shape}")
    inv_sqrt_m = np.repeat(1.0 / np.sqrt(masses), 3)
    h_mw = hess * inv_sqrt_m[:, None] * inv_sqrt_m[None, :]
    h_mw = 0.5 * (h_mw + h_mw.T)
    linear = is_linear(x)
    rb, internal = rigid_and_vibrational_bases(x, linear, masses)
    w, v = np.linalg.eigh(internal.T @ h_mw @ internal)
    modes_mw = (internal @ v).T  # (M, 3N), orthonormal rows
    rb_eigs = np.linalg.eigvalsh(rb.T @ h_mw @ rb)
    wavenumbers = eigenvalues_to_wavenumbers(w)
    cart = modes_mw * inv_sqrt_m[None, :]
    norms = np.linalg.norm(cart, axis=1)
    reduced = 1.0 / norms ** 2
    disp = cart / norms[:, None]
    force_au = w * reduced  # Eh/Bohr^2 along the unit Cartesian displacement
    intensities = None
    if dipole_derivatives_e is not None:
        dmu = np.array(dipole_derivatives_e, dtype=float)
        if charge:
            # mu_com = mu - Q R_com; d R_com,a / d x_(k,a) = m_k / M.
            dmu -= charge * np.kron(masses[:, None] / masses.sum(), np.eye(3))
        dmu_dq = cart @ dmu  # (M, 3): e / sqrt(amu)
        intensities = (dmu_dq ** 2).sum(1) * _E2_AMU_TO_KM_MOL
    m = len(w)
    return HarmonicModes(
        wavenumbers_cm1=wavenumbers,
        intensities_km_mol=intensities,
        modes_mass_weighted=modes_mw.reshape(m, n, 3),
        displacements=disp.reshape(m, n, 3),
        reduced_masses_amu=reduced,
        force_constants_mdyn_angstrom=force_au * _AU_TO_MDYN_A,
        masses_amu=masses,
        linear=linear,
        rigid_body_eigenvalues_au=rb_eigs,
    )


def rayleigh_wavenumbers(hessian_hartree_bohr2, modes: HarmonicModes) -> np.ndarray:
    """Wavenumbers (cm^-1) of another Hessian along the given modes: sqrt(q^T H_mw q) per mode.

    Used to report the unscaled harmonic value of each mode of a scaled force field.
    """
    inv_sqrt_m = np.repeat(1.0 / np.sqrt(modes.masses_amu), 3)
    q = modes.modes_mass_weighted.reshape(modes.count, -1) * inv_sqrt_m[None, :]
    values = np.einsum("mi,ij,mj->m", q, np.asarray(hessian_hartree_bohr2), q)
    return eigenvalues_to_wavenumbers(values)


def stretch_shares(modes: HarmonicModes, positions_angstrom, i: int, j: int) -> np.ndarray:
    """Share of the stretch of bond i-j in each mode: (l . q_k)^2 for the unit mass-weighted bond
    stretch vector l and the mass-weighted eigenvectors q_k, normalised to sum to 1 over the modes."""
    x = np.asarray(positions_angstrom, dtype=float)
    e = (x[j] - x[i]) / np.linalg.norm(x[j] - x[i])
    b = np.zeros_like(x)
    b[i], b[j] = -e, e
    local = (b / np.sqrt(modes.masses_amu)[:, None]).ravel()
    q = modes.modes_mass_weighted.reshape(len(modes.wavenumbers_cm1), -1)
    share = (q @ (local / np.linalg.norm(local))) ** 2
    return share / share.sum()
