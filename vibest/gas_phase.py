"""Gas-phase band contours: rotational P/Q/R envelopes of predicted bands (spectrum stage).

At room temperature a gas-phase band is not a single line but the envelope of its rotational
lines. For a rigid rotor with rotational constant B (cm^-1) the P and R branch lines at offset
x ~ 2BJ carry intensity ~ (2J + 1) exp(-B J (J + 1) hc / kT); in the classical limit the
envelope of each branch is

    E(x) ~ |x| exp(-x^2 / (2 s^2)),   s^2 = 2 B kT / hc,

with maxima at x = +-s, i.e. a P-R separation of sqrt(8 B kT / hc) = 2.3583 sqrt(B T) cm^-1
(the Gerhard-Dennison result). A Q branch, where present, sits at the band centre.

vibest's model (an approximation, documented as such):
* B is the mean of the three rotational constants of the optimised geometry (a single B for
  linear molecules), from the principal moments of inertia (scipy.constants for h, c, k).
* Transition dipole direction decides the Q branch of linear molecules: parallel bands (dipole
  derivative along the axis) have none, perpendicular ones put half the intensity in Q. For
  non-linear molecules a fixed fraction ``q_fraction_nonlinear`` (default 1/3) goes to Q.
* Each branch is then broadened with the chosen line shape and FWHM (instrument resolution and
  unresolved structure); the band keeps its integrated intensity.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

from .spectrum import Spectrum, line_shape_values


def band_contour_inputs(pred) -> tuple[float, np.ndarray]:
    """(effective B in cm^-1, Q fraction per band) of a prediction (or the first member of an ensemble)."""
    from .rigid_body import is_linear

    member = pred.first_prediction
    rec = member.record
    masses = member.modes.masses_amu
    b = effective_b_cm1(rec.numbers, rec.positions_angstrom, masses)
    dirs = member.modes.displacements.reshape(member.modes.count, -1) @ rec.dipole_derivatives_e
    q = q_fractions(rec.numbers, rec.positions_angstrom, dirs, is_linear(rec.positions_angstrom), masses_amu=masses)
    if hasattr(pred, "members"):
        q = np.concatenate([np.full(m.prediction.modes.count, q.mean() if len(q) else 0.0) for m in pred.members])
    return b, q

#: kT/hc at temperature T, in cm^-1 per K
_KT_HC_PER_K = sc.k / (sc.h * sc.c * 100.0)
DEFAULT_TEMPERATURE_K = 298.15
DEFAULT_Q_FRACTION = 1.0 / 3.0


def rotational_constants_cm1(numbers, positions_angstrom, masses_amu=None) -> np.ndarray:
    """Rotational constants A >= B >= C (cm^-1); zero moments (linear axis) give inf."""
    from ase.data import atomic_masses

    from .inertia import principal_moments_amu_angstrom2

    m = np.asarray(masses_amu if masses_amu is not None else atomic_masses[np.asarray(numbers)], dtype=float)
    moments = principal_moments_amu_angstrom2(positions_angstrom, m) * sc.atomic_mass * sc.angstrom ** 2  # kg m^2
    with np.errstate(divide="ignore"):
        b = sc.h / (8 * np.pi ** 2 * sc.c * 100.0 * moments)
    return np.sort(np.where(moments > 1e-50, b, np.inf))[::-1]


def effective_b_cm1(numbers, positions_angstrom, masses_amu=None) -> float:
    """One B for the envelope: the mean of the finite rotational constants (cm^-1)."""
    b = rotational_constants_cm1(numbers, positions_angstrom, masses_amu)
    finite = b[np.isfinite(b)]
    return float(finite.mean()) if len(finite) else 0.0


def branch_maximum_offset_cm1(b_cm1: float, temperature_K: float = DEFAULT_TEMPERATURE_K) -> float:
    """s = sqrt(2 B kT / hc) (cm^-1): where the P and R envelopes peak, either side of the centre
    (half the Gerhard-Dennison P-R separation)."""
    return float(np.sqrt(2.0 * max(b_cm1, 0.0) * _KT_HC_PER_K * temperature_K))


def branch_profile(offsets_cm1, b_cm1: float, temperature_K: float = DEFAULT_TEMPERATURE_K) -> np.ndarray:
    """P+R envelope |x| exp(-x^2/2s^2), unit area over ``offsets_cm1`` (uniform grid)."""
    x = np.asarray(offsets_cm1, dtype=float)
    s2 = branch_maximum_offset_cm1(b_cm1, temperature_K) ** 2
    e = np.abs(x) * np.exp(-x ** 2 / (2.0 * s2))
    area = e.sum() * (x[1] - x[0]) if len(x) > 1 else 0.0
    return e / area if area > 0 else e


def q_fractions(numbers, positions_angstrom, dipole_derivatives_mode, linear: bool,
                q_nonlinear: float = DEFAULT_Q_FRACTION, masses_amu=None) -> np.ndarray:
    """Fraction of each band's intensity in its Q branch (see module docstring).

    ``dipole_derivatives_mode``: (modes, 3) transition dipole directions in the molecule frame."""
    d = np.asarray(dipole_derivatives_mode, dtype=float)
    if not linear:
        return np.full(len(d), float(q_nonlinear))
    from ase.data import atomic_masses

    from .inertia import centred

    m = atomic_masses[np.asarray(numbers)] if masses_amu is None else np.asarray(masses_amu, dtype=float)
    x = centred(positions_angstrom, m)
    axis = x[np.argmax(np.linalg.norm(x, axis=1))]
    axis = axis / np.linalg.norm(axis)
    norm = np.linalg.norm(d, axis=1)
    parallel = np.divide(np.abs(d @ axis), norm, out=np.ones(len(d)), where=norm > 0)
    return np.where(parallel > 0.7, 0.0, 0.5)


def envelope_spectrum(wavenumbers_cm1, intensities_km_mol, b_cm1: float, q_fraction, fwhm_cm1: float,
                      line_shape: str, grid_cm1, temperature_K: float = DEFAULT_TEMPERATURE_K) -> Spectrum:
    """Bands with rotational contours on ``grid_cm1``: (1 - q) A (branch envelope * line shape) + q A (line shape)."""
    x = np.asarray(grid_cm1, dtype=float)
    nu = np.asarray(wavenumbers_cm1, dtype=float)
    inten = np.asarray(intensities_km_mol, dtype=float)
    q = np.broadcast_to(np.asarray(q_fraction, dtype=float), nu.shape)
    step = float(x[1] - x[0]) if len(x) > 1 else 1.0
    y = np.zeros_like(x)
    if b_cm1 <= 0 or not np.isfinite(b_cm1):
        for c, a in zip(nu[nu > 0], inten[nu > 0]):
            y += a * line_shape_values(x, c, fwhm_cm1, line_shape)
        return Spectrum(x, y, line_shape, float(fwhm_cm1))
    s = np.sqrt(2.0 * b_cm1 * _KT_HC_PER_K * temperature_K)
    n = max(int(np.ceil((6.0 * s + 5.0 * fwhm_cm1) / step)), 10)  # the envelope's window, +-n steps
    half = n * step
    # the line shape over twice the window, so that the convolution is whole within the window
    wide = np.arange(-2 * n, 2 * n + 1) * step
    kernel_line = line_shape_values(wide, 0.0, fwhm_cm1, line_shape) * step
    branches = np.convolve(kernel_line, branch_profile(np.arange(-n, n + 1) * step, b_cm1, temperature_K), mode="same")
    for c, a, qq in zip(nu, inten, q):
        if c <= 0:
            continue
        # beyond the window the envelope (unit area, within 6 s of the centre) has the line shape's own
        # tail; cut off there, the tails' loss showed as steps in the curve (and in y**0.5 compared)
        line = line_shape_values(x, c, fwhm_cm1, line_shape)
        contour = np.where(np.abs(x - c) <= half, np.interp(x - c, wide, branches), line)
        y += a * ((1.0 - qq) * contour + qq * line)
    return Spectrum(x, y, line_shape, float(fwhm_cm1))
