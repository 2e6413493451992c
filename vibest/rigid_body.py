"""Translations and rotations of a molecule as vectors in (mass-weighted) Cartesian space."""

from __future__ import annotations

import numpy as np


def rigid_body_basis(positions, masses=None, tol: float = 1e-6) -> np.ndarray:
    """Orthonormal basis (3N, k) of infinitesimal translations and rotations.

    With ``masses`` the vectors live in mass-weighted coordinates (Eckart conditions: the
    translations are sqrt(m_i) e_a, the rotations sqrt(m_i) (e_a x r_i) about the centre of
    mass); without, in plain Cartesians about the centroid. k is 6, or 5 for a linear molecule
    (a rotation whose vector vanishes is dropped by the rank test with ``tol``).
    """
    x = np.asarray(positions, dtype=float)
    n = len(x)
    m = np.ones(n) if masses is None else np.asarray(masses, dtype=float)
    sq = np.sqrt(m)
    centre = (m[:, None] * x).sum(0) / m.sum()
    r = x - centre
    vecs = []
    for a in range(3):
        t = np.zeros((n, 3))
        t[:, a] = sq
        vecs.append(t.ravel())
    for a in range(3):
        e = np.zeros(3)
        e[a] = 1.0
        vecs.append((sq[:, None] * np.cross(e, r)).ravel())
    mat = np.array(vecs).T
    u, s, _ = np.linalg.svd(mat, full_matrices=False)
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
