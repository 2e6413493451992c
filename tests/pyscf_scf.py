"""A converged restricted Kohn-Sham object for the tests that compare vibest's contractions with
PySCF's own (small molecules and basis sets keep them quick; the formulas do not depend on size)."""

from pyscf import dft, gto

WATER = "O 0 0 0.12; H 0 0.76 -0.47; H 0 -0.76 -0.47"
FORMALDEHYDE = "C 0 0 0; O 0 0 1.21; H 0 0.94 -0.59; H 0 -0.94 -0.59"


def converged_rks(xc: str, atom: str = WATER, basis: str = "6-31g*", density_fit: bool = False):
    mf = dft.RKS(gto.M(atom=atom, basis=basis, verbose=0))
    if density_fit:
        mf = mf.density_fit()
    mf.xc = xc
    mf.grids.level = 2
    mf.conv_tol = 1e-10
    mf.kernel()
    return mf
