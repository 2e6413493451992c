"""The Kohn-Sham response to first-order orbital changes, contracted in the orbital basis.

The coupled-perturbed equations of the density-functional tier (nuclear displacements and the
electric field) need, many times over, the first-order Fock matrix of a set of perturbed
densities D1 = C (2 X) C_occ^T + h.c. (X: orbital rotations, nmo x nocc per perturbation),
projected back on the orbitals: F1 = C^T (J[D1] - hyb/2 K[D1] + V_xc[D1]) C_occ. PySCF's own
response (``mf.gen_response``) builds V_xc[D1] in the atomic-orbital basis, one density at a
time (nao^2 per grid point each); here the perturbed density is built from the orbitals on the
grid, rho1 = 4 sum_i psi_i phi_i with psi_i = sum_p phi_p X_pi, and the kernel's potential is
projected straight onto (all orbitals) x (occupied), every perturbation of a grid block in one
matrix product (nmo nocc per grid point). The mathematics is PySCF's (``nr_rks_fxc`` with the
kernel of ``cache_xc_kernel``; Coulomb and exchange from ``mf.get_jk``); only the order of the
contractions differs, so the result agrees to rounding (tests/test_orbital_response.py). Calls
with few perturbations (the electric field's three) are contracted PySCF's way, which is quicker
there (:data:`MIN_PERTURBATIONS`).

It covers closed-shell LDA and GGA functionals without range separation or non-local
correlation (B3LYP, PBE0, PBE, ...); for anything else :func:`orbital_response` returns None and
the caller keeps PySCF's response.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

#: Most memory (MB) the per-block intermediates of one chunk of perturbations may take.
CHUNK_MEMORY_MB = 200.0
#: Fewer perturbations than this in one call are left to PySCF's order of contractions (in the
#: atomic-orbital basis), which is quicker for few: the orbitals on the grid cost about as much
#: as 5-10 perturbations (methyl benzoate, B3LYP/6-31G(d): the 3 field perturbations took 60 s
#: the orbital way against 39 s PySCF's; the 54 nuclear ones 31 against 40 s per call).
MIN_PERTURBATIONS = 12


def covers(mf) -> bool:
    """Whether vibest's own contractions (this module's response and the Hessian assembly of
    vibest.calculation.hessian_assembly) cover the Kohn-Sham object ``mf``: closed shell, an LDA
    or GGA functional without range separation or non-local correlation."""
    ni = getattr(mf, "_numint", None)
    if ni is None or getattr(mf, "do_nlc", lambda: False)() or mf.mol.spin != 0:
        return False
    omega = ni.rsh_and_hybrid_coeff(mf.xc, spin=0)[0]
    return ni._xc_type(mf.xc) in ("LDA", "GGA") and omega == 0


def orbital_response(mf) -> Callable[[np.ndarray], np.ndarray] | None:
    """``fx(x) -> f1`` for a converged closed-shell Kohn-Sham object ``mf``: x (k, nmo, nocc)
    orbital rotations, f1 (k, nmo, nocc) the first-order Fock matrices in the orbital basis (see
    the module docstring; the same as ``pyscf.hessian.rhf.gen_vind``). None when the functional
    or the SCF object is not covered."""
    if not covers(mf):
        return None
    mol, ni = mf.mol, mf._numint
    xctype = ni._xc_type(mf.xc)
    hyb = ni.rsh_and_hybrid_coeff(mf.xc, spin=0)[2]
    hybrid = ni.libxc.is_hybrid_xc(mf.xc)
    mo_c, mo_o = mf.mo_coeff, mf.mo_occ
    occ = mo_o > 0
    c_occ = mo_c[:, occ]
    max_memory = max(2000.0, mf.max_memory * 0.8)
    rho0, vxc, fxc = ni.cache_xc_kernel(mol, mf.grids, mf.xc, mo_c, mo_o, 0, max_memory)
    gga = xctype == "GGA"

    def coulomb_exchange(d: np.ndarray) -> np.ndarray:  # (k, nao, nao) -> (k, nao, nao)
        if hybrid:
            vj, vk = mf.get_jk(mol, d, hermi=1)
            return vj - 0.5 * hyb * vk
        return mf.get_j(mol, d, hermi=1)

    def fx(x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float).reshape(-1, mo_c.shape[1], c_occ.shape[1])
        d = mo_c @ (2.0 * x) @ c_occ.T
        d = d + d.transpose(0, 2, 1)
        v = coulomb_exchange(d)
        few = len(x) < MIN_PERTURBATIONS  # PySCF's own order of contractions is quicker for few
        if few:
            v += ni.nr_rks_fxc(mol, mf.grids, mf.xc, None, d, 0, 1, rho0, vxc, fxc, max_memory=max_memory)
        out = mo_c.T @ v @ c_occ
        if few:
            return out
        kernel = fxc if gga else fxc.reshape(1, 1, -1)
        p1 = 0
        for ao, _, weight, _ in ni.block_loop(mol, mf.grids, mol.nao, 1 if gga else 0, max_memory=max_memory):
            p0, p1 = p1, p1 + weight.size
            ao = ao if gga else ao[None]
            out += _kernel_block(ao @ mo_c, ao @ c_occ, x, kernel[:, :, p0:p1] * weight)
        return out

    return fx


def pyscf_response(mf) -> Callable[[np.ndarray], np.ndarray]:
    """PySCF's own response in the orbital basis (``pyscf.hessian.rhf.gen_vind``): the fallback
    for what :func:`orbital_response` does not cover, and its reference in the tests."""
    from pyscf.hessian import rhf as rhf_hessian

    return rhf_hessian.gen_vind(mf, mf.mo_coeff, mf.mo_occ)


def _kernel_block(phi: np.ndarray, phi_occ: np.ndarray, x: np.ndarray, fxc_w: np.ndarray) -> np.ndarray:
    """The exchange-correlation part of f1 from one grid block: ``phi`` (c, g, nmo) orbitals and,
    for a GGA (c = 4), their gradients; ``phi_occ`` (c, g, nocc); ``x`` (k, nmo, nocc);
    ``fxc_w`` (c, c, g) the kernel times the grid weights. Returns (k, nmo, nocc); the grid is
    taken in slices small enough for :data:`CHUNK_MEMORY_MB`, all perturbations at once."""
    c, g, nmo = phi.shape
    k, _, nocc = x.shape
    out = np.zeros((nmo, k * nocc))
    xs = x.transpose(1, 0, 2).reshape(nmo, k * nocc)
    step = max(16, int(CHUNK_MEMORY_MB * 1e6 / (8.0 * 2 * c * k * nocc)))
    for g0 in range(0, g, step):
        ph, po, fw = phi[:, g0:g0 + step], phi_occ[:, g0:g0 + step], fxc_w[:, :, g0:g0 + step]
        n = ph.shape[1]
        flat = ph.reshape(c * n, nmo)
        psi = (flat @ xs).reshape(c, n, k, nocc)
        rho1 = np.empty((k, c, n))
        rho1[:, 0] = 4.0 * np.einsum("gki,gi->kg", psi[0], po[0])
        for a in range(1, c):
            rho1[:, a] = 4.0 * (np.einsum("gki,gi->kg", psi[a], po[0]) + np.einsum("gki,gi->kg", psi[0], po[a]))
        wv = np.einsum("kyg,xyg->kxg", rho1, fw)  # (k, c, g)
        b = psi  # reused as the buffer of the potential's right-hand factors
        b[0] = np.einsum("kg,gi->gki", wv[:, 0], po[0])
        for a in range(1, c):
            b[0] += np.einsum("kg,gi->gki", wv[:, a], po[a])
            b[a] = np.einsum("kg,gi->gki", wv[:, a], po[0])
        out += flat.T @ b.reshape(c * n, k * nocc)
    return out.reshape(nmo, k, nocc).transpose(1, 0, 2)
