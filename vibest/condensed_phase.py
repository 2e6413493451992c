"""Condensed-phase band positions, intensities and widths (spectrum stage): what a neat liquid,
solid or solution does to bands that a gas-phase prediction does not know.

vibest predicts isolated molecules. Before a prediction is compared with a measured spectrum of a
condensed sample, its bands are adjusted here (never the prediction itself):

* **Hydrogen bonding, computed** (:mod:`vibest.hydrogen_bonding`): for a molecule with an O-H or
  N-H donor whose prediction carries a cluster result, every band gets the computed change of the
  donor stretch (and of an accepting C=O) in proportion to that stretch's share in the band's
  mode: shift (scaled like the band), intensity ratio, and for donor stretches a width. The
  width model: a hydrogen-bonded X-H stretching band is about three quarters of its shift wide
  (full width at half height; Huggins and Pimentel, J. Phys. Chem. 60, 1615 (1956), ratio from
  memory), :data:`H_BOND_WIDTH_PER_SHIFT`; never narrower than the comparison's width.
* **C=O stretches** not covered by a cluster lie 10-30 cm^-1 below their gas-phase values in neat
  liquids and most solvents (common practice; e.g. acetone about 1738 cm^-1 as a gas and 1715
  cm^-1 as a liquid, from memory): moved down by :data:`CARBONYL_SHIFT_CM1`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .analysis.harmonic import stretch_shares
from .internal_coordinates import STRETCH

#: Shift of C=O stretching bands in a condensed phase (cm^-1): the middle of the 10-30 range.
CARBONYL_SHIFT_CM1 = -20.0
#: A band moves when at least this share of its mode's potential energy is in C=O stretches.
CARBONYL_SHARE = 0.4
#: Width (FWHM) of a hydrogen-bonded X-H stretching band per cm^-1 of its shift (Huggins and
#: Pimentel 1956, from memory; see the module docstring).
H_BOND_WIDTH_PER_SHIFT = 0.75
#: A band takes a donor stretch's width when at least this share of it is that stretch.
DONOR_SHARE = 0.5


@dataclass(frozen=True)
class BandAdjustments:
    """Per band of a prediction (an ensemble: its members' bands in order), what a condensed phase
    does to it.

    Attributes:
        shift_cm1: added to the band's wavenumber, cm^-1.
        intensity_factor: multiplies the band's intensity.
        fwhm_cm1: the band's own width, cm^-1, or NaN for the comparison's width.
        notes: what was applied, in words.
    """

    shift_cm1: np.ndarray
    intensity_factor: np.ndarray
    fwhm_cm1: np.ndarray
    notes: tuple[str, ...] = ()

    @property
    def changes_anything(self) -> bool:
        return bool(np.any(self.shift_cm1) or np.any(self.intensity_factor != 1.0) or np.any(np.isfinite(self.fwhm_cm1)))


def condensed_bands(pred, fwhm_cm1: float) -> BandAdjustments:
    """The condensed-phase adjustments of ``pred`` (a prediction or an ensemble) for a comparison
    at band width ``fwhm_cm1`` (see the module docstring)."""
    if hasattr(pred, "members"):
        parts = [condensed_bands(m.prediction, fwhm_cm1) for m in pred.members]
        notes = tuple(dict.fromkeys(n for p in parts for n in p.notes))
        return BandAdjustments(*(np.concatenate([getattr(p, f) for p in parts])
                                 for f in ("shift_cm1", "intensity_factor", "fwhm_cm1")), notes)
    n = len(pred.bands)
    shift, factor, width = np.zeros(n), np.ones(n), np.full(n, np.nan)
    notes = []
    hb = getattr(pred, "hydrogen_bonding", None)
    covered: set[tuple[int, int]] = set()
    if hb is not None:
        ratio = np.array([b.wavenumber_cm1 / b.harmonic_cm1 if b.harmonic_cm1 > 0 else 1.0 for b in pred.bands])
        for change in hb.changes:
            bonds = _bonds_of_group(pred.record, change)
            covered |= {tuple(sorted(b)) for b in bonds}
            share = np.max([stretch_shares(pred.modes, pred.record.positions_angstrom, i, j) for i, j in bonds], axis=0)
            shift += share * change.shift_cm1 * ratio
            if np.isfinite(change.intensity_ratio):
                factor *= 1.0 + share * (change.intensity_ratio - 1.0)
            if change.group != "C=O":
                wide = share >= DONOR_SHARE
                width[wide] = np.maximum(fwhm_cm1, H_BOND_WIDTH_PER_SHIFT * np.abs(shift[wide]))
        notes.append(hb.describe() + f"; donor bands {H_BOND_WIDTH_PER_SHIFT:g} x their shift wide "
                     "(vibest.condensed_phase)")
    carbonyl = _carbonyl_shift(pred, covered)
    if np.any(carbonyl):
        shift += carbonyl
        notes.append(f"condensed phase: predicted C=O stretches moved {CARBONYL_SHIFT_CM1:+.0f} cm^-1 "
                     "(vibest.condensed_phase)")
    return BandAdjustments(shift, factor, width, tuple(notes))


def _bonds_of_group(record, change) -> list[tuple[int, int]]:
    """Every bond of the monomer of ``change``'s group (all O-H of a diol take the focus O-H's
    change; an accepting C=O only itself)."""
    if change.group == "C=O":
        return [change.atoms]
    heavy = {"O-H": 8, "N-H": 7}[change.group]
    out = []
    for i, j, _ in record.bonds:
        zi, zj = int(record.numbers[i]), int(record.numbers[j])
        if {zi, zj} == {heavy, 1}:
            out.append((i, j) if zi == heavy else (j, i))
    return out or [change.atoms]


def _carbonyl_shift(pred, covered: set[tuple[int, int]]) -> np.ndarray:
    from .calculation.record import record_molecule

    comp = pred.composition
    mol = record_molecule(pred.record)
    carbonyl = [k for k, p in enumerate(comp.primitives) if p.kind == STRETCH and _is_carbonyl(mol, *p.atoms)
                and tuple(sorted(p.atoms)) not in covered]
    shifts = np.zeros(len(pred.bands))
    if carbonyl and comp.shares.size:
        share = comp.shares[:, carbonyl].sum(axis=1)
        shifts[share >= CARBONYL_SHARE] = CARBONYL_SHIFT_CM1
    return shifts


def _is_carbonyl(mol, i: int, j: int) -> bool:
    bond = mol.GetBondBetweenAtoms(int(i), int(j))
    if bond is None or bond.GetBondTypeAsDouble() != 2.0:
        return False
    a, b = mol.GetAtomWithIdx(int(i)), mol.GetAtomWithIdx(int(j))
    if a.GetAtomicNum() == 8:
        a, b = b, a
    return a.GetAtomicNum() == 6 and b.GetAtomicNum() == 8 and b.GetDegree() == 1
