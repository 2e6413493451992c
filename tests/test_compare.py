"""Scores, scale/shift fit, peak matching and ranking."""

import dataclasses
import sys
from pathlib import Path

import numpy as np

import pytest

from vibest.comparison import compare, match_peaks, Peak, predicted_curve, score, SCORES
from vibest.measured import ABSORBANCE, MeasuredSpectrum, load_spectrum
from vibest.ranking import Candidate, rank_candidates, read_candidates
from vibest.spectrum import grid, line_shape_values
from vibest.store import RecordStore

from .conftest import prediction_of, record_of

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))


def lorentz(x, c, w=16.0):
    return line_shape_values(x, c, w, "lorentzian")


@pytest.mark.parametrize("name", SCORES)
def test_identical_spectra_score_one(name):
    # every score is 1 for identical curves by its definition (module docstring of vibest.comparison)
    x = grid(500, 3800, 2)
    a = lorentz(x, 1700) + 0.5 * lorentz(x, 2950)
    assert score(a, a, name, x) == pytest.approx(1.0)


@pytest.mark.parametrize("name", SCORES)
def test_shifted_lorentzians_order(name):
    """Two Lorentzians: the smaller the shift, the higher every score (analytic case)."""
    x = grid(500, 3800, 1)
    a = lorentz(x, 1700)
    values = [score(a, lorentz(x, 1700 + d), name, x) for d in (0, 5, 15, 40, 120)]
    assert all(v1 > v2 for v1, v2 in zip(values, values[1:]))


def test_regional_score_lets_the_fingerprint_count_against_strong_stretches():
    """A strong shared band at 2950 cm^-1 and a weak fingerprint band that is at 1000 cm^-1 in one
    curve and at 1200 in the other: the whole-range correlation hardly notices, the regional
    score does (construction, no source)."""
    x = grid(500, 3800, 2)

    def curve(*bands):  # normalised and square-rooted, as compare() does by default
        y = sum(h * lorentz(x, c) for c, h in bands)
        return (y / y.max()) ** 0.5

    a = curve((2950, 1.0), (1000, 0.15))
    b = curve((2950, 1.0), (1200, 0.15))
    # the wrong fingerprint band costs the regional score at least twice what it costs Pearson
    assert 1 - score(a, b, "regional", x) > 2 * (1 - score(a, b, "pearson", x))
    assert score(a, curve((2950, 1.0), (1000, 0.15)), "regional", x) == pytest.approx(1.0)
    with pytest.raises(ValueError):
        score(a, b, "regional")


def _synthetic_measured(pred, factor, shift=0.0):
    """A constructed 'measured' curve: the prediction itself, scaled and shifted (compared with
    condensed_shifts=False: it is the predicted curve, not a condensed sample)."""
    x = grid(450, 3900, 1)
    y = predicted_curve(pred, x, extra_scale=factor, shift_cm1=shift)
    return MeasuredSpectrum(x, y, ABSORBANCE, "synthetic")


def test_scale_fit_recovers_known_factor():
    # constructed case: the measured curve is the prediction scaled by 0.975, which the fit must find
    pred = prediction_of("CC(C)=O")
    comp = compare(pred, _synthetic_measured(pred, 0.975), fit_scale=True, fit_shift=False, condensed_shifts=False)
    assert comp.extra_scale == pytest.approx(0.975, abs=5e-4)
    assert comp.score == pytest.approx(1.0, abs=1e-3)
    plain = compare(pred, _synthetic_measured(pred, 0.975), fit_shift=False, condensed_shifts=False)
    assert plain.score < comp.score


def test_default_comparison_fits_a_bounded_shift_and_no_shift_when_asked():
    pred = prediction_of("CC(C)=O")
    measured = _synthetic_measured(pred, 1.0, shift=14.0)
    comp = compare(pred, measured, condensed_shifts=False)
    assert comp.settings["fit_shift"] and comp.shift_cm1 == pytest.approx(14.0, abs=0.3)
    assert comp.score == pytest.approx(1.0, abs=1e-3)
    # beyond the default bound of 20 cm^-1 the fit stops at the bound
    assert compare(pred, _synthetic_measured(pred, 1.0, shift=-35.0), condensed_shifts=False).shift_cm1 == pytest.approx(-20.0, abs=0.5)
    plain = compare(pred, measured, fit_shift=False, condensed_shifts=False)
    assert plain.shift_cm1 == 0.0 and plain.score < comp.score


def test_translated_curve_equals_the_curve_of_shifted_bands():
    """The shift fit moves one broadened curve instead of re-broadening: same curve (gas contours too)."""
    pred = prediction_of("CC(C)=O")
    measured = _synthetic_measured(pred, 1.0, shift=-8.0)
    for gas in (False, True):
        comp = compare(pred, measured, gas_phase=gas, intensity_power=1.0, condensed_shifts=False)
        direct = predicted_curve(pred, comp.grid_cm1, 1.0, comp.shift_cm1, gas_phase=gas)
        np.testing.assert_allclose(comp.predicted_curve, direct, atol=0.02)


def test_shift_fit_recovers_known_shift():
    # constructed case: the measured curve is the prediction shifted by -12 cm^-1
    pred = prediction_of("CC(C)=O")
    comp = compare(pred, _synthetic_measured(pred, 1.0, shift=-12.0), fit_shift=True, condensed_shifts=False)
    assert comp.shift_cm1 == pytest.approx(-12.0, abs=0.3)


def test_peak_matching_is_one_to_one_within_tolerance():
    # constructed peaks; the expected pairs are the minimum-total-shift assignment (Hungarian method)
    m = [Peak(1715, 1.0), Peak(1365, 0.4), Peak(1220, 0.5), Peak(800, 0.1)]
    p = [Peak(1730, 1.0), Peak(1380, 0.3), Peak(1200, 0.6), Peak(2250, 0.2)]
    pairs = match_peaks(m, p, tolerance_cm1=40)
    matched = {(a.wavenumber_cm1, b.wavenumber_cm1) for a, b in pairs if a and b}
    assert matched == {(1715, 1730), (1365, 1380), (1220, 1200)}
    assert sum(1 for a, b in pairs if a and not b) == 1 and sum(1 for a, b in pairs if b and not a) == 1


def test_peak_table_names_the_carbonyl():
    # acetone's strongest band is its C=O stretch (common practice, no source)
    pred = prediction_of("CC(C)=O")
    comp = compare(pred, _synthetic_measured(pred, 1.0), condensed_shifts=False)
    strongest = max((r for r in comp.matches if r.matched), key=lambda r: r.measured_height)
    assert "C=O stretch" in strongest.character and strongest.shift_cm1 == pytest.approx(0, abs=2.5)


def test_peak_table_columns_line_up():
    """Every row's region and character start where the header's do, unmatched rows included
    (the shift column once was narrower than the word "unmatched")."""
    from vibest.output import peak_table

    pred = prediction_of("CC(C)=O")
    measured = _synthetic_measured(pred, 1.0)
    x = measured.wavenumbers_cm1  # the C=O band taken out: the predicted one stays unmatched
    measured = dataclasses.replace(measured, values=np.where((x > 1650) & (x < 1850), 0.0, measured.values))
    lines = peak_table(compare(pred, measured, condensed_shifts=False)).splitlines()
    assert any("unmatched" in line for line in lines[1:])
    start = lines[0].index("region")
    for line in lines[1:]:
        assert line[start:].split()[0] in ("fingerprint", "group-frequency"), line


def test_ranking_from_trade_facts(tmp_path):
    """A 'measured' spectrum built from facts of the trade (common practice, no source): a strong
    band at 1715 cm^-1 (ketone C=O), medium 1365 and 1220 (CH3 bend, C-C-C stretch of acetone),
    weak C-H near 2970, and nothing near 2250 (no nitrile). The ketone must rank first."""
    x = grid(450, 3900, 1)
    y = (lorentz(x, 1715) + 0.35 * lorentz(x, 1365) + 0.45 * lorentz(x, 1220) + 0.08 * lorentz(x, 2970, 30))
    measured = MeasuredSpectrum(x, y, ABSORBANCE, "trade-facts acetone")
    cands = [Candidate("2-aminopropanenitrile", "CC(N)C#N"), Candidate("acetone", "CC(C)=O"),
             Candidate("allyl alcohol", "C=CCO")]
    store = RecordStore(tmp_path / "store.sqlite")
    ranking = rank_candidates(measured, cands, store=store)
    assert ranking.entries[0].candidate.name == "acetone"
    assert ranking.entries[0].margin_to_next > 0
    again = rank_candidates(measured, cands, store=store)
    assert all(e.from_store for e in again.entries)
    assert [e.candidate.name for e in again.entries] == [e.candidate.name for e in ranking.entries]


def test_failed_candidate_is_listed_not_fatal():
    x = grid(450, 3900, 1)
    measured = MeasuredSpectrum(x, lorentz(x, 1715), ABSORBANCE, "one band")
    ranking = rank_candidates(measured, [Candidate("bad", "C1CC"), Candidate("acetone", "CC(C)=O")])
    assert ranking.entries[0].candidate.name == "acetone"
    assert ranking.entries[-1].error and "invalid SMILES" in ranking.entries[-1].error


def test_candidates_file_forms(tmp_path):
    a = tmp_path / "a.txt"
    a.write_text("# candidates\nCC(C)=O acetone\nCCC=O\n")
    assert [c.name for c in read_candidates(a)] == ["acetone", "CCC=O"]
    b = tmp_path / "b.csv"
    b.write_text("name,smiles\nacetone,CC(C)=O\npropanal,CCC=O\n")
    assert [c.smiles for c in read_candidates(b)] == ["CC(C)=O", "CCC=O"]


@pytest.mark.slow
@pytest.mark.parametrize("file,right,others", [
    # Real gas-phase spectra, ##ORIGIN=DOW CHEMICAL COMPANY, files in data/infrared_spectra/ of the
    # sdist of the PyPI package jcamp 1.3.2 (fetched at test time, never stored in this repository).
    ("chlorobenzene.jdx", "Clc1ccccc1", ["c1ccccc1", "Cc1ccccc1", "C=CCl", "ClCCCl"]),
    ("carbon dioxide.jdx", "O=C=O", ["[C-]#[O+]", "O=S=O", "O", "C"]),
])
def test_ranking_against_real_measured_spectra(file, right, others, measured_folder):
    measured = load_spectrum(measured_folder / file)
    ranking = rank_candidates(measured, [Candidate(s, s) for s in [right] + others])
    assert ranking.entries[0].candidate.smiles == right, [(e.candidate.name, e.score) for e in ranking.entries]
    assert ranking.entries[0].margin_to_next > 0.05


def test_rotational_constants_of_water():
    """Water's rotational constants A 27.9, B 14.5, C 9.3 cm^-1 (ground state, from memory of
    Herzberg's tables); the GFN2-xTB geometry is close, so 8 % tolerance."""
    from vibest.gas_phase import rotational_constants_cm1

    rec = record_of("O")
    a, b, c = rotational_constants_cm1(rec.numbers, rec.positions_angstrom)
    assert a == pytest.approx(27.9, rel=0.08) and b == pytest.approx(14.5, rel=0.08) and c == pytest.approx(9.3, rel=0.08)


def test_branch_maxima_follow_the_classical_p_r_separation():
    """P-R maxima separation sqrt(8 B kT / hc) = 2.3583 sqrt(B T) cm^-1 (Gerhard & Dennison,
    Phys. Rev. 43, 197 (1933), from memory); for CO, B = 1.93 cm^-1 at 298 K: about 56.6 cm^-1."""
    from vibest.gas_phase import branch_profile

    x = np.arange(-200, 200.01, 0.1)
    y = branch_profile(x, 1.93, 298.15)
    left, right = x[np.argmax(np.where(x < 0, y, 0))], x[np.argmax(np.where(x > 0, y, 0))]
    assert right - left == pytest.approx(2.3583 * np.sqrt(1.93 * 298.15), abs=0.5)
    assert np.sum(y) * 0.1 == pytest.approx(1.0, abs=1e-3)


def test_gas_phase_contour_keeps_the_line_shapes_tail():
    """Far from a band the P+R envelope (unit area, within a few s of the centre) convolved with a
    Lorentzian is the Lorentzian's own tail: f * L (x) = L(x) (1 + O(s^2 / x^2)) (a property of
    convolution, common practice, no source). So the curve falls smoothly with distance: no cut
    where the envelope's window ends (until 2026-12-04 the tails beyond 6 s + 5 FWHM were dropped,
    a step of 0.05 in y**0.5 at B = 0.1 cm^-1, FWHM 16), and the band keeps its area."""
    from vibest.gas_phase import envelope_spectrum
    from vibest.spectrum import line_shape_values

    x = grid(400, 4000, 1.0)
    y = envelope_spectrum([1500.0], [100.0], 0.1, 0.0, 16.0, "lorentzian", x).absorption_km_mol_cm1
    far = np.abs(x - 1500.0) >= 100.0  # 6 s^2 / x^2 < 0.03 there (s = 6.4 cm^-1)
    assert y[far] / (100.0 * line_shape_values(x[far], 1500.0, 16.0, "lorentzian")) == pytest.approx(1.0, abs=0.05)
    right = x >= 1560.0
    assert np.all(np.diff(y[right]) < 0)  # falls all the way, no step
    lorentz_area_in_range = 100.0 * line_shape_values(x, 1500.0, 16.0, "lorentzian").sum()
    assert y.sum() == pytest.approx(lorentz_area_in_range, rel=0.005)


def test_gas_phase_contour_keeps_intensity_and_is_chosen_from_the_file(tmp_path):
    """A band with a contour keeps its integrated intensity; a JCAMP-DX file with ##STATE=GAS
    switches the contour on by itself (JCAMP-DX 4.24 label, open standard)."""
    from vibest.gas_phase import envelope_spectrum
    from vibest.measured import load_spectrum
    from vibest.measured.jcamp import write_jcamp

    x = grid(1000, 3000, 1.0)
    s = envelope_spectrum([2000.0], [50.0], 1.93, 0.0, 4.0, "lorentzian", x)
    assert s.absorption_km_mol_cm1.sum() * 1.0 == pytest.approx(50.0, rel=0.03)
    assert s.absorption_km_mol_cm1[1000] < 0.3 * s.absorption_km_mol_cm1.max()  # a dip, no Q branch, at the centre
    pred = prediction_of("C=O")
    path = tmp_path / "gas.jdx"
    g = grid(600, 3600, 2.0)
    write_jcamp(path, g, lorentz(g, 1746) + 0.3 * lorentz(g, 2843), "formaldehyde gas", extra_labels={"STATE": "GAS"})
    spec = load_spectrum(path)
    assert spec.phase == "gas"
    assert compare(pred, spec).settings["gas_phase"] is True
    assert compare(pred, spec, gas_phase=False).settings["gas_phase"] is False


def test_noise_does_not_become_peaks_under_the_square_root_comparison():
    """Weak noise (0.5 % of the strongest band) must not be picked as peaks: the square root used
    for scoring would lift it to ~7 % of the maximum, above the 3 % prominence."""
    pred = prediction_of("CC(C)=O")
    clean = _synthetic_measured(pred, 1.0)
    noisy = MeasuredSpectrum(clean.wavenumbers_cm1,
                             clean.values + np.random.default_rng(7).normal(0.0, 0.005, clean.values.size),
                             ABSORBANCE, "synthetic with noise")
    comp = compare(pred, noisy)
    measured = [m for m in comp.matches if m.measured_cm1 is not None]
    predicted = [m for m in comp.matches if m.predicted_cm1 is not None]
    assert len(measured) <= 1.5 * len(predicted) + 2


def test_condensed_phase_moves_only_carbonyl_stretches():
    """In a neat liquid a C=O stretch lies 10-30 cm^-1 below its gas value (common practice,
    e.g. acetone 1738 gas / 1715 liquid, from memory): the comparison of a condensed-phase
    spectrum moves acetone's C=O band by -20 cm^-1 and nothing else; a gas-phase one does not."""
    from vibest.condensed_phase import condensed_bands

    pred = prediction_of("CC(C)=O")
    shifts = condensed_bands(pred, 16.0).shift_cm1
    moved = [b for b, s in zip(pred.bands, shifts) if s]
    assert len(moved) == 1 and "C=O stretch" in moved[0].label and shifts[moved[0].index - 1] == -20.0
    assert not np.any(condensed_bands(prediction_of("CCO"), 16.0).shift_cm1)  # no cluster attached
    liquid = _synthetic_measured(pred, 1.0, shift=-20.0)  # no ##STATE: condensed
    assert any("condensed phase" in n for n in compare(pred, liquid, fit_shift=False).notes)
    assert not any("condensed" in n for n in compare(pred, liquid, fit_shift=False, gas_phase=True).notes)


def test_comparison_options_one_object_for_api_ranking_and_verdict():
    """Model logic (no source needed): an options object and keyword changes on top give the same
    comparison as the keywords alone; a ranking keeps the options it was scored with; an unknown
    or unusable option is an InputError, not a TypeError deep inside."""
    from vibest.comparison import ComparisonOptions
    from vibest.errors import InputError

    pred = prediction_of("CC(C)=O")
    measured = _synthetic_measured(pred, 0.98, shift=5.0)
    opts = ComparisonOptions(fit_scale=True, condensed_shifts=False)
    a = compare(pred, measured, opts, score_name="pearson")
    b = compare(pred, measured, fit_scale=True, condensed_shifts=False, score_name="pearson")
    assert (a.score, a.extra_scale, a.shift_cm1) == (b.score, b.extra_scale, b.shift_cm1)
    assert a.score_name == "pearson" and a.score > compare(pred, measured, condensed_shifts=False,
                                                             score_name="pearson").score
    ranking = rank_candidates(measured, [Candidate("acetone", "CC(C)=O"), Candidate("water", "O")], options=opts)
    assert ranking.options == opts and ranking.entries[0].comparison.extra_scale == pytest.approx(a.extra_scale)
    with pytest.raises(InputError, match="unknown comparison option"):
        compare(pred, measured, fit_scael=True)
    with pytest.raises(InputError, match="intensity power"):
        compare(pred, measured, opts, intensity_power=5.0)
