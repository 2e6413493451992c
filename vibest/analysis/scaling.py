"""Frequency scaling: harmonic GFN2-xTB wavenumbers -> estimates of observed fundamentals.

The default factor is fitted by ``benchmarks/fit_scale_factor.py`` on the experimental gas-phase
fundamentals in ``vibest/data/fundamentals.csv`` (least squares through the origin:
s = sum(w_calc * w_exp) / sum(w_calc^2)) and shipped in ``vibest/data/scale_factors.json``.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass
from importlib import resources

import numpy as np

from ..errors import InputError


@dataclass(frozen=True)
class ScaleModel:
    """A uniform scale factor.

    Attributes:
        factor: multiplies harmonic wavenumbers (dimensionless).
        name: short name of the model ("uniform" or "user").
        source: where the factor comes from.
    """

    factor: float
    name: str = "uniform"
    source: str = ""

    def apply(self, wavenumbers_cm1) -> np.ndarray:
        """Scaled wavenumbers (cm^-1); imaginary (negative) values are scaled the same way."""
        return np.asarray(wavenumbers_cm1, dtype=float) * self.factor

    def to_dict(self) -> dict:
        return asdict(self)


def default_scale_model() -> ScaleModel:
    """The project's fitted GFN2-xTB factor (see module docstring)."""
    text = resources.files("vibest.data").joinpath("scale_factors.json").read_text()
    data = json.loads(text)
    fit = data["uniform"]
    return ScaleModel(float(fit["factor"]), "uniform",
                      f"fitted on {fit['fundamentals']} gas-phase fundamentals of {fit['molecules']} molecules "
                      f"(MAD {fit['mad_cm1']:.0f} cm^-1), benchmarks/fit_scale_factor.py")


def user_scale_model(factor: float) -> ScaleModel:
    """A factor chosen by the user (checked to be a plausible number)."""
    if not (0.5 <= float(factor) <= 1.5):
        raise InputError(f"scale factor {factor} is outside 0.5-1.5; give e.g. 0.97")
    return ScaleModel(float(factor), "user", "given by the user")


def fit_uniform_factor(calculated_cm1, experimental_cm1) -> float:
    """Least-squares factor s minimising sum (s w_calc - w_exp)^2."""
    c = np.asarray(calculated_cm1, dtype=float)
    e = np.asarray(experimental_cm1, dtype=float)
    return float(c @ e / (c @ c))
