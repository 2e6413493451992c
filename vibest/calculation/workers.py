"""A persistent pool of worker processes for independent single points (Hessian displacements).

Each worker is a :class:`vibest.calculation.processes.WorkerProcess` running
``vibest.calculation.worker_main`` (one OpenMP/BLAS thread, safe from any script).

The pool lives for the whole process: the first Hessian (or :func:`prestart`, which
:func:`vibest.pipeline.compute_record` calls right after the first gradient when the Hessian is
expected to be long enough) starts the workers, and every later Hessian reuses them, so their
start-up (importing tblite, ~0.3 s on the benchmark machine) is paid once and overlaps the
optimisation; while a worker is still starting, the calling process computes displacements
itself. Tasks are handed out one or two at a time (dynamic load balancing); each result comes
back as soon as it is done.

Protocol per job: a header pickle ``(numbers, x0, charge, uhf, settings, guess_path, steps)``
(``steps``: displacement vectors as columns, Bohr), then task pickles ``(j, sign)`` and a final
``None``; the worker answers ``("result", item)`` per task and ``("done", None)`` at the end, or ``("error", message)`` and exits.
"""

from __future__ import annotations

import atexit
import pickle
import queue
import threading
from collections import deque
from typing import Callable

import numpy as np

from ..errors import CalculationError
from .processes import WorkerProcess

#: Tasks in flight per worker (hides the pipe round trip).
IN_FLIGHT = 2


class WorkerPool:
    """``size`` persistent single-threaded worker processes."""

    def __init__(self, size: int):
        self.size = int(size)
        self.procs = [WorkerProcess("vibest.calculation.worker_main") for _ in range(self.size)]
        self.lock = threading.Lock()
        self._ready = [False] * self.size

    def alive(self) -> bool:
        return all(p.alive() for p in self.procs)

    def _read_ready(self, k: int, timeout_s: float | None) -> bool:
        """Consume worker k's start-up message if it is there (wait up to ``timeout_s``; None: block)."""
        if self._ready[k]:
            return True
        proc = self.procs[k]
        if timeout_s is not None and not proc.has_output(timeout_s):
            return False
        kind, _ = proc.receive()
        self._ready[k] = kind == "ready"
        return self._ready[k]

    def ready(self) -> bool:
        """Whether every worker has finished starting (does not wait)."""
        try:
            return all(self._read_ready(k, 0.0) for k in range(self.size))
        except (EOFError, OSError, pickle.UnpicklingError):
            return False

    def close(self) -> None:
        for p in self.procs:
            p.close("exit", 5.0)

    def kill(self) -> None:
        for p in self.procs:
            p.kill()

    def _serve(self, k: int, header, pending: deque, guard: threading.Lock, out: queue.Queue,
               started: threading.Event) -> None:
        proc = self.procs[k]
        try:
            self._read_ready(k, None)
            started.set()
            proc.send(header, flush=False)
            in_flight = 0
            finished = False
            while True:
                while not finished and in_flight < IN_FLIGHT:
                    with guard:
                        task = pending.popleft() if pending else None
                    if task is None:
                        proc.send(None, flush=False)
                        finished = True
                    else:
                        proc.send(task, flush=False)
                        in_flight += 1
                proc.flush()
                kind, payload = proc.receive()
                if kind == "result":
                    in_flight -= 1
                    out.put(("result", payload))
                elif kind == "done":
                    out.put(("done", None))
                    return
                else:
                    out.put(("error", payload))
                    return
        except (EOFError, OSError, pickle.UnpicklingError) as exc:
            out.put(("error", f"worker process ended unexpectedly ({type(exc).__name__})"))

    def run(self, header, tasks, local: Callable | None = None):
        """Yield the result of every task (in completion order).

        ``local(task) -> result``, when given, computes tasks in the calling thread while some
        worker is still starting, so that a pool started late costs no idle time.
        """
        with self.lock:
            pending = deque(tasks)
            guard = threading.Lock()
            out: queue.Queue = queue.Queue()
            started = [threading.Event() for _ in range(self.size)]
            threads = [threading.Thread(target=self._serve, args=(k, header, pending, guard, out, started[k]),
                                        daemon=True) for k in range(self.size)]
            for t in threads:
                t.start()
            finished = 0
            try:
                while finished < len(threads):
                    task = None
                    if local is not None and not all(e.is_set() for e in started):
                        with guard:
                            task = pending.popleft() if pending else None
                    if task is not None:
                        yield local(task)
                        messages = []
                        while not out.empty():
                            messages.append(out.get_nowait())
                    else:
                        messages = [out.get()]
                    for kind, payload in messages:
                        if kind == "result":
                            yield payload
                        elif kind == "done":
                            finished += 1
                        else:
                            raise CalculationError(f"Hessian worker failed: {payload}")
            except BaseException:
                self.kill()  # a broken or abandoned job: the next Hessian starts a fresh pool
                raise


_POOL: WorkerPool | None = None
_POOL_LOCK = threading.Lock()


def get_pool(size: int) -> WorkerPool:
    """The process-wide pool with ``size`` workers (started, or restarted if dead or of another size)."""
    global _POOL
    with _POOL_LOCK:
        if _POOL is None or _POOL.size != size or not _POOL.alive():
            if _POOL is not None:
                _POOL.kill()
            _POOL = WorkerPool(size)
        return _POOL


def prestart(size: int) -> None:
    """Start the pool now (non-blocking), so that its start-up overlaps other work."""
    if size > 1:
        get_pool(size)


def pool_is_ready(size: int) -> bool:
    """Whether a pool of ``size`` workers is running and done starting."""
    return _POOL is not None and _POOL.size == size and _POOL.alive() and _POOL.ready()


def shutdown() -> None:
    """Stop the pool (also done at interpreter exit)."""
    global _POOL
    with _POOL_LOCK:
        if _POOL is not None:
            _POOL.close()
            _POOL = None


atexit.register(shutdown)


def run_in_workers(numbers, x0, charge, uhf, settings, guess_path, steps, tasks, workers: int,
                   local: Callable | None = None):
    """Yield (j, sign, gradient, dipole) for every task (x0 + sign * steps[:, j]), computed by
    the pool's ``workers`` processes (and by ``local`` in this process while workers are still
    starting)."""
    header = (np.asarray(numbers), np.asarray(x0), charge, uhf, settings, guess_path, np.asarray(steps))
    yield from get_pool(workers).run(header, tasks, local)
