"""Functional groups found with SMARTS patterns, and plain-word band labels built from them.

The table below is the one place where groups are defined. Each row: the group's name, a SMARTS
pattern, and which matched atoms belong to the group's characteristic bonds (all, if None).
Rows are tried in order; an atom keeps the first (most specific) group that claims it for a bond.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rdkit import Chem

from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION

#: (name, SMARTS). Most specific first.
GROUP_TABLE: tuple[tuple[str, str], ...] = (
    ("carboxylate", "[CX3](=O)[O-]"),
    ("carboxylic acid", "[CX3](=O)[OX2H1]"),
    ("ester", "[#6][CX3](=O)[OX2H0][#6]"),
    ("amide", "[CX3](=O)[NX3]"),
    ("aldehyde", "[CX3H1](=O)[#6,#1]"),
    ("formaldehyde", "[CX3H2]=O"),
    ("ketone", "[#6][CX3](=O)[#6]"),
    ("acyl halide", "[CX3](=O)[F,Cl,Br,I]"),
    ("nitrile", "[NX1]#[CX2]"),
    ("isocyanate", "N=C=O"),
    ("nitro", "[NX3+](=O)[O-]"),
    ("nitro", "[NX3](=O)=O"),
    ("phenol", "[OX2H1][c]"),
    ("alcohol", "[OX2H1][CX4,CX3;!$(C=O)]"),
    ("water", "[OH2]"),
    ("ether", "[OD2]([#6;!$(C=O)])[#6;!$(C=O)]"),
    ("primary amine", "[NX3;H2][#6;!$(C=O)]"),
    ("secondary amine", "[NX3;H1]([#6;!$(C=O)])[#6;!$(C=O)]"),
    ("tertiary amine", "[NX3;H0]([#6;!$(C=O)])([#6;!$(C=O)])[#6;!$(C=O)]"),
    ("ammonia", "[NH3]"),
    ("thiol", "[SX2H1][#6]"),
    ("sulfone/sulfoxide", "[SX4,SX3]=O"),
    ("aromatic", "a"),
    ("alkyne", "[CX2]#[CX2]"),
    ("alkene", "[CX3]=[CX3]"),
    ("fluoride", "[#6]F"),
    ("chloride", "[#6]Cl"),
    ("bromide", "[#6]Br"),
    ("iodide", "[#6]I"),
    ("alkane", "[CX4]"),
)

_BOND = {1.0: "-", 1.5: "=", 2.0: "=", 3.0: "\u2261"}
#: Groups whose name adds nothing to a label (a C-H stretch of a chloroalkane is a C-H stretch).
_SILENT_GROUPS = ("alkane", "fluoride", "chloride", "bromide", "iodide")
#: Two-oxygen groups whose X-O stretches are named as a pair (symmetric / antisymmetric).
_XO2_GROUPS = {"nitro": "NO2", "carboxylate": "CO2-"}


@dataclass(frozen=True)
class GroupMap:
    """Groups of one molecule: for each group name, the atom index sets (0-based) it matched."""

    matches: dict[str, tuple[frozenset[int], ...]]

    def is_aromatic(self, *atoms) -> bool:
        arom = self.matches.get("aromatic", ())
        return all(any(a in m for m in arom) for a in atoms)

    def group_of(self, atoms) -> str | None:
        """First group (table order) one of whose matches contains all heavy ``atoms``."""
        need = set(atoms)
        for name, _ in GROUP_TABLE:
            for m in self.matches.get(name, ()):
                if need <= m:
                    return name
        return None


def find_groups(mol_with_h: Chem.Mol) -> GroupMap:
    out: dict[str, tuple[frozenset[int], ...]] = {}
    for name, smarts in GROUP_TABLE:
        patt = Chem.MolFromSmarts(smarts)
        hits = mol_with_h.GetSubstructMatches(patt, uniquify=True, maxMatches=10000)
        if hits:  # a name may have several patterns (nitro as charges or as double bonds)
            out[name] = out.get(name, ()) + tuple(frozenset(h) for h in hits)
    return GroupMap(out)


def _sym(numbers, i):
    from ase.data import chemical_symbols

    return chemical_symbols[int(numbers[i])]


def _stretch_label(numbers, a, b, order, groups: GroupMap, mol: Chem.Mol, signs: dict[int, list[float]]) -> str:
    """E.g. "C=O stretch (ketone)", "N-H stretch (primary amine, antisymmetric)"."""
    if int(numbers[a]) == 1:
        a, b = b, a
    heavy, other = a, b
    if int(numbers[other]) == 1:
        x = _sym(numbers, heavy)
        nh = sum(1 for n in mol.GetAtomWithIdx(heavy).GetNeighbors() if n.GetAtomicNum() == 1)
        group = groups.group_of([heavy])
        if group == "aromatic":
            name = "aromatic C-H stretch"
        elif group in ("alkene",):
            name = "=C-H stretch (alkene)"
        elif group == "alkyne":
            name = "\u2261C-H stretch (alkyne)"
        elif x == "C" and nh == 3:
            name = "CH3 stretch"
        elif x == "C" and nh == 2:
            name = "CH2 stretch"
        else:
            name = f"{x}-H stretch" + (f" ({group})" if group and group not in _SILENT_GROUPS else "")
        s = signs.get(heavy, [])
        if nh >= 2:
            # one X-H stretch dominating the mode is an antisymmetric combination (the symmetric one
            # moves every X-H bond alike)
            same = len(s) >= 2 and (np.all(np.array(s) > 0) or np.all(np.array(s) < 0))
            kind = "symmetric" if same else "antisymmetric"
            name = name[:-1] + f", {kind})" if name.endswith(")") else f"{name} ({kind})"
        return name
    order_sym = "=" if order == 1.5 else _BOND.get(order, "-")
    x, y = _sym(numbers, a), _sym(numbers, b)
    if y == "C" and x != "C":
        x, y = y, x
    if order == 1.5 and groups.is_aromatic(a, b):
        return "ring C=C stretch (aromatic)"
    group = groups.group_of([a, b])
    if group in _XO2_GROUPS and 8 in (int(numbers[a]), int(numbers[b])):
        centre = a if int(numbers[a]) != 8 else b
        s = signs.get(-1 - centre, [])
        kind = "symmetric" if len(s) >= 2 and (all(v > 0 for v in s) or all(v < 0 for v in s)) else "antisymmetric"
        return f"{_XO2_GROUPS[group]} {kind} stretch ({group})"
    label = f"{x}{order_sym}{y} stretch"
    if group is None:
        # C-O of an ester/acid: the single-bonded O belongs to the ester group match
        group = groups.group_of([a]) if groups.group_of([a]) == groups.group_of([b]) else None
    return label + (f" ({group})" if group and group not in _SILENT_GROUPS else "")


def _torsion_label(numbers, atoms, orders, groups: GroupMap, mol: Chem.Mol) -> str:
    """Name of a torsion i-j-k-l by what turns: an X-H about its own bond to a heteroatom
    (O-H, N-H, S-H torsion), a methyl group (CH3 torsion), a terminal C=O moving out of its plane
    (C=O out-of-plane wag), ring out-of-plane motions."""
    i, j, k, l = (int(v) for v in atoms)
    if groups.is_aromatic(j, k):
        return "aromatic C-H out-of-plane bend" if 1 in (int(numbers[i]), int(numbers[l])) else \
            "ring out-of-plane deformation"
    for end, axis in ((i, j), (l, k)):
        if int(numbers[end]) == 1 and int(numbers[axis]) in (7, 8, 16):
            return f"{_sym(numbers, axis)}-H torsion"
    for end, axis in ((i, j), (l, k)):
        atom = mol.GetAtomWithIdx(axis)
        if int(numbers[end]) == 1 and atom.GetAtomicNum() == 6 and \
                sum(n.GetAtomicNum() == 1 for n in atom.GetNeighbors()) == 3:
            return "CH3 torsion"
    for end, axis in ((i, j), (l, k)):
        if int(numbers[end]) == 8 and orders.get((min(end, axis), max(end, axis)), 1.0) == 2.0 \
                and mol.GetAtomWithIdx(end).GetDegree() == 1:
            return "C=O out-of-plane wag"
    return "torsion"


#: Amide band names (common practice, no source): amide I mainly C=O stretch (1630-1700
#: cm^-1), amide II N-H in-plane bend with C-N stretch (about 1480-1600), amide III C-N stretch
#: with N-H bend (about 1200-1350).
_AMIDE_BANDS = (("C=O stretch (amide)", None, "C=O stretch (amide I)"),
                ("N-H bend (amide)", (1450.0, 1620.0), "N-H bend (amide II)"),
                ("NH2 bend (amide)", (1550.0, 1680.0), "NH2 bend (amide II)"),
                ("C-N stretch (amide)", (1180.0, 1360.0), "C-N stretch (amide III)"))


def named_band(label: str, wavenumber_cm1: float) -> str:
    """``label`` with the trade's name where a band has one (amide I, II, III)."""
    for plain, window, name in _AMIDE_BANDS:
        if label == plain and (window is None or window[0] <= wavenumber_cm1 <= window[1]):
            return name
    return label


def band_label(numbers, bonds, primitives, shares_row, dq_row, groups: GroupMap, mol: Chem.Mol) -> str:
    """A short label for one mode from its composition (shares over primitives) and groups."""
    if len(shares_row) == 0:
        return ""
    orders = {(min(i, j), max(i, j)): float(o) for i, j, o in bonds}
    # Sum shares by a label key; keep sign information of X-H stretches per heavy atom.
    totals: dict[str, float] = {}
    signs: dict[int, list[float]] = {}
    for k in np.argsort(-shares_row)[:12]:
        p = primitives[k]
        if p.kind == STRETCH and shares_row[k] > 0.05:
            a, b = p.atoms
            if 1 in (int(numbers[a]), int(numbers[b])):
                heavy = a if int(numbers[b]) == 1 else b
                signs.setdefault(heavy, []).append(float(dq_row[k]))
            elif 8 in (int(numbers[a]), int(numbers[b])) and groups.group_of([a, b]) in _XO2_GROUPS:
                centre = a if int(numbers[a]) != 8 else b
                signs.setdefault(-1 - centre, []).append(float(dq_row[k]))
    for k in np.argsort(-shares_row)[:12]:
        share = shares_row[k]
        if share < 0.03:
            break
        p = primitives[k]
        a = p.atoms
        if p.kind == STRETCH:
            key = _stretch_label(numbers, a[0], a[1], orders.get((min(a), max(a)), 1.0), groups, mol, signs)
        elif p.kind in (BEND, LINEAR_BEND):
            i, j, l = a[:3]
            ends = sorted((int(numbers[i]), int(numbers[l])))
            centre = _sym(numbers, j)
            nh = sum(1 for n in mol.GetAtomWithIdx(j).GetNeighbors() if n.GetAtomicNum() == 1)
            group = groups.group_of([j])
            if centre == "C" and group not in ("aldehyde", "formaldehyde", "alkene", "aromatic"):
                group = None  # a CH3/CH2 next to a group is named by itself
            if ends == [1, 1]:
                key = (f"{centre}H{nh} bend" if nh >= 2 else f"H-{centre}-H bend") + (
                    f" ({group})" if group and group not in ("alkane", "aromatic") else "")
            elif 1 in ends and centre == "C" and nh >= 2 and group is None:
                key = f"CH{nh} bend"
            elif 1 in ends and centre != "C" and nh >= 2:
                # H-N-C bends of an NH2 group are NH2 deformations (scissor, wag, twist, rock)
                key = f"{centre}H{nh} bend" + (f" ({group})" if group and group not in ("alkane", "aromatic") else "")
            elif 1 in ends:
                key = ("aromatic C-H in-plane bend" if group == "aromatic" else
                       f"{centre}-H bend" + (f" ({group})" if group and group != "alkane" else ""))
            else:
                key = "ring deformation" if group == "aromatic" else "skeletal bend"
        elif p.kind == OUT_OF_PLANE:
            i, j, l, centre = a
            has_h = 1 in (int(numbers[i]), int(numbers[j]), int(numbers[l]))
            group = "aromatic" if groups.is_aromatic(centre) else groups.group_of([centre])
            key = ("aromatic C-H out-of-plane bend" if group == "aromatic" and has_h else
                   f"{_sym(numbers, centre)} out-of-plane wag" + (f" ({group})" if group and group != "alkane" else ""))
        elif p.kind == TORSION:
            key = _torsion_label(numbers, a, orders, groups, mol)
        else:
            key = p.kind
        totals[key] = totals.get(key, 0.0) + float(share)
    if not totals:
        return ""
    best = max(totals.items(), key=lambda kv: kv[1])
    if best[0] in ("CH3 torsion", "torsion") and _carbonyl_out_of_plane(numbers, primitives, dq_row, orders, mol):
        return "C=O out-of-plane wag"
    return best[0]


def _carbonyl_out_of_plane(numbers, primitives, dq_row, orders, mol: Chem.Mol) -> bool:
    """Whether a mode described by torsions moves a terminal carbonyl O out of its plane: the
    torsions i-j-k-O and i-j-k-X (X the carbonyl carbon's other substituent) change in opposite
    directions (O and X move to opposite sides), where a methyl rotation turns both alike."""
    by_frame: dict[tuple, dict[str, float]] = {}
    for p, dq in zip(primitives, dq_row):
        if p.kind != TORSION:
            continue
        i, j, k, l = (int(v) for v in p.atoms)
        for a, b, c, end in ((i, j, k, l), (l, k, j, i)):
            if int(numbers[end]) == 8 and orders.get((min(c, end), max(c, end)), 1.0) == 2.0 \
                    and mol.GetAtomWithIdx(end).GetDegree() == 1:
                by_frame.setdefault((a, b, c), {})["O"] = float(dq)
            elif int(numbers[end]) != 1 and c in (j, k) and any(
                    int(numbers[n.GetIdx()]) == 8 and orders.get((min(c, n.GetIdx()), max(c, n.GetIdx())), 1.0) == 2.0
                    for n in mol.GetAtomWithIdx(c).GetNeighbors()):
                by_frame.setdefault((a, b, c), {})["X"] = float(dq)
    pairs = [(v["O"], v["X"]) for v in by_frame.values() if "O" in v and "X" in v]
    if not pairs:
        return False
    o, x = np.array(pairs).T
    return bool(np.sum(o * x) < -0.25 * np.sum(o * o + x * x) / 2)
