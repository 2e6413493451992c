"""Geometry optimiser: rational-function (RFO) quasi-Newton steps in Cartesian coordinates.

The start curvature is Lindh's model Hessian; it is improved by BFGS updates from every
gradient. Translations and rotations are projected out of gradient and Hessian, so steps stay
in the 3N-6 internal space; a trust radius controls step length from the ratio of actual to
predicted energy change. References: A. Banerjee, N. Adams, J. Simons, R. Shepard,
J. Phys. Chem. 89, 52 (1985) (RFO); J. Nocedal & S. Wright, *Numerical Optimization* (2006),
ch. 4 and 6 (trust region, BFGS).
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field
from typing import Callable

import numpy as np

from ..rigid_body import rigid_body_basis
from .engine import Engine, Evaluation
from .model_hessian import lindh_hessian


@dataclass(frozen=True)
class OptimizerSettings:
    """Convergence and step control.

    Attributes:
        max_force_hartree_bohr: converged when the largest per-atom gradient norm is below this (Eh/Bohr).
        max_steps: give up after this many gradient evaluations.
        trust_radius_bohr: initial trust radius (Bohr, norm of the whole step).
        max_trust_radius_bohr: upper bound of the trust radius (Bohr).
    """

    max_force_hartree_bohr: float = 5e-5
    max_steps: int = 300
    trust_radius_bohr: float = 0.3
    max_trust_radius_bohr: float = 1.0
    min_trust_radius_bohr: float = 1e-3

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class OptimizationResult:
    """Outcome of one optimisation.

    Attributes:
        positions_bohr: final geometry (N, 3) in Bohr.
        energy_hartree: final energy (Eh).
        max_force_hartree_bohr: largest per-atom gradient norm at the end (Eh/Bohr).
        converged: whether the force criterion was met.
        gradient_calls: gradient evaluations used.
        seconds: wall time; gradient_seconds: part of it spent inside the engine.
    """

    positions_bohr: np.ndarray
    energy_hartree: float
    max_force_hartree_bohr: float
    converged: bool
    gradient_calls: int
    seconds: float
    gradient_seconds: float
    energies_hartree: list[float] = field(default_factory=list)
    #: The engine's evaluation at ``positions_bohr`` when it was the engine's last one (its
    #: wavefunction is then loaded), else None.
    final_evaluation: Evaluation | None = None

    def to_dict(self) -> dict:
        return {
            "energy_hartree": self.energy_hartree,
            "max_force_hartree_bohr": self.max_force_hartree_bohr,
            "converged": self.converged,
            "gradient_calls": self.gradient_calls,
            "seconds": self.seconds,
            "gradient_seconds": self.gradient_seconds,
        }


def _max_atom_force(grad: np.ndarray) -> float:
    return float(np.linalg.norm(grad.reshape(-1, 3), axis=1).max())


#: Curvature given to translations/rotations so that RFO never steps along them (Eh/Bohr^2).
_RIGID_SHIFT = 1e3


def _rfo_step(hess: np.ndarray, grad: np.ndarray, rigid: np.ndarray, proj: np.ndarray) -> np.ndarray:
    """RFO step (Banerjee et al. 1985) in the space orthogonal to the rigid-body vectors ``rigid``
    (``proj`` = 1 - rigid rigid^T).

    The projected Hessian P H P gets a large curvature along the rigid-body directions; one
    eigendecomposition then serves both the projection and the augmented-Hessian root.
    """
    h = proj @ hess @ proj + _RIGID_SHIFT * (rigid @ rigid.T)
    w, v = np.linalg.eigh(0.5 * (h + h.T))
    internal = w < 0.5 * _RIGID_SHIFT
    w, v = w[internal], v[:, internal]
    if np.all(w > 0):
        w = np.maximum(w, 1e-4)
    gq = v.T @ grad
    aug = np.zeros((len(w) + 1, len(w) + 1))
    aug[:-1, :-1] = np.diag(w)
    aug[:-1, -1] = gq
    aug[-1, :-1] = gq
    _, ev = np.linalg.eigh(aug)
    vec = ev[:, 0]
    step_q = -gq / np.maximum(np.abs(w), 1e-4) if abs(vec[-1]) < 1e-12 else vec[:-1] / vec[-1]
    return v @ step_q


def optimize(engine: Engine, numbers, positions_bohr, settings: OptimizerSettings = OptimizerSettings(),
             progress: Callable[[int, float, float], None] | None = None,
             first: Evaluation | None = None) -> OptimizationResult:
    """Minimise the engine's energy from ``positions_bohr``.

    ``progress(step, energy_hartree, max_force)`` is called after each gradient.
    ``first`` may carry an evaluation already made at the start geometry.
    """
    t0 = time.perf_counter()
    tg = 0.0
    x = np.asarray(positions_bohr, dtype=float).copy()
    n = len(x)
    calls = 0

    def evaluate(pos):
        nonlocal tg, calls
        t = time.perf_counter()
        ev = engine.evaluate(pos)
        tg += time.perf_counter() - t
        calls += 1
        return ev

    ev = first if first is not None else evaluate(x)
    last, last_is_final = ev, first is None
    e, g = ev.energy_hartree, ev.gradient_hartree_bohr.ravel()
    energies = [e]
    hess = lindh_hessian(numbers, x)
    trust = settings.trust_radius_bohr
    converged = _max_atom_force(g) < settings.max_force_hartree_bohr
    if progress:
        progress(0, e, _max_atom_force(g))
    while not converged and calls < settings.max_steps:
        rb = rigid_body_basis(x)
        proj = np.eye(3 * n) - rb @ rb.T
        gp = proj @ g
        step = _rfo_step(hess, gp, rb, proj)
        length = np.linalg.norm(step)
        if length > trust:
            step *= trust / length
            length = trust
        predicted = gp @ step + 0.5 * step @ hess @ step
        x_new = x + step.reshape(n, 3)
        ev = evaluate(x_new)
        e_new, g_new = ev.energy_hartree, ev.gradient_hartree_bohr.ravel()
        actual = e_new - e
        ratio = actual / predicted if abs(predicted) > 1e-14 else 1.0
        # BFGS update from this pair (skipped when the curvature condition fails).
        y = proj @ (g_new - g)
        sy = step @ y
        if sy > 1e-10:
            hs = hess @ step
            hess = hess + np.outer(y, y) / sy - np.outer(hs, hs) / (step @ hs)
        if ratio < 0.25:
            trust = max(0.25 * length, settings.min_trust_radius_bohr)
        elif ratio > 0.75 and length > 0.8 * trust:
            trust = min(2.0 * trust, settings.max_trust_radius_bohr)
        if actual > 1e-6 and trust > settings.min_trust_radius_bohr:
            # Reject an uphill step: stay, with the updated Hessian and a smaller trust radius.
            last_is_final = False
            if progress:
                progress(calls, e, _max_atom_force(g))
            continue
        x, e, g = x_new, e_new, g_new
        last = ev
        last_is_final = True
        energies.append(e)
        converged = _max_atom_force(g) < settings.max_force_hartree_bohr
        if progress:
            progress(calls, e, _max_atom_force(g))
    return OptimizationResult(
        positions_bohr=x, energy_hartree=e, max_force_hartree_bohr=_max_atom_force(g),
        converged=bool(converged), gradient_calls=calls, seconds=time.perf_counter() - t0,
        gradient_seconds=tg, energies_hartree=energies,
        final_evaluation=last if last_is_final else None,
    )
