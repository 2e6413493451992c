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
