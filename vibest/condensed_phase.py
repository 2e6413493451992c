"""Condensed-phase band positions (spectrum stage): what a neat liquid, solid or solution does to
bands that a gas-phase prediction does not know.

vibest predicts isolated molecules. In a condensed phase some bands move systematically; where
the trade knows the size of the move it is applied to the predicted band before comparing with a
measured spectrum of a condensed sample (never to the prediction itself):

* C=O stretches lie 10-30 cm^-1 below their gas-phase values in neat liquids and most solvents
  (common practice; e.g. acetone about 1738 cm^-1 as a gas and 1715 cm^-1 as a liquid, from
  memory): moved down by :data:`CARBONYL_SHIFT_CM1`.

Hydrogen-bonded O-H and N-H stretches move by hundreds of cm^-1 and broaden; no fixed shift
describes them, so they are left alone (see the README's limits).
"""

from __future__ import annotations

import numpy as np

from .internal_coordinates import STRETCH

#: Shift of C=O stretching bands in a condensed phase (cm^-1): the middle of the 10-30 range.
CARBONYL_SHIFT_CM1 = -20.0
#: A band moves when at least this share of its mode's potential energy is in C=O stretches.
CARBONYL_SHARE = 0.4


def condensed_band_shifts(pred) -> np.ndarray:
    """Per band of ``pred`` (a prediction, or an ensemble of them), the shift (cm^-1) a condensed
    phase gives it (see the module docstring); zeros where none is known."""
    if hasattr(pred, "members"):
        return np.concatenate([condensed_band_shifts(m.prediction) for m in pred.members])
    from .calculation.record import record_molecule

    comp = pred.composition
    mol = record_molecule(pred.record)
    carbonyl = [k for k, p in enumerate(comp.primitives) if p.kind == STRETCH and _is_carbonyl(mol, *p.atoms)]
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
