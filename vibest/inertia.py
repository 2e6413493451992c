"""Inertia of a geometry: one place for the centre of mass and the inertia tensor (pure geometry;
thermochemistry, gas-phase contours and the symmetry finder all use it)."""

from __future__ import annotations

import numpy as np


def centred(positions_angstrom, masses_amu) -> np.ndarray:
    """Positions (Angstrom) relative to the centre of mass."""
    x = np.asarray(positions_angstrom, dtype=float)
    m = np.asarray(masses_amu, dtype=float)
    return x - (m[:, None] * x).sum(0) / m.sum()


def inertia_tensor(positions_angstrom, masses_amu) -> np.ndarray:
    """Inertia tensor about the centre of mass (3, 3), amu Angstrom^2."""
    r = centred(positions_angstrom, masses_amu)
    m = np.asarray(masses_amu, dtype=float)
    outer = np.einsum("i,ij,ik->jk", m, r, r)
    return np.trace(outer) * np.eye(3) - outer


def principal_moments_amu_angstrom2(positions_angstrom, masses_amu) -> np.ndarray:
    """Principal moments of inertia (amu Angstrom^2), ascending."""
    return np.sort(np.linalg.eigvalsh(inertia_tensor(positions_angstrom, masses_amu)))


def principal_axes(positions_angstrom, masses_amu) -> np.ndarray:
    """Principal axes (rows, unit vectors), in the order of ascending moments."""
    return np.linalg.eigh(inertia_tensor(positions_angstrom, masses_amu))[1].T
