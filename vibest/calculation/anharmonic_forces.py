"""Cubic and semi-diagonal quartic force constants along given normal modes, by central
differences of Hessians at geometries displaced along each mode (the expensive part of VPT2; the
analysis is vibest.analysis.anharmonic).

With H(+-) the mass-weighted Hessian at Q_i = +-d projected on the modes, and H(0) at the
reference geometry: phi_ijk = (H_jk(+) - H_jk(-)) / (2 d) and phi_iijj = (H_jj(+) + H_jj(-) - 2 H_jj(0)) / d^2;
phi_ijk is then averaged over the three orders in which it is computed. The reference geometry
need not be a stationary point of the engine (both formulas are central differences).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from ase.units import Bohr

from .engine import Engine
from .hessian import finite_difference_hessian

#: Default step along a normal mode, Bohr amu^1/2 (0.025 Angstrom amu^1/2).
MODE_STEP_BOHR_AMU = 0.025 / Bohr


@dataclass(frozen=True)
class ModeForceConstants:
    """Force constants over mass-weighted normal coordinates (Bohr amu^1/2).

    Attributes:
        eigenvalues_au: engine's Hessian projected on the modes, diagonal (M,), Eh/(Bohr^2 amu).
        cubic_au: phi_ijk (M, M, M), Eh/(Bohr^3 amu^3/2), symmetric.
        quartic_au: phi_iijj (M, M), Eh/(Bohr^4 amu^2), symmetric.
        hessians: number of Hessians computed.
    """

    eigenvalues_au: np.ndarray
    cubic_au: np.ndarray
    quartic_au: np.ndarray
    hessians: int


def _projected(engine: Engine, numbers, positions_bohr, basis, charge, uhf, workers) -> np.ndarray:
    """The engine's Hessian at ``positions_bohr`` (analytic for a density-functional engine, as
    in vibest.calculation.driver, but without the dipole derivatives, which VPT2 does not use;
    else by finite differences of gradients), mass-weighted and projected on the modes."""
    if engine.settings.is_dft:
        h = engine.hessian_and_dipole_derivatives(positions_bohr, dipole_derivatives=False)[0]
    else:
        reference = engine.evaluate(positions_bohr)
        h = finite_difference_hessian(engine, numbers, positions_bohr, charge, uhf, workers=workers,
                                      displacements="cartesian", reference=reference).hessian_hartree_bohr2
    return basis.T @ h @ basis


def mode_force_constants(engine: Engine, numbers, positions_angstrom, masses_amu, modes_mass_weighted,
                         charge: int = 0, uhf: int = 0, step: float = MODE_STEP_BOHR_AMU, workers: int = 1,
                         progress: Callable[[int, int], None] | None = None) -> ModeForceConstants:
    """Cubic and semi-diagonal quartic force constants of ``engine`` along ``modes_mass_weighted``
    (M, N, 3; orthonormal, as vibest.analysis.harmonic gives them) at ``positions_angstrom``.
    Costs 2M + 1 Hessians. ``progress(done, total)`` is called after each."""
    x0 = np.asarray(positions_angstrom, dtype=float) / Bohr
    m = len(modes_mass_weighted)
    l = np.asarray(modes_mass_weighted, dtype=float).reshape(m, -1).T  # (3N, M)
    inv_sqrt_m = np.repeat(1.0 / np.sqrt(np.asarray(masses_amu, dtype=float)), 3)
    basis = inv_sqrt_m[:, None] * l  # Cartesian Hessian -> mass-weighted, projected on the modes
    total = 2 * m + 1
    h0 = _projected(engine, numbers, x0, basis, charge, uhf, workers)
    if progress:
        progress(1, total)
    cubic = np.zeros((m, m, m))
    quartic = np.zeros((m, m))
    for i in range(m):
        shift = (step * basis[:, i]).reshape(-1, 3)
        plus = _projected(engine, numbers, x0 + shift, basis, charge, uhf, workers)
        minus = _projected(engine, numbers, x0 - shift, basis, charge, uhf, workers)
        cubic[i] = (plus - minus) / (2 * step)
        quartic[i] = np.diag(plus + minus - 2 * h0) / step ** 2
        if progress:
            progress(2 * i + 3, total)
    cubic = (cubic + cubic.transpose(1, 2, 0) + cubic.transpose(2, 0, 1)) / 3.0
    cubic = 0.5 * (cubic + cubic.transpose(0, 2, 1))
    quartic = 0.5 * (quartic + quartic.T)
    return ModeForceConstants(np.diag(h0).copy(), cubic, quartic, total)
