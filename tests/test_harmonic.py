"""Harmonic analysis: physics checks and agreement with ASE's own vibrational analysis."""

import numpy as np
import pytest
from ase import Atoms
from ase.units import Bohr, Hartree
from scipy import constants as sc

from vibest.analysis.harmonic import default_masses, harmonic_analysis
from vibest.calculation.engine import EngineSettings

from .conftest import prediction_of, record_of


def test_hookes_law_diatomic():
    """nu = (1/2 pi c) sqrt(k/mu) for a harmonic spring (Hooke's law; common practice, no source)."""
    k_au = 0.5  # Eh/Bohr^2 along the bond
    numbers = [1, 17]
    x = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 1.27]])
    u = np.array([0, 0, -1.0, 0, 0, 1.0])
    # V = k (dr)^2 / 2 with dr = u . x  ->  H = k u u^T
    modes = harmonic_analysis(numbers, x, k_au * np.outer(u, u))
    m = default_masses(numbers) * sc.atomic_mass
    mu = m[0] * m[1] / (m[0] + m[1])
    k_si = k_au * sc.physical_constants["Hartree energy"][0] / sc.physical_constants["Bohr radius"][0] ** 2
    expected = np.sqrt(k_si / mu) / (2 * np.pi * sc.c * 100)
    assert modes.count == 1 and modes.linear
    assert modes.wavenumbers_cm1[0] == pytest.approx(expected, rel=1e-10)
    # Reduced mass and force constant refer to the unit-length Cartesian displacement of the
    # mode (the usual quantum-chemistry convention): mu = m1 m2 (m1 + m2) / (m1^2 + m2^2) for a
    # diatomic, and omega = sqrt(k / mu) must hold with them.
    m1, m2 = default_masses(numbers)
    assert modes.reduced_masses_amu[0] == pytest.approx(m1 * m2 * (m1 + m2) / (m1 ** 2 + m2 ** 2), rel=1e-10)
    k_mode = modes.force_constants_mdyn_angstrom[0] * 100.0  # N/m
    omega = np.sqrt(k_mode / (modes.reduced_masses_amu[0] * sc.atomic_mass))
    assert omega / (2 * np.pi * sc.c * 100) == pytest.approx(expected, rel=1e-10)


@pytest.mark.parametrize("smiles,count", [("O", 3), ("O=C=O", 4), ("c1ccccc1", 30), ("C#C", 7)])
def test_mode_counts(smiles, count):
    """3N-6 modes, 3N-5 for linear molecules (common practice, no source)."""
    assert prediction_of(smiles).modes.count == count


def test_co2_symmetric_stretch_is_ir_inactive(co2):
    """The Sigma_g+ stretch of CO2 has no dipole change (symmetry; common practice, no source)."""
    modes = co2.modes
    order = np.argsort(modes.wavenumbers_cm1)
    sym = order[2]  # bend, bend, symmetric stretch, antisymmetric stretch
    assert modes.intensities_km_mol[sym] < 1e-3
    assert modes.intensities_km_mol[order[3]] > 100.0
    assert modes.wavenumbers_cm1[order[0]] == pytest.approx(modes.wavenumbers_cm1[order[1]], abs=0.5)


def test_translations_rotations_projected_out():
    """The unprojected mass-weighted Hessian has six near-zero eigenvalues (three translations and
    three rotations of a non-linear molecule at a stationary point: common practice, e.g. Wilson,
    Decius & Cross, Molecular Vibrations, 1955); none reach the output."""
    rec = record_of("C=O")
    modes = harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2)
    m = np.repeat(default_masses(rec.numbers), 3)
    hmw = rec.hessian_hartree_bohr2 / np.sqrt(np.outer(m, m))
    eig = np.sort(np.abs(np.linalg.eigvalsh(hmw)))
    assert eig[5] < 1e-3 * eig[6]  # six small, then vibrations
    assert np.all(np.abs(modes.rigid_body_eigenvalues_au) < 1e-4)
    assert modes.count == 6 and np.all(modes.wavenumbers_cm1 > 500)


def _ase_reference(rec, tmp_path):
    """ASE's Infrared analysis with the same tblite settings, geometry and step."""
    from ase.vibrations import Infrared
    from tblite.ase import TBLite

    atoms = Atoms(numbers=rec.numbers, positions=rec.positions_angstrom)
    atoms.calc = TBLite(method=EngineSettings().method, accuracy=0.01, electronic_temperature=300.0, verbosity=0)
    ir = Infrared(atoms, delta=rec.settings["hessian_step_bohr"] * Bohr, nfree=2, name=str(tmp_path / "ir"))
    ir.run()
    freqs = np.real(ir.get_frequencies())  # cm^-1, 3N values incl. rigid body
    inten = ir.intensities * ir.intensity_prefactor("km/mol")[0]
    return freqs, inten


@pytest.mark.parametrize("smiles", ["O", "C=O", "N"])
def test_against_ase_infrared(smiles, tmp_path):
    """Frequencies and intensities agree with ase.vibrations.Infrared (ASE 3.2x, general-purpose reference)."""
    rec = record_of(smiles)
    modes = harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2,
                              rec.dipole_derivatives_e)  # unscaled: ASE knows no scaling
    freqs, inten = _ase_reference(rec, tmp_path)
    order = np.argsort(freqs)[-modes.count:]  # ASE keeps rigid-body modes; drop the lowest six
    np.testing.assert_allclose(modes.wavenumbers_cm1, freqs[order], atol=1.0)
    # ASE rounds its km/mol factor to 42.255; allow 0.2 % plus a small absolute term.
    np.testing.assert_allclose(modes.intensities_km_mol, inten[order], rtol=2e-3, atol=0.05)


def test_isotopic_masses_change_only_frequencies_not_hessian():
    rec = record_of("Cl")
    m_cl = default_masses([17])[0]
    h = harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2,
                          masses_amu=[1.00782503, m_cl])
    d = harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2,
                          masses_amu=[2.014101778, m_cl])
    mu_h, mu_d = 1.00782503 * m_cl / (1.00782503 + m_cl), 2.014101778 * m_cl / (2.014101778 + m_cl)
    # Hooke's law: nu_H / nu_D = sqrt(mu_D / mu_H) ~ 1.39 (common practice, no source)
    # one mode, one force constant: the ratio is exact to rounding (1e-9 leaves room for the
    # eigensolver; a mass-weighting error of one part in 1e6 would fail it)
    assert h.wavenumbers_cm1[0] / d.wavenumbers_cm1[0] == pytest.approx(np.sqrt(mu_d / mu_h), rel=1e-9)
