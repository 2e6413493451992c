"""Spectrum stage: stick spectrum -> broadened curve on a wavenumber grid.

Each band of integrated intensity A_k (km/mol) at nu_k (cm^-1) becomes a unit-area line shape
times A_k, so the curve is a molar absorption coefficient density in km/mol per cm^-1 (its
integral over the grid returns the summed intensities, apart from wings cut off at the grid ends).

Line shapes (FWHM = full width at half maximum, cm^-1):
    Lorentzian  L(nu) = (1/pi) (w/2) / ((nu - nu_k)^2 + (w/2)^2)
    Gaussian    G(nu) = exp(-4 ln2 (nu - nu_k)^2 / w^2) * sqrt(4 ln2 / pi) / w

The default FWHM, 16 cm^-1, is a typical width of condensed-phase bands in routine spectra
(common practice, no source); gas-phase rotational contours are broader (~20-40 cm^-1).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

LINE_SHAPES = ("lorentzian", "gaussian")
DEFAULT_FWHM_CM1 = 16.0
DEFAULT_RANGE_CM1 = (400.0, 4000.0)
DEFAULT_STEP_CM1 = 1.0


@dataclass(frozen=True)
class Spectrum:
    """A broadened spectrum on a grid.

    Attributes:
        wavenumbers_cm1: grid (ascending), cm^-1.
        absorption_km_mol_cm1: band density, km/mol per cm^-1.
        line_shape: "lorentzian" or "gaussian"; fwhm_cm1: line width in cm^-1.
    """

    wavenumbers_cm1: np.ndarray
    absorption_km_mol_cm1: np.ndarray
    line_shape: str
    fwhm_cm1: float

    @property
    def absorbance_normalised(self) -> np.ndarray:
        """Absorbance-like curve scaled to a maximum of 1 (dimensionless)."""
        peak = self.absorption_km_mol_cm1.max()
        return self.absorption_km_mol_cm1 / peak if peak > 0 else self.absorption_km_mol_cm1.copy()

    @property
    def transmittance_percent(self) -> np.ndarray:
        """%T view: 100 * 10^(-A) with A the normalised absorbance (strongest band at 10 %T)."""
        return 100.0 * 10.0 ** (-self.absorbance_normalised)

    def to_dict(self) -> dict:
        return {
            "line_shape": self.line_shape,
            "fwhm_cm1": self.fwhm_cm1,
            "wavenumbers_cm1": self.wavenumbers_cm1.tolist(),
            "absorption_km_mol_cm1": self.absorption_km_mol_cm1.tolist(),
        }


def grid(start_cm1: float = DEFAULT_RANGE_CM1[0], stop_cm1: float = DEFAULT_RANGE_CM1[1],
         step_cm1: float = DEFAULT_STEP_CM1) -> np.ndarray:
    """Evenly spaced ascending wavenumber grid including both ends (cm^-1)."""
    lo, hi = sorted((float(start_cm1), float(stop_cm1)))
    if step_cm1 <= 0:
        raise ValueError("grid step must be positive")
    count = int(round((hi - lo) / step_cm1)) + 1
    return np.linspace(lo, hi, max(count, 2))


def line_shape_values(x: np.ndarray, centre: float, fwhm: float, shape: str) -> np.ndarray:
    """Unit-area line shape evaluated at x (cm^-1)."""
    if shape == "lorentzian":
        half = 0.5 * fwhm
        return (half / np.pi) / ((x - centre) ** 2 + half ** 2)
    if shape == "gaussian":
        a = 4.0 * np.log(2.0) / fwhm ** 2
        return np.sqrt(a / np.pi) * np.exp(-a * (x - centre) ** 2)
    raise ValueError(f"unknown line shape {shape!r}; choose one of {', '.join(LINE_SHAPES)}")


def broaden(wavenumbers_cm1, intensities_km_mol, fwhm_cm1: float = DEFAULT_FWHM_CM1,
            line_shape: str = "lorentzian", grid_cm1: np.ndarray | None = None) -> Spectrum:
    """Sum of line shapes, one per band with positive wavenumber."""
    if fwhm_cm1 <= 0:
        raise ValueError("FWHM must be positive")
    x = grid() if grid_cm1 is None else np.asarray(grid_cm1, dtype=float)
    nu = np.asarray(wavenumbers_cm1, dtype=float)
    inten = np.asarray(intensities_km_mol, dtype=float)
    keep = nu > 0
    y = np.zeros_like(x)
    for c, a in zip(nu[keep], inten[keep]):
        y += a * line_shape_values(x, c, fwhm_cm1, line_shape)
    return Spectrum(x, y, line_shape, float(fwhm_cm1))
