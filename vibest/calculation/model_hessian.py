"""Lindh's model Hessian in Cartesian coordinates, the optimiser's starting curvature.

R. Lindh, A. Bernhardsson, G. Karlstroem, P.-A. Malmqvist, Chem. Phys. Lett. 241, 423 (1995):
force constants k_r rho_ij (stretch), k_phi rho_ij rho_jk (bend), k_tau rho_ij rho_jk rho_kl
(torsion) over all atom pairs/triples/quadruples, with rho_ij = exp(alpha_ij (r_ref,ij^2 - r_ij^2)),
projected to Cartesians with Wilson B vectors: H = sum_k f_k b_k b_k^T (Eh/Bohr^2).
The parameters below are the paper's table (rows 1-3 of the periodic table; heavier atoms use row 3).
Vectorised over terms with numpy; the B vectors are those of :mod:`vibest.internal_coordinates`.
"""

from __future__ import annotations

import numpy as np

from ..internal_coordinates import bend_vectors, torsion_vectors

K_STRETCH, K_BEND, K_TORSION = 0.45, 0.15, 0.005
#: alpha_ij (Bohr^-2) and r_ref,ij (Bohr) by periodic-table rows (1, 2, 3).
ALPHA = np.array([[1.0000, 0.3949, 0.3949], [0.3949, 0.2800, 0.2800], [0.3949, 0.2800, 0.2800]])
R_REF = np.array([[1.35, 2.10, 2.53], [2.10, 2.87, 3.40], [2.53, 3.40, 3.40]])
#: Terms whose rho product is below this are dropped (they add < 0.1% of the nearest terms).
RHO_CUTOFF = 1e-3
#: Bends (and torsions through them) closer to linear than this are left out (degrees).
LINEAR_DEG = 175.0


def _row(z: int) -> int:
    return 0 if z <= 2 else (1 if z <= 10 else 2)


def _norm(v):
    return np.linalg.norm(v, axis=-1, keepdims=True)


def _accumulate(h4, atoms: np.ndarray, vecs: np.ndarray, k: np.ndarray) -> None:
    """h4[a_p, a_q] += k b_p b_q^T for every term (atoms: (T, m), vecs: (T, m, 3))."""
    m = atoms.shape[1]
    for p in range(m):
        for q in range(m):
            blocks = k[:, None, None] * vecs[:, p, :, None] * vecs[:, q, None, :]
            np.add.at(h4, (atoms[:, p], atoms[:, q]), blocks)


def lindh_rho(numbers, positions_bohr) -> np.ndarray:
    """Lindh's pair factors rho_ij = exp(alpha_ij (r_ref,ij^2 - r_ij^2)), (N, N), zero diagonal."""
    x = np.asarray(positions_bohr, dtype=float)
    rows = np.array([_row(int(z)) for z in numbers])
    d2 = ((x[:, None, :] - x[None, :, :]) ** 2).sum(-1)
    rho = np.exp(ALPHA[rows[:, None], rows[None, :]] * (R_REF[rows[:, None], rows[None, :]] ** 2 - d2))
    np.fill_diagonal(rho, 0.0)
    return rho


def lindh_diagonal(numbers, positions_bohr, bonds: np.ndarray, bends: np.ndarray, torsions: np.ndarray) -> np.ndarray:
    """Lindh's force constants of given primitives (Eh/Bohr^2, Eh/rad^2), in the order bonds,
    bends, torsions: the model restricted to one internal set, as a diagonal Hessian there."""
    rho = lindh_rho(numbers, positions_bohr)
    kb = K_STRETCH * rho[bonds[:, 0], bonds[:, 1]]
    ka = K_BEND * rho[bends[:, 0], bends[:, 1]] * rho[bends[:, 1], bends[:, 2]]
    t = torsions
    kt = K_TORSION * rho[t[:, 0], t[:, 1]] * rho[t[:, 1], t[:, 2]] * rho[t[:, 2], t[:, 3]]
    return np.concatenate([kb, ka, kt])


def lindh_hessian(numbers, positions_bohr) -> np.ndarray:
    """Model Hessian (3N, 3N) in Eh/Bohr^2 for positions in Bohr."""
    x = np.asarray(positions_bohr, dtype=float)
    n = len(x)
    rho = lindh_rho(numbers, x)
    h4 = np.zeros((n, n, 3, 3))
    near = [np.nonzero(rho[i] > RHO_CUTOFF)[0] for i in range(n)]
    # stretches
    ii, jj = np.nonzero(np.triu(rho > RHO_CUTOFF, 1))
    if len(ii):
        u = x[ii] - x[jj]
        u /= _norm(u)
        _accumulate(h4, np.stack([ii, jj], 1), np.stack([u, -u], 1), K_STRETCH * rho[ii, jj])
    # bends
    tri = [(i, j, k) for j in range(n) for a, i in enumerate(near[j]) for k in near[j][a + 1:]
           if rho[i, j] * rho[j, k] >= RHO_CUTOFF]
    if tri:
        t = np.array(tri)
        vecs, ang = bend_vectors(x, t[:, 0], t[:, 1], t[:, 2])
        keep = ang <= LINEAR_DEG
        _accumulate(h4, t[keep], vecs[keep], K_BEND * rho[t[keep, 0], t[keep, 1]] * rho[t[keep, 1], t[keep, 2]])
    # torsions
    quads = [(i, j, k, l) for j in range(n) for k in near[j] if k > j
             for i in near[j] if i != k and rho[i, j] * rho[j, k] >= RHO_CUTOFF
             for l in near[k] if l != i and l != j and rho[i, j] * rho[j, k] * rho[k, l] >= RHO_CUTOFF]
    if quads:
        q = np.array(quads)
        _, a1 = bend_vectors(x, q[:, 0], q[:, 1], q[:, 2])
        _, a2 = bend_vectors(x, q[:, 1], q[:, 2], q[:, 3])
        keep = (a1 <= LINEAR_DEG) & (a2 <= LINEAR_DEG)
        q = q[keep]
        if len(q):
            kt = K_TORSION * rho[q[:, 0], q[:, 1]] * rho[q[:, 1], q[:, 2]] * rho[q[:, 2], q[:, 3]]
            _accumulate(h4, q, torsion_vectors(x, q[:, 0], q[:, 1], q[:, 2], q[:, 3]), kt)
    h = h4.transpose(0, 2, 1, 3).reshape(3 * n, 3 * n)
    return 0.5 * (h + h.T)
