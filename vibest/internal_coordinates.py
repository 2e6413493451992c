"""Primitive internal coordinates and their Wilson B-matrix rows (pure geometry).

Used by the optimiser's model Hessian (calculation stage) and by the normal-mode composition
analysis (analysis stage). Positions in any length unit; angles in radians. The B vectors are
the first derivatives of each coordinate with respect to the Cartesian positions
(Wilson, Decius & Cross, *Molecular Vibrations*, 1955, ch. 4).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

STRETCH, BEND, LINEAR_BEND, OUT_OF_PLANE, TORSION = "stretch", "bend", "linear bend", "out-of-plane", "torsion"


@dataclass(frozen=True)
class Primitive:
    """One internal coordinate: ``kind`` and the atom indices it involves (0-based).

    stretch (i, j); bend (i, j, k) with j at the apex; torsion (i, j, k, l) about j-k;
    out-of-plane (i, j, k, l): angle of bond i-l out of the plane j-l-k, l the central atom;
    linear bend (i, j, k, c): component c (0 or 1) of the bend of a near-linear i-j-k.
    """

    kind: str
    atoms: tuple[int, ...]


def stretch_b(x: np.ndarray, i: int, j: int) -> tuple[float, dict[int, np.ndarray]]:
    d = x[i] - x[j]
    r = float(np.linalg.norm(d))
    u = d / r
    return r, {i: u, j: -u}


def bend_vectors(x: np.ndarray, i, j, k) -> tuple[np.ndarray, np.ndarray]:
    """B vectors of many bends i-j-k at once (index arrays, apex j): (T, 3, 3) for atoms
    (i, j, k), and the angles in degrees (T,)."""
    u, v = x[i] - x[j], x[k] - x[j]
    lu = np.sqrt((u * u).sum(-1, keepdims=True))
    lv = np.sqrt((v * v).sum(-1, keepdims=True))
    u, v = u / lu, v / lv
    cos = np.clip((u * v).sum(-1, keepdims=True), -1.0, 1.0)
    sin = np.maximum(np.sqrt(1.0 - cos ** 2), 1e-8)
    bi = (cos * u - v) / (lu * sin)
    bk = (cos * v - u) / (lv * sin)
    return np.stack([bi, -(bi + bk), bk], axis=1), np.degrees(np.arccos(cos[:, 0]))


def cross_rows(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Row-wise cross product of (K, 3) arrays (np.cross costs several times more for small K)."""
    out = np.empty_like(a)
    out[:, 0] = a[:, 1] * b[:, 2] - a[:, 2] * b[:, 1]
    out[:, 1] = a[:, 2] * b[:, 0] - a[:, 0] * b[:, 2]
    out[:, 2] = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
    return out


def torsion_angles_and_vectors(x: np.ndarray, i, j, k, l) -> tuple[np.ndarray, np.ndarray]:
    """Dihedral angles (rad, -pi..pi) and B vectors (T, 4, 3) of many torsions i-j-k-l at once
    (index arrays), from one set of cross products (Blondel & Karplus, J. Comput. Chem. 17,
    1132 (1996))."""
    f, g, h = x[i] - x[j], x[j] - x[k], x[l] - x[k]
    a, b = cross_rows(f, g), cross_rows(h, g)
    aa = np.maximum((a * a).sum(-1, keepdims=True), 1e-16)
    bb = np.maximum((b * b).sum(-1, keepdims=True), 1e-16)
    lg = np.sqrt((g * g).sum(-1, keepdims=True))
    angles = _dihedral(a, b, h, lg[:, 0])
    fg = (f * g).sum(-1, keepdims=True) / (aa * lg)
    hg = (h * g).sum(-1, keepdims=True) / (bb * lg)
    ta, tb = lg / aa * a, lg / bb * b
    fa_hb = fg * a - hg * b
    return angles, np.stack([-ta, ta + fa_hb, -tb - fa_hb, tb], axis=1)


def torsion_vectors(x: np.ndarray, i, j, k, l) -> np.ndarray:
    """B vectors of many torsions i-j-k-l at once (index arrays): (T, 4, 3) for atoms (i, j, k, l)."""
    return torsion_angles_and_vectors(x, i, j, k, l)[1]


def bend_angles(x: np.ndarray, i, j, k) -> np.ndarray:
    """Angles (rad) of many bends i-j-k at once (index arrays, apex j)."""
    u, v = x[i] - x[j], x[k] - x[j]
    cos = (u * v).sum(-1) / np.sqrt((u * u).sum(-1) * (v * v).sum(-1))
    return np.arccos(np.clip(cos, -1.0, 1.0))


def _dihedral(a: np.ndarray, b: np.ndarray, h: np.ndarray, length_g: np.ndarray) -> np.ndarray:
    """Dihedral angles (rad) from the plane normals a = f x g, b = h x g, the bond vector h and
    |g|: atan2((b x a) . g / |g|, a . b), where (b x a) . g / |g| = |g| (a . h) (vector identity,
    one cross product fewer)."""
    return np.arctan2(length_g * (a * h).sum(-1), (a * b).sum(-1))


def torsion_angles(x: np.ndarray, i, j, k, l) -> np.ndarray:
    """Dihedral angles (rad, -pi..pi) of many torsions i-j-k-l at once (index arrays)."""
    f, g, h = x[i] - x[j], x[j] - x[k], x[l] - x[k]
    return _dihedral(cross_rows(f, g), cross_rows(h, g), h, np.sqrt((g * g).sum(-1)))


def bend_b(x: np.ndarray, i: int, j: int, k: int) -> tuple[float, dict[int, np.ndarray]]:
    vecs, ang = bend_vectors(x, np.array([i]), np.array([j]), np.array([k]))
    return float(np.radians(ang[0])), {i: vecs[0, 0], k: vecs[0, 2], j: vecs[0, 1]}


def torsion_b(x: np.ndarray, i: int, j: int, k: int, l: int) -> tuple[float, dict[int, np.ndarray]]:
    """Dihedral angle i-j-k-l and its gradient."""
    angle, vecs = torsion_angles_and_vectors(x, np.array([i]), np.array([j]), np.array([k]), np.array([l]))
    v = vecs[0]
    return float(angle[0]), {i: v[0], j: v[1], k: v[2], l: v[3]}


def out_of_plane_b(x: np.ndarray, i: int, j: int, k: int, l: int) -> tuple[float, dict[int, np.ndarray]]:
    """Out-of-plane angle of bond l->i from the plane (j, l, k), l central (Wilson's wag).

    The gradient is taken by central differences of the analytic value (cheap: 12 evaluations).
    """

    def value(p):
        e_i, e_j, e_k = p[i] - p[l], p[j] - p[l], p[k] - p[l]
        e_i, e_j, e_k = (v / np.linalg.norm(v) for v in (e_i, e_j, e_k))
        n = np.cross(e_j, e_k)
        n /= max(np.linalg.norm(n), 1e-12)
        return float(np.arcsin(np.clip(n @ e_i, -1.0, 1.0)))

    h = 1e-5
    grads: dict[int, np.ndarray] = {}
    p = np.array(x, dtype=float)
    for atom in (i, j, k, l):
        gvec = np.zeros(3)
        for c in range(3):
            p[atom, c] += h
            up = value(p)
            p[atom, c] -= 2 * h
            dn = value(p)
            p[atom, c] += h
            gvec[c] = (up - dn) / (2 * h)
        grads[atom] = gvec
    return value(p), grads


def linear_bend_b(x: np.ndarray, i: int, j: int, k: int, component: int) -> tuple[float, dict[int, np.ndarray]]:
    """Bend of a near-linear chain i-j-k along one of two directions perpendicular to it.

    Value: w.(x_i - x_j)/r_ij + w.(x_k - x_j)/r_kj, with w a fixed unit vector perpendicular to
    the i-k axis (component 0: the one closest to the x, y or z axis least aligned with the
    chain; component 1: axis x w). Zero at the linear geometry; radians to first order.
    """
    axis = x[k] - x[i]
    axis /= np.linalg.norm(axis)
    ref = np.eye(3)[int(np.argmin(np.abs(axis)))]
    w = ref - (ref @ axis) * axis
    w /= np.linalg.norm(w)
    if component == 1:
        w = np.cross(axis, w)
    rij, rkj = np.linalg.norm(x[i] - x[j]), np.linalg.norm(x[k] - x[j])
    val = float(w @ (x[i] - x[j]) / rij + w @ (x[k] - x[j]) / rkj)
    bi, bk = w / rij, w / rkj
    return val, {i: bi, k: bk, j: -(bi + bk)}


_FUNCS = {LINEAR_BEND: linear_bend_b, STRETCH: stretch_b, BEND: bend_b, TORSION: torsion_b, OUT_OF_PLANE: out_of_plane_b}


def value_and_b_row(x: np.ndarray, prim: Primitive) -> tuple[float, np.ndarray]:
    """The coordinate's value and its B row as a flat (3N,) array."""
    val, parts = _FUNCS[prim.kind](x, *prim.atoms)
    row = np.zeros(x.size)
    for atom, vec in parts.items():
        row[3 * atom:3 * atom + 3] += vec
    return val, row


def b_matrix(x: np.ndarray, prims: list[Primitive]) -> np.ndarray:
    """Wilson B matrix, shape (len(prims), 3N)."""
    return np.array([value_and_b_row(x, p)[1] for p in prims]).reshape(len(prims), x.size)


def primitives_from_bonds(x: np.ndarray, bonds: list[tuple[int, int]], linear_deg: float = 175.0) -> list[Primitive]:
    """Stretches of every bond, bends of every bonded triple (not near-linear), torsions about
    every bond with non-linear neighbours, and out-of-plane wags at three-coordinate centres."""
    n = len(x)
    nbrs: list[list[int]] = [[] for _ in range(n)]
    prims: list[Primitive] = []
    for i, j in bonds:
        i, j = (i, j) if i < j else (j, i)
        nbrs[i].append(j)
        nbrs[j].append(i)
        prims.append(Primitive(STRETCH, (i, j)))
    linear = set()
    for j in range(n):
        for a in range(len(nbrs[j])):
            for b in range(a + 1, len(nbrs[j])):
                i, k = sorted((nbrs[j][a], nbrs[j][b]))
                ang = np.degrees(bend_b(x, i, j, k)[0])
                if ang > linear_deg:
                    linear.add((i, j, k))
                    linear.add((k, j, i))
                    prims.append(Primitive(LINEAR_BEND, (i, j, k, 0)))
                    prims.append(Primitive(LINEAR_BEND, (i, j, k, 1)))
                    continue
                prims.append(Primitive(BEND, (i, j, k)))
    for j, k in sorted(tuple(sorted(b)) for b in bonds):
        for i in nbrs[j]:
            if i == k or (i, j, k) in linear:
                continue
            for l in nbrs[k]:
                if l == j or l == i or (j, k, l) in linear:
                    continue
                prims.append(Primitive(TORSION, (i, j, k, l)))
    for l in range(n):
        if len(nbrs[l]) == 3:
            i, j, k = nbrs[l]
            prims.append(Primitive(OUT_OF_PLANE, (i, j, k, l)))
    return prims
