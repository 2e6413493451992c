"""Line shapes and broadening (definitions of the Lorentzian and Gaussian; common practice, no source)."""

import numpy as np
import pytest

from vibest.spectrum import broaden, grid, line_shape_values


@pytest.mark.parametrize("shape", ["lorentzian", "gaussian"])
def test_unit_area_and_fwhm(shape):
    x = np.linspace(-4000, 4000, 800001)
    y = line_shape_values(x, 0.0, 20.0, shape)
    area = np.trapezoid(y, x)
    assert area == pytest.approx(1.0, abs=2e-3 if shape == "lorentzian" else 1e-9)
    half = y.max() / 2
    above = x[y >= half]
    assert above[-1] - above[0] == pytest.approx(20.0, abs=0.02)


def test_broadened_area_equals_intensity_and_peak_position():
    g = grid(0, 6000, 0.5)
    s = broaden([1700.0, 3000.0], [100.0, 50.0], fwhm_cm1=10.0, line_shape="gaussian", grid_cm1=g)
    assert np.trapezoid(s.absorption_km_mol_cm1, g) == pytest.approx(150.0, rel=1e-6)
    assert g[np.argmax(s.absorption_km_mol_cm1)] == pytest.approx(1700.0)
    assert s.absorbance_normalised.max() == pytest.approx(1.0)
    t = s.transmittance_percent
    assert t.min() == pytest.approx(10.0) and t.max() <= 100.0


def test_imaginary_bands_are_not_drawn():
    s = broaden([-300.0, 1000.0], [500.0, 1.0], grid_cm1=grid(400, 4000, 1))
    assert np.argmax(s.absorption_km_mol_cm1) == 600


def test_grid_is_inclusive_and_validated():
    g = grid(400, 4000, 2)
    assert g[0] == 400 and g[-1] == 4000 and len(g) == 1801
    with pytest.raises(ValueError):
        grid(400, 4000, 0)
