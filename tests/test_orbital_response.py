"""The orbital-basis Kohn-Sham response against PySCF's own (``pyscf.hessian.rhf.gen_vind``,
the general-purpose reference library): the same numbers, for the functionals it covers, and no
result (so PySCF's is used) for those it does not."""

import numpy as np
import pytest

pyscf = pytest.importorskip("pyscf")

from tests.pyscf_scf import FORMALDEHYDE, converged_rks as _scf  # noqa: E402
from vibest.calculation.orbital_response import MIN_PERTURBATIONS, orbital_response, pyscf_response  # noqa: E402


@pytest.mark.parametrize("xc", ["b3lyp", "pbe", "lda,vwn", "pbe0"])
@pytest.mark.parametrize("count", [MIN_PERTURBATIONS, 3])  # the orbital-basis path; PySCF's order for few
def test_the_response_equals_pyscfs(xc, count):
    mf = _scf(xc)
    nmo, nocc = mf.mo_coeff.shape[1], int((mf.mo_occ > 0).sum())
    x = np.random.default_rng(7).standard_normal((count, nmo, nocc)) * 0.01
    ref = pyscf_response(mf)(x)
    ours = orbital_response(mf)(x)
    assert ours.shape == ref.shape
    assert np.abs(ours - ref).max() < 1e-10 * np.abs(ref).max()


def test_small_grid_slices_give_the_same_response(monkeypatch):
    # the grid is cut into slices by memory: a tiny allowance gives many slices, same result
    import vibest.calculation.orbital_response as module

    mf = _scf("b3lyp", FORMALDEHYDE)
    nmo, nocc = mf.mo_coeff.shape[1], int((mf.mo_occ > 0).sum())
    x = np.random.default_rng(3).standard_normal((MIN_PERTURBATIONS + 2, nmo, nocc)) * 0.01
    whole = orbital_response(mf)(x)
    monkeypatch.setattr(module, "CHUNK_MEMORY_MB", 0.05)
    sliced = orbital_response(mf)(x)
    assert np.abs(whole - sliced).max() < 1e-12
    assert np.abs(whole - pyscf_response(mf)(x)).max() < 1e-10 * np.abs(whole).max()


@pytest.mark.parametrize("xc", ["r2scan", "wb97x"])
def test_functionals_it_does_not_cover_are_left_to_pyscf(xc):
    # a meta-GGA and a range-separated hybrid: no orbital-basis response, PySCF's is used
    assert orbital_response(_scf(xc, basis="sto-3g")) is None
