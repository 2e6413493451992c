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
from ase.data import atomic_numbers, chemical_symbols
from scipy.optimize import linear_sum_assignment

from ..errors import InputError
from ..structure import isotope_mass
from .harmonic import HarmonicModes, default_masses

_ITEM = re.compile(r"^(\d+)([A-Z][a-z]?)(?:@(\d+))?$")


@dataclass(frozen=True)
class Substitution:
    """One item of an isotope specification: ``kind`` is "exchangeable-H" (every H on N, O or S
    becomes D), "all-H" (every H becomes D), or "element" (``atomic_number`` becomes the isotope
    ``mass_number``, on atom ``atom`` (0-based) only, or on every such atom when ``atom`` is None)."""

    text: str
    kind: str
    atomic_number: int = 1
    mass_number: int = 2
    atom: int | None = None

    @property
    def mass_amu(self) -> float:
        return isotope_mass(self.atomic_number, self.mass_number)


def parse_isotope_spec(spec: str) -> tuple[Substitution, ...]:
    """Read a specification (see module docstring) without a molecule: syntax, element and
    isotope are checked here, so that a mistake is reported before any calculation."""
    if not isinstance(spec, str) or not spec.strip():
        raise InputError("empty isotope specification; e.g. 'D', '13C@2', '18O'")
    out = []
    for item in (t.strip() for t in spec.split(",")):
        if item in ("D", "D-exchangeable"):
            out.append(Substitution(item, "exchangeable-H"))
            continue
        if item == "D-all":
            out.append(Substitution(item, "all-H"))
            continue
        m = _ITEM.match(item)
        if not m:
            raise InputError(f"cannot read isotope {item!r}; write e.g. D, D-all, 13C@2, 18O")
        mass_number, symbol, atom = int(m.group(1)), m.group(2), m.group(3)
        z = atomic_numbers.get(symbol, 0)  # not RDKit's table: it prints a C++ trace for unknown symbols
        if z < 1:
            raise InputError(f"unknown element {symbol!r} in {item!r}")
        if atom is not None and int(atom) < 1:
            raise InputError(f"{item!r}: atoms are numbered from 1")
        sub = Substitution(item, "element", z, mass_number, None if atom is None else int(atom) - 1)
        sub.mass_amu  # noqa: B018 - raises InputError for an unknown isotope
        out.append(sub)
    return tuple(out)


def isotopologue_masses(numbers, bonds, spec: str, base_masses_amu=None) -> np.ndarray:
    """Masses (amu) for the substitutions in ``spec`` (see module docstring), applied to
    ``base_masses_amu`` (default: standard atomic weights)."""
    numbers = np.asarray(numbers, int)
    masses = default_masses(numbers) if base_masses_amu is None else np.array(base_masses_amu, dtype=float)
    neighbours: dict[int, set[int]] = {i: set() for i in range(len(numbers))}
    for i, j, _ in bonds:
        neighbours[int(i)].add(int(j))
        neighbours[int(j)].add(int(i))
    for sub in parse_isotope_spec(spec):
        if sub.kind == "exchangeable-H":
            hits = [i for i in range(len(numbers)) if numbers[i] == 1 and any(numbers[n] in (7, 8, 16) for n in neighbours[i])]
            if not hits:
                raise InputError("'D': the molecule has no exchangeable (N-H, O-H, S-H) hydrogen")
            masses[hits] = sub.mass_amu
        elif sub.kind == "all-H":
            masses[numbers == 1] = sub.mass_amu
        elif sub.atom is not None:
            if not sub.atom < len(numbers) or numbers[sub.atom] != sub.atomic_number:
                raise InputError(f"{sub.text!r}: atom {sub.atom + 1} is not a {chemical_symbols[sub.atomic_number]} "
                                 "atom of this molecule")
            masses[sub.atom] = sub.mass_amu
        else:
            if not np.any(numbers == sub.atomic_number):
                raise InputError(f"{sub.text!r}: the molecule has no {chemical_symbols[sub.atomic_number]} atom")
            masses[numbers == sub.atomic_number] = sub.mass_amu
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
