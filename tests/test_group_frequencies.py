"""Facts of the trade: characteristic group-frequency regions (common practice, no source).

Each check uses vibest's default scaling and looks at the strongest band in the named window
or the molecule's strongest band overall.
"""

import numpy as np
import pytest

from .conftest import prediction_of


def strongest(pred, lo=0.0, hi=5000.0):
    bands = [b for b in pred.bands if lo <= b.wavenumber_cm1 <= hi]
    return max(bands, key=lambda b: b.intensity_km_mol)


@pytest.mark.parametrize("smiles", ["CC(C)=O", "CCC(C)=O", "O=C1CCCCC1"])
def test_ketone_strongest_band_is_carbonyl_near_1700_1750(smiles):
    """1700-1750 cm^-1 is the window of liquids and solutions; a gas lies 10-30 cm^-1 higher
    (common practice; vibest.condensed_phase), and the prediction is of a gas: 1710-1780."""
    b = strongest(prediction_of(smiles))
    assert 1710 <= b.wavenumber_cm1 <= 1780
    assert "C=O stretch" in b.character


@pytest.mark.parametrize("smiles", ["CCO", "CC(C)O", "OCCCC"])
def test_alcohol_has_oh_stretch_above_3200(smiles):
    oh = [b for b in prediction_of(smiles).bands if "O-H stretch" in b.character]
    assert oh and all(b.wavenumber_cm1 > 3200 for b in oh)


@pytest.mark.parametrize("smiles", ["CC#N", "CCC#N", "N#Cc1ccccc1"])
def test_nitrile_band_near_2200_2300(smiles):
    b = strongest(prediction_of(smiles), 2000, 2500)
    assert 2200 <= b.wavenumber_cm1 <= 2300 and "C\u2261N stretch" in b.character


@pytest.mark.parametrize("smiles", ["CCCCCC", "CC(C)=O", "c1ccccc1C"])
def test_ch_stretches_between_2850_and_3100(smiles):
    ch = [b.wavenumber_cm1 for b in prediction_of(smiles).bands if b.character.startswith("C-H stretch")]
    assert ch and 2850 <= min(ch) and max(ch) <= 3100
