"""Point-group operations of a geometry and the symmetry class of each normal mode (pure).

Used to assign computed modes to experimental fundamentals by symmetry. Only properties that do
not depend on axis conventions are used, so that they compare with any table's Mulliken labels:
whether a mode is totally symmetric, its degeneracy (1, 2 or 3), its parity (g/u) under
inversion when the molecule has a centre of symmetry, and, from Mulliken's rules for the letters
and primes of a label (R. S. Mulliken, J. Chem. Phys. 23, 1997 (1955)): for a non-degenerate
mode whether it is symmetric (A, or a Sigma of a linear molecule) or antisymmetric (B) under the
principal rotation, and whether it is symmetric (') or antisymmetric (") under the horizontal
mirror plane. (Which of b1/b2, or a1/a2 beyond the totally symmetric one, a mode is depends on
how the table chose its axes and planes, so it is not used.) The principal rotation is the
proper rotation of highest order when its axis is unique, or the improper S_2n on one of several
C_n axes (D2d's S4); without a unique one (D2h, Td) the A/B letter is not used. The horizontal
plane is the mirror perpendicular to the principal axis, or the only mirror of a Cs molecule.

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
    from ..inertia import principal_axes

    vectors = list(principal_axes(x, masses))
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
    from ..inertia import centred

    masses = atomic_masses[numbers]
    x = centred(x, masses)
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
    ("g", "u", or "" without a centre of symmetry); ``axial``: for a non-degenerate mode +1
    symmetric, -1 antisymmetric under the principal rotation (0 unknown or degenerate);
    ``horizontal``: +1 symmetric, -1 antisymmetric under the horizontal mirror plane (0 unknown)."""

    degeneracy: int
    totally_symmetric: bool
    parity: str
    axial: int = 0
    horizontal: int = 0

    @property
    def key(self) -> tuple[int, bool, str]:
        """The coarse class: degeneracy, totally symmetric, parity."""
        return (self.degeneracy, self.totally_symmetric, self.parity)

    def species_key(self, axial: bool, horizontal: bool) -> tuple:
        """The coarse class refined by the A/B letter and/or the prime (when asked for)."""
        return self.key + ((self.axial if axial else 0), (self.horizontal if horizontal else 0))


def _rotation_order(matrix: np.ndarray) -> tuple[int, bool]:
    """(n, proper) of an operation: a proper rotation C_n (n = 1 for the identity), or an
    improper S_n (n = 1 for a mirror, 2 for the inversion)."""
    proper = np.linalg.det(matrix) > 0
    cos = (np.trace(matrix) - 1.0) / 2.0 if proper else (np.trace(matrix) + 1.0) / 2.0
    angle = float(np.arccos(np.clip(cos, -1.0, 1.0)))
    return (1 if angle < 1e-3 else int(round(2 * np.pi / angle))), bool(proper)


def _axis(matrix: np.ndarray, proper: bool) -> np.ndarray:
    """Unit axis of a rotation (eigenvalue +1) or of an improper rotation / mirror normal (-1)."""
    w, v = np.linalg.eig(matrix)
    a = np.real(v[:, int(np.argmin(np.abs(w - (1.0 if proper else -1.0))))])
    return a / np.linalg.norm(a)


def principal_and_horizontal(ops: list[SymmetryOperation]) -> tuple[int | None, int | None]:
    """Indices into ``ops`` of the principal rotation and of the horizontal mirror (None when
    the group has none, or no unique one): see the module docstring."""
    info = [(*_rotation_order(op.matrix), op) for op in ops]
    axes = [_axis(op.matrix, proper) for n, proper, op in info]
    rotations = [k for k, (n, proper, op) in enumerate(info) if proper and n > 1]
    principal = None
    if rotations:
        top = max(info[k][0] for k in rotations)
        best = [k for k in rotations if info[k][0] == top]
        distinct: list[int] = []
        for k in best:
            if all(abs(np.dot(axes[k], axes[j])) < 0.999 for j in distinct):
                distinct.append(k)
        if len(distinct) == 1:
            principal = distinct[0]
        else:
            improper = [k for k, (n, proper, op) in enumerate(info)
                        if not proper and n == 2 * top and not op.is_inversion
                        and any(abs(np.dot(axes[k], axes[j])) > 0.999 for j in distinct)]
            lines = {tuple(np.round(np.abs(axes[k]), 3)) for k in improper}
            if improper and len(lines) == 1:
                principal = improper[0]
    mirrors = [k for k, (n, proper, op) in enumerate(info) if not proper and n == 1]
    horizontal = None
    if principal is not None:
        lying = [k for k in mirrors if abs(np.dot(axes[k], axes[principal])) > 0.999]
        horizontal = lying[0] if lying else None
    elif not rotations and len(mirrors) == 1:
        horizontal = mirrors[0]
    return principal, horizontal


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
    principal, horizontal = principal_and_horizontal(ops)

    def sign(m: int, op: int | None) -> int:
        if op is None:
            return 0
        c = chars[m, op]
        return 1 if c > threshold else (-1 if c < -threshold else 0)

    out = []
    for m in range(count):
        parity = {1: "g", -1: "u", 0: ""}[sign(m, inv[0])] if inv else ""
        partners = int(np.sum(mixing[:, m] > coupling))
        if partners == 0:
            out.append(ModeSymmetry(1, bool(np.all(chars[m] > threshold)), parity,
                                    sign(m, principal), sign(m, horizontal)))
        else:
            out.append(ModeSymmetry(min(3, partners + 1), False, parity, 0, sign(m, horizontal)))
    return out


#: Mulliken labels of totally symmetric species (lower case, ' and " as written in tables).
TOTALLY_SYMMETRIC_LABELS = {"a1", "ag", "a1g", "a'", "a1'", "sg+", "s+", "a"}


def label_symmetry(label: str, degeneracy: int, centrosymmetric: bool) -> ModeSymmetry:
    """The convention-free class of a table's symmetry label (e.g. "a1g", "e'", "b2u", "pu"):
    A (and Sigma) non-degenerate species are symmetric under the principal rotation, B ones
    antisymmetric; ' marks symmetric, " antisymmetric under the horizontal plane."""
    s = label.strip().lower().replace("sigma", "s").replace("pi", "p")
    parity = ""
    if centrosymmetric:
        core = s.rstrip("+-'\"")
        parity = "g" if core.endswith("g") else ("u" if core.endswith("u") else "")
    axial = 0
    if degeneracy == 1 and s[:1] in ("a", "s", "b"):
        axial = -1 if s[0] == "b" else 1
    horizontal = -1 if s.endswith('"') or s.endswith("''") else (1 if s.endswith("'") else 0)
    return ModeSymmetry(int(degeneracy), degeneracy == 1 and s in TOTALLY_SYMMETRIC_LABELS, parity,
                        axial, horizontal)
