"""Evidence by functional group: does the measured spectrum show the bands the structure needs,
and does it show strong bands of groups the structure lacks?

A *diagnostic vibration* is a bond stretch that the trade reads groups by (O-H, N-H, C=O,
C#N, ...), defined here by the bond itself (elements, bond order, what the atoms carry), not by
label text, with the wavenumber window where the trade expects it. The windows are those of
group-frequency tables (common practice; the numbers written from memory of the tables in
Silverstein, Webster & Kiemle, *Spectrometric Identification of Organic Compounds*, and Socrates,
*Infrared and Raman Characteristic Group Frequencies*, 3rd ed. 2001), wide enough for gas and
condensed phases.

For a vibration the structure has, its predicted bands (modes with at least 40 % of their
potential energy in that kind of bond, the strongest three of those above 2 % of the strongest
band) are looked for in the measured spectrum within the tolerance of their positions (after
the fitted shift); the vibration is seen when one of them is. For a vibration the structure
lacks, the strongest measured peak inside its window is reported when it is strong (at least
:data:`UNEXPLAINED_RELATIVE` of the spectrum's strongest peak) and no predicted band lies near it
(in a gas, for a light molecule, "near" includes the reach of the band's rotational lines: water's
bend at 1595 cm^-1 has lines from 1400 to 1800 cm^-1).
Everything reads the comparison's curves; nothing is computed again.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .internal_coordinates import STRETCH

#: A mode belongs to a diagnostic vibration when at least this share of its potential energy is
#: in stretches of that kind of bond.
DIAGNOSTIC_SHARE = 0.4
#: Relative height (of the strongest measured peak, absorbance) from which a peak of a group the
#: structure lacks is reported.
UNEXPLAINED_RELATIVE = 0.15
#: A measured maximum below this relative height counts as no band.
ABSENT_RELATIVE = 0.03
#: Half-width (cm^-1) around a predicted position where the measured band is looked for.
DEFAULT_TOLERANCE_CM1 = 30.0
#: In a gas, a band's rotational lines reach this many branch-maximum offsets s (vibest.gas_phase)
#: from its centre with at least 18 % of the branch maximum (envelope |x| exp(-x^2/2s^2) at 2.5 s).
ROTATIONAL_REACH = 2.5
#: A predicted band at least this strong (of the strongest predicted) can explain a measured one
#: through its rotational lines.
EXPLAINING_RELATIVE = 0.1
#: A predicted band at least this strong can explain a measured band near twice its wavenumber
#: as its overtone, when the measured band there is weaker than the one at the fundamental
#: (overtones of strong bands, e.g. the =CH2 wag of vinyl groups near 910 cm^-1 at 1820-1830
#: cm^-1, inside the C=O window; common practice).
OVERTONE_RELATIVE = 0.3

SEEN, WEAK, MISSING, NOT_EXPECTED, UNEXPLAINED, ABSENT, OUT_OF_RANGE = (
    "seen", "weaker than predicted", "missing", "predicted weak", "unexplained band", "absent", "not covered")

BondTest = Callable[[object, int, int], bool]  # (RDKit molecule with H, atom i, atom j)


def _bond(mol, i: int, j: int):
    return mol.GetBondBetweenAtoms(int(i), int(j))


def _xh(element: int, test=lambda atom: True) -> BondTest:
    def check(mol, i, j):
        a, b = mol.GetAtomWithIdx(int(i)), mol.GetAtomWithIdx(int(j))
        if a.GetAtomicNum() == 1:
            a, b = b, a
        return b.GetAtomicNum() == 1 and a.GetAtomicNum() == element and test(a)
    return check


def _heavy(e1: int, e2: int, order: float, test=lambda a, b: True) -> BondTest:
    def check(mol, i, j):
        a, b = mol.GetAtomWithIdx(int(i)), mol.GetAtomWithIdx(int(j))
        bond = _bond(mol, i, j)
        if bond is None or abs(bond.GetBondTypeAsDouble() - order) > 0.01:
            return False
        if (a.GetAtomicNum(), b.GetAtomicNum()) == (e2, e1):
            a, b = b, a
        return (a.GetAtomicNum(), b.GetAtomicNum()) == (e1, e2) and test(a, b)
    return check


def _carbonyl_carbon(atom) -> bool:
    return any(_bond(atom.GetOwningMol(), atom.GetIdx(), n.GetIdx()).GetBondTypeAsDouble() == 2.0
               and n.GetAtomicNum() == 8 for n in atom.GetNeighbors())


def _nitro_o(a, b) -> bool:
    return a.GetAtomicNum() == 7 and sum(n.GetAtomicNum() == 8 for n in a.GetNeighbors()) == 2


@dataclass(frozen=True)
class Diagnostic:
    """A vibration groups are read by.

    Attributes:
        name: plain words ("C=O stretch").
        window_cm1: where the trade expects it (cm^-1): a structure's band of this kind counts
            as seen when the measured spectrum has a band here, even if the prediction put it
            further off than the tolerance (X-H stretches of tight binding can be 100 cm^-1 off).
        bond: which bonds carry it.
        lacks_hint: what a strong unexplained band may mean for a structure without it.
        lacks_window_cm1: where a strong band counts against a structure without it (narrower
            where other groups absorb at the window's edge: C=C stretches reach 1680 cm^-1).
        explained_by: other vibrations whose presence in the structure explains bands in the
            window (hydrogen-bonded O-H and N-H stretches overlap).
    """

    name: str
    window_cm1: tuple[float, float]
    bond: BondTest
    lacks_hint: str
    lacks_window_cm1: tuple[float, float] | None = None
    explained_by: tuple[str, ...] = ()


DIAGNOSTICS: tuple[Diagnostic, ...] = (
    Diagnostic("O-H stretch", (3200.0, 3700.0), _xh(8), "an O-H (alcohol, phenol, acid, water)",
               explained_by=("N-H stretch",)),
    Diagnostic("N-H stretch", (3250.0, 3550.0), _xh(7), "an N-H (amine, amide)", explained_by=("O-H stretch",)),
    Diagnostic("acetylenic C-H stretch", (3250.0, 3340.0), _xh(6, lambda c: c.GetHybridization().name == "SP"),
               "a terminal alkyne C-H",  # hydrogen-bonded O-H and N-H bands cover it (common practice)
               explained_by=("O-H stretch", "N-H stretch")),
    Diagnostic("=C-H stretch (alkene, aromatic)", (3000.0, 3120.0),
               _xh(6, lambda c: c.GetHybridization().name == "SP2" and not _carbonyl_carbon(c)),
               "an alkene or aromatic C-H"),
    Diagnostic("aliphatic C-H stretch", (2840.0, 3000.0), _xh(6, lambda c: c.GetHybridization().name == "SP3"),
               "an aliphatic C-H"),
    # against a structure without it only the doublet's lower band near 2720 cm^-1 is read: the
    # upper one near 2820 sits among CH3 symmetric stretches (2870 in the xylenes; common practice)
    Diagnostic("aldehyde C-H stretch", (2680.0, 2880.0), _xh(6, _carbonyl_carbon), "an aldehyde C-H",
               lacks_window_cm1=(2680.0, 2780.0)),
    Diagnostic("S-H stretch", (2540.0, 2620.0), _xh(16), "an S-H (thiol)"),
    Diagnostic("C\u2261N stretch", (2200.0, 2270.0), _heavy(6, 7, 3.0), "a nitrile"),
    Diagnostic("C\u2261C stretch", (2100.0, 2270.0), _heavy(6, 6, 3.0), "an alkyne"),
    Diagnostic("C=O stretch", (1650.0, 1870.0), _heavy(6, 8, 2.0, lambda c, o: o.GetDegree() == 1),
               "a C=O (ketone, aldehyde, ester, acid, amide)", lacks_window_cm1=(1690.0, 1870.0)),
    Diagnostic("NO2 stretch", (1500.0, 1600.0), _heavy(7, 8, 1.5, _nitro_o), "a nitro group"),
)


@dataclass(frozen=True)
class GroupEvidence:
    """What the measured spectrum says about one diagnostic vibration.

    Attributes:
        name: the vibration ("C=O stretch").
        in_structure: whether the structure has the bond.
        status: "seen", "weaker than predicted", "missing", "predicted weak" (the structure has
            it but its predicted band is too weak to look for), "unexplained band", "absent",
            "not covered" (outside the measured range).
        predicted_cm1, predicted_relative, predicted_label: the predicted band (after the fitted
            shift; height relative to the strongest predicted band), or None.
        measured_cm1, measured_relative: the measured peak looked at (height relative to the
            strongest measured peak), or None.
        message: one line in plain words.
    """

    name: str
    in_structure: bool
    status: str
    message: str
    predicted_cm1: float | None = None
    predicted_relative: float | None = None
    predicted_label: str = ""
    measured_cm1: float | None = None
    measured_relative: float | None = None

    @property
    def against(self) -> bool:
        """Whether this is evidence against the structure (a needed band missing, or a strong
        band of a group it lacks)."""
        return self.status in (MISSING, UNEXPLAINED)

    def to_dict(self) -> dict:
        return {"name": self.name, "in_structure": self.in_structure, "status": self.status,
                "message": self.message, "predicted_cm1": self.predicted_cm1,
                "predicted_relative": self.predicted_relative, "predicted_label": self.predicted_label,
                "measured_cm1": self.measured_cm1, "measured_relative": self.measured_relative,
                "against": self.against}


def _linear(curve: np.ndarray, power: float) -> np.ndarray:
    y = np.clip(np.asarray(curve, float), 0.0, None) ** (1.0 / power)
    return y / y.max() if y.max() > 0 else y


def _peak_near(grid: np.ndarray, y: np.ndarray, lo: float, hi: float) -> tuple[float, float] | None:
    """(position, height) of the highest point of ``y`` in [lo, hi] that is a local maximum of
    the curve (not a shoulder of a band outside), or None."""
    sel = np.flatnonzero((grid >= lo) & (grid <= hi))
    if len(sel) == 0:
        return None
    k = sel[int(np.argmax(y[sel]))]
    inner = 0 < k < len(y) - 1
    if inner and (y[k] < y[k - 1] or y[k] < y[k + 1]):
        return None
    if not inner and k in (sel[0], sel[-1]) and len(sel) > 2:
        # the maximum sits on the window's edge: a band outside the window, not one in it
        neighbour = k - 1 if k == sel[-1] else k + 1
        if 0 <= neighbour < len(y) and y[neighbour] > y[k]:
            return None
    return float(grid[k]), float(y[k])


def group_evidence(prediction, comparison, tolerance_cm1: float = DEFAULT_TOLERANCE_CM1) -> list[GroupEvidence]:
    """Evidence for every diagnostic vibration (see the module docstring) from a prediction and
    its comparison with a measured spectrum."""
    from .calculation.record import record_molecule

    mol = record_molecule(prediction.record)
    comp = prediction.composition
    power = float(comparison.settings.get("intensity_power", 1.0))
    g = comparison.grid_cm1
    measured = _linear(comparison.measured_curve, power)
    predicted = _linear(comparison.predicted_curve, power)
    lo, hi = float(g[0]), float(g[-1])
    shift, scale = comparison.shift_cm1, comparison.extra_scale
    strongest = max(prediction.intensities_km_mol.max(), 1e-12)
    carried = {diag.name: [k for k, p in enumerate(comp.primitives) if p.kind == STRETCH and diag.bond(mol, *p.atoms)]
               for diag in DIAGNOSTICS}
    moved = _condensed_shifts(prediction, comparison)
    reach = rotational_reach_cm1(prediction, comparison)
    rel = prediction.intensities_km_mol / strongest
    bands = [(b.wavenumber_cm1 * scale + shift, float(r)) for b, r in zip(prediction.bands, rel)
             if r >= EXPLAINING_RELATIVE]
    out = []
    for diag in DIAGNOSTICS:
        if carried[diag.name]:
            out.append(_present(diag, prediction, carried[diag.name], g, measured, lo, hi, shift, scale, strongest,
                                tolerance_cm1, moved))
        else:
            others = [name for name in diag.explained_by if carried.get(name)]
            out.append(_absent(diag, g, measured, predicted, lo, hi, tolerance_cm1, others, bands, reach))
    return out


def _overtone_of(peak, bands, g, measured, tol) -> float | None:
    """The measured fundamental (cm^-1) whose overtone may be the measured ``peak``: the band
    measured within the tolerance of a predicted band at least :data:`OVERTONE_RELATIVE` strong,
    stronger than ``peak``, and at half its position within half the tolerance (overtones sit
    within a few per cent of twice their fundamental); else None."""
    for position, rel in sorted(bands, key=lambda b: -b[1]):
        if rel < OVERTONE_RELATIVE or abs(2.0 * position - peak[0]) > 4.0 * tol:
            continue
        fundamental = _peak_near(g, measured, position - tol, position + tol)
        if fundamental is not None and fundamental[1] > peak[1] and abs(2.0 * fundamental[0] - peak[0]) <= tol:
            return fundamental[0]
    return None


def _something_it_has(peak, bands, g, measured, tol, reach) -> str | None:
    """What of the structure's own a strong measured ``peak`` may be (words), or None: the
    overtone of a stronger measured fundamental, or in a gas a rotational line of a band within
    ``reach`` that is relatively at least half as strong as the peak."""
    overtone = _overtone_of(peak, bands, g, measured, tol)
    if overtone is not None:
        return f"the overtone of the stronger measured band at {overtone:.0f} cm^-1, a predicted fundamental"
    if reach > tol:  # a light molecule in a gas: resolved rotational lines far from the band centre
        # a band at least half as strong (of the strongest predicted) as the peak (of the strongest
        # measured), as the curve test above asks of the predicted curve
        near = [p for p, rel in bands if abs(p - peak[0]) <= reach and rel >= 0.5 * peak[1]]
        if near:
            centre = min(near, key=lambda p: abs(p - peak[0]))
            return (f"a rotational line of the predicted band at {centre:.0f} cm^-1 (in a gas this molecule's "
                    f"lines reach +-{reach:.0f} cm^-1)")
    return None


def rotational_reach_cm1(prediction, comparison) -> float:
    """How far (cm^-1) the rotational lines of a predicted band reach in the compared sample:
    :data:`ROTATIONAL_REACH` times the branch-maximum offset for a gas, 0 for a condensed phase.
    About 20 cm^-1 for toluene, 200 for water, whose lines a measured gas spectrum resolves."""
    if not comparison.settings.get("gas_phase"):
        return 0.0
    from .gas_phase import band_contour_inputs, branch_maximum_offset_cm1

    return ROTATIONAL_REACH * branch_maximum_offset_cm1(band_contour_inputs(prediction)[0])


def _condensed_shifts(prediction, comparison) -> tuple[np.ndarray, np.ndarray]:
    """Per band, the condensed-phase shift the comparison applied (hydrogen bonding, C=O) and the
    band's own width (NaN: the common one), so that evidence looks where the compared band was and
    as widely as it is broad; zeros and NaN for a gas-phase comparison."""
    adj = comparison.band_adjustments
    if adj is None:
        n = len(prediction.bands)
        return np.zeros(n), np.full(n, np.nan)
    return adj.shift_cm1, adj.fwhm_cm1


def _present(diag, prediction, stretches, g, measured, lo, hi, shift, scale, strongest, tol, moved) -> GroupEvidence:
    shares = prediction.composition.shares[:, stretches].sum(axis=1)
    modes = sorted((k for k in range(len(shares)) if shares[k] >= DIAGNOSTIC_SHARE),
                   key=lambda m: -prediction.intensities_km_mol[m])
    if not modes:
        return GroupEvidence(diag.name, True, NOT_EXPECTED, f"{diag.name}: no band of the structure is mainly this "
                                                             "vibration (mixed with others)")
    looked = []
    for k in modes[:3]:
        band = prediction.bands[k]
        position = band.wavenumber_cm1 * scale + shift + moved[0][k]
        rel = float(prediction.intensities_km_mol[k] / strongest)
        if lo <= position <= hi and (rel >= 0.02 or not looked):
            reach = max(tol, float(moved[1][k])) if np.isfinite(moved[1][k]) else tol  # a broad band: its width
            peak = _peak_near(g, measured, position - reach, position + reach)
            looked.append((position, rel, band.label or band.character, peak))
    if not looked or not any(lo <= p <= hi for p, *_ in looked):
        position = prediction.bands[modes[0]].wavenumber_cm1 * scale + shift + moved[0][modes[0]]
        return GroupEvidence(diag.name, True, OUT_OF_RANGE, f"{diag.name}: predicted at {position:.0f} cm^-1, "
                             f"outside the compared range {lo:.0f}-{hi:.0f} cm^-1", predicted_cm1=float(position))
    found = [x for x in looked if x[3] is not None and x[3][1] >= ABSENT_RELATIVE]
    position, rel, label, peak = max(found, key=lambda x: x[3][1]) if found else looked[0]
    common = dict(predicted_cm1=float(position), predicted_relative=rel, predicted_label=label)
    if rel < 0.02:
        return GroupEvidence(diag.name, True, NOT_EXPECTED, f"{diag.name}: predicted at {position:.0f} cm^-1 but "
                             f"weak ({rel:.0%} of the strongest band); its absence says little", **common)
    if not found:
        wlo, whi = diag.window_cm1
        in_window = _peak_near(g, measured, max(wlo, lo), min(whi, hi))
        if in_window is not None and in_window[1] >= ABSENT_RELATIVE:
            return GroupEvidence(diag.name, True, SEEN if in_window[1] >= 0.3 * min(rel, 1.0) else WEAK,
                                 f"{diag.name} predicted at {position:.0f} cm^-1; the measured band in its window "
                                 f"({wlo:.0f}-{whi:.0f} cm^-1) is at {in_window[0]:.0f} cm^-1 ({in_window[1]:.0%} of "
                                 "the strongest)", measured_cm1=in_window[0], measured_relative=in_window[1], **common)
        return GroupEvidence(diag.name, True, MISSING, f"{diag.name} predicted at {position:.0f} cm^-1 "
                             f"({rel:.0%} of the strongest band): no measured band within {tol:.0f} cm^-1 nor in its "
                             f"window {wlo:.0f}-{whi:.0f} cm^-1", **common)
    status = SEEN if peak[1] >= 0.3 * min(rel, 1.0) else WEAK
    text = "seen" if status == SEEN else "only weak"
    return GroupEvidence(diag.name, True, status, f"{diag.name} predicted at {position:.0f} cm^-1: {text} at "
                         f"{peak[0]:.0f} cm^-1 ({peak[1]:.0%} of the strongest measured band)",
                         measured_cm1=peak[0], measured_relative=peak[1], **common)


def _absent(diag, g, measured, predicted, lo, hi, tol, explained_by=(), bands=(), reach=0.0) -> GroupEvidence:
    wlo, whi = diag.lacks_window_cm1 or diag.window_cm1
    if whi < lo or wlo > hi:
        return GroupEvidence(diag.name, False, OUT_OF_RANGE, f"{diag.name}: window {wlo:.0f}-{whi:.0f} cm^-1 "
                             "not covered by the comparison")
    peak = _peak_near(g, measured, max(wlo, lo), min(whi, hi))
    if peak is None or peak[1] < UNEXPLAINED_RELATIVE:
        return GroupEvidence(diag.name, False, ABSENT, f"{diag.name}: no strong band in {wlo:.0f}-{whi:.0f} cm^-1, "
                             "as expected for a structure without it",
                             measured_cm1=None if peak is None else peak[0],
                             measured_relative=None if peak is None else peak[1])
    if explained_by:
        return GroupEvidence(diag.name, False, ABSENT, f"{diag.name}: the band at {peak[0]:.0f} cm^-1 may be the "
                             f"structure's {explained_by[0]} (the two overlap)",
                             measured_cm1=peak[0], measured_relative=peak[1])
    near = (g >= peak[0] - tol) & (g <= peak[0] + tol)
    if predicted[near].max(initial=0.0) >= 0.5 * peak[1]:
        return GroupEvidence(diag.name, False, ABSENT, f"{diag.name}: the band at {peak[0]:.0f} cm^-1 is explained "
                             "by a predicted band of the structure", measured_cm1=peak[0], measured_relative=peak[1])
    other = _something_it_has(peak, bands, g, measured, tol, reach)
    if other is not None:
        return GroupEvidence(diag.name, False, ABSENT, f"{diag.name}: the band at {peak[0]:.0f} cm^-1 may be {other}",
                             measured_cm1=peak[0], measured_relative=peak[1])
    return GroupEvidence(diag.name, False, UNEXPLAINED, f"strong band at {peak[0]:.0f} cm^-1 ({peak[1]:.0%} of the "
                         f"strongest) that the structure does not explain: {diag.lacks_hint} it lacks?",
                         measured_cm1=peak[0], measured_relative=peak[1])
