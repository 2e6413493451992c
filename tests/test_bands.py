"""Band character: composition, functional-group labels, isotopologues and thermochemistry."""

import numpy as np
import pytest
from ase.data import atomic_masses
from rdkit import Chem

from vibest.analysis.composition import mode_composition
from vibest.analysis.isotopes import isotopologue_masses
from vibest.analysis.thermo import rotational_symmetry_number, thermochemistry
from vibest.calculation.record import record_molecule
from vibest.errors import InputError
from vibest.pipeline import isotopologue, prediction_thermochemistry

from .conftest import prediction_of, record_of


def strongest(pred, lo, hi):
    return max((b for b in pred.bands if lo <= b.wavenumber_cm1 <= hi), key=lambda b: b.intensity_km_mol)


# Diagnostic regions and the vibration responsible for the strongest band there: facts of the
# trade (common practice, no source).
@pytest.mark.parametrize("smiles,lo,hi,label", [
    ("CC(C)=O", 1600, 1900, "C=O stretch (ketone)"),
    ("CCO", 3200, 3800, "O-H stretch (alcohol)"),
    ("CO", 950, 1200, "C-O stretch (alcohol)"),
    ("CC#N", 2100, 2400, "C\u2261N stretch (nitrile)"),
    ("CCOC(C)=O", 1600, 1900, "C=O stretch (ester)"),
    ("CCOC(C)=O", 1100, 1300, "C-O stretch (ester)"),
    ("CNC(C)=O", 1600, 1900, "C=O stretch (amide I)"),
    ("CNC(C)=O", 1450, 1600, "N-H bend (amide II)"),
    ("CNC(C)=O", 1180, 1360, "C-N stretch (amide III)"),
    ("C[N+](=O)[O-]", 1550, 1800, "NO2 antisymmetric stretch (nitro)"),
    ("C[N+](=O)[O-]", 1250, 1450, "NO2 symmetric stretch (nitro)"),
    ("C#CC", 3200, 3500, "\u2261C-H stretch (alkyne)"),
    ("C#CC", 2000, 2300, "C\u2261C stretch (alkyne)"),
    ("ClC(Cl)Cl", 2900, 3200, "C-H stretch"),
    ("CNC(C)=O", 3300, 3700, "N-H stretch (amide)"),
    ("c1ccccc1", 2900, 3200, "aromatic C-H stretch"),
    ("Cc1ccccc1", 1500, 1700, "ring C=C stretch (aromatic)"),
    ("c1ccccc1", 600, 800, "aromatic C-H out-of-plane bend"),
    ("CCCN", 1500, 1700, "NH2 bend (primary amine)"),
])
def test_strongest_band_in_region_has_the_right_label(smiles, lo, hi, label):
    assert strongest(prediction_of(smiles), lo, hi).label == label


def test_primary_amine_nh_stretches_symmetric_and_antisymmetric():
    nh = sorted((b for b in prediction_of("CCCN").bands if b.label.startswith("N-H stretch")),
                key=lambda b: b.wavenumber_cm1)
    assert [b.label for b in nh] == ["N-H stretch (primary amine, symmetric)",
                                     "N-H stretch (primary amine, antisymmetric)"]


def test_composition_does_not_depend_on_the_molecule_s_orientation():
    """A potential-energy distribution over internal coordinates is the same for a rotated copy
    of the molecule (rotating the geometry and the Hessian together); a composition that mixed in
    Cartesian components would change. (Internal coordinates: common practice, no source.)"""
    from scipy.spatial.transform import Rotation

    from vibest.analysis.composition import mode_composition
    from vibest.analysis.harmonic import harmonic_analysis

    rec = record_of("CCOC(C)=O")
    r = Rotation.from_euler("xyz", [0.7, -1.1, 2.3]).as_matrix()
    n = rec.natoms
    big = np.kron(np.eye(n), r)
    pos = rec.positions_angstrom @ r.T
    hess = big @ rec.hessian_hartree_bohr2 @ big.T
    a = mode_composition(rec.numbers, rec.positions_angstrom, rec.bonds, rec.hessian_hartree_bohr2,
                         harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2).displacements)
    b = mode_composition(rec.numbers, pos, rec.bonds, hess, harmonic_analysis(rec.numbers, pos, hess).displacements)
    np.testing.assert_allclose(a.shares, b.shares, atol=1e-6)


def test_diatomic_mode_is_its_bond_stretch():
    rec = record_of("Cl")
    comp = prediction_of("Cl").composition
    assert len(comp.contributions[0]) == 1
    c = comp.contributions[0][0]
    assert c.kind == "stretch" and c.percent == pytest.approx(100.0)
    assert comp.primitives[0].atoms == (0, 1) and sorted(rec.numbers.tolist()) == [1, 17]


def test_hcl_to_dcl_ratio_follows_reduced_mass():
    """nu(HCl)/nu(DCl) = sqrt(mu_DCl/mu_HCl) ~ 1.39 (Hooke's law, common practice, no source)."""
    parent = prediction_of("Cl")
    iso, shifts = isotopologue(parent, "D-all")
    m_cl = atomic_masses[17]
    m_h, m_d = atomic_masses[1], 2.0141017781
    expected = np.sqrt((m_d * m_cl / (m_d + m_cl)) / (m_h * m_cl / (m_h + m_cl)))
    assert shifts[0].parent_cm1 / shifts[0].isotopologue_cm1 == pytest.approx(expected, rel=1e-6)


def test_13c_carbon_monoxide_shift_follows_reduced_mass():
    """12C16O -> 13C16O: ratio sqrt(mu13/mu12) for a diatomic (common practice, no source)."""
    parent = prediction_of("[C-]#[O+]")
    iso, shifts = isotopologue(parent, "13C@1")
    m13 = 13.0033548
    mass_o = atomic_masses[8]
    mu = lambda a, b: a * b / (a + b)  # noqa: E731
    expected = np.sqrt(mu(m13, mass_o) / mu(atomic_masses[6], mass_o))
    assert shifts[0].parent_cm1 / shifts[0].isotopologue_cm1 == pytest.approx(expected, rel=1e-6)
    assert 40 < -shifts[0].shift_cm1 < 55  # ~ -48 cm^-1 at 2143 cm^-1


def test_exchangeable_deuteration_moves_oh_not_ch():
    """O-D stretches lie ~900-1000 cm^-1 below O-H ones (ratio ~0.73), C-H stretches do not move
    when only the O-H hydrogen is exchanged (common practice, no source)."""
    iso, shifts = isotopologue(prediction_of("CCO"), "D")
    by_label = {b.index: b for b in prediction_of("CCO").bands}
    oh = [s for s in shifts if by_label[s.parent_index].label.startswith("O-H stretch")]
    ch = [s for s in shifts if by_label[s.parent_index].label.startswith(("CH3 stretch", "CH2 stretch"))]
    assert oh and all(s.shift_cm1 < -900 for s in oh)
    assert ch and all(abs(s.shift_cm1) < 2 for s in ch)


@pytest.mark.parametrize("spec", ["", "X", "13C@2", "99C", "D"])
def test_bad_isotope_specs(spec):
    rec = record_of("C=O")
    with pytest.raises(InputError):
        isotopologue_masses(rec.numbers, rec.bonds, spec)  # C=O: atom 2 is O, no exchangeable H


@pytest.mark.parametrize("smiles,sigma", [("O", 2), ("N", 3), ("C", 12), ("c1ccccc1", 12), ("CC", 6),
                                          ("C=C", 4), ("O=C=O", 2), ("CCO", 1), ("ClC(Cl)(Cl)Cl", 12)])
def test_symmetry_numbers(smiles, sigma):
    """Rotational symmetry numbers of the point groups C2v 2, C3v 3, Td 12, D6h 12, D3d 6, D2h 4,
    Dinfh 2, C1 1 (common practice, no source)."""
    rec = record_of(smiles)
    assert rotational_symmetry_number(record_molecule(rec), rec.positions_angstrom) == sigma


@pytest.mark.parametrize("smiles,geometry,sigma,spin", [("O", "nonlinear", 2, 0), ("O=C=O", "linear", 2, 0),
                                                      ("CCO", "nonlinear", 1, 0)])
def test_thermochemistry_matches_ase_ideal_gas(smiles, geometry, sigma, spin):
    """Against ase.thermochemistry.IdealGasThermo (general-purpose reference), same frequencies."""
    from ase import Atoms
    from ase.thermochemistry import IdealGasThermo
    from ase.units import invcm, kJ, mol

    pred = prediction_of(smiles)
    rec = pred.record
    t = thermochemistry(pred.wavenumbers_cm1, rec.positions_angstrom, pred.modes.masses_amu, 0.0, 298.15, 101325.0, sigma)
    atoms = Atoms(numbers=rec.numbers, positions=rec.positions_angstrom)
    ase = IdealGasThermo(vib_energies=pred.wavenumbers_cm1 * invcm, geometry=geometry, potentialenergy=0.0,
                         atoms=atoms, symmetrynumber=sigma, spin=spin)
    s_ase = ase.get_entropy(298.15, 101325.0, verbose=False) / (kJ / mol) * 1000
    h_ase = ase.get_enthalpy(298.15, verbose=False) / (kJ / mol)
    assert t.entropy_j_mol_k == pytest.approx(s_ase, rel=1e-4)
    assert t.enthalpy_kj_mol == pytest.approx(h_ase, rel=1e-4, abs=1e-3)
    assert t.zero_point_energy_kj_mol == pytest.approx(0.5 * pred.wavenumbers_cm1.sum() * invcm / (kJ / mol), rel=1e-6)


def test_water_standard_entropy():
    """S(H2O, g, 298.15 K, 1 bar) = 188.8 J/(mol K), NIST-JANAF tables (value from memory)."""
    t = prediction_thermochemistry(prediction_of("O"), 298.15, 1e5)
    assert t.symmetry_number == 2
    assert t.entropy_j_mol_k == pytest.approx(188.8, abs=3.0)


def test_quasi_harmonic_lowers_entropy_of_soft_modes():
    """Grimme's quasi-RRHO (Chem. Eur. J. 18, 9955 (2012)) replaces the diverging harmonic entropy
    of soft modes by a free-rotor one, which is smaller, and leaves the enthalpy alone."""
    pred = prediction_of("CCCC")
    rrho = prediction_thermochemistry(pred)
    qh = prediction_thermochemistry(pred, quasi_harmonic=True)
    assert qh.entropy_j_mol_k < rrho.entropy_j_mol_k
    assert qh.enthalpy_kj_mol == pytest.approx(rrho.enthalpy_kj_mol)


def test_torsion_labels_name_what_turns():
    """Ethyl acetate has no O-H, N-methylacetamide's methyl groups are not N-H (the issue's
    examples); their low modes are CH3 torsions and plain torsions."""
    ester = {b.label for b in prediction_of("CCOC(C)=O").bands}
    assert "O-H torsion" not in ester and "CH3 torsion" in ester
    amide = [b for b in prediction_of("CNC(C)=O").bands if "torsion" in b.label]
    assert any(b.label == "CH3 torsion" for b in amide) and any(b.label == "N-H torsion" for b in amide)
    assert "O-H torsion" in {b.label for b in prediction_of("CO").bands}  # a real O-H


def test_carboxylate_stretches_are_named_as_a_pair():
    # sodium acetate, kept as the acetate ion: antisymmetric CO2- stretch above the symmetric one
    # (common practice, no source: about 1550-1610 and 1400-1450 cm^-1 in salts)
    from vibest.pipeline import predict

    bands = predict("CC(=O)[O-].[Na+]", largest_fragment=True, workers=1).bands
    anti = [b for b in bands if b.label == "CO2- antisymmetric stretch (carboxylate)"]
    sym = [b for b in bands if b.label == "CO2- symmetric stretch (carboxylate)"]
    assert anti and sym and max(b.wavenumber_cm1 for b in anti) > max(b.wavenumber_cm1 for b in sym)


def test_labels_and_characters_use_the_trades_notation():
    # the trade writes triple bonds with the triple-bar sign, not SMILES's '#' (common practice)
    for smiles in ("C#CC", "CC#N", "c1ccccc1"):
        for b in prediction_of(smiles).bands:
            assert "#" not in b.label and "#" not in b.character and ":" not in b.character, (smiles, b)


def test_every_xh2_xh3_stretch_says_symmetric_or_antisymmetric():
    for smiles in ("CC(C)=O", "CNC(C)=O", "CCOC(C)=O"):
        for b in prediction_of(smiles).bands:
            if b.label.startswith(("CH3 stretch", "CH2 stretch")):
                assert "symmetric" in b.label, (smiles, b.label)


def test_acetone_carbonyl_out_of_plane_wag():
    """Acetone's b1 C=O out-of-plane wag at 484 cm^-1 (Shimanouchi's tables, from memory of the
    NIST WebBook entry): the computed band nearest it is named so, not a torsion."""
    b = min(prediction_of("CC(C)=O").bands, key=lambda b: abs(b.wavenumber_cm1 - 484))
    assert b.label == "C=O out-of-plane wag" and abs(b.wavenumber_cm1 - 484) < 60
