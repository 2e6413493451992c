"""Finite-difference Hessian and dipole derivatives from analytic gradients.

Central differences: each Cartesian coordinate is displaced by +-h (Bohr); column k of the
Hessian is (g(x + h e_k) - g(x - h e_k)) / 2h and the dipole derivative row k is
(mu(x + h e_k) - mu(x - h e_k)) / 2h. The Hessian is symmetrised, (H + H^T)/2. Every displaced
SCF starts from the equilibrium wavefunction. The 6N displacements run in parallel workers, each
with one OpenMP/BLAS thread so that cores are not over-subscribed: threads of this process when
the engine allows it (tblite releases the GIL; no start-up cost, no copying of results), else the
persistent worker processes of :mod:`vibest.calculation.workers`.
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

from ..errors import CalculationError
from .engine import Engine, calculation_threads, scratch_file
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


def _displaced(engine: Engine, x0: np.ndarray, task, step: float):
    """(k, sign, gradient (3N,) Eh/Bohr, dipole (3,) e*Bohr) at x0 + sign * step * e_k."""
    k, sign = task
    x = x0.copy().ravel()
    x[k] += sign * step
    ev = engine.evaluate(x.reshape(-1, 3))
    return k, sign, ev.gradient_hartree_bohr.ravel(), ev.dipole_e_bohr


def evaluate_block(engine: Engine, x0: np.ndarray, guess: str | None, tasks, step: float):
    """Displacements ``tasks`` in turn, each restarted from the wavefunction file ``guess``."""
    out = []
    for task in tasks:
        if guess is not None:
            engine.load_guess(guess)
        out.append(_displaced(engine, x0, task, step))
    return out


def run_in_threads(engine: Engine, x0: np.ndarray, tasks, step: float, workers: int):
    """Yield (k, sign, gradient, dipole) for every task, computed by ``workers`` threads, each
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
                    out.put(("result", _displaced(own, x0, task, step)))
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


def _in_processes(engine: Engine, numbers, x0, charge, uhf, tasks, step: float, workers: int):
    """Yield (k, sign, gradient, dipole) for every task, computed in the persistent worker
    processes, the wavefunction passed through a file (this process computes displacements itself
    while workers are still starting); the engine has the equilibrium wavefunction again at the end."""
    guess = scratch_file(".npz")
    try:
        guess_path = guess if engine.save_guess(guess) else None

        def local(task):
            return evaluate_block(engine, x0, guess_path, [task], step)[0]

        yield from run_in_workers(numbers, x0, charge, uhf, engine.settings, guess_path, step, tasks, workers, local)
        if guess_path is not None:
            engine.load_guess(guess_path)
    finally:
        if os.path.exists(guess):
            os.remove(guess)


def finite_difference_hessian(engine: Engine, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                              step_bohr: float = 0.005, workers: int = 1,
                              progress: Callable[[int, int], None] | None = None) -> HessianResult:
    """Hessian and dipole derivatives by central differences of analytic gradients.

    ``engine`` must have just evaluated ``positions_bohr`` (its wavefunction is the SCF guess
    for all displacements). With ``workers`` > 1 the displacements are split over that many
    single-threaded workers (threads of this process for a concurrent engine, else processes);
    the result equals the serial one to SCF noise.
    ``progress(done, total)`` is called as displacements finish.
    """
    t0 = time.perf_counter()
    x0 = np.asarray(positions_bohr, dtype=float)
    n = len(x0)
    tasks = _displacements(n)
    total = len(tasks)
    workers = max(1, min(int(workers), total))
    in_memory = workers == 1 or engine.concurrent
    if in_memory:
        guess = engine.wavefunction()
        if workers == 1:
            def serial():
                for task in tasks:
                    engine.restart_from(guess)
                    yield _displaced(engine, x0, task, step_bohr)

            source = serial()
        else:
            source = run_in_threads(engine, x0, tasks, step_bohr, workers)
    else:
        source = _in_processes(engine, numbers, x0, charge, uhf, tasks, step_bohr, workers)
    results = []
    every = max(1, total // 50)
    with calculation_threads():
        for item in source:
            results.append(item)
            if progress and (len(results) % every == 0 or len(results) == total):
                progress(len(results), total)
    if in_memory:
        engine.restart_from(guess)
    hess = np.zeros((3 * n, 3 * n))
    dmu = np.zeros((3 * n, 3))
    for k, sign, grad, dip in results:
        hess[k] += sign * grad / (2 * step_bohr)
        dmu[k] += sign * dip / (2 * step_bohr)
    hess = 0.5 * (hess + hess.T)
    return HessianResult(hess, dmu, total, time.perf_counter() - t0, workers, step_bohr)
