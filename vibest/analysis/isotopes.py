"""Isotopologues: other masses, same Hessian and dipole derivatives (Born-Oppenheimer).

A specification is a comma-separated list of substitutions:
  ``D``          every exchangeable hydrogen (bonded to N, O or S) -> deuterium
  ``D-all``      every hydrogen -> deuterium
  ``13C@3``      atom 3 (1-based, the order of the band table's atom labels) -> carbon-13
  ``18O``        every oxygen -> oxygen-18 (any mass number and element: ``15N``, ``37Cl`` ...)
Isotope masses come from RDKit's periodic table.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
from rdkit import Chem
from scipy.optimize import linear_sum_assignment

from ..errors import InputError
from .harmonic import HarmonicModes, default_masses

_ITEM = re.compile(r"^(\d+)([A-Z][a-z]?)(?:@(\d+))?$")


def isotope_mass(z: int, mass_number: int) -> float:
    table = Chem.GetPeriodicTable()
    m = table.GetMassForIsotope(int(z), int(mass_number))
    if m <= 0 or abs(m - mass_number) > 0.5:
        raise InputError(f"no isotope {mass_number}{table.GetElementSymbol(int(z))} is known")
    return float(m)


def isotopologue_masses(numbers, bonds, spec: str) -> np.ndarray:
    """Masses (amu) for the substitutions in ``spec`` (see module docstring)."""
    numbers = np.asarray(numbers, int)
    masses = default_masses(numbers)
    if not spec or not spec.strip():
        raise InputError("empty isotope specification; e.g. 'D', '13C@2', '18O'")
    neighbours: dict[int, set[int]] = {i: set() for i in range(len(numbers))}
    for i, j, _ in bonds:
        neighbours[int(i)].add(int(j))
        neighbours[int(j)].add(int(i))
    table = Chem.GetPeriodicTable()
    for item in (t.strip() for t in spec.split(",")):
        if item in ("D", "D-exchangeable"):
            hits = [i for i in range(len(numbers)) if numbers[i] == 1 and any(numbers[n] in (7, 8, 16) for n in neighbours[i])]
            if not hits:
                raise InputError("'D': the molecule has no exchangeable (N-H, O-H, S-H) hydrogen")
            masses[hits] = isotope_mass(1, 2)
            continue
        if item == "D-all":
            masses[numbers == 1] = isotope_mass(1, 2)
            continue
        m = _ITEM.match(item)
        if not m:
            raise InputError(f"cannot read isotope {item!r}; write e.g. D, D-all, 13C@2, 18O")
        mass_number, symbol, atom = int(m.group(1)), m.group(2), m.group(3)
        try:
            z = table.GetAtomicNumber(symbol)
        except RuntimeError:
            raise InputError(f"unknown element {symbol!r} in {item!r}") from None
        mass = isotope_mass(z, mass_number)
        if atom is not None:
            k = int(atom) - 1
            if not 0 <= k < len(numbers) or numbers[k] != z:
                raise InputError(f"{item!r}: atom {atom} is not a {symbol} atom of this molecule")
            masses[k] = mass
        else:
            if not np.any(numbers == z):
                raise InputError(f"{item!r}: the molecule has no {symbol} atom")
            masses[numbers == z] = mass
    return masses


@dataclass(frozen=True)
class BandShift:
    """A band of the parent and the band of the isotopologue it became (cm^-1, km/mol)."""

    parent_index: int
    parent_cm1: float
    isotopologue_cm1: float
    parent_intensity_km_mol: float
    isotopologue_intensity_km_mol: float

    @property
    def shift_cm1(self) -> float:
        return self.isotopologue_cm1 - self.parent_cm1

    def to_dict(self) -> dict:
        return {"parent_index": self.parent_index, "parent_cm1": self.parent_cm1,
                "isotopologue_cm1": self.isotopologue_cm1, "shift_cm1": self.shift_cm1,
                "parent_intensity_km_mol": self.parent_intensity_km_mol,
                "isotopologue_intensity_km_mol": self.isotopologue_intensity_km_mol}


def correlate_modes(parent: HarmonicModes, other: HarmonicModes, parent_cm1=None, other_cm1=None) -> np.ndarray:
    """For each parent mode, the index of the isotopologue mode most like it: one-to-one
    (Hungarian assignment) minimising (1 - |overlap of unit Cartesian displacements|) plus,
    when wavenumbers are given, 2 |ln(nu_iso / nu_parent)| (isotopic shifts are rarely large)."""
    a = parent.displacements.reshape(parent.count, -1)
    b = other.displacements.reshape(other.count, -1)
    cost = 1.0 - np.abs(a @ b.T)
    if parent_cm1 is not None and other_cm1 is not None:
        pa = np.maximum(np.abs(np.asarray(parent_cm1, float)), 1.0)
        pb = np.maximum(np.abs(np.asarray(other_cm1, float)), 1.0)
        cost = cost + 2.0 * np.abs(np.log(pb[None, :] / pa[:, None]))
    rows, cols = linear_sum_assignment(cost)
    out = np.empty(parent.count, dtype=int)
    out[rows] = cols
    return out


def band_shifts(parent_cm1, parent: HarmonicModes, other_cm1, other: HarmonicModes) -> list[BandShift]:
    idx = correlate_modes(parent, other, parent_cm1, other_cm1)
    return [BandShift(k + 1, float(parent_cm1[k]), float(other_cm1[j]), float(parent.intensities_km_mol[k]),
                      float(other.intensities_km_mol[j])) for k, j in enumerate(idx)]
