"""The assembly of the analytic Hessian (PySCF's ``partial_hess_elec``), done vibest's way.

**The functional's terms, contracted atom pair by atom pair.**
PySCF's RKS Hessian (``pyscf.hessian.rks.partial_hess_elec``) builds, for every atom A, the
nao x nao matrices V^A_xy of the functional's second-derivative potential (``_get_vxc_deriv2``:
per grid block and atom about a dozen products of (grid x nao) by (grid x nao)) and then uses
them only through 2 sum_{p in B} sum_q V^A_xy,pq D_pq for every atom B. Each V^A is a sum of
terms f(g) phi'_p(g) phi_q(g), so the contraction with the density D can be taken first:
sum_q phi_q(g) D_pq is the same for every atom, and what is left per atom pair is a sum over
the grid of products already at hand (grid x nao per atom instead of grid x nao^2). The
mathematics is PySCF's; only the order of the sums differs, so the Hessian agrees to rounding
(tests/test_hessian_assembly.py). The functional's one-centre diagonal (``_get_vxc_diag``) stays
PySCF's.

**The two-electron terms, exact or density-fitted.** The second-derivative two-electron
integrals (PySCF's ``_partial_hess_ejk``: four-centre integrals differentiated twice, contracted
with the density) are the larger part of the assembly. With ``two_electron="density-fitted"``
they are PySCF's density-fitted ones (``pyscf.df.hessian.rhf._partial_hess_ejk``, with the
auxiliary basis PySCF chooses for the orbital basis: cc-pVDZ-JKFIT for 6-31G(d)), while the SCF,
the coupled-perturbed equations and the dipole derivatives stay exact: the Hessian differs from
the exact one by the fitting error of those terms alone (methyl benzoate, B3LYP/6-31G(d):
frequencies within 0.6 cm^-1, intensities within 0.5 %; the terms in 107 s against 392 s, both
measured while other work ran; tests/test_hessian_assembly.py).

It covers closed-shell LDA and GGA functionals without range separation or non-local
correlation (:func:`vibest.calculation.orbital_response.covers`, shared with the response); for anything else
:func:`contracted_partial_hessian` returns None and the caller keeps PySCF's assembly, which
has exact two-electron terms only: density-fitted ones are then refused
(:func:`two_electron_problem`, which the engine also asks before any SCF).
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from .orbital_response import covers

#: Second-derivative components of the atomic orbitals in PySCF's order (XX=4, XY=5, ...).
_SECOND = np.array([[4, 5, 6], [5, 7, 8], [6, 8, 9]])


#: The ways to do the two-electron terms (``two_electron``; DFTSettings.hessian_two_electron).
TWO_ELECTRON_WAYS = ("exact", "density-fitted")


def two_electron_problem(mf, two_electron: str) -> str | None:
    """Why the assembly cannot take the two-electron terms the way ``two_electron`` says for the
    Kohn-Sham object ``mf`` (no SCF needed), or None: an unknown way, or density-fitted terms for
    a functional it does not cover (PySCF's own assembly, the fallback, has exact terms only)."""
    if two_electron not in TWO_ELECTRON_WAYS:
        return (f"Hessian two-electron terms (two_electron) are one of {', '.join(TWO_ELECTRON_WAYS)}, "
                f"not {two_electron!r}")
    if two_electron != "exact" and not covers(mf):
        return (f"{two_electron} two-electron Hessian terms are available for LDA and GGA functionals "
                f"without range separation only, not {mf.xc}")
    return None


def contracted_partial_hessian(hobj, two_electron: str = "exact") -> Callable | None:
    """A drop-in for ``hobj.partial_hess_elec`` (PySCF's RKS Hessian object ``hobj``) that
    contracts the functional's terms per atom pair and takes the two-electron terms as
    ``two_electron`` says (:data:`TWO_ELECTRON_WAYS`); None when the functional is not covered
    and the terms are exact (then PySCF's assembly is the same thing). Raises ValueError with
    :func:`two_electron_problem`'s reason otherwise."""
    mf = hobj.base
    problem = two_electron_problem(mf, two_electron)
    if problem:
        raise ValueError(problem)
    if not covers(mf):
        return None
    ni = mf._numint
    hyb = ni.rsh_and_hybrid_coeff(mf.xc, spin=0)[2]

    def partial_hess_elec(mo_energy=None, mo_coeff=None, mo_occ=None, atmlst=None, max_memory=4000, verbose=None):
        from pyscf import lib
        from pyscf.hessian import rks as rks_hessian

        mol = hobj.mol
        mo_energy = mf.mo_energy if mo_energy is None else mo_energy
        mo_coeff = mf.mo_coeff if mo_coeff is None else mo_coeff
        mo_occ = mf.mo_occ if mo_occ is None else mo_occ
        atmlst = list(range(mol.natm)) if atmlst is None else list(atmlst)
        hybrid = ni.libxc.is_hybrid_xc(mf.xc)
        terms, target = _two_electron_terms(hobj, two_electron)
        de2, ej, ek = terms(target, mo_energy, mo_coeff, mo_occ, atmlst, max_memory, verbose, with_k=hybrid)
        de2 += ej - hyb * ek
        max_memory = max(2000, mf.max_memory * 0.9 - lib.current_memory()[0])
        diag = rks_hessian._get_vxc_diag(hobj, mo_coeff, mo_occ, max_memory)
        dm0 = mf.make_rdm1(mo_coeff, mo_occ)
        pairs = xc_pair_terms(hobj, mo_coeff, mo_occ, dm0, max_memory)
        aoslices = mol.aoslice_by_atom()
        for i0, ia in enumerate(atmlst):
            p0, p1 = aoslices[ia][2:]
            de2[i0, i0] += np.einsum("xypq,pq->xy", diag[:, :, p0:p1], dm0[p0:p1]) * 2
            for j0, ja in enumerate(atmlst[:i0 + 1]):  # PySCF's lower triangle, then its transpose
                de2[i0, j0] += pairs[ia, ja]
            for j0 in range(i0):
                de2[j0, i0] = de2[i0, j0].T
        return de2

    return partial_hess_elec


def _two_electron_terms(hobj, two_electron: str) -> tuple[Callable, object]:
    """PySCF's function for the two-electron part of the assembly and the Hessian object to
    call it with: density-fitted when asked or when ``hobj`` is already PySCF's density-fitted
    Hessian (its SCF ran with density fitting), exact otherwise."""
    from pyscf.df.hessian import rhf as df_rhf_hessian
    from pyscf.df.hessian import rks as df_rks_hessian
    from pyscf.hessian import rhf as rhf_hessian

    if isinstance(hobj, df_rks_hessian.Hessian):
        return df_rhf_hessian._partial_hess_ejk, hobj
    if two_electron == "density-fitted":
        fitted = hobj.base.density_fit().Hessian()  # the same orbitals; only the integrals are fitted
        fitted.max_memory = hobj.max_memory
        return df_rhf_hessian._partial_hess_ejk, fitted
    return rhf_hessian._partial_hess_ejk, hobj


def xc_pair_terms(hobj, mo_coeff, mo_occ, dm0, max_memory) -> np.ndarray:
    """(natm, natm, 3, 3) in Eh/Bohr^2: [A, B, x, y] = 2 sum_{p in B} sum_q V^A_xy,pq D_pq with
    V^A PySCF's ``_get_vxc_deriv2(...)[A]`` (LDA or GGA) and D = ``dm0`` the density of
    ``mo_coeff``/``mo_occ``, contracted without forming V^A."""
    from pyscf.dft import numint

    mol, mf = hobj.mol, hobj.base
    ni = mf._numint
    gga = ni._xc_type(mf.xc) == "GGA"
    grids = hobj.grids if hobj.grids is not None else mf.grids
    if grids.coords is None:
        grids.build(with_non0tab=True)
    nao, natm = mol.nao, mol.natm
    aoslices = mol.aoslice_by_atom()
    owner = np.zeros((nao, natm))  # owner[p, B] = 1 when orbital p sits on atom B
    for b in range(natm):
        owner[aoslices[b][2]:aoslices[b][3], b] = 1.0
    shls_slice, ao_loc = (0, mol.nbas), mol.ao_loc_nr()
    ipip = np.zeros((3, 3, nao, nao))
    pairs = np.zeros((natm, 3, natm, 3))
    for ao, mask, weight, _ in ni.block_loop(mol, grids, nao, 2 if gga else 1, max_memory):
        if gga:
            rho = ni.eval_rho2(mol, ao[:4], mo_coeff, mo_occ, mask, "GGA")
        else:
            rho = ni.eval_rho2(mol, ao[0], mo_coeff, mo_occ, mask, "LDA")
        vxc, fxc = ni.eval_xc_eff(mf.xc, rho, 2, xctype="GGA" if gga else "LDA")[1:3]
        _add_ipip_block(ipip, mol, ao, weight * vxc, gga, mask, ao_loc)
        ncomp = 4 if gga else 1
        ao_dm0 = np.array([numint._dot_ao_dm(mol, ao[i], dm0, mask, shls_slice, ao_loc) for i in range(ncomp)])
        wv = _atom_weights(ao, ao_dm0, weight * fxc, aoslices, gga)  # (natm, 3, c, g)
        q = _pair_factors(ao, ao_dm0, owner, gga)  # (c, g, natm, 3)
        c, g = q.shape[:2]
        pairs += 2.0 * (wv.reshape(natm * 3, c * g) @ q.reshape(c * g, natm * 3)).reshape(natm, 3, natm, 3)
    blocks = np.einsum("xypq,pq,pb,qa->xyba", ipip, dm0, owner, owner)  # [x, y, B, A]
    terms = pairs.transpose(0, 2, 1, 3) + 2.0 * blocks.transpose(3, 2, 0, 1)
    if gga:
        terms += 2.0 * blocks.transpose(2, 3, 1, 0)
    return terms


def _add_ipip_block(ipip, mol, ao, wv, gga, mask, ao_loc) -> None:
    """Adds one grid block's share to PySCF's ``ipip`` matrices (3, 3, nao, nao) (``wv``:
    weights times the functional's first derivatives)."""
    from pyscf.dft import numint
    from pyscf.grad import rks as rks_gradient

    if gga:
        wv = wv.copy()
        wv[0] *= 0.5
        aow = rks_gradient._make_dR_dao_w(ao, wv)
    else:
        aow = [numint._scale_ao(ao[i], wv[0]) for i in range(1, 4)]
    for d1 in range(3):
        for d2 in range(3):
            ipip[d1, d2] += numint._dot_ao_ao(mol, aow[d2], ao[d1 + 1], mask, (0, mol.nbas), ao_loc)


def _atom_weights(ao, ao_dm0, wf, aoslices, gga) -> np.ndarray:
    """(natm, 3, c, g): for each atom A and direction, the kernel times the density's
    derivative with respect to A's position (PySCF's ``wv`` of ``_get_vxc_deriv2``)."""
    from pyscf.hessian import rks as rks_hessian

    natm = len(aoslices)
    if gga:
        rho1 = np.array([rks_hessian._make_dR_rho1(ao, ao_dm0, a, aoslices, "GGA") for a in range(natm)])
        wv = np.einsum("xyg,asxg->asyg", wf, rho1)
        wv[:, :, 0] *= 0.5
        return wv
    rho1 = np.empty((natm, 3, ao.shape[1]))
    for a in range(natm):
        p0, p1 = aoslices[a][2:]
        rho1[a] = np.einsum("xpi,pi->xp", ao[1:4, :, p0:p1], ao_dm0[0][:, p0:p1]) * 2
    return (wf[0, 0] * rho1)[:, :, None, :]


def _pair_factors(ao, ao_dm0, owner, gga) -> np.ndarray:
    """(c, g, natm, 3): [k, g, B, x] = sum_{p on B} of the orbital products that multiply the
    kernel weights of component k in direction x (see the module docstring)."""
    g, natm = ao.shape[1], owner.shape[1]
    c = 4 if gga else 1
    q = np.empty((c, g, natm, 3))
    for x in range(3):
        q[0, :, :, x] = (ao[1 + x] * ao_dm0[0]) @ owner
        if not gga:
            continue
        q[0, :, :, x] *= 2.0  # the gradient term and the density term share this product
        for k in range(1, 4):
            q[k, :, :, x] = (ao[_SECOND[x, k - 1]] * ao_dm0[0] + ao[1 + x] * ao_dm0[k]) @ owner
    return q
