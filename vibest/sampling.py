"""How a measured spectrum was recorded, and the ATR correction.

**Sampling** is read from the file: JCAMP-DX ``##STATE`` and ``##SAMPLING PROCEDURE``, else words
in the title (ATR, film, KBr pellet, mull, solution, gas). It decides the phase the comparison
assumes when ``--phase auto`` (gas: rotational contours; anything else: condensed) and whether
the ATR correction applies.

**ATR correction.** In attenuated total reflection the evanescent wave's penetration depth
(Harrick, *Internal Reflection Spectroscopy*, Interscience 1967)

    d_p = lambda / (2 pi n1 sqrt(sin^2 theta - (n2/n1)^2)),   lambda = 1/nu

grows with wavelength, so ATR absorbances are weaker at high wavenumber than in transmission.
The correction multiplies the absorbance by d_p(nu_ref)/d_p(nu) = nu/nu_ref (nu_ref =
:data:`ATR_REFERENCE_CM1`), taking the sample's refractive index n2 as constant (1.5, common
practice for organics); n1 and theta then only set the scale, but are reported and checked
(total reflection needs sin theta > n2/n1). Crystal refractive indices in the mid-infrared (from
memory, common practice): diamond 2.40, ZnSe 2.43, Ge 4.00; incidence 45 degrees.
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np

from .errors import InputError

GAS, ATR, FILM, PELLET, MULL, SOLUTION, UNKNOWN = "gas", "ATR", "film", "KBr pellet", "mull", "solution", ""
#: Refractive indices of ATR crystals in the mid-infrared (from memory, common practice).
CRYSTALS = {"diamond": 2.40, "znse": 2.43, "ge": 4.00}
DEFAULT_CRYSTAL = "diamond"
DEFAULT_ANGLE_DEG = 45.0
SAMPLE_INDEX = 1.5
ATR_REFERENCE_CM1 = 1000.0

_WORDS = ((ATR, r"\bATR\b|attenuated total|\bHATR\b|diamond|ZnSe\b"),
          (PELLET, r"\bKBr\b|pellet|\bdisc\b|\bdisk\b"),
          (MULL, r"\bmull\b|nujol|fluorolube"),
          (FILM, r"\bfilm\b|\bneat\b|capillary|liquid cell|smear"),
          (SOLUTION, r"solution|\bin CCl4\b|\bin CS2\b|\bin CHCl3\b"),
          (GAS, r"\bgas\b|vapou?r"))


def sampling_of(state: str = "", procedure: str = "", title: str = "") -> tuple[str, str]:
    """(sampling, where it was read) from ##STATE, ##SAMPLING PROCEDURE and the title."""
    for where, text in (("sampling procedure", procedure), ("state", state), ("title", title)):
        for kind, pattern in _WORDS:
            if text and re.search(pattern, text, re.IGNORECASE):
                return kind, where
    return UNKNOWN, ""


def penetration_depth_um(wavenumber_cm1, n_crystal: float, angle_deg: float = DEFAULT_ANGLE_DEG,
                         n_sample: float = SAMPLE_INDEX) -> np.ndarray:
    """ATR penetration depth (micrometre) at each wavenumber (Harrick 1967; see the module docstring)."""
    s = math.sin(math.radians(angle_deg)) ** 2 - (n_sample / n_crystal) ** 2
    if s <= 0:
        raise InputError(f"no total reflection: sin^2({angle_deg:g} deg) must exceed (n_sample/n_crystal)^2 = "
                         f"({n_sample:g}/{n_crystal:g})^2")
    wavelength_um = 1e4 / np.asarray(wavenumber_cm1, dtype=float)
    return wavelength_um / (2 * math.pi * n_crystal * math.sqrt(s))


def atr_corrected(spec, crystal: str = DEFAULT_CRYSTAL, angle_deg: float = DEFAULT_ANGLE_DEG):
    """The measured spectrum (as absorbance) times d_p(1000 cm^-1)/d_p(nu), with a note saying so."""
    key = crystal.lower()
    if key not in CRYSTALS:
        raise InputError(f"unknown ATR crystal {crystal!r}; choose one of {', '.join(CRYSTALS)}")
    if not 10.0 <= angle_deg <= 80.0:
        raise InputError(f"ATR angle {angle_deg:g} degrees: give the angle of incidence, 10-80")
    a = spec.absorbance()
    dp = penetration_depth_um(a.wavenumbers_cm1, CRYSTALS[key], angle_deg)
    ref = float(penetration_depth_um(ATR_REFERENCE_CM1, CRYSTALS[key], angle_deg))
    note = (f"ATR correction applied ({key}, n = {CRYSTALS[key]:.2f}, {angle_deg:g} deg, sample n = {SAMPLE_INDEX}): "
            f"absorbance x d_p({ATR_REFERENCE_CM1:.0f} cm^-1)/d_p(nu), d_p({ATR_REFERENCE_CM1:.0f}) = {ref:.2f} um")
    return dataclasses.replace(a, values=a.values * ref / dp, notes=a.notes + (note,))


#: Bands of mull oils and pellet matrices (cm^-1), left out of a comparison on request
#: (``--matrix``; common practice, no source): Nujol (paraffin oil) C-H stretches and bends;
#: water held by KBr (O-H stretch and H-O-H bend).
MATRIX_WINDOWS = {"nujol": ((2800.0, 3000.0), (1440.0, 1480.0), (1365.0, 1385.0)),
                  "kbr-water": ((3200.0, 3600.0), (1600.0, 1680.0))}
