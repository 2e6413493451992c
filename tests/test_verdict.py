"""The verdict: group evidence on real measured spectra, each flag on a constructed case, the
confidence model refitted from its features table, and the check command's output.

Real spectra: gas-phase files of the jcamp 1.3.2 sdist (benchmarks/data/measured_set.csv,
fetched and SHA-256-checked at test time). Group positions: common practice (O-H stretch of
gas-phase alcohols near 3650-3680 cm^-1, terminal alkyne C-H near 3330 cm^-1, no source)."""

from __future__ import annotations

import dataclasses
import json
import sys
from pathlib import Path

import numpy as np
import pytest

from vibest.comparison import compare
from vibest.confidence import (LEVELS_DISAGREE, LOW, MARGIN_IN_NOISE, POOR_FIT, SHIFT_AT_BOUND, ConfidenceModel, assess,
                               expected_calibration_error, fit_logistic, matched_share, shift_flag,
                               shipped_model)
from vibest.evidence import group_evidence
from vibest.measured import MeasuredSpectrum, load_spectrum
from vibest.ranking import Candidate, rank_candidates
from vibest.verdict import CONSISTENT, INCONCLUSIVE, NOT_SUPPORTED, check_structure

from .conftest import prediction_of

ROOT = Path(__file__).resolve().parents[1]


def status(evidence, name):
    return next(e for e in evidence if e.name == name).status


@pytest.mark.slow
def test_group_evidence_on_real_alcohol_spectrum(measured_folder):
    ethanol = load_spectrum(measured_folder / "ethanol.jdx")
    right = group_evidence(prediction_of("CCO"), compare(prediction_of("CCO"), ethanol))
    assert status(right, "O-H stretch") == "seen"
    assert status(right, "C=O stretch") == "absent"  # no strong band in the C=O window
    propane = group_evidence(prediction_of("CCC"), compare(prediction_of("CCC"), ethanol))
    oh = next(e for e in propane if e.name == "O-H stretch")
    assert oh.status == "unexplained band" and 3600 < oh.measured_cm1 < 3700 and oh.against
    aldehyde = group_evidence(prediction_of("CC=O"), compare(prediction_of("CC=O"), ethanol))
    assert status(aldehyde, "C=O stretch") == "missing"


@pytest.mark.slow
def test_group_evidence_missing_alkyne_on_real_propylene_spectrum(measured_folder):
    propylene = load_spectrum(measured_folder / "propylene.jdx")
    propyne = group_evidence(prediction_of("C#CC"), compare(prediction_of("C#CC"), propylene))
    assert status(propyne, "acetylenic C-H stretch") == "missing"
    own = group_evidence(prediction_of("C=CC"), compare(prediction_of("C=CC"), propylene))
    assert not any(e.against for e in own)


def test_branch_maximum_offset_is_half_the_gerhard_dennison_separation():
    # P-R maximum separation 2.3583 sqrt(B T) cm^-1 (Gerhard & Dennison 1933; Herzberg, Infrared
    # and Raman Spectra, from memory); water's rotational constants 27.88, 14.51, 9.28 cm^-1
    # (Herzberg, from memory), mean 17.2: maxima about 84 cm^-1 either side at 298 K
    from vibest.gas_phase import branch_maximum_offset_cm1

    assert 2 * branch_maximum_offset_cm1(1.0, 300.0) == pytest.approx(2.3583 * np.sqrt(300.0), rel=1e-3)
    assert branch_maximum_offset_cm1(np.mean([27.88, 14.51, 9.28]), 298.15) == pytest.approx(84.5, abs=1.0)


@pytest.mark.slow
def test_rotational_lines_of_a_light_molecule_are_not_bands_of_groups_it_lacks(measured_folder):
    """Gas-phase water resolves its bend's rotational lines from about 1400 to 1800 cm^-1 (common
    practice, no source); the strongest of them, in the C=O and NO2 windows, are the bend's, not
    a carbonyl or nitro group. Toluene's lines reach less than the tolerance, so nothing changes
    for it."""
    from vibest.evidence import DEFAULT_TOLERANCE_CM1, UNEXPLAINED, rotational_reach_cm1

    water = load_spectrum(measured_folder / "water.jdx")
    comparison = compare(prediction_of("O"), water)
    assert rotational_reach_cm1(prediction_of("O"), comparison) > 150
    evidence = group_evidence(prediction_of("O"), comparison)
    assert all(e.status != UNEXPLAINED for e in evidence)
    carbonyl = next(e for e in evidence if e.name == "C=O stretch")
    assert "rotational line" in carbonyl.message
    toluene = load_spectrum(measured_folder / "toluene.jdx")
    assert rotational_reach_cm1(prediction_of("Cc1ccccc1"), compare(prediction_of("Cc1ccccc1"), toluene)) \
        < DEFAULT_TOLERANCE_CM1
    # a condensed-phase comparison has no rotational lines
    assert rotational_reach_cm1(prediction_of("O"), compare(prediction_of("O"), water, gas_phase=False)) == 0.0
    # but a light molecule's weak band does not explain a strong one: held against the real
    # neopentane spectrum, ethylene (no aliphatic C-H) still leaves its 2960 cm^-1 band unexplained,
    # though ethylene's C-H stretch near 2990 cm^-1 lies within its rotational reach
    neopentane = load_spectrum(measured_folder / "neo-pentane.jdx")
    ethylene = group_evidence(prediction_of("C=C"), compare(prediction_of("C=C"), neopentane))
    assert status(ethylene, "aliphatic C-H stretch") == UNEXPLAINED


def _synthetic(pred, shift_cm1=0.0, lo=400.0, hi=4000.0) -> MeasuredSpectrum:
    """A constructed 'measured' spectrum: the prediction's own curve, shifted (for flag tests only)."""
    x = np.arange(lo, hi, 1.0)
    comp_grid = pred.spectrum.wavenumbers_cm1
    y = np.interp(x - shift_cm1, comp_grid, pred.spectrum.absorbance_normalised)
    return MeasuredSpectrum(x, y, "absorbance", source="constructed")


@pytest.mark.slow
def test_overtones_and_methyl_stretches_are_not_read_as_groups_a_structure_lacks(measured_folder):
    """Real gas-phase spectra: 1,3-butadiene's band near 1830 cm^-1 is the overtone of its =CH2
    wag near 908 cm^-1, not a C=O; the xylenes' band near 2870 cm^-1 is a CH3 stretch, not an
    aldehyde C-H, whose diagnostic band is near 2720 cm^-1 (common practice, no source)."""
    from vibest.evidence import UNEXPLAINED

    butadiene = load_spectrum(measured_folder / "butadiene.jdx")
    evidence = group_evidence(prediction_of("C=CC=C"), compare(prediction_of("C=CC=C"), butadiene))
    carbonyl = next(e for e in evidence if e.name == "C=O stretch")
    assert carbonyl.status != UNEXPLAINED and "overtone" in carbonyl.message
    xylene = load_spectrum(measured_folder / "p-xylene.jdx")
    evidence = group_evidence(prediction_of("Cc1ccc(C)cc1"), compare(prediction_of("Cc1ccc(C)cc1"), xylene))
    assert status(evidence, "aldehyde C-H stretch") != UNEXPLAINED


def test_a_band_stronger_than_its_would_be_fundamental_is_not_an_overtone():
    """Constructed: butadiene's own predicted spectrum plus a band at twice its strongest band's
    position, twice as strong as that band. An overtone is weaker than its fundamental (common
    practice, no source), so this band stays unexplained: a C=O the structure lacks."""
    from vibest.evidence import UNEXPLAINED

    pred = prediction_of("C=CC=C")
    strongest = pred.bands[int(np.argmax(pred.intensities_km_mol))].wavenumber_cm1
    base = _synthetic(pred)
    x, y = base.wavenumbers_cm1, base.values
    target = 2.0 * strongest
    assert 1690 < target < 1870  # inside the C=O window, so the test means something
    y = y + 2.0 * y.max() * (8.0 ** 2 / ((x - target) ** 2 + 8.0 ** 2))
    measured = MeasuredSpectrum(x, y, "absorbance", source="constructed")
    evidence = group_evidence(pred, compare(pred, measured, gas_phase=False))
    assert status(evidence, "C=O stretch") == UNEXPLAINED


def test_shift_at_bound_flag_on_a_constructed_case():
    water = prediction_of("O")
    shifted = compare(water, _synthetic(water, shift_cm1=45.0))
    assert abs(shifted.shift_cm1) == pytest.approx(20.0, abs=0.5)
    assert shift_flag(shifted, 20.0).kind == SHIFT_AT_BOUND
    assert shift_flag(compare(water, _synthetic(water)), 20.0) is None


def test_a_lone_candidate_keeps_its_flags(tmp_path):
    """With no decoy to rank against there is no confidence, but a fit at the shift bound is still
    said (the verdict once dropped every flag when the intended structure stood alone)."""
    from vibest.store import RecordStore

    water = prediction_of("O")
    v = check_structure(_synthetic(water, shift_cm1=45.0), "O", decoys=0, store=RecordStore(tmp_path / "s.sqlite"))
    assert v.assessment.confidence is None and "no decoy" in v.assessment.note
    assert SHIFT_AT_BOUND in {f.kind for f in v.assessment.flags}
    assert any("bound" in r for r in v.reasons) and v.conclusion == INCONCLUSIVE
    # unnamed, the report says the name is a SMILES ("CO" would read as carbon monoxide)
    from vibest.output import verdict_report

    assert "intended structure: O (SMILES)" in verdict_report(v)


def test_margin_within_noise_poor_fit_and_low_confidence_on_constructed_cases():
    formaldehyde = prediction_of("C=O")
    measured = _synthetic(formaldehyde)
    # two candidates of the same structure: a margin of zero is within any noise
    twice = rank_candidates(measured, [Candidate("a", "C=O"), Candidate("b", "O=C")], condensed_shifts=False)
    model = ConfidenceModel(0.0, 1.0, 1.0, 0.0, {"score": "regional"}, poor_fit_score=1.5, cross_validated_ece=0.0)
    kinds = {f.kind for f in assess(twice, "GFN2-xTB", 16.0, model).flags}
    assert MARGIN_IN_NOISE in kinds and POOR_FIT in kinds  # every score is below 1.5
    low = ConfidenceModel(-10.0, 1.0, 1.0, 0.0, {"score": "regional"}, poor_fit_score=0.0, cross_validated_ece=0.0)
    result = assess(twice, "GFN2-xTB", 16.0, low)
    assert result.confidence < 0.01 and LOW in {f.kind for f in result.flags}
    # another setting than the model's: no confidence, and says why
    other = assess(twice, "GFN2-xTB", 16.0,
                   dataclasses.replace(low, settings={"score": "pearson"}))
    assert other.confidence is None and "score" in other.note


def test_a_clear_case_has_no_flags():
    water = prediction_of("O")
    ranking = rank_candidates(_synthetic(water), [Candidate("water", "O"), Candidate("formaldehyde", "C=O")])
    model = ConfidenceModel(-1.0, 1.0, 5.0, 0.0, {"score": "regional"}, poor_fit_score=0.5, cross_validated_ece=0.0)
    result = assess(ranking, "GFN2-xTB", 16.0, model)
    assert result.flags == () and result.confidence > 0.9 and result.sure


def test_the_threshold_rule_bound_sees_separation_and_its_absence():
    """benchmarks/confidence.py's bound on what score, margin and matched share can separate
    and the trade-off of confidences at any threshold (the reasons given for the missed
    right-first-sure target): constructed rankings. Right ones
    above every wrong one on the score: all sure with every wrong one flagged. Right and wrong
    with the same features, in three groups of a third each: a rule sure of any group leaves a
    third of the wrong ones unflagged, so none flags 80 % of them and keeps a right one sure.
    A refined ranking whose levels disagree is never sure (vibest's own rules, no source)."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import confidence as bench

    def row(score, right, agree=True):
        return {"score": score, "margin": 0.1, "matched": 0.5, "right": int(right), "agree": agree}

    separable = [row(0.9 + 0.01 * k, True) for k in range(5)] + [row(0.3 + 0.01 * k, False) for k in range(5)]
    assert bench.threshold_rule_bound(separable)[0] == 1.0
    mixed = [row(0.5 + 0.1 * (k % 3), k % 2 == 0) for k in range(12)]
    mixed += [row(s["score"], not s["right"]) for s in mixed]  # every feature vector both right and wrong
    assert bench.threshold_rule_bound(mixed)[0] == 0.0
    vetoed = [row(0.9, True, agree=False)] + separable
    assert bench.threshold_rule_bound(vetoed)[0] == 5 / 6
    # the same trade-off read off confidences at any threshold
    p, right = np.array([0.9, 0.8, 0.6, 0.5, 0.4]), np.array([True, True, False, True, False])
    assert bench.best_threshold_share(p, right, np.zeros(5, bool)) == 2 / 3  # threshold 0.8: both wrong below
    assert bench.best_threshold_share(p, right, np.array([True, False, False, False, False])) == 1 / 3


@pytest.mark.parametrize("method,name", [("gfn2", "GFN2-xTB"), ("gfn1", "GFN1-xTB"),
                                         ("gfn1-refine5-b3lyp", "B3LYP-D3(BJ)/6-31G(d)")])
def test_calibration_refit_reproduces_the_shipped_model(method, name):
    """benchmarks/confidence.py --write fitted vibest/data/confidence[-gfn1].json on the features
    table it wrote; refitting from that table chooses the same features and L2 penalty (lowest
    held-out log loss) and gives the same coefficients, threshold and held-out ECE, and the model
    holds for its own level of theory."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import confidence as bench

    rows = bench.read_rows(bench.paths(method)[0])
    model = shipped_model(name)
    assert model.settings["method"] == name
    shipped = json.loads((ROOT / "vibest" / "data" / bench.paths(method)[1].name).read_text())
    features, l2 = bench.chosen_settings(rows)
    assert features == tuple(shipped["features"]) and l2 == pytest.approx(shipped["l2_penalty"])
    coef = bench.fit_rows(rows, features, l2)
    assert coef == pytest.approx([model.intercept, model.score_weight, model.margin_weight, model.matched_weight],
                                 abs=1e-4)
    assert bench.poor_fit_threshold(rows) == pytest.approx(model.poor_fit_score, abs=1e-5)
    p, y, _ = bench.cross_validated(rows, features, l2)
    assert expected_calibration_error(p, y) == pytest.approx(model.cross_validated_ece, abs=1e-3)


def test_penalty_choice_prefers_the_lower_held_out_log_loss():
    """On rows whose label follows the score exactly, with the scores far apart (separable), no
    penalty is needed and the weakest one wins; on rows whose label is a coin toss independent of
    the features, the strongest penalty wins (a weak one overfits the noise). Common practice, no
    source."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import confidence as bench

    rng = np.random.default_rng(3)

    def rows(labels, scores):
        return [{"spectrum": f"s{i}", "score": float(s), "margin": float(rng.uniform(0, 0.3)),
                 "matched": float(rng.uniform()), "right": int(y)} for i, (y, s) in enumerate(zip(labels, scores))]

    labels = rng.uniform(size=60) < 0.5
    separable = rows(labels, np.where(labels, 0.9, 0.2) + rng.normal(0, 0.02, 60))
    noise = rows(rng.uniform(size=60) < 0.5, rng.uniform(size=60))
    assert bench.chosen_settings(separable)[1] == min(bench.PENALTIES)
    assert bench.chosen_settings(noise)[1] == max(bench.PENALTIES)


def test_logistic_fit_and_calibration_error_on_known_data():
    # data drawn from a known logistic model: the fit recovers it (common practice, no source)
    rng = np.random.default_rng(1)
    x = rng.uniform(-2, 2, size=(4000, 2))
    p = 1 / (1 + np.exp(-(0.5 + 1.5 * x[:, 0] - 2.0 * x[:, 1])))
    y = rng.uniform(size=len(p)) < p
    assert fit_logistic(x, y) == pytest.approx([0.5, 1.5, -2.0], abs=0.2)
    assert expected_calibration_error(p, y) < 0.03
    assert expected_calibration_error(np.full(100, 0.9), np.zeros(100)) == pytest.approx(0.9)


def test_calibration_error_of_a_calibrated_model_is_sampling_noise():
    """Consistency resampling (Broecker & Smith 2007, from memory): labels drawn from the
    confidences themselves give the ECE a perfectly calibrated model shows; it is pure sampling
    noise, so it shrinks about as 1/sqrt(n) (common practice, no source): a hundred times the
    rankings, a tenth of the error. Certain confidences (0 or 1) have no noise at all."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import confidence as bench

    p = np.random.default_rng(5).uniform(0.05, 0.95, 10000)
    small, large = bench.calibrated_ece(p[:100], draws=400), bench.calibrated_ece(p, draws=100)
    assert small[0] > 0.04 and small[1] > small[0]
    assert large[0] == pytest.approx(small[0] / np.sqrt(100), rel=0.6)
    assert bench.calibrated_ece(np.tile([0.0, 1.0], 50), draws=50) == (0.0, 0.0)


@pytest.mark.slow
def test_verdict_on_real_spectra(measured_folder, tmp_path):
    store = tmp_path / "store.sqlite"
    from vibest.store import RecordStore

    methanol = load_spectrum(measured_folder / "methanol.jdx")
    v = check_structure(methanol, "CO", name="methanol", store=RecordStore(store))
    assert v.intended_rank is not None and v.conclusion in (CONSISTENT, INCONCLUSIVE, NOT_SUPPORTED)
    assert any(d.smiles == "COC" or d.smiles == "CCO" for d in v.decoys)
    assert json.loads(json.dumps(v.to_dict()))["intended"]["smiles"] == "CO"
    # a structure lacking the O-H the spectrum shows, with a C=O it does not show: not consistent
    wrong = check_structure(methanol, "CC=O", name="acetaldehyde", decoys=2, store=RecordStore(store))
    assert wrong.conclusion != CONSISTENT
    assert any("C=O" in r or "O-H" in r for r in wrong.reasons)


@pytest.mark.slow
def test_partial_coverage_still_gives_a_verdict_for_what_can_be_judged(measured_folder):
    ethanol = load_spectrum(measured_folder / "ethanol.jdx")
    keep = ethanol.wavenumbers_cm1 < 2000
    part = dataclasses.replace(ethanol, wavenumbers_cm1=ethanol.wavenumbers_cm1[keep], values=ethanol.values[keep])
    v = check_structure(part, "CCO", decoys=2)
    oh = next(e for e in v.evidence if e.name == "O-H stretch")
    assert oh.status == "not covered" and not oh.against


def test_shipped_confidence_is_withheld_for_a_condensed_sample():
    """The shipped models were calibrated on gas-phase spectra only (benchmarks/confidence.py):
    a ranking compared as a condensed sample gets no confidence, and the note says why; the same
    spectrum declared a gas gets one."""
    import dataclasses

    water = prediction_of("O")
    condensed = _synthetic(water)
    cands = [Candidate("water", "O"), Candidate("formaldehyde", "C=O")]
    result = assess(rank_candidates(condensed, cands), "GFN2-xTB", 16.0)
    assert result.confidence is None and "gas-phase spectra only" in result.note
    gas = dataclasses.replace(condensed, phase="gas")
    assert assess(rank_candidates(gas, cands), "GFN2-xTB", 16.0).confidence is not None


def test_refined_rankings_get_the_refined_model_and_nothing_else_does():
    """A ranking screened at GFN1-xTB whose best 5 were refined at B3LYP is judged by the model
    calibrated on exactly such rankings (vibest/data/confidence-gfn1-refine5-b3lyp.json); the same
    ranking refined with another K, screened at another level, or B3LYP without screening gets
    no number and a note naming both kinds of ranking. (The entries are relabelled rather than
    recomputed at B3LYP: this checks which model holds, not the chemistry.)"""
    water = prediction_of("O")
    gas = dataclasses.replace(_synthetic(water), phase="gas")
    plain = rank_candidates(gas, [Candidate("water", "O"), Candidate("formaldehyde", "C=O")])
    b3lyp = "B3LYP-D3(BJ)/6-31G(d)"
    entries = tuple(dataclasses.replace(e, refined=True, method=b3lyp) for e in plain.entries)

    def refined(k, screened="GFN1-xTB"):
        return dataclasses.replace(plain, entries=entries, refine=k, screening_method=screened)

    model = shipped_model(b3lyp)
    result = assess(refined(5), b3lyp, 16.0)
    first = plain.entries[0]
    assert result.confidence == pytest.approx(model.probability(
        first.score, first.score - plain.entries[1].score, matched_share(first.comparison)))
    import vibest  # the public call reads the level and band width from the ranking itself
    assert vibest.assess(refined(5)).confidence == pytest.approx(result.confidence)
    for other in (refined(3), refined(5, "GFN2-xTB")):
        note = assess(other, b3lyp, 16.0).note
        assert assess(other, b3lyp, 16.0).confidence is None and "best 5 refined at" in note and "not for" in note
    unrefined = assess(plain, b3lyp, 16.0)
    assert unrefined.confidence is None and "best 5 refined" in unrefined.note
    alone = dataclasses.replace(refined(5), entries=(entries[0], plain.entries[1]))  # only the first refined
    assert assess(alone).confidence is None and "only the first candidate was refined" in assess(alone).note
    # the refined first was second at the screening level: flagged, naming the one first there
    swapped = dataclasses.replace(refined(5), entries=(dataclasses.replace(entries[0], screening_rank=2),
                                                       dataclasses.replace(entries[1], screening_rank=1)))
    flags = {f.kind: f.message for f in assess(swapped).flags}
    assert f"GFN1-xTB put {entries[1].candidate.name} first" in flags[LEVELS_DISAGREE] and "2nd" in flags[LEVELS_DISAGREE]
    assert LEVELS_DISAGREE not in {f.kind for f in assess(refined(5)).flags}  # no screening ranks: no flag
    # and the unrefined models do not hold for a refined ranking
    gfn1 = assess(refined(5), b3lyp, 16.0, shipped_model("GFN1-xTB"))
    assert gfn1.confidence is None and "calibrated for rankings at GFN1-xTB with" in gfn1.note
