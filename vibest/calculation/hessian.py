"""Finite-difference Hessian and dipole derivatives from analytic gradients.

Central differences along orthonormal directions u_j (Bohr): G_j = (g(x + h u_j) - g(x - h u_j)) / 2h
is H u_j and (mu(x + h u_j) - mu(x - h u_j)) / 2h the dipole derivative along u_j. Every displaced
SCF starts from the equilibrium wavefunction.

Two sets of directions:

* ``"vibrational"`` (default): an orthonormal basis U of the 3N-6 (3N-5 linear) directions
  orthogonal to translations and rotations, 6N-12 (6N-10) gradients. The energy does not change
  under translation and rotation, so the rest of the Hessian follows without calculation: with
  R the orthonormal rigid-body basis, H = G U^T + U G^T - U sym(U^T G) U^T + R W R^T, where the
  rigid block W comes from the gradient at x (zero at a stationary point,
  :func:`vibest.rigid_body.rigid_body_curvature`), and the dipole derivatives along R from the
  dipole and charge (:func:`vibest.rigid_body.rigid_body_dipole_derivatives`). Equal to the
  Cartesian result to finite-difference noise (tests/test_pipeline.py).
* ``"cartesian"``: each Cartesian coordinate, 6N gradients (U = 1, no rigid part).

The result is a full Cartesian Hessian (3N, 3N), symmetrised, and dipole derivatives (3N, 3),
so that every analysis (isotopes included) works with it unchanged. The displacements run in
parallel workers, each with one OpenMP/BLAS thread so that cores are not over-subscribed:
threads of this process when the engine allows it (tblite releases the GIL; no start-up cost,
no copying of results), else the persistent worker processes of
:mod:`vibest.calculation.workers`.
"""

from __future__ import annotations

import os
import queue
import threading
import time
from collections import deque
from dataclasses import dataclass
from typing import Callable

import numpy as np
from ase.units import Bohr

from ..errors import CalculationError, InputError
from ..rigid_body import (is_linear, rigid_and_vibrational_bases, rigid_body_curvature, rigid_body_dipole_derivatives,
                          rigid_body_vectors)
from .engine import Engine, Evaluation, calculation_threads, scratch_file
from .workers import run_in_workers

#: Sets of displacement directions (see the module docstring).
DISPLACEMENTS = ("vibrational", "cartesian")


@dataclass(frozen=True)
class HessianResult:
    """Hessian in Eh/Bohr^2 (3N, 3N), dipole derivatives in e (3N, 3): d mu_a / d x_k in e*Bohr/Bohr."""

    hessian_hartree_bohr2: np.ndarray
    dipole_derivatives_e: np.ndarray
    gradient_calls: int
    seconds: float
    workers: int
    step_bohr: float
    #: The directions used: "vibrational" or "cartesian" (see the module docstring).
    displacements: str


def displacement_directions(positions_bohr, displacements: str = "vibrational") -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal directions U (3N, m) to displace along, and the orthonormal rigid-body basis R
    (3N, 3N - m) they leave out (empty for ``"cartesian"``, where U is the identity)."""
    if displacements not in DISPLACEMENTS:
        raise InputError(f"unknown Hessian displacements {displacements!r}; choose one of {', '.join(DISPLACEMENTS)}")
    x = np.asarray(positions_bohr, dtype=float)
    if displacements == "cartesian":
        return np.eye(x.size), np.zeros((x.size, 0))
    rigid, directions = rigid_and_vibrational_bases(x, is_linear(x * Bohr))
    return directions, rigid


def _tasks(count: int) -> list[tuple[int, int]]:
    return [(j, sign) for j in range(count) for sign in (+1, -1)]


def _displaced(engine: Engine, x0: np.ndarray, task, steps: np.ndarray):
    """(j, sign, gradient (3N,) Eh/Bohr, dipole (3,) e*Bohr) at x0 + sign * steps[:, j] (Bohr)."""
    j, sign = task
    x = x0.ravel() + sign * steps[:, j]
    ev = engine.evaluate(x.reshape(-1, 3))
    return j, sign, ev.gradient_hartree_bohr.ravel(), ev.dipole_e_bohr


def evaluate_block(engine: Engine, x0: np.ndarray, guess: str | None, tasks, steps: np.ndarray):
    """Displacements ``tasks`` (along the columns of ``steps``, Bohr) in turn, each restarted
    from the wavefunction file ``guess``."""
    out = []
    for task in tasks:
        if guess is not None:
            engine.load_guess(guess)
        out.append(_displaced(engine, x0, task, steps))
    return out


def run_in_threads(engine: Engine, x0: np.ndarray, tasks, steps: np.ndarray, workers: int):
    """Yield (j, sign, gradient, dipole) for every task, computed by ``workers`` threads, each
    with its own copy of ``engine`` restarted from ``engine``'s current wavefunction before every
    displacement. Tasks are handed out one at a time; results come in completion order. An error
    in any thread stops the others after their current displacement and is raised here."""
    guess = engine.wavefunction()
    pending = deque(tasks)
    lock = threading.Lock()
    out: queue.Queue = queue.Queue()

    def work() -> None:
        try:
            with calculation_threads(user_api="openmp"):  # OpenMP thread counts are per thread
                own = engine.copy()
                while True:
                    with lock:
                        task = pending.popleft() if pending else None
                    if task is None:
                        break
                    own.restart_from(guess)
                    out.put(("result", _displaced(own, x0, task, steps)))
        except BaseException as exc:  # handed to the caller
            with lock:
                pending.clear()
            out.put(("error", exc))
        finally:
            out.put(("done", None))

    threads = [threading.Thread(target=work, name=f"vibest-hessian-{k}", daemon=True) for k in range(workers)]
    for t in threads:
        t.start()
    finished, error = 0, None
    try:
        while finished < workers:
            try:
                kind, payload = out.get(timeout=0.2)  # a timeout keeps Ctrl-C responsive
            except queue.Empty:
                continue
            if kind == "result":
                yield payload
            elif kind == "error":
                error = error or payload
            else:
                finished += 1
    finally:
        with lock:
            pending.clear()  # abandoned (error or interrupt): threads stop after their displacement
    if error is not None:
        if isinstance(error, CalculationError):
            raise error
        raise CalculationError(f"Hessian displacement failed: {type(error).__name__}: {error}") from error


def default_workers() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)


def _in_processes(engine: Engine, numbers, x0, charge, uhf, tasks, steps: np.ndarray, workers: int):
    """Yield (j, sign, gradient, dipole) for every task, computed in the persistent worker
    processes, the wavefunction passed through a file (this process computes displacements itself
    while workers are still starting); the engine has the equilibrium wavefunction again at the end."""
    guess = scratch_file(".npz")
    try:
        guess_path = guess if engine.save_guess(guess) else None

        def local(task):
            return evaluate_block(engine, x0, guess_path, [task], steps)[0]

        yield from run_in_workers(numbers, x0, charge, uhf, engine.settings, guess_path, steps, tasks, workers, local)
        if guess_path is not None:
            engine.load_guess(guess_path)
    finally:
        if os.path.exists(guess):
            os.remove(guess)


def finite_difference_hessian(engine: Engine, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                              step_bohr: float = 0.005, workers: int = 1,
                              progress: Callable[[int, int], None] | None = None,
                              displacements: str = "vibrational",
                              reference: Evaluation | None = None) -> HessianResult:
    """Hessian and dipole derivatives by central differences of analytic gradients.

    ``engine`` must have just evaluated ``positions_bohr`` (its wavefunction is the SCF guess
    for all displacements); ``reference`` is that evaluation (gradient and dipole at
    ``positions_bohr``, needed by ``"vibrational"`` displacements; evaluated again if not given).
    ``displacements``: ``"vibrational"`` (6N-12 gradients, 6N-10 for a linear molecule) or
    ``"cartesian"`` (6N); see the module docstring. A charged molecule on an engine whose dipole
    origin is not known to be fixed falls back to ``"cartesian"``. With ``workers`` > 1 the
    displacements are split over that many single-threaded workers (threads of this process for
    a concurrent engine, else processes); the result equals the serial one to SCF noise.
    ``progress(done, total)`` is called as displacements finish.
    """
    t0 = time.perf_counter()
    x0 = np.asarray(positions_bohr, dtype=float)
    if displacements == "vibrational" and charge and not engine.dipole_about_coordinate_origin:
        displacements = "cartesian"
    directions, rigid = displacement_directions(x0, displacements)
    extra = 0
    if rigid.shape[1] and reference is None:
        reference = engine.evaluate(x0)
        extra = 1
    steps = step_bohr * directions
    tasks = _tasks(directions.shape[1])
    total = len(tasks)
    workers = max(1, min(int(workers), total))
    in_memory = workers == 1 or engine.concurrent
    if in_memory:
        guess = engine.wavefunction()
        if workers == 1:
            def serial():
                for task in tasks:
                    engine.restart_from(guess)
                    yield _displaced(engine, x0, task, steps)

            source = serial()
        else:
            source = run_in_threads(engine, x0, tasks, steps, workers)
    else:
        source = _in_processes(engine, numbers, x0, charge, uhf, tasks, steps, workers)
    results = []
    every = max(1, total // 50)
    with calculation_threads():
        for item in source:
            results.append(item)
            if progress and (len(results) % every == 0 or len(results) == total):
                progress(len(results), total)
    if in_memory:
        engine.restart_from(guess)
    hess, dmu = _assemble(x0, directions, rigid, results, step_bohr, reference, charge)
    return HessianResult(hess, dmu, total + extra, time.perf_counter() - t0, workers, step_bohr, displacements)


def _assemble(x0: np.ndarray, directions: np.ndarray, rigid: np.ndarray, results, step_bohr: float,
              reference: Evaluation | None, charge: int) -> tuple[np.ndarray, np.ndarray]:
    """Cartesian Hessian (3N, 3N) and dipole derivatives (3N, 3) from the displaced gradients
    and dipoles along ``directions`` and the analytic rigid-body parts along ``rigid``."""
    g = np.zeros((x0.size, directions.shape[1]))  # H u_j
    d = np.zeros((directions.shape[1], 3))  # d mu / d u_j
    for j, sign, grad, dip in results:
        g[:, j] += sign * grad / (2 * step_bohr)
        d[j] += sign * dip / (2 * step_bohr)
    inner = directions.T @ g
    hess = g @ directions.T + directions @ g.T - directions @ (0.5 * (inner + inner.T)) @ directions.T
    dmu = directions @ d
    if rigid.shape[1]:
        # the rigid basis in terms of the generators of rigid_body_vectors (exact: same span)
        coeff = np.linalg.lstsq(rigid_body_vectors(x0), rigid, rcond=None)[0]
        curvature = coeff.T @ rigid_body_curvature(x0, reference.gradient_hartree_bohr) @ coeff
        hess += rigid @ curvature @ rigid.T
        dmu += rigid @ (rigid_body_dipole_derivatives(x0, reference.dipole_e_bohr, charge) @ coeff).T
    return 0.5 * (hess + hess.T), dmu
