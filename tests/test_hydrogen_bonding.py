"""Hydrogen bonding in condensed samples, computed on clusters (vibest.hydrogen_bonding) and
applied to predicted bands (vibest.condensed_phase).

Facts of the trade used here (common practice, no source): carboxylic acids are cyclic dimers in
liquids and solids, their O-H stretch a broad band over about 2500-3300 cm^-1 against about 3580
for the free monomer's, and their C=O stretch near 1710 against about 1780-1790; alcohols in the
liquid absorb near 3200-3400 cm^-1 against about 3650-3680 free; hydrogen-bonded O-H bands are
several times stronger than free ones; O-H...O hydrogen bonds are 1.7-2.0 Angstrom (H...O).
The width model is Huggins and Pimentel's (J. Phys. Chem. 60, 1615 (1956); ratio from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from vibest.comparison import compare
from vibest.condensed_phase import H_BOND_WIDTH_PER_SHIFT, condensed_bands
from vibest.hydrogen_bonding import compute_hydrogen_bonding, plan_cluster, with_hydrogen_bonding
from vibest.measured import ABSORBANCE, MeasuredSpectrum, load_spectrum
from vibest.pipeline import CalculationOptions
from vibest.ranking import Candidate, rank_candidates
from vibest.store import RecordStore

from .conftest import prediction_of, record_of

SERIAL = CalculationOptions(workers=1)


def test_acid_dimer_carbonyl_below_the_monomer_and_its_o_h_far_below():
    hb = compute_hydrogen_bonding(record_of("CC(=O)O"), SERIAL)
    assert hb.kind == "acid dimer" and hb.binding_kcal_mol < -10.0
    oh, co = hb.change("O-H"), hb.change("C=O")
    assert oh.shift_cm1 < -300.0  # 2500-3300 against ~3580: hundreds of cm^-1 down
    assert -150.0 < co.shift_cm1 < -20.0  # ~1710 against ~1785
    assert oh.intensity_ratio > 3.0
    assert 1.4 < oh.h_bond_angstrom < 2.0


def test_alcohol_chain_moves_the_o_h_stretch_down_and_strengthens_it():
    hb = compute_hydrogen_bonding(record_of("CO"), SERIAL)
    assert hb.kind == "chain trimer" and hb.change("C=O") is None
    oh = hb.change("O-H")
    assert -450.0 < oh.shift_cm1 < -100.0 and oh.intensity_ratio > 2.0
    assert 1.7 < oh.h_bond_angstrom < 2.1


def test_molecules_without_a_donor_or_charged_get_no_cluster():
    assert plan_cluster(record_of("CC(C)=O")) is None
    assert plan_cluster(record_of("[NH4+]")) is None
    pred = prediction_of("CC(C)=O")
    assert with_hydrogen_bonding(pred, SERIAL) is pred


def test_donor_bands_are_moved_strengthened_and_widened_by_the_width_model():
    pred = with_hydrogen_bonding(prediction_of("CO"), SERIAL)
    change = pred.hydrogen_bonding.change("O-H")
    adj = condensed_bands(pred, 16.0)
    k = int(np.argmin(adj.shift_cm1))  # the O-H stretch band
    band = pred.bands[k]
    assert "O-H stretch" in band.label
    ratio = band.wavenumber_cm1 / band.harmonic_cm1
    assert adj.shift_cm1[k] == pytest.approx(change.shift_cm1 * ratio, rel=0.05)  # its share is ~1
    assert adj.fwhm_cm1[k] == pytest.approx(H_BOND_WIDTH_PER_SHIFT * abs(adj.shift_cm1[k]))
    assert adj.intensity_factor[k] > 2.0
    ch = [i for i, b in enumerate(pred.bands) if "CH3 stretch" in b.label]
    assert ch and np.all(np.abs(adj.shift_cm1[ch]) < 5.0) and not np.any(np.isfinite(adj.fwhm_cm1[ch]))


def test_the_cluster_is_stored_and_reused(tmp_path, monkeypatch):
    store = RecordStore(tmp_path / "s.sqlite")
    first = compute_hydrogen_bonding(record_of("CO"), SERIAL, store)
    import vibest.calculation.driver as driver

    monkeypatch.setattr(driver, "compute_record", lambda *a, **k: pytest.fail("recomputed a stored cluster"))
    again = compute_hydrogen_bonding(record_of("CO"), SERIAL, store)
    assert again == first
    assert store.count() == 1


def test_compare_says_when_a_condensed_prediction_has_no_hydrogen_bonding():
    pred = prediction_of("CO")
    liquid = MeasuredSpectrum(pred.spectrum.wavenumbers_cm1, pred.spectrum.absorbance_normalised, ABSORBANCE, "l.csv")
    assert any("hydrogen bonding not computed" in n for n in compare(pred, liquid).notes)
    bonded = with_hydrogen_bonding(pred, SERIAL)
    notes = compare(bonded, liquid).notes
    assert any("computed on the chain trimer" in n for n in notes)
    assert not any("not computed" in n for n in compare(pred, liquid, hydrogen_bonding=False).notes)


ISOMERS = {"2-propanol": ("CC(C)O", ("CCCO", "CCOC")), "ethanol": ("CCO", ("COC",))}


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(ISOMERS))
def test_real_liquid_alcohols_rank_first_among_their_isomers(name, condensed_folder, tmp_path):
    """The two liquid alcohols of the jcamp sdist (benchmarks/data/condensed_set.csv): with the
    computed hydrogen bonding the right structure is first among its isomers and scores higher
    than with free-molecule O-H bands (which put ethyl methyl ether ahead of 2-propanol)."""
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    import measured_set

    entry = next(e for e in measured_set.entries(measured_set.CONDENSED_TABLE) if e.name == name)
    spectrum = load_spectrum(condensed_folder / entry.file)
    right, others = ISOMERS[name]
    cands = [Candidate(s, s) for s in (right, *others)]
    store = RecordStore(tmp_path / "s.sqlite")
    bonded = rank_candidates(spectrum, cands, store=store)
    free = rank_candidates(spectrum, cands, store=store, hydrogen_bonding=False)
    assert bonded.entries[0].candidate.smiles == right
    score = {r: next(e.score for e in ranking.entries if e.candidate.smiles == right) for r, ranking in
             (("bonded", bonded), ("free", free))}
    assert score["bonded"] > score["free"] + 0.05
    assert any("hydrogen bonding computed" in n for n in bonded.entries[0].comparison.notes)
    # the group evidence looks where the compared (hydrogen-bonded, broad) band is: the liquid's
    # O-H band (3331 / 3350 cm^-1 in these files) is seen, and not taken for an alkyne C-H
    from vibest.evidence import SEEN, UNEXPLAINED, group_evidence

    first = bonded.entries[0]
    evidence = {e.name: e for e in group_evidence(first.prediction, first.comparison)}
    oh = evidence["O-H stretch"]
    assert oh.status == SEEN and oh.predicted_cm1 < 3500 and 3300 < oh.measured_cm1 < 3380
    assert all(e.status != UNEXPLAINED for e in evidence.values())


def test_a_donor_without_a_cluster_is_said_not_silently_compared_free():
    """An ion with N-H donors gets no cluster: a condensed comparison says so in a note."""
    pred = prediction_of("C[NH3+]")
    assert plan_cluster(pred.record) is None
    liquid = MeasuredSpectrum(pred.spectrum.wavenumbers_cm1, pred.spectrum.absorbance_normalised, ABSORBANCE, "l.csv")
    assert any("an ion or radical gets no hydrogen-bonded cluster" in n for n in compare(pred, liquid).notes)
    assert not any("hydrogen bonding" in n for n in compare(prediction_of("CC(C)=O"), liquid).notes)


def test_a_deuterated_donor_is_computed_with_its_own_mass():
    """Isotopes named in the SMILES count in the cluster too: the O-D stretch of CH3OD moves less
    than the O-H stretch of CH3OH, by about the ratio of the stretch wavenumbers (nu_OH / nu_OD
    about 1.35-1.37, common practice)."""
    oh = compute_hydrogen_bonding(record_of("CO"), SERIAL).change("O-H")
    od = compute_hydrogen_bonding(record_of("CO[2H]"), SERIAL).change("O-H")
    assert 1.25 < oh.monomer_cm1 / od.monomer_cm1 < 1.45
    assert 1.2 < oh.shift_cm1 / od.shift_cm1 < 1.6


def test_a_cluster_that_fails_keeps_the_candidate_and_says_why(tmp_path, monkeypatch):
    from vibest.calculation import driver
    from vibest.errors import CalculationError

    pred = prediction_of("CCO")
    liquid = MeasuredSpectrum(pred.spectrum.wavenumbers_cm1, pred.spectrum.absorbance_normalised, ABSORBANCE, "l.csv")

    def fail(*args, **kwargs):
        raise CalculationError("SCF did not converge (test)")

    monkeypatch.setattr(driver, "compute_record", fail)
    store = RecordStore(tmp_path / "s.sqlite")
    store.put("CCO", SERIAL, pred.record)  # the monomer is stored; only the cluster would be computed
    ranking = rank_candidates(liquid, [Candidate("ethanol", "CCO")], calc=SERIAL, store=store)
    entry = ranking.entries[0]
    assert entry.comparison is not None and entry.rank == 1
    assert any("hydrogen bonding not computed (SCF did not converge (test))" in n for n in entry.comparison.notes)
