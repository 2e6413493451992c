"""Structure stage: SMILES validation, charge/spin, embedding determinism."""

import numpy as np
import pytest

from vibest.errors import InputError
from vibest.structure import build_molecule, parse_smiles


@pytest.mark.parametrize("bad", ["", "   ", "C1CC", "C(C", "Xx", "c1cccc1"])
def test_invalid_smiles_raise_input_error(bad):
    with pytest.raises(InputError):
        parse_smiles(bad)


def test_unsupported_element_is_refused():
    # GFN2-xTB is parametrised for Z = 1-86 (Bannwarth, Ehlert, Grimme, JCTC 15, 1652 (2019)).
    with pytest.raises(InputError, match="unsupported element"):
        parse_smiles("[U]Cl")
    with pytest.raises(InputError, match="unsupported element"):
        parse_smiles("C*")


def test_fragments_refused_unless_asked():
    with pytest.raises(InputError, match="fragments"):
        parse_smiles("CC(=O)[O-].[Na+]")
    mol, notes = parse_smiles("CC(=O)[O-].[Na+]", largest_fragment=True)
    assert mol.GetNumAtoms() == 4 and notes


def test_charge_and_unpaired_electrons_from_smiles():
    m = build_molecule("C[NH3+]")
    assert m.charge == 1 and m.uhf == 0
    r = build_molecule("[CH3]")
    assert r.charge == 0 and r.uhf == 1
    assert r.natoms == 4


def test_hydrogens_added_and_embedding_deterministic():
    a = build_molecule("CCO", seed=7)
    b = build_molecule("CCO", seed=7)
    assert a.natoms == 9  # C2H6O
    np.testing.assert_array_equal(a.positions_angstrom, b.positions_angstrom)


def test_single_atom_has_no_vibrations():
    with pytest.raises(InputError, match="single atom"):
        build_molecule("[Ne]")


# --- the molecule computed is the molecule given ---------------------------------------------

@pytest.mark.parametrize("text", ["CC(=O) C", "c1ccccc1 C", "CCO\u2603", "CC\nO", "C\tC", "CC\u00a0O"])
def test_smiles_with_inner_whitespace_or_non_ascii_is_refused(text):
    # RDKit reads a SMILES up to the first whitespace and takes the rest as a name: "CC(=O) C"
    # would be acetaldehyde. Nothing may be dropped silently.
    with pytest.raises(InputError, match="whitespace|character"):
        parse_smiles(text)


def test_surrounding_whitespace_is_fine():
    mol, _ = parse_smiles("  CCO\n")
    assert mol.GetNumAtoms() == 3


def test_non_string_smiles_is_an_input_error():
    with pytest.raises(InputError, match="string"):
        parse_smiles(123)


def test_trans_double_bond_in_small_ring_is_refused_not_made_cis():
    # trans-cycloalkenes below 8 ring atoms cannot be built (trans-cyclooctene is the smallest
    # isolable one; common practice, no source); RDKit drops the configuration silently.
    with pytest.raises(InputError, match="cannot be built"):
        parse_smiles("C1C/C=C/C1")
    mol, _ = parse_smiles("C1CCC/C=C/CCC1")  # trans-cyclononene exists: kept
    assert any(b.GetStereo() != b.GetStereo().STEREONONE for b in mol.GetBonds())
    parse_smiles("F/C=C/F")


def test_isotopes_in_smiles_set_the_masses():
    # masses of 2H and 13C: 2.014102 and 13.003355 amu (IUPAC/AME atomic masses, from memory;
    # here read from RDKit's table and checked to those digits)
    m = build_molecule("[2H]OCC")
    assert m.mass_numbers.count(2) == 1 and m.mass_numbers.count(0) == m.natoms - 1
    d = m.masses_amu[np.array(m.mass_numbers) == 2]
    assert d == pytest.approx([2.014102], abs=1e-6)
    c = build_molecule("[13CH3]CO")
    assert sorted(c.masses_amu[c.numbers == 6]) == pytest.approx([12.011, 13.003355], abs=1e-3)
    assert any("isotopes" in n for n in c.notes)
    plain = build_molecule("CCO")
    assert plain.mass_numbers == ()


def test_unknown_isotope_is_an_input_error():
    with pytest.raises(InputError, match="no isotope 99C"):
        parse_smiles("[99CH4]")
