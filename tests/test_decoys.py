"""Decoys: alternative structures made from an intended one (RDKit only, no calculation).

Expected isomers are facts of organic chemistry (common practice, no source): 2-butanone and
butanal are C4H8O isomers, 3-buten-2-ol is its allylic-alcohol isomer, ethyl vinyl ether its
enol ether; 2-chlorotoluene has 3- and 4-chlorotoluene as ring-position isomers."""

import pytest
from rdkit import Chem
from rdkit.Chem import rdMolDescriptors

from vibest.decoys import make_decoys
from vibest.errors import InputError


def canon(smiles: str) -> str:
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles))


def formula(smiles: str) -> str:
    return rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(smiles))


def test_decoys_of_2_butanone():
    decoys = make_decoys("CCC(C)=O")
    smiles = {d.smiles for d in decoys}
    assert canon("CCCC=O") in smiles  # butanal: the carbonyl moved along the chain
    assert canon("C=CC(C)O") in smiles  # 3-buten-2-ol
    assert canon("C=COCC") in smiles  # ethyl vinyl ether (enol ether)
    assert canon("CCC(C)=O") not in smiles
    assert len(smiles) == len(decoys)  # distinct
    for d in decoys:
        assert Chem.MolFromSmiles(d.smiles) is not None and d.reason
    # isomers, one-CH2 homologues and the reduced alcohol only
    assert {formula(s) for s in smiles} <= {"C4H8O", "C3H6O", "C5H10O", "C4H10O"}


def test_ring_positions_are_moved():
    smiles = {d.smiles for d in make_decoys("Cc1ccccc1Cl")}
    assert canon("Cc1cccc(Cl)c1") in smiles and canon("Cc1ccc(Cl)cc1") in smiles


def test_functional_group_changes():
    assert canon("COC") in {d.smiles for d in make_decoys("CCO")}  # alcohol -> ether
    assert canon("COC(C)=O") in {d.smiles for d in make_decoys("CC(=O)O")}  # acid -> methyl ester
    assert canon("CC(=O)O") in {d.smiles for d in make_decoys("COC(C)=O")}  # and back


def test_redox_steps():
    """Reduction and oxidation products (common practice, no source): 2-butanone reduces to
    2-butanol; methanol oxidises to formaldehyde, formaldehyde to formic acid; a tertiary alcohol
    has no carbonyl to oxidise to, and an acid, ester or amide carbonyl is not reduced here."""
    butanone = {d.smiles: d.reason for d in make_decoys("CCC(C)=O")}
    assert butanone[canon("CCC(C)O")] == "carbonyl reduced to alcohol"
    assert canon("C=O") in {d.smiles for d in make_decoys("CO")}
    formaldehyde = {d.smiles: d.reason for d in make_decoys("C=O")}
    assert formaldehyde == {canon("CO"): "carbonyl reduced to alcohol",
                            canon("O=CO"): "aldehyde oxidised to acid"}
    assert not any("oxidised" in d.reason for d in make_decoys("CC(C)(C)O"))
    for smiles in ("CC(=O)O", "CC(=O)OC", "CC(N)=O"):
        assert not any("reduced" in d.reason for d in make_decoys(smiles))


def test_count_limits_and_order_is_deterministic():
    a = make_decoys("CCCC(C)=O")
    assert make_decoys("CCCC(C)=O") == a
    assert make_decoys("CCCC(C)=O", count=3) == a[:3]


def test_homologues_and_methyl_changes():
    """Homologues one CH2 apart and methyl groups removed or put on a ring (common practice, no
    source): methanol is ethanol's lower homologue; toluene has benzene without its methyl and
    the three xylenes with one more; N-methylamphetamine loses its N-methyl to amphetamine."""
    assert canon("CO") in {d.smiles for d in make_decoys("CCO")}
    toluene = {d.smiles: d.reason for d in make_decoys("Cc1ccccc1")}
    assert toluene[canon("c1ccccc1")] == "methyl removed"
    assert {canon(x) for x in ("Cc1ccccc1C", "Cc1cccc(C)c1", "Cc1ccc(C)cc1")} <= set(toluene)
    # among the default 8, though it has 13 positional isomers (the two kinds alternate)
    assert canon("CC(N)Cc1ccccc1") in {d.smiles for d in make_decoys("CC(Cc1ccccc1)NC", count=8)}
    assert [d.smiles for d in make_decoys("c1ccccc1")] == [canon("Cc1ccccc1")]


def test_no_decoy_is_a_peroxide_or_a_single_heavy_atom():
    # removing the CH2 of dimethoxymethane would join two O atoms; methylamine without its methyl
    # is ammonia: neither is a plausible alternative structure (common practice, no source)
    assert all("OO" not in d.smiles for d in make_decoys("COCOC"))
    for smiles in ("CN", "CO", "CC", "CCl"):
        assert all(Chem.MolFromSmiles(d.smiles).GetNumHeavyAtoms() >= 2 for d in make_decoys(smiles))


def test_a_molecule_without_substituents_has_no_decoys_and_bad_smiles_is_refused():
    assert make_decoys("C1CCCCC1") == [] and make_decoys("O=C=O") == []
    with pytest.raises(InputError):
        make_decoys("C1CC")


def test_every_decoy_of_the_measured_set_is_valid_distinct_and_not_the_input():
    """For each molecule of the real-spectrum set (benchmarks/data/measured_set.csv) and a few
    with many sites: every decoy parses, is sanitizable, differs from the intended structure and
    from the others, has at least two heavy atoms, and a count gives a prefix of the full list."""
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    import measured_set

    smiles = [e.smiles for e in measured_set.entries()] + ["CC(Cc1ccccc1)NC", "OC(=O)c1ccccc1O", "CCOC(=O)C=C",
                                                            "C1CCC(O)CC1"]
    for smi in smiles:
        decoys = make_decoys(smi)
        found = [d.smiles for d in decoys]
        assert canon(smi) not in found and len(set(found)) == len(found), smi
        for d in found:
            mol = Chem.MolFromSmiles(d)
            assert mol is not None and mol.GetNumHeavyAtoms() >= 2 and canon(d) == d, (smi, d)
        assert make_decoys(smi, count=3) == decoys[:3]
