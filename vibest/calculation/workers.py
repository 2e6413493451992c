"""Worker processes for independent single points (Hessian displacements).

Each worker is a fresh interpreter (``python -m vibest.calculation.worker_main``) with one
OpenMP/BLAS thread, so N workers use N cores without over-subscription. Workers never import
the caller's main script (unlike multiprocessing's spawn), so they are safe from any script.
The job goes in as one pickle on stdin; results come back as one pickle per displacement on
stdout, followed by a final ``("done", None)`` or ``("error", message)``.
"""

from __future__ import annotations

import os
import pickle
import queue
import subprocess
import sys
import threading

import numpy as np

from ..errors import CalculationError

#: Environment variables that set thread counts of OpenMP/BLAS in worker processes.
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def _reader(proc: subprocess.Popen, out: queue.Queue) -> None:
    try:
        while True:
            try:
                item = pickle.load(proc.stdout)
            except EOFError:
                out.put(("error", "worker process ended unexpectedly"))
                return
            out.put(item)
            if item[0] in ("done", "error"):
                return
    except Exception as exc:  # pragma: no cover - broken pipe etc.
        out.put(("error", f"worker communication failed: {exc}"))


def run_in_workers(numbers, x0, charge, uhf, settings, guess_path, step, tasks, workers: int):
    """Yield (k, sign, gradient, dipole) for every task, computed in ``workers`` processes."""
    env = dict(os.environ)
    for v in THREAD_VARIABLES:
        env[v] = "1"
    procs = []
    out: queue.Queue = queue.Queue()
    try:
        for w in range(workers):
            proc = subprocess.Popen([sys.executable, "-m", "vibest.calculation.worker_main"], stdin=subprocess.PIPE,
                                    stdout=subprocess.PIPE, env=env)
            job = (np.asarray(numbers), np.asarray(x0), charge, uhf, settings, guess_path, step, tasks[w::workers])
            pickle.dump(job, proc.stdin)
            proc.stdin.close()
            procs.append(proc)
            threading.Thread(target=_reader, args=(proc, out), daemon=True).start()
        finished = 0
        while finished < workers:
            kind, payload = out.get()
            if kind == "result":
                yield payload
            elif kind == "done":
                finished += 1
            else:
                raise CalculationError(f"Hessian worker failed: {payload}")
    finally:
        for proc in procs:
            if proc.poll() is None:
                proc.kill()
            proc.wait()
            if proc.stdout:
                proc.stdout.close()
