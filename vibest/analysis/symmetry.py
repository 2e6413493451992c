"""Point-group operations of a geometry and the symmetry class of each normal mode (pure).

Used to assign computed modes to experimental fundamentals by symmetry. Only properties that do
not depend on axis conventions are used, so that they compare with any table's Mulliken labels:
whether a mode is totally symmetric, its degeneracy (1, 2 or 3), and its parity (g/u) under
inversion when the molecule has a centre of symmetry. (Which of b1/b2 a mode is depends on how
the table chose its axes, so it is not used.)

Method: candidate operations (proper rotations C2-C6 and improper S3, S4, S6 about, and mirror
planes perpendicular to, axes through the centre of mass along principal axes, atoms, midpoints
of like atoms and normals of atom pairs; plus inversion) are kept when they map every atom onto
an atom of the same element within ``tolerance_angstrom``. A mode's character under operation R
is c_R = <l, R l> for its normalised mass-weighted vector l (atoms permuted by R). A mode is
non-degenerate when |c_R| ~ 1 for every R, totally symmetric when c_R ~ +1 for every R.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase.data import atomic_masses


@dataclass(frozen=True)
class SymmetryOperation:
    """An orthogonal 3x3 matrix and the atom permutation it induces (atom i goes to perm[i])."""

    matrix: np.ndarray
    permutation: np.ndarray
    is_inversion: bool = False


def _rotation(axis: np.ndarray, angle: float) -> np.ndarray:
    a = axis / np.linalg.norm(axis)
    k = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
    return np.eye(3) + np.sin(angle) * k + (1 - np.cos(angle)) * (k @ k)


def _candidate_axes(x: np.ndarray, numbers: np.ndarray, masses: np.ndarray) -> list[np.ndarray]:
    inertia = np.zeros((3, 3))
    for m, r in zip(masses, x):
        inertia += m * (np.dot(r, r) * np.eye(3) - np.outer(r, r))
    vectors = list(np.linalg.eigh(inertia)[1].T)
    n = len(x)
    vectors += [r for r in x]
    for i in range(n):
        for j in range(i + 1, n):
            if numbers[i] == numbers[j]:
                vectors.append(x[i] + x[j])
                vectors.append(x[i] - x[j])
            vectors.append(np.cross(x[i], x[j]))
    axes: list[np.ndarray] = []
    for v in vectors:
        norm = np.linalg.norm(v)
        if norm < 1e-3:
            continue
        v = v / norm
        if all(abs(np.dot(v, a)) < 0.9999 for a in axes):
            axes.append(v)
    return axes


def _permutation(matrix: np.ndarray, x: np.ndarray, numbers: np.ndarray, tol: float) -> np.ndarray | None:
    y = x @ matrix.T
    d = np.linalg.norm(y[:, None, :] - x[None, :, :], axis=2)
    d[numbers[:, None] != numbers[None, :]] = np.inf
    perm = np.argmin(d, axis=1)
    if np.any(d[np.arange(len(x)), perm] > tol) or len(set(perm.tolist())) != len(x):
        return None
    return perm


def symmetry_operations(numbers, positions_angstrom, tolerance_angstrom: float = 0.03,
                        max_atoms: int = 40) -> list[SymmetryOperation]:
    """Non-identity point-group operations of the geometry (empty for C1 or more than ``max_atoms`` atoms)."""
    numbers = np.asarray(numbers)
    x = np.asarray(positions_angstrom, dtype=float)
    if len(x) > max_atoms or len(x) < 2:
        return []
    masses = atomic_masses[numbers]
    x = x - (masses[:, None] * x).sum(0) / masses.sum()
    candidates = [(-np.eye(3), True)]
    for axis in _candidate_axes(x, numbers, masses):
        for order in (2, 3, 4, 5, 6):
            for k in range(1, order):
                if np.gcd(k, order) == 1:
                    rot = _rotation(axis, 2 * np.pi * k / order)
                    candidates.append((rot, False))
                    if order in (3, 4, 6):
                        candidates.append((rot @ (np.eye(3) - 2 * np.outer(axis, axis)), False))
        candidates.append((np.eye(3) - 2 * np.outer(axis, axis), False))
    ops: list[SymmetryOperation] = []
    for matrix, inversion in candidates:
        if any(np.abs(op.matrix - matrix).max() < 1e-3 for op in ops):
            continue
        perm = _permutation(matrix, x, numbers, tolerance_angstrom)
        if perm is not None:
            ops.append(SymmetryOperation(matrix, perm, inversion))
    return ops


def _overlaps(ops: list[SymmetryOperation], modes: np.ndarray) -> np.ndarray:
    """O[r, k, m] = <l_k, R_r l_m> for modes (M, N, 3) of unit norm."""
    out = np.empty((len(ops), len(modes), len(modes)))
    for r, op in enumerate(ops):
        moved = np.zeros_like(modes)
        moved[:, op.permutation, :] = modes @ op.matrix.T
        out[r] = np.einsum("kij,mij->km", modes, moved)
    return out


@dataclass(frozen=True)
class ModeSymmetry:
    """Convention-free symmetry class of one mode: degeneracy, totally symmetric or not, parity
    ("g", "u", or "" without a centre of symmetry)."""

    degeneracy: int
    totally_symmetric: bool
    parity: str

    @property
    def key(self) -> tuple[int, bool, str]:
        return (self.degeneracy, self.totally_symmetric, self.parity)


def mode_symmetries(ops: list[SymmetryOperation], modes_mass_weighted: np.ndarray,
                    threshold: float = 0.9, coupling: float = 0.2) -> list[ModeSymmetry]:
    """Symmetry class of every mode. The degenerate partners of mode m are the modes k that some
    operation mixes into it (|<l_k, R l_m>| > ``coupling``); its degeneracy is 1 + their number."""
    modes = np.asarray(modes_mass_weighted, dtype=float)
    count = len(modes)
    if not ops:
        return [ModeSymmetry(1, True, "") for _ in range(count)]
    o = _overlaps(ops, modes)
    chars = np.einsum("rmm->mr", o)
    inv = [k for k, op in enumerate(ops) if op.is_inversion]
    mixing = np.abs(o).max(axis=0)  # (k, m)
    np.fill_diagonal(mixing, 0.0)
    abelian = all(np.abs(op.matrix @ op.matrix - np.eye(3)).max() < 1e-6 for op in ops)
    if abelian:
        # Only one-dimensional species: modes mixed by an operation are accidentally (nearly)
        # degenerate; symmetry-adapted combinations of each such group carry their characters.
        done: set[int] = set()
        for m in range(count):
            group = sorted({m} | set(np.nonzero(mixing[:, m] > coupling)[0].tolist()))
            if len(group) == 1 or m in done:
                continue
            blocks = o[:, group][:, :, group]
            weights = np.arange(1, len(ops) + 1) * np.pi
            _, vecs = np.linalg.eigh(np.einsum("r,rij->ij", weights, 0.5 * (blocks + blocks.transpose(0, 2, 1))))
            for slot, k in enumerate(group):
                chars[k] = np.einsum("i,rij,j->r", vecs[:, slot], blocks, vecs[:, slot])
            done.update(group)
        mixing[:] = 0.0
    out = []
    for m in range(count):
        parity = ""
        if inv:
            c = chars[m, inv[0]]
            parity = "g" if c > threshold else ("u" if c < -threshold else "")
        partners = int(np.sum(mixing[:, m] > coupling))
        if partners == 0:
            out.append(ModeSymmetry(1, bool(np.all(chars[m] > threshold)), parity))
        else:
            out.append(ModeSymmetry(min(3, partners + 1), False, parity))
    return out


#: Mulliken labels of totally symmetric species (lower case, ' and " as written in tables).
TOTALLY_SYMMETRIC_LABELS = {"a1", "ag", "a1g", "a'", "a1'", "sg+", "s+", "a"}


def label_symmetry(label: str, degeneracy: int, centrosymmetric: bool) -> ModeSymmetry:
    """The convention-free class of a table's symmetry label (e.g. "a1g", "e'", "b2u", "pu")."""
    s = label.strip().lower().replace("sigma", "s").replace("pi", "p")
    parity = ""
    if centrosymmetric:
        core = s.rstrip("+-'\"")
        parity = "g" if core.endswith("g") else ("u" if core.endswith("u") else "")
    return ModeSymmetry(int(degeneracy), degeneracy == 1 and s in TOTALLY_SYMMETRIC_LABELS, parity)
