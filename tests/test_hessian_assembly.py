"""vibest's Hessian assembly against PySCF's own (``pyscf.hessian.rks.partial_hess_elec`` and
its harmonic analysis, the general-purpose reference library): the functional's terms contracted
per atom pair give the same numbers for the functionals it covers, and no result (so PySCF's is
used) for the others; density-fitted two-electron terms stay within the README's 1 cm^-1."""

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")

from tests.pyscf_scf import FORMALDEHYDE, converged_rks  # noqa: E402
from vibest.calculation.hessian_assembly import contracted_partial_hessian  # noqa: E402


def _hessian_object(xc: str, basis: str = "6-31g*", density_fit: bool = False):
    # formaldehyde: two heavy atoms and two hydrogens, so that every kind of atom pair occurs
    return converged_rks(xc, FORMALDEHYDE, basis, density_fit).Hessian()


@pytest.mark.parametrize("xc", ["b3lyp", "pbe", "lda,vwn", "pbe0"])
def test_the_assembly_equals_pyscfs(xc):
    hobj = _hessian_object(xc)
    ref = hobj.partial_hess_elec()
    ours = contracted_partial_hessian(hobj)()
    assert ours.shape == ref.shape == (4, 4, 3, 3)
    assert np.abs(ours - ref).max() < 1e-9 * np.abs(ref).max()


def test_the_functional_terms_are_not_negligible(monkeypatch):
    # the comparison above would pass trivially if the functional's pair terms vanished:
    # dropping them must change the assembly well beyond the tolerance
    import vibest.calculation.hessian_assembly as module

    hobj = _hessian_object("b3lyp")
    ref = hobj.partial_hess_elec()
    full = contracted_partial_hessian(hobj)()
    real = module.xc_pair_terms
    monkeypatch.setattr(module, "xc_pair_terms", lambda *a: np.zeros_like(real(*a)))
    without = contracted_partial_hessian(hobj)()
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
    # a meta-GGA and a range-separated hybrid: PySCF's own assembly is used, exact terms only,
    # so density-fitted terms are refused rather than silently computed exactly
    hobj = _hessian_object(xc, basis="sto-3g")
    assert contracted_partial_hessian(hobj) is None
    with pytest.raises(ValueError, match="range separation"):
        contracted_partial_hessian(hobj, "density-fitted")


def test_the_density_fitted_assembly_equals_pyscfs():
    # with density fitting PySCF's own density-fitted two-electron terms are kept
    hobj = _hessian_object("b3lyp", density_fit=True)
    ref = hobj.partial_hess_elec()
    ours = contracted_partial_hessian(hobj)()
    assert np.abs(ours - ref).max() < 1e-9 * np.abs(ref).max()


def _frequencies(hobj) -> np.ndarray:
    from pyscf.hessian import thermo

    return np.sort(np.real(thermo.harmonic_analysis(hobj.mol, hobj.kernel())["freq_wavenumber"]))


def test_density_fitted_two_electron_terms_stay_within_a_wavenumber_of_exact():
    # Reference: PySCF's own exact Hessian (four-centre integrals throughout) and its harmonic
    # analysis. The README claims the density-fitted two-electron terms move frequencies by less
    # than 1 cm^-1 (0.6 cm^-1 measured on methyl benzoate); and they must move them at all, or
    # the fitted terms were not used.
    exact = _frequencies(_hessian_object("b3lyp"))
    hobj = _hessian_object("b3lyp")
    hobj.partial_hess_elec = contracted_partial_hessian(hobj, "density-fitted")
    fitted = _frequencies(hobj)
    assert np.abs(fitted - exact).max() < 1.0, fitted - exact
    assert np.abs(fitted - exact).max() > 1e-4


def test_an_unknown_way_is_refused():
    with pytest.raises(ValueError, match="two_electron"):
        contracted_partial_hessian(_hessian_object("b3lyp", basis="sto-3g"), "approximate")
