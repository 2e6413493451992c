"""Coordinate types of the per-coordinate scale model: which factor each internal coordinate gets.

A :class:`CoordinateType` carries its name (e.g. "C-H stretch (sp3)", "C=O stretch") and its
:class:`Family` (C-H stretches; N-H, O-H, F-H stretches; bonds to halogens; ...), both set where
the type is made from the atoms and bonds, never parsed back from the name. The fitted factors
of ``vibest/data/scale_factors*.json`` are keyed by name and family together, so renaming a
type or moving it to another family in this file no longer matches its fitted factor; the test
suite checks that every type of the shipped files is still made here, with the same family.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass

from ase.data import chemical_symbols

from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION, Primitive

_SYMBOL = {1.0: "-", 1.5: ":", 2.0: "=", 3.0: "#"}
HALOGENS = frozenset({9, 17, 35, 53})
_POLAR_HYDRIDES = {7, 8, 9}


class Family(enum.Enum):
    """Families of coordinate types. A type's factor is pulled towards its family's in the fit
    (partial pooling), and a type without data of its own (N=N of N2O, the H-F stretch) uses the
    family's factor instead of the uniform one. Values are the names written in the JSON files."""

    C_H = "C-H stretch"
    POLAR_H = "N-H, O-H, F-H stretch"
    HALOGEN = "stretch of a bond to a halogen"
    TRIPLE = "triple-bond stretch"
    CUMULATED = "cumulated double-bond stretch"
    DOUBLE = "double and aromatic bond stretch"
    SINGLE = "single heavy-atom bond stretch"
    BEND_H = "bend with H"
    TORSION = "torsion"


@dataclass(frozen=True)
class CoordinateType:
    """The scaling type of an internal coordinate: its name and its family (None for types of
    their own: heavy-atom bends, linear bends, out-of-plane, heavier-hydride stretches)."""

    name: str
    family: Family | None = None

    def __str__(self) -> str:
        return self.name

    def __lt__(self, other: "CoordinateType") -> bool:  # families are not ordered; names are unique
        return (self.name, self.family.value if self.family else "") < \
            (other.name, other.family.value if other.family else "")


def _cumulated_atoms(bonds) -> set[int]:
    doubles: dict[int, int] = {}
    for i, j, o in bonds:
        if float(o) >= 2.0:
            for a in (int(i), int(j)):
                doubles[a] = doubles.get(a, 0) + 1
    return {a for a, c in doubles.items() if c >= 2}


def _carbon_kind(c: int, numbers, orders) -> str:
    """Kind of a C-H bond's carbon: "aldehyde" (C=O on the carbon), "halogenated, one halogen
    on C", "halogenated, 2+ halogens on C", "sp", "sp2", "sp3, next to N or O" or "sp3"."""
    nbrs = [(j if i == c else i, o) for (i, j), o in orders.items() if c in (i, j)]
    if any(int(numbers[n]) == 8 and o >= 2.0 for n, o in nbrs):
        return "aldehyde"
    halogens = sum(int(numbers[n]) in HALOGENS for n, _ in nbrs)
    if halogens:
        return "halogenated, " + ("one halogen on C" if halogens == 1 else "2+ halogens on C")
    if any(o >= 3.0 for _, o in nbrs) or len(nbrs) == 2:
        return "sp"
    if any(o >= 1.5 for _, o in nbrs) or len(nbrs) == 3:
        return "sp2"
    if any(int(numbers[n]) in (7, 8) for n, _ in nbrs):
        return "sp3, next to N or O"
    return "sp3"


def _hydride_stretch(a, numbers, orders) -> CoordinateType:
    """First-row hydrides by element; heavier ones (S, Cl, Br, P, ...) share one type: GFN2-xTB
    places their stretches too low by a similar fraction. C-H stretches by the kind of carbon,
    whose GFN2-xTB errors differ (aldehyde C-H ~100 cm^-1 low, C-H next to an ether or amine O/N
    low, CH3X high, CHX2/CHX3 low)."""
    x = a[1] if int(numbers[a[0]]) == 1 else a[0]
    z = int(numbers[x])
    if z == 6:
        return CoordinateType(f"C-H stretch ({_carbon_kind(x, numbers, orders)})", Family.C_H)
    if z > 10:
        return CoordinateType("heavy-atom-H stretch")
    return CoordinateType(f"{chemical_symbols[z]}-H stretch", Family.POLAR_H if z in _POLAR_HYDRIDES else None)


def _halogen_stretch(i: int, j: int, numbers, orders) -> CoordinateType:
    """"C-Cl stretch (one halogen on C)", "C-F stretch (2+ halogens on C)", ...: by halogen, and
    by whether the carbon carries more halogens (the stretches of CX2, CX3 and CX4 groups couple,
    and GFN2-xTB misplaces them differently from those of a lone C-X bond); "X-halogen stretch"
    for bonds of a halogen to anything but carbon."""
    if 6 not in (int(numbers[i]), int(numbers[j])):
        return CoordinateType("X-halogen stretch", Family.HALOGEN)
    c, x = (i, j) if int(numbers[i]) == 6 else (j, i)
    halogens = sum(int(numbers[k if l == c else l]) in HALOGENS for k, l in orders if c in (k, l))
    where = "one halogen on C" if halogens <= 1 else "2+ halogens on C"
    return CoordinateType(f"C-{chemical_symbols[int(numbers[x])]} stretch ({where})", Family.HALOGEN)


def _heavy_stretch(a, numbers, orders, cumulated: set[int]) -> CoordinateType:
    """"C=O stretch", "C:C stretch" (aromatic), "C#N stretch", "C=O stretch (cumulated)" ...:
    carbon first, else the heavier atom first; the family by bond order."""
    zi, zj = sorted((int(numbers[a[0]]), int(numbers[a[1]])))
    order = orders.get((min(a[0], a[1]), max(a[0], a[1])), 1.0)
    first, second = (zi, zj) if zi == 6 else ((zj, zi) if zj == 6 else (zj, zi))
    symbol = _SYMBOL.get(order, "-")
    name = f"{chemical_symbols[first]}{symbol}{chemical_symbols[second]} stretch"
    if order >= 2.0 and (a[0] in cumulated or a[1] in cumulated):
        return CoordinateType(name + " (cumulated)", Family.CUMULATED)
    return CoordinateType(name, {"#": Family.TRIPLE, "=": Family.DOUBLE, ":": Family.DOUBLE}.get(symbol, Family.SINGLE))


def _bend(a, numbers) -> CoordinateType:
    ends = (int(numbers[a[0]]), int(numbers[a[2]]))
    apex = chemical_symbols[int(numbers[a[1]])]
    if ends == (1, 1):
        return CoordinateType(f"H-{apex}-H bend", Family.BEND_H)
    if 1 in ends:
        return CoordinateType(f"H-{apex}-X bend", Family.BEND_H)
    if ends[0] in HALOGENS or ends[1] in HALOGENS:
        # X-C-Cl, Cl-C-Cl, ...: GFN2-xTB misplaces the deformations of halogenated carbons
        # differently from skeletal bends (cross-validated, DEVELOPERS.md)
        return CoordinateType("bend (halogen end)")
    return CoordinateType("bend")


def coordinate_types(numbers, bonds, primitives: tuple[Primitive, ...] | list[Primitive]) -> list[CoordinateType]:
    """Scaling type of each primitive, e.g. "C-H stretch (sp3)", "C=O stretch", "C#N stretch",
    "C=O stretch (cumulated)", "C-Cl stretch (2+ halogens on C)", "heavy-atom-H stretch" (S-H,
    Cl-H, ...), "H-C-X bend", "bend", "bend (halogen end)", "linear bend", "torsion (H)", "out-of-plane"."""
    orders = {(min(int(i), int(j)), max(int(i), int(j))): float(o) for i, j, o in bonds}
    cumulated = _cumulated_atoms(bonds)
    out = []
    for p in primitives:
        a = p.atoms
        if p.kind == STRETCH:
            zs = (int(numbers[a[0]]), int(numbers[a[1]]))
            if 1 in zs:
                out.append(_hydride_stretch(a, numbers, orders))
            elif HALOGENS & set(zs):
                out.append(_halogen_stretch(a[0], a[1], numbers, orders))
            else:
                out.append(_heavy_stretch(a, numbers, orders, cumulated))
        elif p.kind == BEND:
            out.append(_bend(a, numbers))
        elif p.kind == LINEAR_BEND:
            out.append(CoordinateType("linear bend"))
        elif p.kind == TORSION:
            hydrogen_end = 1 in (int(numbers[a[0]]), int(numbers[a[3]]))
            out.append(CoordinateType("torsion (H)" if hydrogen_end else "torsion", Family.TORSION))
        elif p.kind == OUT_OF_PLANE:
            out.append(CoordinateType("out-of-plane"))
        else:  # pragma: no cover - all kinds are listed above
            out.append(CoordinateType(p.kind))
    return out
