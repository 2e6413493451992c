"""What each normal mode is made of, in internal coordinates (stretches, bends, wags, torsions).

Method (documented for users in README "Band character"):
1. primitive internal coordinates from the bond graph (see :mod:`vibest.internal_coordinates`);
2. the Cartesian Hessian is carried to those (redundant) coordinates with the generalised
   inverse of G = B B^T: F_q = G^- B H B^T G^- (P. Pulay, G. Fogarasi, J. Chem. Phys. 96, 2856
   (1992); C. Peng et al., J. Comput. Chem. 17, 49 (1996));
3. each mode's internal displacement is dq = B l (l the Cartesian displacement of the mode);
4. the share of coordinate k is the diagonal potential-energy term F_kk dq_k^2 normalised over
   all k (the diagonal part of the potential-energy distribution of Morino & Kuchitsu,
   J. Chem. Phys. 20, 1809 (1952)). Shares are non-negative and sum to 100 % per mode.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase.data import chemical_symbols

from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION, Primitive
from .internal_space import InternalSpace

BOND_SYMBOL = {1.0: "-", 1.5: ":", 2.0: "=", 3.0: "#"}


@dataclass(frozen=True)
class Contribution:
    """One coordinate's share of a mode: ``label`` like "C2=O3 stretch", ``kind``, ``type_label``
    like "C=O stretch", ``atoms`` (0-based) and ``percent``."""

    label: str
    type_label: str
    kind: str
    atoms: tuple[int, ...]
    percent: float

    def to_dict(self) -> dict:
        return {"label": self.label, "type": self.type_label, "kind": self.kind,
                "atoms": list(self.atoms), "percent": round(self.percent, 2)}


@dataclass(frozen=True)
class ModeComposition:
    """Composition of every mode: ``contributions[m]`` sorted by share (largest first)."""

    primitives: tuple[Primitive, ...]
    shares: np.ndarray  # (modes, primitives), fractions summing to 1 per mode
    contributions: tuple[tuple[Contribution, ...], ...]
    internal_displacements: np.ndarray | None = None  # (modes, primitives): dq = B l

    def type_shares(self, mode: int) -> dict[str, float]:
        """Percent per coordinate type (e.g. "C-H stretch") for one mode, largest first."""
        out: dict[str, float] = {}
        for c in self.contributions[mode]:
            out[c.type_label] = out.get(c.type_label, 0.0) + c.percent
        return dict(sorted(out.items(), key=lambda kv: -kv[1]))

    def rough_character(self, mode: int) -> str:
        """Short description from the dominant coordinate types, e.g. "C=O stretch 82%", in the
        trade's notation (triple bonds as the triple-bar sign, aromatic bonds in words)."""
        types = [(trade_notation(t), v) for t, v in self.type_shares(mode).items()]
        if not types:
            return ""
        (t1, p1), rest = types[0], types[1:]
        text = f"{t1} {p1:.0f}%"
        if p1 < 60 and rest:
            text += f", {rest[0][0]} {rest[0][1]:.0f}%"
        return text


def trade_notation(text: str) -> str:
    """Bond symbols of SMILES turned into the trade's: "C#N" -> "C\u2261N", "C:C stretch" ->
    "aromatic C-C stretch"."""
    import re

    text = text.replace("#", "\u2261")
    return re.sub(r"\b([A-Z][a-z]?):([A-Z][a-z]?)\b", r"aromatic \1-\2", text)


def _atom_label(numbers, i: int) -> str:
    return f"{chemical_symbols[int(numbers[i])]}{i + 1}"


def _bond_order_map(bonds) -> dict[tuple[int, int], float]:
    return {(min(i, j), max(i, j)): float(o) for i, j, o in bonds}


def _element_rank(z: int) -> tuple[int, int]:
    """Order in bond names as chemists write them: C first, H last, others heavier first."""
    return (0, 0) if z == 6 else ((2, 0) if z == 1 else (1, -z))


def _ordered_pair(numbers, i: int, j: int) -> tuple[int, int]:
    """C=O, C-H, O-H, C#N, S=O ...; ties by lower index."""
    ki, kj = (_element_rank(int(numbers[i])), i), (_element_rank(int(numbers[j])), j)
    return (i, j) if ki <= kj else (j, i)


def describe(prim: Primitive, numbers, orders) -> tuple[str, str]:
    """(label with atom numbers, type label) of one primitive."""
    s = lambda i: chemical_symbols[int(numbers[i])]  # noqa: E731
    a = prim.atoms
    if prim.kind == STRETCH:
        i, j = _ordered_pair(numbers, *a)
        sym = BOND_SYMBOL.get(orders.get((min(i, j), max(i, j)), 1.0), "-")
        return (f"{_atom_label(numbers, i)}{sym}{_atom_label(numbers, j)} stretch",
                f"{s(i)}{sym}{s(j)} stretch")
    if prim.kind in (BEND, LINEAR_BEND):
        i, j, k = a[:3]
        ends = sorted((i, k), key=lambda t: (_element_rank(int(numbers[t])), t))
        return (f"{_atom_label(numbers, ends[0])}-{_atom_label(numbers, j)}-{_atom_label(numbers, ends[1])} bend",
                f"{s(ends[0])}-{s(j)}-{s(ends[1])} bend")
    if prim.kind == TORSION:
        i, j, k, l = a
        p, q = _ordered_pair(numbers, j, k)
        return (f"torsion {_atom_label(numbers, i)}-{_atom_label(numbers, j)}-{_atom_label(numbers, k)}-{_atom_label(numbers, l)}",
                f"torsion about {s(p)}-{s(q)}")
    if prim.kind == OUT_OF_PLANE:
        i, j, k, l = a
        return (f"{_atom_label(numbers, l)} out-of-plane ({_atom_label(numbers, i)})",
                f"{s(l)} out-of-plane wag")
    raise ValueError(prim.kind)


def mode_composition(numbers, positions_angstrom, bonds, hessian_hartree_bohr2, displacements,
                     min_percent: float = 1.0, space: InternalSpace | None = None) -> ModeComposition:
    """Composition of each mode over internal coordinates built from ``bonds``.

    Args:
        bonds: (i, j, order) triples of the molecule.
        displacements: Cartesian displacement vectors of the modes (M, N, 3), any normalisation.
        min_percent: contributions below this are left out of ``contributions`` (not of ``shares``).
        space: the molecule's internal coordinates, when already built.
    """
    space = space or InternalSpace.build(positions_angstrom, bonds)
    prims = space.primitives
    m = len(displacements)
    if not prims:
        return ModeComposition((), np.zeros((m, 0)), tuple(() for _ in range(m)))
    f_diag = space.diagonal_force_constants(hessian_hartree_bohr2)
    dq = np.asarray(displacements).reshape(m, -1) @ space.b.T  # (M, P)
    energy = np.abs(f_diag)[None, :] * dq ** 2
    total = energy.sum(1, keepdims=True)
    shares = np.divide(energy, total, out=np.zeros_like(energy), where=total > 0)
    orders = _bond_order_map(bonds)
    described = [describe(p, numbers, orders) for p in prims]
    contribs = []
    for mode in range(m):
        order = np.argsort(-shares[mode])
        row = []
        for k in order:
            pct = 100.0 * shares[mode, k]
            if pct < min_percent:
                break
            label, tlabel = described[k]
            row.append(Contribution(label, tlabel, prims[k].kind, prims[k].atoms, float(pct)))
        contribs.append(tuple(row))
    return ModeComposition(tuple(prims), shares, tuple(contribs), dq)
