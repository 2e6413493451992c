"""One worker process: the single kind of child process vibest starts (Hessian workers, batch workers).

A worker is a fresh interpreter (``python -m MODULE``) with one OpenMP/BLAS thread, so N workers
use N cores without over-subscription; it never imports the caller's main script (unlike
multiprocessing's spawn), so it is safe from any script. The coordinator writes pickles to its
stdin and reads pickles from its stdout; the worker side of the start-up is
:mod:`vibest.calculation.worker_setup`. The pools that schedule work on such processes are
:class:`vibest.calculation.workers.WorkerPool` (Hessian displacements) and
:class:`vibest.batch.pool.LocalPool` (molecules).
"""

from __future__ import annotations

import os
import pickle
import select
import subprocess
import sys

from .worker_setup import close_process

#: Environment variables that set thread counts of OpenMP/BLAS in worker processes.
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def worker_environment() -> dict:
    """This process's environment with one OpenMP/BLAS thread."""
    env = dict(os.environ)
    for v in THREAD_VARIABLES:
        env[v] = "1"
    return env


class WorkerProcess:
    """A single-threaded worker interpreter running ``python -m module``, talking in pickles."""

    def __init__(self, module: str):
        self.module = module
        self.proc = subprocess.Popen([sys.executable, "-m", module], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     env=worker_environment())

    def alive(self) -> bool:
        return self.proc.poll() is None

    def send(self, obj, flush: bool = True) -> None:
        """Pickle ``obj`` to the worker (OSError/ValueError if it is gone)."""
        pickle.dump(obj, self.proc.stdin)
        if flush:
            self.proc.stdin.flush()

    def flush(self) -> None:
        self.proc.stdin.flush()

    def has_output(self, timeout_s: float) -> bool:
        """Whether an answer can be read now (waiting up to ``timeout_s``)."""
        return bool(select.select([self.proc.stdout], [], [], timeout_s)[0])

    def receive(self):
        """The worker's next answer (blocks; EOFError/OSError/UnpicklingError if it died)."""
        return pickle.load(self.proc.stdout)

    def wait(self) -> int:
        """Exit code (waits for the process to end)."""
        return self.proc.wait()

    def close(self, goodbye=None, timeout_s: float = 10.0) -> None:
        """Ask the worker to finish (``goodbye`` pickled, then its input closed) and wait for it,
        killing it after ``timeout_s``."""
        try:
            if self.alive():
                pickle.dump(goodbye, self.proc.stdin)
                self.proc.stdin.close()
        except (OSError, ValueError):
            self.proc.kill()
        close_process(self.proc, timeout_s)

    def kill(self, wait: bool = True) -> None:
        """End the worker now (SIGKILL); with ``wait``, also reap it and close its pipes (without,
        a thread reading its answers sees the end of its output and does that)."""
        if self.alive():
            self.proc.kill()
        if wait:
            close_process(self.proc, 5.0)
