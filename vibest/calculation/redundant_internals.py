"""Redundant internal coordinates for geometry optimisation (vectorised values and Wilson B).

The set holds every bond stretch (covalent radii, fragments joined by their closest pair),
every bend of two bonds at one atom and every torsion about a bond (C. Peng, P. Y. Ayala,
H. B. Schlegel, M. J. Frisch, J. Comput. Chem. 17, 49 (1996)). Near-linear bends have no
usable torsions or bend derivative; a geometry that has one is not described by this set
(:func:`build` returns None and the optimiser stays in Cartesians). Positions in Bohr, angles
in radians.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase.data import covalent_radii
from ase.units import Bohr

from ..internal_coordinates import bend_angles, bend_vectors, torsion_angles, torsion_angles_and_vectors

#: Atoms closer than this multiple of the sum of their covalent radii are bonded.
BOND_FACTOR = 1.3
#: Bends wider than this (degrees) count as linear: the set is not used for such a geometry.
LINEAR_DEG = 172.0


@dataclass(frozen=True)
class InternalSet:
    """Index arrays of the primitives: bonds (B, 2), bends (A, 3) apex in the middle, torsions (T, 4)."""

    bonds: np.ndarray
    bends: np.ndarray
    torsions: np.ndarray

    @property
    def size(self) -> int:
        return len(self.bonds) + len(self.bends) + len(self.torsions)

    @property
    def periodic(self) -> np.ndarray:
        """Mask of the coordinates whose differences wrap at 2 pi (the torsions)."""
        mask = np.zeros(self.size, dtype=bool)
        mask[len(self.bonds) + len(self.bends):] = True
        return mask

    def values(self, x: np.ndarray) -> np.ndarray:
        """Coordinate values: bond lengths (Bohr), bends and torsions (rad)."""
        b, a, t = self.bonds, self.bends, self.torsions
        d = x[b[:, 0]] - x[b[:, 1]]
        r = np.sqrt((d * d).sum(1))
        phi = torsion_angles(x, t[:, 0], t[:, 1], t[:, 2], t[:, 3]) if len(t) else np.zeros(0)
        return np.concatenate([r, bend_angles(x, a[:, 0], a[:, 1], a[:, 2]), phi])

    def values_and_b_matrix(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`values` and the Wilson B matrix (size, 3N; derivatives of the values by
        Cartesians, Bohr) from one pass over the primitives."""
        n = len(x)
        out = np.zeros((self.size, n, 3))
        b, a, t = self.bonds, self.bends, self.torsions
        rows = np.arange(len(b))
        u = x[b[:, 0]] - x[b[:, 1]]
        r = np.sqrt((u * u).sum(1))
        u /= r[:, None]
        # within one row every atom appears once, so plain (not accumulating) assignment is exact
        out[rows, b[:, 0]] = u
        out[rows, b[:, 1]] = -u
        theta = np.zeros(0)
        if len(a):
            vecs, degrees = bend_vectors(x, a[:, 0], a[:, 1], a[:, 2])
            theta = np.radians(degrees)
            rows = len(b) + np.arange(len(a))
            for m in range(3):
                out[rows, a[:, m]] = vecs[:, m]
        phi = np.zeros(0)
        if len(t):
            phi, vecs = torsion_angles_and_vectors(x, t[:, 0], t[:, 1], t[:, 2], t[:, 3])
            rows = len(b) + len(a) + np.arange(len(t))
            for m in range(4):
                out[rows, t[:, m]] = vecs[:, m]
        return np.concatenate([r, theta, phi]), out.reshape(self.size, 3 * n)

    def difference(self, q_new: np.ndarray, q_old: np.ndarray) -> np.ndarray:
        """q_new - q_old with torsion differences wrapped into (-pi, pi]."""
        d = q_new - q_old
        per = self.periodic
        d[per] = (d[per] + np.pi) % (2 * np.pi) - np.pi
        return d

    def max_bend_deg(self, x: np.ndarray) -> float:
        a = self.bends
        return float(np.degrees(bend_angles(x, a[:, 0], a[:, 1], a[:, 2]).max())) if len(a) else 0.0


def _first_fragment(bonded: np.ndarray) -> np.ndarray:
    """Mask of the atoms connected to atom 0 (depth-first search; for the tens of atoms of a
    molecule ~10x faster than scipy's connected_components, which converts to a sparse matrix)."""
    neighbours = [np.flatnonzero(row).tolist() for row in bonded]
    seen = np.zeros(len(bonded), dtype=bool)
    seen[0] = True
    stack = [0]
    while stack:
        for j in neighbours[stack.pop()]:
            if not seen[j]:
                seen[j] = True
                stack.append(j)
    return seen


def connectivity(numbers, x: np.ndarray) -> list[tuple[int, int]]:
    """Bonded pairs by covalent radii; separate fragments joined by their closest atom pair."""
    radii = covalent_radii[np.asarray(numbers, int)] / Bohr
    d = np.linalg.norm(x[:, None] - x[None, :], axis=-1)
    bonded = d < BOND_FACTOR * (radii[:, None] + radii[None, :])
    np.fill_diagonal(bonded, False)
    while True:
        first = _first_fragment(bonded)
        if first.all():
            break
        sub = np.where(first[:, None] & ~first[None, :], d, np.inf)
        i, j = np.unravel_index(np.argmin(sub), sub.shape)
        bonded[i, j] = bonded[j, i] = True
    ii, jj = np.nonzero(np.triu(bonded, 1))
    return list(zip(ii.tolist(), jj.tolist()))


def build(numbers, x: np.ndarray) -> InternalSet | None:
    """The redundant set of a geometry (Bohr), or None when it has a near-linear bend or too few
    atoms. Whether the set spans all 3N-6 internal motions (it does not for, e.g., a planar
    4-atom molecule without torsions) is for the user of its B matrix to check."""
    n = len(x)
    if n < 3:
        return None
    bonds = connectivity(numbers, x)
    nbrs: list[list[int]] = [[] for _ in range(n)]
    for i, j in bonds:
        nbrs[i].append(j)
        nbrs[j].append(i)
    bends = [(i, j, k) for j in range(n) for p, i in enumerate(nbrs[j]) for k in nbrs[j][p + 1:]]
    if not bends:
        return None
    torsions = [(i, j, k, l) for j, k in bonds for i in nbrs[j] if i != k for l in nbrs[k] if l not in (j, i)]
    internal = InternalSet(np.array(bonds, int).reshape(-1, 2), np.array(bends), np.array(torsions, int).reshape(-1, 4))
    return None if internal.max_bend_deg(x) > LINEAR_DEG else internal
