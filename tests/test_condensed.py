"""Spectra as labs record them: sampling from the file, the ATR correction, atmospheric bands and
matrix windows (issue: condensed phase).

The ATR formula is Harrick's penetration depth (Internal Reflection Spectroscopy, 1967); crystal
refractive indices from memory (common practice). Atmospheric CO2 and water vapour positions:
common practice, no source.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from vibest.atmosphere import atmospheric_bands
from vibest.comparison import compare
from vibest.errors import InputError
from vibest.measured import ABSORBANCE, MeasuredSpectrum, load_spectrum
from vibest.measured.jcamp import write_jcamp
from vibest.sampling import ATR, GAS, PELLET, atr_corrected, penetration_depth_um, sampling_of
from vibest.spectrum import grid

from .conftest import prediction_of


def test_penetration_depth_worked_by_hand():
    """Diamond (n1 = 2.40), 45 degrees, sample n2 = 1.5, 1000 cm^-1 (lambda = 10 um):
    sin^2 45 = 0.5; (1.5/2.4)^2 = 0.390625; sqrt(0.5 - 0.390625) = sqrt(0.109375) = 0.330719;
    2 pi x 2.40 x 0.330719 = 4.98712; d_p = 10 / 4.98712 = 2.0052 um. At 3000 cm^-1 a third."""
    assert penetration_depth_um(1000.0, 2.40) == pytest.approx(2.0052, abs=1e-4)
    assert penetration_depth_um(3000.0, 2.40) == pytest.approx(2.0052 / 3, abs=1e-4)
    # germanium (n1 = 4.0): sqrt(0.5 - 0.140625) = 0.599479; 10 / (2 pi x 4 x 0.599479) = 0.66372 um
    assert penetration_depth_um(1000.0, 4.0) == pytest.approx(0.66372, abs=1e-4)
    with pytest.raises(InputError, match="no total reflection"):
        penetration_depth_um(1000.0, 1.6)


def test_atr_correction_scales_absorbance_with_wavenumber():
    """A flat ATR absorbance of 0.1 becomes 0.1 x nu/1000 (d_p is proportional to the wavelength)."""
    x = grid(500, 4000, 10)
    corrected = atr_corrected(MeasuredSpectrum(x, np.full_like(x, 0.1), ABSORBANCE, "atr.csv"))
    np.testing.assert_allclose(corrected.values, 0.1 * x / 1000.0, rtol=1e-12)
    assert "ATR correction applied (diamond" in corrected.notes[-1]


def test_sampling_is_read_from_labels_then_title():
    assert sampling_of(procedure="ATR, diamond") == (ATR, "sampling procedure")
    assert sampling_of(state="GAS") == (GAS, "state")
    assert sampling_of(title="compound X, KBr pellet") == (PELLET, "title")
    assert sampling_of(state="liquid", procedure="transmission", title="sample 7") == ("", "")


def test_an_atr_file_is_corrected_and_said_so(tmp_path):
    """A JCAMP-DX file whose ##SAMPLING PROCEDURE says ATR: the comparison takes it as condensed,
    applies the ATR correction, and says both in its notes; --atr off leaves it."""
    water = prediction_of("O")
    s = water.spectrum
    path = tmp_path / "atr.jdx"
    write_jcamp(path, s.wavenumbers_cm1, s.absorbance_normalised * 1000.0 / s.wavenumbers_cm1, "water ATR",
                extra_labels={"SAMPLING PROCEDURE": "ATR (diamond)"})
    spec = load_spectrum(path)
    assert spec.sampling == ATR and spec.phase == ""
    comp = compare(water, spec, condensed_shifts=False)
    assert any(n.startswith("phase: condensed (ATR") for n in comp.notes)
    assert any(n.startswith("ATR correction applied") for n in comp.notes)
    off = compare(water, spec, condensed_shifts=False, atr="off")
    assert comp.score > off.score  # the correction undoes the 1/nu weakening built into the file


def _with_co2(spec: MeasuredSpectrum, depth: float) -> MeasuredSpectrum:
    """Constructed: a P/R doublet of CO2 (2360, 2340 cm^-1) and its bend (667 cm^-1) added."""
    x = spec.wavenumbers_cm1
    co2 = sum(depth * np.exp(-0.5 * ((x - c) / 5.0) ** 2) for c in (2360.0, 2340.0, 667.0))
    return MeasuredSpectrum(x, spec.values + co2, ABSORBANCE, "with-co2.csv")


def test_atmospheric_co2_is_found_and_left_out_of_a_condensed_comparison():
    acetone = prediction_of("CC(C)=O")
    x = acetone.spectrum.wavenumbers_cm1
    clean = MeasuredSpectrum(x, acetone.spectrum.absorbance_normalised + 0.02, ABSORBANCE, "clean.csv")
    assert atmospheric_bands(clean).co2 == ""
    dirty = _with_co2(clean, 0.6)
    assert "CO2" in atmospheric_bands(dirty).co2
    comp = compare(acetone, dirty, condensed_shifts=False)
    assert any("CO2" in n and "left out" in n for n in comp.notes) and comp.settings["excluded_points"] > 0
    kept = compare(acetone, dirty, condensed_shifts=False, keep_atmospheric=True)
    assert kept.settings["excluded_points"] == 0 and comp.score > kept.score
    assert compare(acetone, dirty, gas_phase=True).settings["excluded_points"] == 0  # a gas may be CO2 itself


def test_matrix_windows_and_bad_windows():
    acetone = prediction_of("CC(C)=O")
    x = acetone.spectrum.wavenumbers_cm1
    spec = MeasuredSpectrum(x, acetone.spectrum.absorbance_normalised + 0.02, ABSORBANCE, "mull.csv")
    comp = compare(acetone, spec, exclude_cm1=((2800.0, 3000.0),), condensed_shifts=False)
    assert comp.settings["excluded_points"] == len([g for g in comp.grid_cm1 if 2800 <= g <= 3000])
    with pytest.raises(InputError, match="low end must be below"):
        compare(acetone, spec, exclude_cm1=((3000.0, 2800.0),))
    with pytest.raises(InputError, match="whole compared range"):
        compare(acetone, spec, exclude_cm1=((0.0, 10000.0),))


@pytest.mark.slow
def test_detectors_on_real_spectra(measured_folder):
    """The CO2 detector on a real gas spectrum of CO2 and the water detector on a real spectrum of
    water vapour (DOW / Sadtler files of the jcamp sdist); neither fires on the invented demo
    spectrum (Lorentzian bands and white noise, examples/make_hx07_spectrum.py)."""
    assert atmospheric_bands(load_spectrum(measured_folder / "carbon dioxide.jdx")).co2
    assert atmospheric_bands(load_spectrum(measured_folder / "water.jdx")).water
    demo = atmospheric_bands(load_spectrum("examples/hx07-recovered-solvent.csv"))
    assert demo.co2 == "" and demo.water == ""


@pytest.mark.slow
def test_indene_film_ranks_first_among_its_isomers():
    """R. J. Lancashire's public-domain indene spectrum (a condensed sample, tests/data/lancashire),
    ranked with the default comparison against C9H8 isomers (benchmarks/condensed.py)."""
    from pathlib import Path

    from vibest.ranking import Candidate, rank_candidates

    spectrum = load_spectrum(Path(__file__).parent / "data" / "lancashire" / "xyinc1.jdx")
    isomers = [("indene", "C1C=Cc2ccccc21"), ("1-phenylpropyne", "CC#Cc1ccccc1"), ("3-phenylpropyne", "C#CCc1ccccc1"),
               ("phenylallene", "C=C=Cc1ccccc1"), ("2-ethynyltoluene", "C#Cc1ccccc1C")]
    ranking = rank_candidates(spectrum, [Candidate(n, s) for n, s in isomers])
    assert ranking.entries[0].candidate.name == "indene", [(e.candidate.name, e.score) for e in ranking.entries]
