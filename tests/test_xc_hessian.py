"""The functional's part of the Hessian assembly contracted per atom pair, against PySCF's own
assembly (``pyscf.hessian.rks.partial_hess_elec``, the general-purpose reference library): the
same numbers for the functionals it covers, no result (so PySCF's is used) for the others."""

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")

from pyscf import dft, gto  # noqa: E402

from vibest.calculation.xc_hessian import contracted_partial_hessian  # noqa: E402

# formaldehyde: two heavy atoms and two hydrogens, so that every kind of atom pair occurs;
# a small molecule and basis keep the test quick (the formulas do not depend on size)
FORMALDEHYDE = "C 0 0 0; O 0 0 1.21; H 0 0.94 -0.59; H 0 -0.94 -0.59"


def _hessian_object(xc: str, basis: str = "6-31g*"):
    mol = gto.M(atom=FORMALDEHYDE, basis=basis, verbose=0)
    mf = dft.RKS(mol)
    mf.xc = xc
    mf.grids.level = 2
    mf.conv_tol = 1e-10
    mf.kernel()
    return mf.Hessian()


@pytest.mark.parametrize("xc", ["b3lyp", "pbe", "lda,vwn", "pbe0"])
def test_the_assembly_equals_pyscfs(xc):
    hobj = _hessian_object(xc)
    ref = hobj.partial_hess_elec()
    ours = contracted_partial_hessian(hobj)()
    assert ours.shape == ref.shape == (4, 4, 3, 3)
    assert np.abs(ours - ref).max() < 1e-9 * np.abs(ref).max()


def test_the_functional_terms_are_not_negligible():
    # the comparison above would pass trivially if the functional's pair terms vanished:
    # dropping them must change the assembly well beyond the tolerance
    import vibest.calculation.xc_hessian as module

    hobj = _hessian_object("b3lyp")
    ref = hobj.partial_hess_elec()
    full = contracted_partial_hessian(hobj)()
    real = module.xc_pair_terms
    try:
        module.xc_pair_terms = lambda *a: np.zeros_like(real(*a))
        without = contracted_partial_hessian(hobj)()
    finally:
        module.xc_pair_terms = real
    assert np.abs(full - without).max() > 1e-3 * np.abs(ref).max()


def test_a_full_hessian_with_the_contraction_equals_pyscfs():
    # the whole analytic Hessian (response and all) with the contracted assembly plugged in
    hobj = _hessian_object("b3lyp", basis="sto-3g")
    ref = hobj.kernel()
    hobj2 = _hessian_object("b3lyp", basis="sto-3g")
    hobj2.partial_hess_elec = contracted_partial_hessian(hobj2)
    ours = hobj2.kernel()
    assert np.abs(ours - ref).max() < 1e-8 * np.abs(ref).max()


@pytest.mark.parametrize("xc", ["r2scan", "wb97x"])
def test_functionals_it_does_not_cover_are_left_to_pyscf(xc):
    # a meta-GGA and a range-separated hybrid: PySCF's own assembly is used
    assert contracted_partial_hessian(_hessian_object(xc, basis="sto-3g")) is None


def test_the_density_fitted_assembly_equals_pyscfs():
    # with density fitting PySCF's own density-fitted two-electron terms are kept
    mol = gto.M(atom=FORMALDEHYDE, basis="6-31g*", verbose=0)
    mf = dft.RKS(mol).density_fit()
    mf.xc = "b3lyp"
    mf.grids.level = 2
    mf.conv_tol = 1e-10
    mf.kernel()
    hobj = mf.Hessian()
    ref = hobj.partial_hess_elec()
    ours = contracted_partial_hessian(hobj)()
    assert np.abs(ours - ref).max() < 1e-9 * np.abs(ref).max()
