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


def rigid_and_vibrational_bases(positions, linear: bool, masses=None) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal bases of the rigid-body motions R (3N, k) and of their complement U
    (3N, 3N - k): k = 5 for a ``linear`` molecule (the rotation about its axis left out even when
    the atoms are a hair off the line), else 6. With ``masses`` in mass-weighted coordinates
    (as :func:`rigid_body_basis`). U comes from a QR factorisation of [R | 1] (deterministic)."""
    x = np.asarray(positions, dtype=float)
    k = 5 if linear else 6
    rigid = rigid_body_basis(x, masses)[:, :k]
    q, _ = np.linalg.qr(np.hstack([rigid, np.eye(x.size)]))
    return rigid, q[:, k:x.size]


def is_linear(positions, tol_angstrom: float = 1e-3) -> bool:
    """True when all atoms lie on one line (within ``tol_angstrom`` of it, positions in Angstrom)."""
    x = np.asarray(positions, dtype=float)
    if len(x) <= 2:
        return True
    r = x - x.mean(0)
    _, s, vt = np.linalg.svd(r)
    off = r - np.outer(r @ vt[0], vt[0])
    return bool(np.abs(off).max() < tol_angstrom)


def rigid_body_curvature(positions_bohr, gradient_hartree_bohr) -> np.ndarray:
    """Second derivatives of the energy (Eh per unit generator^2) along the plain-Cartesian
    generators of :func:`rigid_body_vectors` (translations, then rotations about the centroid),
    from the gradient alone.

    The energy does not change when the molecule is translated or rotated, so along these
    motions d^2E = 0 = v_a^T H v_b + g^T d^2x/(dt_a dt_b): translations give zero rows and
    columns, rotations about axes e_a and e_b give -g . sym(e_a x (e_b x r)) with r measured
    from the centroid. At a stationary point the whole block vanishes; near one it is of the
    order of the residual gradient.
    """
    x = np.asarray(positions_bohr, dtype=float)
    g = np.asarray(gradient_hartree_bohr, dtype=float).reshape(-1, 3)
    r = x - x.mean(0)
    axes = np.eye(3)
    out = np.zeros((6, 6))
    for a in range(3):
        for b in range(a, 3):
            second = 0.5 * (np.cross(axes[a], np.cross(axes[b], r)) + np.cross(axes[b], np.cross(axes[a], r)))
            out[3 + a, 3 + b] = out[3 + b, 3 + a] = -np.sum(g * second)
    return out


def rigid_body_dipole_derivatives(positions_bohr, dipole_e_bohr, charge: float = 0.0) -> np.ndarray:
    """Derivatives (3, 6) of a dipole measured from the coordinate origin (e*Bohr per unit
    generator) along the generators of :func:`rigid_body_vectors`.

    A translation by t adds charge * t; a rotation by angle theta about axis e through the
    centroid c turns the dipole about the origin into R mu - charge (R c - c), so its derivative
    is e x mu - charge (e x c). For a neutral molecule only the rotations count and the origin
    does not matter.
    """
    x = np.asarray(positions_bohr, dtype=float)
    mu = np.asarray(dipole_e_bohr, dtype=float)
    c = x.mean(0)
    out = np.zeros((3, 6))
    for a, axis in enumerate(np.eye(3)):
        out[:, a] = charge * axis
        out[:, 3 + a] = np.cross(axis, mu) - charge * np.cross(axis, c)
    return out
