"""The product of the expensive stage: a plain, storable record of one Hessian calculation."""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError

RECORD_FORMAT = "vibest-hessian-record"
RECORD_VERSION = 1


@dataclass(frozen=True)
class HessianRecord:
    """Everything the analysis stage needs; nothing it has to recompute.

    Attributes:
        smiles: canonical SMILES of the molecule.
        numbers: atomic numbers (N,).
        positions_angstrom: optimised geometry (N, 3), Angstrom.
        bonds: (i, j, bond order) from the structure stage.
        charge, uhf: total charge and unpaired electrons used.
        energy_hartree: electronic energy at the geometry (Eh).
        hessian_hartree_bohr2: Cartesian Hessian (3N, 3N), Eh/Bohr^2.
        dipole_e_bohr: dipole at the geometry (3,), e*Bohr.
        dipole_derivatives_e: d mu / d x (3N, 3), e (e*Bohr per Bohr).
        settings: level of theory and numerical settings (JSON-able).
        timings: counts and seconds per stage (JSON-able).
        molblock: MDL molblock with H in the record's atom order (bond types, formal charges), or "".
        notes: remarks of the calculation for the user (fragment choice, retries, non-convergence).
        mass_numbers: per-atom mass numbers the structure names (0: none), or empty when it names
            no isotope; :attr:`masses_amu` gives the masses the analysis uses.
    """

    smiles: str
    numbers: np.ndarray
    positions_angstrom: np.ndarray
    bonds: tuple[tuple[int, int, float], ...]
    charge: int
    uhf: int
    energy_hartree: float
    hessian_hartree_bohr2: np.ndarray
    dipole_e_bohr: np.ndarray
    dipole_derivatives_e: np.ndarray
    settings: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    molblock: str = ""
    notes: tuple[str, ...] = ()
    mass_numbers: tuple[int, ...] = ()

    @property
    def natoms(self) -> int:
        return len(self.numbers)

    @property
    def masses_amu(self) -> np.ndarray:
        """Atomic masses (amu): isotopes named by the structure, else standard atomic weights."""
        from ..structure import atomic_masses_amu

        return atomic_masses_amu(self.numbers, self.mass_numbers)

    def to_dict(self) -> dict:
        return {
            "format": RECORD_FORMAT,
            "version": RECORD_VERSION,
            "smiles": self.smiles,
            "numbers": self.numbers.tolist(),
            "positions_angstrom": self.positions_angstrom.tolist(),
            "bonds": [list(b) for b in self.bonds],
            "charge": self.charge,
            "uhf": self.uhf,
            "energy_hartree": self.energy_hartree,
            "hessian_hartree_bohr2": self.hessian_hartree_bohr2.tolist(),
            "dipole_e_bohr": self.dipole_e_bohr.tolist(),
            "dipole_derivatives_e": self.dipole_derivatives_e.tolist(),
            "settings": self.settings,
            "timings": self.timings,
            "molblock": self.molblock,
            "notes": list(self.notes),
        } | ({"mass_numbers": list(self.mass_numbers)} if any(self.mass_numbers) else {})

    @classmethod
    def from_dict(cls, d: dict) -> "HessianRecord":
        if d.get("format") != RECORD_FORMAT:
            raise InputError("not a vibest Hessian record (missing 'format' field)")
        if int(d.get("version", 0)) > RECORD_VERSION:
            raise InputError(f"Hessian record version {d.get('version')} is newer than this vibest understands")
        return cls(
            smiles=d["smiles"],
            numbers=np.array(d["numbers"], dtype=int),
            positions_angstrom=np.array(d["positions_angstrom"], dtype=float),
            bonds=tuple((int(i), int(j), float(o)) for i, j, o in d["bonds"]),
            charge=int(d["charge"]),
            uhf=int(d["uhf"]),
            energy_hartree=float(d["energy_hartree"]),
            hessian_hartree_bohr2=np.array(d["hessian_hartree_bohr2"], dtype=float),
            dipole_e_bohr=np.array(d["dipole_e_bohr"], dtype=float),
            dipole_derivatives_e=np.array(d["dipole_derivatives_e"], dtype=float),
            settings=dict(d.get("settings", {})),
            timings=dict(d.get("timings", {})),
            molblock=str(d.get("molblock", "")),
            notes=tuple(str(n) for n in d.get("notes", ())),
            mass_numbers=tuple(int(a) for a in d.get("mass_numbers", ())),
        )

    def save(self, path: str | Path) -> None:
        """Write as JSON (exact to float repr), atomically (a temporary file renamed over ``path``)."""
        from ..files import atomic_write_text

        atomic_write_text(path, json.dumps(self.to_dict()))

    @classmethod
    def load(cls, path: str | Path) -> "HessianRecord":
        try:
            return cls.from_dict(json.loads(Path(path).read_text()))
        except (OSError, ValueError, KeyError, TypeError) as exc:
            raise InputError(f"cannot read Hessian record {path}: {exc}") from None


def structure_of_record(record: HessianRecord):
    """The :class:`vibest.structure.Molecule` at the record's geometry (for computing it again,
    e.g. at another level of theory)."""
    from ase.data import chemical_symbols

    from ..structure import Molecule

    return Molecule(smiles=record.smiles, numbers=np.asarray(record.numbers, int),
                    positions_angstrom=np.asarray(record.positions_angstrom, float), charge=record.charge,
                    uhf=record.uhf, bonds=tuple(record.bonds),
                    symbols=tuple(chemical_symbols[int(z)] for z in record.numbers), molblock=record.molblock,
                    mass_numbers=tuple(record.mass_numbers))


def record_molecule(record: HessianRecord):
    """RDKit molecule (with H, the record's atom order) for pattern matching; from the stored
    molblock, else rebuilt from atomic numbers and bonds."""
    from rdkit import Chem

    if record.molblock:
        mol = Chem.MolFromMolBlock(record.molblock, removeHs=False)
        if mol is not None and mol.GetNumAtoms() == record.natoms:
            return mol
    rw = Chem.RWMol()
    for z in record.numbers:
        rw.AddAtom(Chem.Atom(int(z)))
    types = {1.0: Chem.BondType.SINGLE, 1.5: Chem.BondType.AROMATIC, 2.0: Chem.BondType.DOUBLE,
             3.0: Chem.BondType.TRIPLE}
    for i, j, o in record.bonds:
        rw.AddBond(int(i), int(j), types.get(float(o), Chem.BondType.SINGLE))
        if float(o) == 1.5:
            rw.GetAtomWithIdx(int(i)).SetIsAromatic(True)
            rw.GetAtomWithIdx(int(j)).SetIsAromatic(True)
    mol = rw.GetMol()
    mol.UpdatePropertyCache(strict=False)
    Chem.FastFindRings(mol)
    return mol
