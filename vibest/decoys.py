"""Decoys: plausible alternative structures made from an intended one (structure stage, RDKit only).

A measured spectrum that matches the intended structure well is only evidence if the structures
a synthesis could have given instead match it worse. This module makes such structures:

* **positional isomers**: one substituent (a branch of up to four heavy atoms, a ring
  substituent, or a doubly bonded O or S) moved to another atom of the same element on the rest
  of the molecule (along a chain, around a ring: ortho/meta/para), e.g. 2-butanone -> butanal;
* **functional-group changes**: keto/enol and allylic-alcohol tautomers (2-butanone ->
  3-buten-2-ol, but-2-en-2-ol), ketone -> enol ether (2-butanone -> ethyl vinyl ether),
  alcohol <-> ether, acid <-> methyl ester, double bond moved along a chain, one CH2 more or less,
  a C- or N-methyl group removed, a methyl group added to an aromatic ring, and the redox steps
  (aldehyde or ketone <-> alcohol, aldehyde -> acid: 2-butanone -> 2-butanol).

Each decoy is a valid, sanitizable molecule, distinct from the intended structure and from every
other decoy by canonical SMILES, and carries the reason it was made. The order is deterministic:
positional isomers and functional-group changes alternate, each kind sorted by canonical SMILES,
so that the first few decoys (the default count) hold both kinds even for a molecule with many
positional isomers (N-methylamphetamine: amphetamine is the 2nd).
"""

from __future__ import annotations

from dataclasses import dataclass

from rdkit import Chem, RDLogger
from rdkit.Chem import AllChem

from .structure import parse_smiles

#: Largest substituent (heavy atoms) that is moved as a whole.
MAX_SUBSTITUENT_ATOMS = 4

#: (reason, reaction SMARTS) of the functional-group changes; each applies to one site at a time.
TRANSFORMS: tuple[tuple[str, str], ...] = (
    ("enol tautomer", "[C;!$(C[O,N,S,F,Cl,Br,I]):1](=[O:2])[C;!H0:3]>>[C:1]([O:2])=[C:3]"),
    ("allylic alcohol", "[C;!$(C[O,N,S,F,Cl,Br,I]):1](=[O:2])[C:3][C;!H0:4]>>[C:1]([O:2])[C:3]=[C:4]"),
    ("enol ether", "[CH3:1][C:2](=[O:3])[#6:4]>>[C:1]=[C:2][O:3][#6:4]"),
    ("ether from alcohol", "[#6:1][CH2:2][OH1:3]>>[#6:1][O:3][C:2]"),
    ("alcohol from ether", "[#6:1][O;X2;!R:2][CH3:3]>>[#6:1][C:3][O:2]"),
    ("methyl ester from acid", "[C:1](=[O:2])[OH1:3]>>[C:1](=[O:2])[O:3]C"),
    ("acid from methyl ester", "[C:1](=[O:2])[O;X2:3][CH3]>>[C:1](=[O:2])[O:3]"),
    ("double bond moved", "[C:1]=[C:2][C;!R;!H0:3]>>[C:1][C:2]=[C:3]"),
    ("one CH2 more", "[CH3;X4:1][!#1:2]>>[CH3]-[CH2:1][*:2]"),
    # a chain CH2 between a carbon and any heavy atom (ethanol -> methanol; never O-CH2-O -> O-O)
    ("one CH2 less", "[#6:1][CH2;X4;!R:2][!#1:3]>>[*:1][*:3]"),
    # a C- or N-methyl group removed (toluene -> benzene, acetone -> acetaldehyde, an N-methyl amine
    # -> the amine); O-methyl is "acid from methyl ester"
    ("methyl removed", "[CH3;X4][#6,#7;!$([CH3]):1]>>[*:1]"),
    # a methyl group on an aromatic C-H (benzene -> toluene, toluene -> the xylenes)
    ("methyl added to ring", "[cH:1]>>[c:1]C"),
    # the redox steps a synthesis takes or misses: an aldehyde or ketone (not an acid, ester or
    # amide carbon) to its alcohol, a primary or secondary alcohol to its aldehyde or ketone, an
    # aldehyde to its acid (2-butanone -> 2-butanol, methanol -> formaldehyde -> formic acid)
    ("carbonyl reduced to alcohol", "[C;X3;!$(C[O,N,S,F,Cl,Br,I]):1]=[O:2]>>[C:1][O:2]"),
    ("alcohol oxidised to carbonyl", "[C;X4;!H0:1][OH1:2]>>[C:1]=[O:2]"),
    ("aldehyde oxidised to acid", "[C;X3;!H0;!$(C[O,N,S,F,Cl,Br,I]):1]=[O:2]>>[C:1](=[O:2])O"),
)
#: A decoy has at least this many heavy atoms (methylamine's "methyl removed" is not ammonia).
MIN_HEAVY_ATOMS = 2


@dataclass(frozen=True)
class Decoy:
    """An alternative structure: canonical SMILES, and why it was made (plain words)."""

    smiles: str
    reason: str

    @property
    def name(self) -> str:
        return f"decoy: {self.reason}"


def make_decoys(smiles: str, count: int | None = None) -> list[Decoy]:
    """Decoys of ``smiles`` (see the module docstring), at most ``count`` (all when None).

    Raises InputError for a SMILES that cannot be used (see :func:`vibest.structure.parse_smiles`)."""
    mol, _ = parse_smiles(smiles)
    own = Chem.MolToSmiles(mol)
    seen = {own}
    out: list[Decoy] = []
    RDLogger.DisableLog("rdApp.*")
    try:
        groups = [sorted(g.items()) for g in (_positional_isomers(mol), _transformed(mol))]
        for smi, reason in _alternating(*groups):
            if smi not in seen:
                seen.add(smi)
                out.append(Decoy(smi, reason))
    finally:
        RDLogger.EnableLog("rdApp.*")
    return out if count is None else out[: max(0, int(count))]


def _alternating(first: list, second: list) -> list:
    """first[0], second[0], first[1], second[1], ... then the rest of the longer list."""
    out = []
    for k in range(max(len(first), len(second))):
        out += first[k:k + 1] + second[k:k + 1]
    return out


def _canonical(mol: Chem.Mol) -> str | None:
    """Canonical SMILES of a sanitizable, single-fragment molecule, else None."""
    try:
        m = Chem.Mol(mol)
        Chem.SanitizeMol(m)
    except Exception:
        return None
    smi = Chem.MolToSmiles(m)
    if "." in smi or Chem.MolFromSmiles(smi) is None:
        return None
    return smi


def _branch(mol: Chem.Mol, anchor: int, start: int) -> set[int]:
    """Atoms on ``start``'s side of the (non-ring) bond anchor-start."""
    seen, stack = {start}, [start]
    while stack:
        for n in mol.GetAtomWithIdx(stack.pop()).GetNeighbors():
            j = n.GetIdx()
            if j not in seen and j != anchor:
                seen.add(j)
                stack.append(j)
    return seen


def _positional_isomers(mol: Chem.Mol) -> dict[str, str]:
    """Each substituent moved to every other atom of the same element that can take it."""
    out: dict[str, str] = {}
    for bond in mol.GetBonds():
        if bond.IsInRing() or bond.GetBondType() not in (Chem.BondType.SINGLE, Chem.BondType.DOUBLE):
            continue
        order = 1 if bond.GetBondType() == Chem.BondType.SINGLE else 2
        for anchor, sub in ((bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()),
                            (bond.GetEndAtomIdx(), bond.GetBeginAtomIdx())):
            branch = _branch(mol, anchor, sub)
            if len(branch) > MAX_SUBSTITUENT_ATOMS or len(branch) >= mol.GetNumAtoms() - len(branch):
                continue
            element = mol.GetAtomWithIdx(anchor).GetAtomicNum()
            name = _substituent_name(mol, branch, sub, order)
            for target in mol.GetAtoms():
                t = target.GetIdx()
                if t == anchor or t in branch or target.GetAtomicNum() != element or target.GetTotalNumHs() < order:
                    continue
                moved = _move(mol, anchor, sub, t)
                if moved is not None:
                    out.setdefault(moved, f"{name} moved (positional isomer)")
    return out


#: Plain names of common substituents by their SMILES (rooted at the attaching atom).
_SUBSTITUENT_NAMES = {"C": "methyl", "CC": "ethyl", "CCC": "propyl", "C(C)C": "isopropyl", "O": "OH group",
                      "OC": "methoxy", "N": "amino group", "C#N": "cyano group", "F": "F", "Cl": "Cl", "Br": "Br",
                      "I": "I", "S": "SH group", "C=C": "vinyl", "C=O": "formyl group", "[N+](=O)[O-]": "nitro group",
                      "C(=O)O": "carboxyl group", "C(C)=O": "acetyl group"}


def _substituent_name(mol: Chem.Mol, branch: set[int], root: int, order: int) -> str:
    if order == 2:
        return f"carbonyl {mol.GetAtomWithIdx(root).GetSymbol()}" if len(branch) == 1 else "=substituent"
    frag = Chem.MolFragmentToSmiles(mol, atomsToUse=sorted(branch), rootedAtAtom=root, canonical=False)
    return _SUBSTITUENT_NAMES.get(frag, f"substituent {frag}")


def _move(mol: Chem.Mol, anchor: int, sub: int, target: int) -> str | None:
    """Canonical SMILES with the bond anchor-sub moved to target-sub (hydrogens follow)."""
    rw = Chem.RWMol(mol)
    kind = rw.GetBondBetweenAtoms(anchor, sub).GetBondType()
    rw.RemoveBond(anchor, sub)
    rw.AddBond(target, sub, kind)
    for idx in (anchor, target):
        atom = rw.GetAtomWithIdx(idx)
        atom.SetNumExplicitHs(0)
        atom.SetNoImplicit(False)
    return _canonical(rw.GetMol())


def _transformed(mol: Chem.Mol) -> dict[str, str]:
    out: dict[str, str] = {}
    for reason, smarts in TRANSFORMS:
        rxn = AllChem.ReactionFromSmarts(smarts)
        for products in rxn.RunReactants((mol,)):
            if products[0].GetNumHeavyAtoms() < MIN_HEAVY_ATOMS:
                continue
            smi = _canonical(products[0])
            if smi is not None:
                out.setdefault(smi, reason)
    return out
