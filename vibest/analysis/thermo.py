"""Ideal-gas thermochemistry from harmonic frequencies: rigid rotor, harmonic oscillator.

Standard statistical mechanics (e.g. D. A. McQuarrie, *Statistical Mechanics*, 1976; the same
formulas as ASE's ``ase.thermochemistry.IdealGasThermo``): translational (Sackur-Tetrode),
rotational (rigid rotor with symmetry number sigma), vibrational (harmonic oscillator) and
electronic (spin multiplicity) contributions. Optionally, Grimme's quasi-rigid-rotor-harmonic-
oscillator entropy for low modes (S. Grimme, Chem. Eur. J. 18, 9955 (2012)): each mode's
entropy is a blend w S_vib + (1 - w) S_free-rotor with w = 1 / (1 + (nu0 / nu)^4),
nu0 = 100 cm^-1 and B_av = 1e-44 kg m^2. Imaginary modes are left out (and reported).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy import constants as sc

from ..errors import InputError
from ..rigid_body import is_linear

_AMU = sc.physical_constants["atomic mass constant"][0]
_HARTREE_J = sc.physical_constants["Hartree energy"][0]


@dataclass(frozen=True)
class Thermochemistry:
    """Per mole, at ``temperature_K`` and ``pressure_Pa``. Energies in kJ/mol, entropy in J/(mol K);
    enthalpy and Gibbs energy include the electronic energy and the zero-point energy."""

    temperature_K: float
    pressure_Pa: float
    symmetry_number: int
    electronic_energy_kj_mol: float
    zero_point_energy_kj_mol: float
    enthalpy_kj_mol: float
    entropy_j_mol_k: float
    gibbs_energy_kj_mol: float
    entropy_terms_j_mol_k: dict
    quasi_harmonic: bool
    skipped_imaginary_cm1: tuple[float, ...] = ()

    def to_dict(self) -> dict:
        return asdict(self)


def moments_of_inertia(positions_angstrom, masses_amu) -> np.ndarray:
    """Principal moments (kg m^2), ascending."""
    from ..inertia import principal_moments_amu_angstrom2

    return principal_moments_amu_angstrom2(positions_angstrom, masses_amu) * _AMU * sc.angstrom ** 2


def thermochemistry(wavenumbers_cm1, positions_angstrom, masses_amu, energy_hartree: float = 0.0,
                    temperature_K: float = 298.15, pressure_Pa: float = 101325.0, symmetry_number: int = 1,
                    spin_multiplicity: int = 1, quasi_harmonic: bool = False,
                    qh_cutoff_cm1: float = 100.0) -> Thermochemistry:
    """Ideal-gas RRHO (or quasi-RRHO entropy) thermochemistry; see module docstring."""
    T, p = float(temperature_K), float(pressure_Pa)
    if T <= 0 or p <= 0:
        raise InputError("temperature and pressure must be positive")
    if symmetry_number < 1:
        raise InputError("symmetry number must be at least 1")
    R, kB, h, c, NA = sc.R, sc.k, sc.h, sc.c, sc.N_A
    nu = np.asarray(wavenumbers_cm1, float)
    imaginary = tuple(float(v) for v in nu if v <= 0)
    nu = nu[nu > 0]
    masses = np.asarray(masses_amu, float)
    mtot = masses.sum() * _AMU
    linear = is_linear(positions_angstrom)
    # translation
    qt_v = (2 * np.pi * mtot * kB * T / h ** 2) ** 1.5 * kB * T / p
    s_trans = R * (np.log(qt_v) + 2.5)
    h_trans = 2.5 * R * T
    # rotation
    inertia = moments_of_inertia(positions_angstrom, masses)
    if linear:
        i_lin = inertia[-1]
        s_rot = R * (np.log(8 * np.pi ** 2 * i_lin * kB * T / (symmetry_number * h ** 2)) + 1.0)
        h_rot = R * T
    else:
        s_rot = R * (np.log(np.sqrt(np.pi * np.prod(inertia)) / symmetry_number
                            * (8 * np.pi ** 2 * kB * T / h ** 2) ** 1.5) + 1.5)
        h_rot = 1.5 * R * T
    # vibration
    e = h * c * 100.0 * nu  # J per molecule
    x = e / (kB * T)
    zpe = 0.5 * e.sum() * NA
    h_vib = zpe + NA * (e / np.expm1(x)).sum()
    s_each = R * (x / np.expm1(x) - np.log1p(-np.exp(-x)))
    if quasi_harmonic and len(nu):
        b_av = 1e-44
        mu = h / (8 * np.pi ** 2 * c * 100.0 * nu)
        mu_eff = mu * b_av / (mu + b_av)
        s_rotor = R * (0.5 + np.log(np.sqrt(8 * np.pi ** 3 * mu_eff * kB * T / h ** 2)))
        w = 1.0 / (1.0 + (qh_cutoff_cm1 / nu) ** 4)
        s_each = w * s_each + (1 - w) * s_rotor
    s_vib = s_each.sum()
    s_elec = R * np.log(spin_multiplicity)
    e_el = energy_hartree * _HARTREE_J * NA
    enthalpy = e_el + h_trans + h_rot + h_vib  # h_trans = 5/2 RT includes pV
    entropy = s_trans + s_rot + s_vib + s_elec
    gibbs = enthalpy - T * entropy
    return Thermochemistry(T, p, int(symmetry_number), e_el / 1000, zpe / 1000, enthalpy / 1000, entropy, gibbs / 1000,
                           {"translation": s_trans, "rotation": s_rot, "vibration": s_vib, "electronic": s_elec},
                           bool(quasi_harmonic), imaginary)


def rotational_symmetry_number(mol, positions_angstrom, tol_angstrom: float = 0.15, max_matches: int = 20000) -> int:
    """Order of the rotational subgroup of the point group, from the structure.

    Every graph automorphism (RDKit self-match) that a proper rotation realises on the geometry
    (Kabsch fit with determinant +1, largest deviation below ``tol_angstrom``) counts once.
    Linear molecules: 2 if centrosymmetric else 1.
    """
    from rdkit import Chem  # noqa: F401

    x = np.asarray(positions_angstrom, float)
    x = x - x.mean(0)
    if is_linear(x):
        return 2 if np.allclose(np.sort(x, axis=0), np.sort(-x, axis=0), atol=tol_angstrom) and \
            _centrosymmetric(mol, x, tol_angstrom) else 1
    matches = mol.GetSubstructMatches(mol, uniquify=False, useChirality=False, maxMatches=max_matches)
    count = 0
    for perm in matches:
        y = x[list(perm)]
        hmat = y.T @ x
        u, _, vt = np.linalg.svd(hmat)
        d = np.sign(np.linalg.det(vt.T @ u.T))
        rot = vt.T @ np.diag([1, 1, d]) @ u.T  # proper rotation (planar: the flip is harmless)
        if np.abs(y @ rot.T - x).max() < tol_angstrom:
            count += 1
    return max(count, 1)


def _centrosymmetric(mol, x, tol) -> bool:
    z = [a.GetAtomicNum() for a in mol.GetAtoms()]
    for i in range(len(x)):
        j = int(np.argmin(np.linalg.norm(x + x[i], axis=1)))
        if np.linalg.norm(x[j] + x[i]) > tol or z[j] != z[i]:
            return False
    return True
