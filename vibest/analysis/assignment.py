"""Assignment of computed normal modes to experimental fundamentals (pure).

Better than pairing sorted lists, which swaps bands whenever the model misorders them (GFN2-xTB
puts C#N and C=C=O stretches 100-200 cm^-1 too high and X-H stretches of heavier hydrides too
low, so sorted pairing matches them with the wrong experimental bands).

Method:
1. Symmetry. When the computed geometry has point-group operations
   (:mod:`vibest.analysis.symmetry`), each computed mode and each experimental row gets a
   convention-free class: degeneracy, totally symmetric or not, and g/u parity for molecules with
   a centre of symmetry, refined where the group allows it by the A/B letter (symmetric or not
   under the principal rotation) and the prime (under the horizontal plane) of Mulliken's labels.
   A row may only pair with a mode of the same class. If the computed and
   the tabulated classes cannot match (the computed minimum has another symmetry than the one of
   the table, e.g. a methyl rotamer), symmetry is not used for that molecule and the result says so.
2. Character. The table's mode description ("CH3 d-str", "C=O str", "CH2 rock", "Ring deform",
   "Torsion", ...) gives a family: X-H stretch, heavy-atom stretch, bend with H, skeletal bend,
   torsion (or a wider family for "ring" and bare "bend"/"deform"). The computed mode's family
   shares come from its potential-energy distribution over internal coordinates
   (:mod:`vibest.analysis.composition`). Their agreement is a score between 0 and 1.
3. Cost of pairing row e with mode k: |d| + 0.01 d^2 + 3 (1 - character score) with
   d = (w_k - w_e) / 100 cm^-1. The small square term makes the cost strictly convex in d: with
   |d| alone, two rows and two modes of equal character on the same side of each other cost the
   same paired either way (an exact tie, broken by rounding noise); the square term prefers the
   pairing in wavenumber order;
   forbidden pairs (other symmetry class) cost 1e6. The pairing of least total cost is found with
   the Hungarian method (scipy.optimize.linear_sum_assignment). Rows left without a mode of their
   class are reported as unassigned.
"""

from __future__ import annotations

import collections
import re
from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION
from .symmetry import ModeSymmetry, label_symmetry, mode_symmetries, principal_and_horizontal, symmetry_operations

XH_STRETCH, STRETCH_F, H_BEND, SKELETAL_BEND, TORSION_F = "X-H stretch", "stretch", "H bend", "skeletal bend", "torsion"
COMPUTED_FAMILIES = (XH_STRETCH, STRETCH_F, H_BEND, SKELETAL_BEND, TORSION_F)
ANY_BEND, ANY_SKELETAL, SKELETAL_OP = "any bend", "skeletal", "skeletal out-of-plane"

#: similarity of an experimental family (rows) to a computed family (columns), 0..1
SIMILARITY = {
    XH_STRETCH: {XH_STRETCH: 1.0},
    STRETCH_F: {STRETCH_F: 1.0},
    H_BEND: {H_BEND: 1.0, TORSION_F: 0.6, SKELETAL_BEND: 0.3},
    SKELETAL_BEND: {SKELETAL_BEND: 1.0, TORSION_F: 0.5, H_BEND: 0.3},
    TORSION_F: {TORSION_F: 1.0, H_BEND: 0.6, SKELETAL_BEND: 0.5},
    ANY_BEND: {H_BEND: 1.0, SKELETAL_BEND: 1.0, TORSION_F: 0.6},
    ANY_SKELETAL: {STRETCH_F: 1.0, SKELETAL_BEND: 1.0, TORSION_F: 0.5, H_BEND: 0.3},
    SKELETAL_OP: {TORSION_F: 1.0, SKELETAL_BEND: 1.0, H_BEND: 0.5},
}
FORBIDDEN = 1e6
#: Weight of the square term of the pairing cost (see the module docstring).
TIE_BREAK = 0.01
_H_GROUP = re.compile(r"\b(?:c|n|o|s)?h\d?\b|\bh(?:cl|f|br|i)\b")
_BEND_WORDS = ("bend", "deform", "scis", "rock", "wag", "twist", "puck")


def description_family(description: str, hydride: bool) -> str:
    """Family of a table's mode description; ``hydride`` when every bond of the molecule has an H
    (then bare "sym str" / "bend" mean X-H motions)."""
    d = description.lower().split("+")[0].strip()
    d = re.sub(r"\([^)]*\)", "", d)  # CH3(O) -> CH3
    has_h = bool(_H_GROUP.search(d))
    if "torsion" in d:
        return TORSION_F
    if "str" in d:
        return XH_STRETCH if has_h or (hydride and not re.search(r"c[=-]?o|c=c|cc|cn|cl|br", d)) else STRETCH_F
    if d.startswith("op") and "ring" in d:
        return SKELETAL_OP
    if any(w in d for w in _BEND_WORDS):
        if has_h:
            return H_BEND
        if re.fullmatch(r"(sym |deg |anti )?(bend|deform)", d):
            return H_BEND if hydride else ANY_BEND
        return SKELETAL_BEND
    if "ring" in d:
        return ANY_SKELETAL
    return ANY_SKELETAL


def computed_family_shares(numbers, composition) -> np.ndarray:
    """(modes, families) share of each computed family (rows sum to 1) from the PED shares."""
    numbers = np.asarray(numbers)
    columns = []
    for p in composition.primitives:
        has_h = any(int(numbers[a]) == 1 for a in p.atoms)
        if p.kind == STRETCH:
            columns.append(XH_STRETCH if has_h else STRETCH_F)
        elif p.kind in (BEND, LINEAR_BEND):
            ends_h = int(numbers[p.atoms[0]]) == 1 or int(numbers[p.atoms[2]]) == 1
            columns.append(H_BEND if ends_h else SKELETAL_BEND)
        elif p.kind == OUT_OF_PLANE:
            columns.append(H_BEND if has_h else SKELETAL_BEND)
        elif p.kind == TORSION:
            columns.append(TORSION_F)
        else:  # pragma: no cover
            columns.append(SKELETAL_BEND)
    out = np.zeros((composition.shares.shape[0], len(COMPUTED_FAMILIES)))
    for k, fam in enumerate(columns):
        out[:, COMPUTED_FAMILIES.index(fam)] += composition.shares[:, k]
    if not columns:  # diatomic: its one mode is a stretch
        out[:, COMPUTED_FAMILIES.index(XH_STRETCH if 1 in numbers else STRETCH_F)] = 1.0
    return out


def character_scores(families: list[str], shares: np.ndarray) -> np.ndarray:
    """(rows, modes) agreement of each row's family with each computed mode, 0..1."""
    sim = np.array([[SIMILARITY[f].get(c, 0.0) for c in COMPUTED_FAMILIES] for f in families])
    return sim @ shares.T


@dataclass(frozen=True)
class Assignment:
    """Pairs (row, mode): ``rows[i]`` (index into the expanded experimental list) goes with
    computed mode ``modes[i]``; ``unassigned`` rows had no partner; ``method`` says how."""

    rows: tuple[int, ...]
    modes: tuple[int, ...]
    unassigned: tuple[int, ...]
    method: str
    character: tuple[float, ...]


def symmetry_allowed(ops, computed: list[ModeSymmetry], tabulated: list[ModeSymmetry]) -> np.ndarray | None:
    """(rows, modes) mask of the pairs whose symmetry classes agree, or None when the computed
    classes cannot hold the table's rows.

    The finest convention-free class that both sides support is used: the coarse class
    (degeneracy, totally symmetric, g/u) refined by the A/B letter when the group has a principal
    rotation and every non-degenerate row's label has a letter A, B or Sigma, and by the prime
    when the group has a horizontal plane and every label is primed. If the refined classes
    cannot hold the rows (e.g. a table that labels by another principal axis), the coarse
    classes are tried."""
    principal, horizontal = principal_and_horizontal(ops)
    use_axial = principal is not None and all(t.axial != 0 for t in tabulated if t.degeneracy == 1)
    use_horizontal = horizontal is not None and all(t.horizontal != 0 for t in tabulated)
    tries = [(use_axial, use_horizontal), (False, False)] if (use_axial or use_horizontal) else [(False, False)]
    for axial, plane in tries:
        have = collections.Counter(c.species_key(axial, plane) for c in computed)
        need = collections.Counter(t.species_key(axial, plane) for t in tabulated)
        if all(have[k] >= n for k, n in need.items()):
            return np.array([[t.species_key(axial, plane) == c.species_key(axial, plane) for c in computed]
                             for t in tabulated])
    return None


def assign_modes(numbers, positions_angstrom, modes, composition, experimental_cm1, descriptions,
                 symmetry_labels, degeneracies, use_symmetry: bool = True) -> Assignment:
    """Assign computed ``modes`` (:class:`HarmonicModes`) to experimental rows (expanded by degeneracy)."""
    exp = np.asarray(experimental_cm1, dtype=float)
    w = modes.wavenumbers_cm1
    numbers = np.asarray(numbers)
    heavy = numbers[numbers > 1]
    hydride = len(heavy) == 1 and len(numbers) > 1
    families = [description_family(d, hydride) for d in descriptions]
    score = character_scores(families, computed_family_shares(numbers, composition))
    d = (w[None, :] - exp[:, None]) / 100.0
    cost = np.abs(d) + TIE_BREAK * d ** 2 + 3.0 * (1.0 - score)
    method = "character"
    if use_symmetry:
        ops = symmetry_operations(numbers, positions_angstrom)
        if ops:
            centro = any(op.is_inversion for op in ops)
            computed = mode_symmetries(ops, modes.modes_mass_weighted)
            tabulated = [label_symmetry(lab, d, centro) for lab, d in zip(symmetry_labels, degeneracies)]
            allowed = symmetry_allowed(ops, computed, tabulated)
            if allowed is not None:
                cost = np.where(allowed, cost, FORBIDDEN)
                method = "symmetry + character"
            else:
                method = "character (computed symmetry classes differ from the table's)"
    r, c = linear_sum_assignment(cost)
    keep = cost[r, c] < FORBIDDEN
    rows, cols = r[keep], c[keep]
    unassigned = tuple(sorted(set(range(len(exp))) - set(rows.tolist())))
    return Assignment(tuple(int(x) for x in rows), tuple(int(x) for x in cols), unassigned, method,
                      tuple(float(score[i, j]) for i, j in zip(rows, cols)))
