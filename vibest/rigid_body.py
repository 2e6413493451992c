"""Translations and rotations of a molecule as vectors in (mass-weighted) Cartesian space."""

from __future__ import annotations

import numpy as np


def rigid_body_vectors(positions, masses=None) -> np.ndarray:
    """Infinitesimal translations and rotations (3N, 6) as they are, neither normalised nor
    orthogonalised: with ``masses`` in mass-weighted coordinates (sqrt(m_i) e_a and
    sqrt(m_i) (e_a x r_i) about the centre of mass), without in plain Cartesians about the
    centroid. The rotation about the axis of a linear molecule is a zero column."""
    x = np.asarray(positions, dtype=float)
    n = len(x)
    m = np.ones(n) if masses is None else np.asarray(masses, dtype=float)
    sq = np.sqrt(m)
    r = x - (m[:, None] * x).sum(0) / m.sum()
    vecs = np.zeros((n, 3, 6))
    for a in range(3):
        vecs[:, a, a] = sq
    vecs[:, 1, 3], vecs[:, 2, 3] = -sq * r[:, 2], sq * r[:, 1]  # e_x cross r
    vecs[:, 0, 4], vecs[:, 2, 4] = sq * r[:, 2], -sq * r[:, 0]  # e_y cross r
    vecs[:, 0, 5], vecs[:, 1, 5] = -sq * r[:, 1], sq * r[:, 0]  # e_z cross r
    return vecs.reshape(3 * n, 6)


def rigid_body_basis(positions, masses=None, tol: float = 1e-6) -> np.ndarray:
    """Orthonormal basis (3N, k) of infinitesimal translations and rotations.

    With ``masses`` the vectors live in mass-weighted coordinates (Eckart conditions: the
    translations are sqrt(m_i) e_a, the rotations sqrt(m_i) (e_a x r_i) about the centre of
    mass); without, in plain Cartesians about the centroid. k is 6, or 5 for a linear molecule
    (a rotation whose vector vanishes is dropped by the rank test with ``tol``).
    """
    u, s, _ = np.linalg.svd(rigid_body_vectors(positions, masses), full_matrices=False)
    keep = s > tol * max(s[0], 1.0)
    return u[:, keep]


def is_linear(positions, tol_angstrom: float = 1e-3) -> bool:
    """True when all atoms lie on one line (within ``tol_angstrom`` of it, positions in Angstrom)."""
    x = np.asarray(positions, dtype=float)
    if len(x) <= 2:
        return True
    r = x - x.mean(0)
    _, s, vt = np.linalg.svd(r)
    off = r - np.outer(r @ vt[0], vt[0])
    return bool(np.abs(off).max() < tol_angstrom)
