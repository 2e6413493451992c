"""Finite-difference Hessian and dipole derivatives from analytic gradients.

Central differences: each Cartesian coordinate is displaced by +-h (Bohr); column k of the
Hessian is (g(x + h e_k) - g(x - h e_k)) / 2h and the dipole derivative row k is
(mu(x + h e_k) - mu(x - h e_k)) / 2h. The Hessian is symmetrised, (H + H^T)/2. Every displaced
SCF starts from the equilibrium wavefunction. The 6N displacements can run in worker
processes, each single-threaded, so that cores are not over-subscribed.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .engine import Engine, scratch_file
from .workers import run_in_workers


@dataclass(frozen=True)
class HessianResult:
    """Hessian in Eh/Bohr^2 (3N, 3N), dipole derivatives in e (3N, 3): d mu_a / d x_k in e*Bohr/Bohr."""

    hessian_hartree_bohr2: np.ndarray
    dipole_derivatives_e: np.ndarray
    gradient_calls: int
    seconds: float
    workers: int
    step_bohr: float


def _displacements(natoms: int) -> list[tuple[int, int]]:
    return [(k, sign) for k in range(3 * natoms) for sign in (+1, -1)]


def evaluate_block(engine: Engine, x0: np.ndarray, guess: str | None, tasks, step: float):
    out = []
    for k, sign in tasks:
        if guess is not None:
            engine.load_guess(guess)
        x = x0.copy().ravel()
        x[k] += sign * step
        ev = engine.evaluate(x.reshape(-1, 3))
        out.append((k, sign, ev.gradient_hartree_bohr.ravel(), ev.dipole_e_bohr))
    return out


def default_workers() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)


def finite_difference_hessian(engine: Engine, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                              step_bohr: float = 0.005, workers: int = 1,
                              progress: Callable[[int, int], None] | None = None) -> HessianResult:
    """Hessian and dipole derivatives by central differences of analytic gradients.

    ``engine`` must have just evaluated ``positions_bohr`` (its wavefunction is the SCF guess
    for all displacements). With ``workers`` > 1 the displacements are split over that many
    single-threaded processes; the result equals the serial one to SCF noise.
    ``progress(done, total)`` is called as displacements finish.
    """
    t0 = time.perf_counter()
    x0 = np.asarray(positions_bohr, dtype=float)
    n = len(x0)
    tasks = _displacements(n)
    total = len(tasks)
    workers = max(1, min(int(workers), total))
    results = []
    guess = scratch_file(".npz")
    try:
        have_guess = engine.save_guess(guess)
        guess_path = guess if have_guess else None
        if workers == 1:
            chunk = max(1, total // 20)
            for start in range(0, total, chunk):
                results.extend(evaluate_block(engine, x0, guess_path, tasks[start:start + chunk], step_bohr))
                if progress:
                    progress(len(results), total)
        else:
            def local(task):
                return evaluate_block(engine, x0, guess_path, [task], step_bohr)[0]

            for item in run_in_workers(numbers, x0, charge, uhf, engine.settings, guess_path, step_bohr,
                                       tasks, workers, local):
                results.append(item)
                if progress and (len(results) % max(1, total // 50) == 0 or len(results) == total):
                    progress(len(results), total)
        if guess_path is not None:
            engine.load_guess(guess_path)
    finally:
        if os.path.exists(guess):
            os.remove(guess)
    hess = np.zeros((3 * n, 3 * n))
    dmu = np.zeros((3 * n, 3))
    for k, sign, grad, dip in results:
        hess[k] += sign * grad / (2 * step_bohr)
        dmu[k] += sign * dip / (2 * step_bohr)
    hess = 0.5 * (hess + hess.T)
    return HessianResult(hess, dmu, total, time.perf_counter() - t0, workers, step_bohr)
