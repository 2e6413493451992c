"""Structure stage: SMILES validation, charge and spin, 3D embedding.

Knows RDKit; knows nothing of tight binding. Its product is a :class:`Molecule`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
from rdkit import Chem, RDLogger
from rdkit.Chem import AllChem, Descriptors, rdMolAlign, rdMolDescriptors

from .errors import InputError

#: Embedding seed unless told otherwise (the one default of the CLI, the API and the pipeline).
DEFAULT_SEED = 0xB1B

#: Elements GFN2-xTB is parametrised for (Z = 1-86).
MAX_ATOMIC_NUMBER = 86
#: Longest SMILES accepted (characters); far beyond any molecule vibest can compute.
MAX_SMILES_CHARACTERS = 2000
#: Largest molecule (atoms with hydrogens) computed without being asked (--force): its GFN2-xTB
#: Hessian takes 6N-12 gradients, some 10-25 minutes at 250 atoms on 2 cores, and the 3D
#: embedding of much larger molecules runs for minutes without answering Ctrl-C.
MAX_ATOMS = 250


@dataclass(frozen=True)
class Molecule:
    """A molecule with explicit hydrogens and one 3D geometry.

    Attributes:
        smiles: canonical SMILES of the (possibly fragment-reduced) input.
        numbers: atomic numbers, shape (N,).
        positions_angstrom: Cartesian coordinates in Angstrom, shape (N, 3).
        charge: total formal charge (elementary charges).
        uhf: number of unpaired electrons.
        bonds: (i, j, bond order) triples from RDKit (aromatic = 1.5).
        symbols: element symbols.
        molblock: MDL molblock with H (keeps the atom order; used to rebuild RDKit objects).
        notes: human-readable remarks made while building the structure.
        mass_numbers: per-atom mass numbers written in the SMILES (``[2H]``, ``[13CH3]``), 0 where
            none was written; empty when the SMILES names no isotope at all.
    """

    smiles: str
    numbers: np.ndarray
    positions_angstrom: np.ndarray
    charge: int
    uhf: int
    bonds: tuple[tuple[int, int, float], ...]
    symbols: tuple[str, ...]
    molblock: str = ""
    notes: tuple[str, ...] = field(default=())
    mass_numbers: tuple[int, ...] = ()
    #: Further start geometries (N, 3), Angstrom: other low force-field conformers, lowest first
    #: (the expensive stage optimises them too and keeps the lowest minimum).
    alternatives: tuple[np.ndarray, ...] = ()

    @property
    def natoms(self) -> int:
        return len(self.numbers)

    @property
    def masses_amu(self) -> np.ndarray:
        """Atomic masses (amu): the isotope's mass where the SMILES names one, else the standard
        atomic weight."""
        return atomic_masses_amu(self.numbers, self.mass_numbers)

    @property
    def formula(self) -> str:
        return rdMolDescriptors.CalcMolFormula(self.to_rdkit())

    def to_rdkit(self) -> Chem.Mol:
        """An RDKit molecule (with H) carrying this geometry as conformer 0."""
        mol = Chem.MolFromMolBlock(self.molblock, removeHs=False, sanitize=True)
        conf = Chem.Conformer(mol.GetNumAtoms())
        for i, xyz in enumerate(self.positions_angstrom):
            conf.SetAtomPosition(i, xyz.tolist())
        mol.RemoveAllConformers()
        mol.AddConformer(conf, assignId=True)
        return mol

    def with_positions(self, positions_angstrom: np.ndarray) -> "Molecule":
        """The molecule at another geometry (without alternative start geometries)."""
        return dataclasses.replace(self, positions_angstrom=np.asarray(positions_angstrom, float).copy(),
                                   alternatives=())


def isotope_mass(z: int, mass_number: int) -> float:
    """Mass (amu) of the isotope ``mass_number`` of element ``z`` (RDKit's periodic table);
    InputError for an isotope the table does not know."""
    from ase.data import chemical_symbols

    symbol = chemical_symbols[int(z)] if 0 < int(z) < len(chemical_symbols) else f"element {z}"
    m = 0.0
    if 0 < int(z) <= MAX_ATOMIC_NUMBER and 0 < int(mass_number) < 400:
        m = Chem.GetPeriodicTable().GetMassForIsotope(int(z), int(mass_number))
    if m <= 0 or abs(m - mass_number) > 0.5:
        raise InputError(f"no isotope {mass_number}{symbol} is known")
    return float(m)


def atomic_masses_amu(numbers, mass_numbers=()) -> np.ndarray:
    """Masses (amu) of atoms ``numbers``: standard atomic weights (ase.data), or the isotope's
    mass (:func:`isotope_mass`) where ``mass_numbers`` gives a non-zero mass number."""
    from ase.data import atomic_masses

    masses = np.array([atomic_masses[int(z)] for z in numbers], dtype=float)
    for i, a in enumerate(mass_numbers):
        if a:
            masses[i] = isotope_mass(int(numbers[i]), int(a))
    return masses


def _check_text(smiles) -> str:
    """The SMILES as a stripped string; refuses what RDKit would silently cut or misread.

    RDKit reads a SMILES up to the first whitespace and takes the rest as a name, so
    ``"CC(=O) C"`` would be acetaldehyde: a SMILES with inner whitespace or a non-ASCII character
    is refused instead."""
    if not isinstance(smiles, str):
        raise InputError(f"a SMILES must be a string, not {type(smiles).__name__}")
    text = smiles.strip()
    if not text:
        raise InputError("empty SMILES: give a structure such as 'CC(=O)C' (acetone)")
    if len(text) > MAX_SMILES_CHARACTERS:
        raise InputError(f"SMILES of {len(text)} characters: vibest takes at most {MAX_SMILES_CHARACTERS}")
    for k, ch in enumerate(text):
        if ch.isspace():
            raise InputError(f"SMILES {text!r} contains whitespace at position {k + 1}: a SMILES has none "
                             "(remove it, or quote a name separately)")
        if not ch.isascii() or not ch.isprintable():
            raise InputError(f"SMILES {text!r} contains the character {ch!r} at position {k + 1}, "
                             "which no SMILES has")
    return text


def _requested_double_bond_stereo(text: str) -> int:
    """Double bonds whose configuration the SMILES writes with / or \\ (read unsanitised, before
    RDKit drops configurations it considers impossible, e.g. trans in rings of fewer than 8)."""
    raw = Chem.MolFromSmiles(text, sanitize=False)
    if raw is None:
        return 0
    count = 0
    for bond in raw.GetBonds():
        if bond.GetBondType() != Chem.BondType.DOUBLE:
            continue
        ends = [[b for b in bond.GetBeginAtom().GetBonds() if b.GetIdx() != bond.GetIdx()],
                [b for b in bond.GetEndAtom().GetBonds() if b.GetIdx() != bond.GetIdx()]]
        if all(any(b.GetBondDir() != Chem.BondDir.NONE for b in side) for side in ends):
            count += 1
    return count


def _kept_double_bond_stereo(mol: Chem.Mol) -> int:
    return sum(1 for b in mol.GetBonds() if b.GetStereo() != Chem.BondStereo.STEREONONE)


def parse_smiles(smiles: str, largest_fragment: bool = False) -> tuple[Chem.Mol, list[str]]:
    """Validate a SMILES string and return the RDKit molecule (no H) and notes.

    Raises :class:`InputError` with a one-line message for empty input, whitespace or non-ASCII
    characters inside the SMILES, unparsable SMILES, a double-bond configuration that cannot be
    built (trans in a small ring), unsupported elements, or several fragments (unless
    ``largest_fragment`` is set).
    """
    notes: list[str] = []
    text = _check_text(smiles)
    RDLogger.DisableLog("rdApp.*")
    try:
        mol = Chem.MolFromSmiles(text)
        requested = _requested_double_bond_stereo(text) if mol is not None and ("/" in text or "\\" in text) else 0
    finally:
        RDLogger.EnableLog("rdApp.*")
    if mol is None:
        raise InputError(f"invalid SMILES {text!r}: RDKit could not parse it (check brackets, ring closures, valences)")
    if requested > _kept_double_bond_stereo(mol):
        raise InputError(f"SMILES {text!r} gives a double-bond configuration that cannot be built (e.g. trans in "
                         "a ring of fewer than 8 atoms); write the configuration that exists, or none")
    if mol.GetNumAtoms() == 0:
        raise InputError(f"SMILES {text!r} has no atoms")
    for atom in mol.GetAtoms():
        z = atom.GetAtomicNum()
        if z < 1 or z > MAX_ATOMIC_NUMBER:
            raise InputError(f"unsupported element {atom.GetSymbol()!r} in {text!r}: GFN2-xTB covers H to Rn (Z 1-86)")
        if atom.GetIsotope():
            isotope_mass(z, atom.GetIsotope())
    frags = Chem.GetMolFrags(mol, asMols=True, sanitizeFrags=True)
    if len(frags) > 1:
        if not largest_fragment:
            names = ", ".join(Chem.MolToSmiles(f) for f in frags)
            raise InputError(f"SMILES {text!r} has {len(frags)} fragments ({names}); "
                             "give one molecule, or ask for the largest fragment (--largest-fragment)")
        frags = sorted(frags, key=lambda f: (f.GetNumHeavyAtoms(), Descriptors.MolWt(f)), reverse=True)
        mol = frags[0]
        notes.append(f"kept the largest fragment {Chem.MolToSmiles(mol)} of {len(frags)}")
    return mol, notes


def charge_and_uhf(mol: Chem.Mol) -> tuple[int, int]:
    """Total formal charge and number of unpaired electrons (radical electrons in the SMILES)."""
    charge = sum(a.GetFormalCharge() for a in mol.GetAtoms())
    uhf = sum(a.GetNumRadicalElectrons() for a in mol.GetAtoms())
    return int(charge), int(uhf)


def _bond_list(mol: Chem.Mol) -> tuple[tuple[int, int, float], ...]:
    return tuple((b.GetBeginAtomIdx(), b.GetEndAtomIdx(), float(b.GetBondTypeAsDouble()))
                 for b in mol.GetBonds())


def embed(mol_noh: Chem.Mol, seed: int = DEFAULT_SEED, prerelax: bool = True, num_conformers: int = 1) -> Chem.Mol:
    """Add hydrogens and embed 3D conformers with ETKDGv3 (seeded, deterministic).

    Each conformer is pre-relaxed with MMFF94 where parameters exist, else UFF. Returns the
    molecule with H; conformers are ordered by the force-field energy (lowest first).
    """
    RDLogger.DisableLog("rdApp.*")
    try:
        return _embed(mol_noh, seed, prerelax, num_conformers)
    finally:
        RDLogger.EnableLog("rdApp.*")


def _embed(mol_noh: Chem.Mol, seed: int, prerelax: bool, num_conformers: int) -> Chem.Mol:
    mol = Chem.AddHs(mol_noh)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=num_conformers, params=params))
    if not ids:
        params.useRandomCoords = True
        ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=num_conformers, params=params))
    if not ids:
        raise InputError(f"could not build 3D coordinates for {Chem.MolToSmiles(mol_noh)!r}")
    energies = [0.0] * len(ids)
    if prerelax and mol.GetNumAtoms() > 1:
        if AllChem.MMFFHasAllMoleculeParams(mol):
            res = AllChem.MMFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=2000)
        elif AllChem.UFFHasAllMoleculeParams(mol):
            res = AllChem.UFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=2000)
        else:
            res = [(0, 0.0)] * len(ids)
        energies = [e for _, e in res]
    order = sorted(range(len(ids)), key=lambda k: (round(energies[k], 6), k))
    out = Chem.Mol(mol)
    out.RemoveAllConformers()
    for k in order:
        out.AddConformer(mol.GetConformer(ids[k]), assignId=True)
    return out


def check_size(mol_noh: Chem.Mol, allow_large: bool = False) -> int:
    """Atoms with hydrogens; InputError beyond :data:`MAX_ATOMS` unless ``allow_large``."""
    atoms = mol_noh.GetNumAtoms() + sum(a.GetTotalNumHs() for a in mol_noh.GetAtoms())
    if atoms > MAX_ATOMS and not allow_large:
        raise InputError(f"{atoms} atoms with hydrogens: more than the {MAX_ATOMS} vibest computes unless asked "
                         f"(a GFN2-xTB Hessian of that size takes {atoms * 6 // 60} minutes or more here); "
                         "add --force (API: allow_long=True) to run it anyway")
    return atoms


def rotor_count(mol_noh: Chem.Mol) -> int:
    """Rotatable bonds (RDKit's count) plus O-H, N-H and S-H rotors on terminal heteroatoms bonded
    to an sp3 or sp2 atom: their orientation gives distinct conformers (e.g. trans/gauche ethanol)."""
    n = rdMolDescriptors.CalcNumRotatableBonds(mol_noh)
    for atom in mol_noh.GetAtoms():
        if atom.GetAtomicNum() in (7, 8, 16) and atom.GetTotalNumHs() > 0 and atom.GetDegree() == 1:
            nb = atom.GetNeighbors()[0]
            if nb.GetDegree() >= 2 and not atom.GetIsAromatic():
                n += 1
    return n


#: Start geometries of a flexible molecule: this many force-field conformers are embedded per
#: rotor (plus START_BASE), at most START_MAX; the START_KEEP lowest distinct ones within
#: START_WINDOW_KCAL of the lowest (MMFF94) go on to the expensive stage, which ranks them by a
#: single-point energy of its own and optimises the best few (vibest.calculation.driver). A rigid
#: molecule (no rotor) keeps its single embedding.
START_BASE, START_PER_ROTOR, START_MAX, START_KEEP, START_WINDOW_KCAL = 10, 3, 30, 12, 5.0


def build_molecule(smiles: str, seed: int = DEFAULT_SEED, largest_fragment: bool = False,
                   prerelax: bool = True, allow_large: bool = False, start_conformers: bool = True) -> Molecule:
    """SMILES -> validated :class:`Molecule` with a force-field-relaxed 3D geometry; molecules
    above :data:`MAX_ATOMS` atoms (with hydrogens) are refused unless ``allow_large``.

    With ``start_conformers`` a flexible molecule gets several embeddings (seeded: the same input,
    the same conformers), the lowest by MMFF94 as its geometry and the next distinct ones as
    :attr:`Molecule.alternatives`: one embedding can land in a conformer kcal/mol above the
    lowest (cyclohexanol: its C-O stretch then 90 cm^-1 off)."""
    mol_noh, notes = parse_smiles(smiles, largest_fragment=largest_fragment)
    check_size(mol_noh, allow_large)
    rotors = (rotor_count(mol_noh) + _puckering_rings(mol_noh)) if start_conformers else 0
    count = 1 if rotors == 0 else min(START_BASE + START_PER_ROTOR * rotors, START_MAX)
    mol = embed(mol_noh, seed=seed, prerelax=prerelax, num_conformers=count)
    if mol.GetNumAtoms() == 1:
        raise InputError(f"{smiles!r} is a single atom: it has no vibrations")
    ids = [c.GetId() for c in mol.GetConformers()]
    starts = _distinct_low_conformers(mol, ids, prerelax) if count > 1 else ids[:1]
    molecule = molecule_from_conformer(mol_noh, mol, starts[0], notes)
    if len(starts) > 1:
        others = tuple(np.array(mol.GetConformer(c).GetPositions(), dtype=float) for c in starts[1:])
        molecule = dataclasses.replace(molecule, alternatives=others, notes=molecule.notes + (
            f"{count} force-field conformers embedded, {len(starts)} distinct within {START_WINDOW_KCAL:g} kcal/mol "
            "(MMFF94) kept as start geometries",))
    return molecule


def _puckering_rings(mol_noh: Chem.Mol) -> int:
    """Non-aromatic rings of 5 to 8 atoms: each can pucker (chair/boat, axial/equatorial), a
    conformational freedom the rotor count misses."""
    return sum(1 for ring in mol_noh.GetRingInfo().AtomRings()
               if 5 <= len(ring) <= 8 and not all(mol_noh.GetAtomWithIdx(a).GetIsAromatic() for a in ring))


def _distinct_low_conformers(mol: Chem.Mol, ids: list[int], prerelaxed: bool) -> list[int]:
    """Up to START_KEEP conformer ids (lowest MMFF energy first, ``ids`` are in that order) within
    START_WINDOW_KCAL of the lowest, none within 0.15 Angstrom RMSD (all atoms: OH rotamers differ
    in one H) of one kept."""
    energies = _force_field_energies(mol, ids) if prerelaxed else [0.0] * len(ids)
    keep: list[int] = []
    for cid, e in zip(ids, energies):
        if e - energies[0] > START_WINDOW_KCAL:
            break
        if all(rdMolAlign.GetBestRMS(Chem.Mol(mol, confId=cid), Chem.Mol(mol, confId=k), maxMatches=200) > 0.15
               for k in keep):
            keep.append(cid)
        if len(keep) == START_KEEP:
            break
    return keep or ids[:1]


def _force_field_energies(mol: Chem.Mol, ids: list[int]) -> list[float]:
    """MMFF94 energies (kcal/mol) of conformers ``ids`` (UFF where MMFF has no parameters, else zeros)."""
    if AllChem.MMFFHasAllMoleculeParams(mol):
        props = AllChem.MMFFGetMoleculeProperties(mol)
        return [AllChem.MMFFGetMoleculeForceField(mol, props, confId=c).CalcEnergy() for c in ids]
    if AllChem.UFFHasAllMoleculeParams(mol):
        return [AllChem.UFFGetMoleculeForceField(mol, confId=c).CalcEnergy() for c in ids]
    return [0.0] * len(ids)


def molecule_from_conformer(mol_noh: Chem.Mol, mol_h: Chem.Mol, conf_id: int, notes=()) -> Molecule:
    """:class:`Molecule` of conformer ``conf_id`` of ``mol_h`` (``mol_noh`` gives SMILES, charge, spin)."""
    charge, uhf = charge_and_uhf(mol_noh)
    mass_numbers = tuple(int(a.GetIsotope()) for a in mol_h.GetAtoms())
    if any(mass_numbers):
        labelled = sorted({f"{a.GetIsotope()}{a.GetSymbol()}" for a in mol_h.GetAtoms() if a.GetIsotope()})
        notes = tuple(notes) + (f"isotopes from the SMILES ({', '.join(labelled)}): their masses are used",)
    else:
        mass_numbers = ()
    return Molecule(
        smiles=Chem.MolToSmiles(mol_noh),
        numbers=np.array([a.GetAtomicNum() for a in mol_h.GetAtoms()], dtype=int),
        positions_angstrom=np.array(mol_h.GetConformer(conf_id).GetPositions(), dtype=float),
        charge=charge,
        uhf=uhf,
        bonds=_bond_list(mol_h),
        symbols=tuple(a.GetSymbol() for a in mol_h.GetAtoms()),
        molblock=Chem.MolToMolBlock(mol_h, confId=conf_id),
        notes=tuple(notes),
        mass_numbers=mass_numbers,
    )


def canonical_smiles(smiles: str) -> str:
    """RDKit canonical SMILES of a valid input (raises InputError otherwise)."""
    mol, _ = parse_smiles(smiles, largest_fragment=False)
    return Chem.MolToSmiles(mol)
