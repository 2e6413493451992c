"""Lindh's model Hessian in Cartesian coordinates, the optimiser's starting curvature.

R. Lindh, A. Bernhardsson, G. Karlstroem, P.-A. Malmqvist, Chem. Phys. Lett. 241, 423 (1995):
force constants k_r rho_ij (stretch), k_phi rho_ij rho_jk (bend), k_tau rho_ij rho_jk rho_kl
(torsion) over all atom pairs/triples/quadruples, with rho_ij = exp(alpha_ij (r_ref,ij^2 - r_ij^2)),
projected to Cartesians with Wilson B vectors: H = sum_k f_k b_k b_k^T (Eh/Bohr^2).
The parameters below are the paper's table (rows 1-3 of the periodic table; heavier atoms use row 3).
"""

from __future__ import annotations

import numpy as np

from ..internal_coordinates import bend_b, stretch_b, torsion_b

K_STRETCH, K_BEND, K_TORSION = 0.45, 0.15, 0.005
#: alpha_ij (Bohr^-2) and r_ref,ij (Bohr) by periodic-table rows (1, 2, 3).
ALPHA = np.array([[1.0000, 0.3949, 0.3949], [0.3949, 0.2800, 0.2800], [0.3949, 0.2800, 0.2800]])
R_REF = np.array([[1.35, 2.10, 2.53], [2.10, 2.87, 3.40], [2.53, 3.40, 3.40]])
#: Terms whose rho product is below this are dropped (they add < 0.1% of the nearest terms).
RHO_CUTOFF = 1e-3


def _row(z: int) -> int:
    return 0 if z <= 2 else (1 if z <= 10 else 2)


def lindh_hessian(numbers, positions_bohr) -> np.ndarray:
    """Model Hessian (3N, 3N) in Eh/Bohr^2 for positions in Bohr."""
    x = np.asarray(positions_bohr, dtype=float)
    n = len(x)
    rows = np.array([_row(int(z)) for z in numbers])
    d2 = ((x[:, None, :] - x[None, :, :]) ** 2).sum(-1)
    rho = np.exp(ALPHA[rows[:, None], rows[None, :]] * (R_REF[rows[:, None], rows[None, :]] ** 2 - d2))
    np.fill_diagonal(rho, 0.0)
    h = np.zeros((3 * n, 3 * n))

    def add(k: float, parts: dict[int, np.ndarray]) -> None:
        idx = np.concatenate([np.arange(3 * a, 3 * a + 3) for a in parts])
        vec = np.concatenate(list(parts.values()))
        h[np.ix_(idx, idx)] += k * np.outer(vec, vec)

    near = [np.nonzero(rho[i] > RHO_CUTOFF)[0] for i in range(n)]
    for i in range(n):
        for j in near[i]:
            if j > i:
                add(K_STRETCH * rho[i, j], stretch_b(x, i, j)[1])
    for j in range(n):
        for a, i in enumerate(near[j]):
            for k in near[j][a + 1:]:
                r = rho[i, j] * rho[j, k]
                if r < RHO_CUTOFF:
                    continue
                ang = bend_b(x, i, j, k)
                if np.degrees(ang[0]) > 175.0:
                    continue
                add(K_BEND * r, ang[1])
    for j in range(n):
        for k in near[j]:
            if k <= j:
                continue
            for i in near[j]:
                if i == k or rho[i, j] * rho[j, k] < RHO_CUTOFF:
                    continue
                for l in near[k]:
                    if l in (i, j):
                        continue
                    r = rho[i, j] * rho[j, k] * rho[k, l]
                    if r < RHO_CUTOFF:
                        continue
                    if (np.degrees(bend_b(x, i, j, k)[0]) > 175.0
                            or np.degrees(bend_b(x, j, k, l)[0]) > 175.0):
                        continue
                    add(K_TORSION * r, torsion_b(x, i, j, k, l)[1])
    return 0.5 * (h + h.T)
