"""Atmospheric bands in a measured spectrum: carbon dioxide and water vapour.

A spectrum recorded in air carries what the background did not cancel (common practice):

* **CO2**: the antisymmetric stretch near 2349 cm^-1 (a P/R doublet near 2360 and 2340, or one
  saturated band) and the bend near 667 cm^-1, positive or negative (an over-corrected background);
* **water vapour**: sharp rotational lines over about 1300-2000 and 3500-3950 cm^-1.

Detected on the measured points themselves (no interpolation), against the noise of the curve
(median absolute second difference): CO2 as a band in 2320-2380 cm^-1 standing out of its flanks
by more than :data:`CO2_SIGNIFICANCE` noise levels; water vapour as at least
:data:`WATER_MIN_LINES` sharp lines (narrower than 6 cm^-1, in the curve minus its 25 cm^-1
running mean, more prominent than 5 noise levels of the quiet region 2450-2700 cm^-1) in each
of its two regions. Few organic compounds absorb in 2320-2380 cm^-1 (P-H stretches do). For a condensed sample
the comparison leaves the windows of what was found out (both curves set to zero there) and says
so; a gas sample is the analyte itself, so nothing is left out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import uniform_filter1d
from scipy.signal import find_peaks

#: Windows (cm^-1) left out of a comparison for each atmospheric gas found.
CO2_WINDOWS = ((2280.0, 2400.0), (640.0, 690.0))
WATER_WINDOWS = ((1300.0, 2000.0), (3500.0, 3950.0))
CO2_SIGNIFICANCE = 6.0
#: Noise is taken as at least this fraction of the spectrum's largest absorbance (a noise-free or
#: computed curve would otherwise make any wiggle significant).
FLOOR = 0.002
WATER_MIN_LINES = 6
_QUIET = (2450.0, 2700.0)


@dataclass(frozen=True)
class AtmosphericBands:
    """What was found: CO2 and/or water vapour, each with a sentence, and the windows to leave out."""

    co2: str = ""
    water: str = ""

    @property
    def windows_cm1(self) -> tuple[tuple[float, float], ...]:
        return (CO2_WINDOWS if self.co2 else ()) + (WATER_WINDOWS if self.water else ())

    def notes(self) -> list[str]:
        return [n for n in (self.co2, self.water) if n]


def _native(spec, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    """The measured points (absorbance) within lo-hi, ascending: no interpolation, which would
    correlate neighbouring points and hide the noise."""
    a = spec.absorbance()
    sel = (a.wavenumbers_cm1 >= lo) & (a.wavenumbers_cm1 <= hi)
    return a.wavenumbers_cm1[sel], a.values[sel]


def _noise(y: np.ndarray) -> float:
    """Robust noise of a curve: median absolute second difference, scaled for white noise."""
    d2 = np.diff(y, 2)
    return float(1.4826 * np.median(np.abs(d2 - np.median(d2))) / np.sqrt(6)) if len(d2) > 5 else 0.0


def _top(spec) -> float:
    return max(float(np.max(np.abs(spec.absorbance().values))), 1e-9)


def _points(x: np.ndarray, width_cm1: float) -> int:
    return max(3, int(round(width_cm1 / max(float(np.median(np.diff(x))), 1e-6))) | 1)


def _co2(spec) -> str:
    """A band in 2320-2380 cm^-1 standing out of its flanks (2250-2290, 2400-2450) by more than
    :data:`CO2_SIGNIFICANCE` noise levels, its largest deviation inside 2325-2375 cm^-1."""
    x, y = _native(spec, 2250.0, 2450.0)
    if len(x) < 30:
        return ""
    flank = ((x <= 2290) | (x >= 2400))
    inner = (x >= 2320) & (x <= 2380)
    if flank.sum() < 5 or inner.sum() < 5:
        return ""
    base = np.interp(x, x[flank], y[flank])
    dev = y - base
    noise = max(_noise(y[flank]), FLOOR * _top(spec))
    k = int(np.argmax(np.abs(dev)))
    level = float(np.mean(dev[inner]))
    if abs(level) < CO2_SIGNIFICANCE * noise or not 2325.0 <= x[k] <= 2375.0:
        return ""
    word = "absorbs" if level > 0 else "shows as a negative band (background over-corrected)"
    return f"atmospheric CO2 near 2349 cm^-1 {word}"


def _water(spec) -> str:
    """Sharp lines (narrower than 6 cm^-1, more prominent than 5 noise levels of the quiet region)
    in both water regions: a forest of lines in 3500-3950 as well as 1300-2000 cm^-1 is water
    vapour; a compound's own sharp bands rarely reach 3500-3950 cm^-1 in a condensed phase."""
    qx, qy = _native(spec, *_QUIET)
    if len(qx) < 20:
        return ""
    noise = max(_noise(qy), FLOOR * _top(spec))
    counts = []
    for lo, hi in WATER_WINDOWS:
        x, y = _native(spec, lo, hi)
        if len(x) < 50:
            return ""
        detail = y - uniform_filter1d(y, _points(x, 25.0), mode="nearest")
        step = float(np.median(np.diff(x)))
        peaks, _ = find_peaks(np.abs(detail), prominence=5 * noise, width=(None, 6.0 / step))
        counts.append(len(peaks))
    if min(counts) >= WATER_MIN_LINES:
        return f"water vapour lines ({counts[0]} sharp lines in 1300-2000 and {counts[1]} in 3500-3950 cm^-1)"
    return ""


def atmospheric_bands(spec) -> AtmosphericBands:
    """CO2 and water vapour found in a measured spectrum (see the module docstring)."""
    return AtmosphericBands(_co2(spec), _water(spec))
