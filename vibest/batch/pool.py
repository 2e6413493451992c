"""Where batch tasks run: a pool of local worker processes, or a Dask cluster.

Both executors take an iterable of jobs ``(job_id, smiles, options)`` and yield
:class:`~vibest.batch.task.TaskOutcome` objects as they finish (in completion order). Results come
back to the coordinating process, which alone writes the result store.

Memory stays bounded: each local worker holds one molecule at a time and is replaced after
``max_tasks_per_worker`` jobs; the Dask executor keeps at most ``window`` tasks in flight.
"""

from __future__ import annotations

import os
import pickle
import queue
import threading
from typing import Iterable, Iterator

from ..calculation.processes import WorkerProcess
from .task import TaskOutcome, run_task

Job = tuple  # (job_id, smiles, CalculationOptions)


class LocalPool:
    """``workers`` single-threaded :class:`~vibest.calculation.processes.WorkerProcess` es running
    ``vibest.batch.worker_main``, each replaced after ``max_tasks_per_worker`` jobs."""

    def __init__(self, workers: int, max_tasks_per_worker: int = 50):
        if workers < 1:
            raise ValueError("workers must be at least 1")
        self.workers = int(workers)
        self.max_tasks_per_worker = int(max_tasks_per_worker)
        self._procs: set[WorkerProcess] = set()
        self._lock = threading.Lock()
        self._stop = threading.Event()

    def _start(self) -> WorkerProcess:
        proc = WorkerProcess("vibest.batch.worker_main")
        with self._lock:
            self._procs.add(proc)
        return proc

    def _retire(self, proc: WorkerProcess, kill: bool = False) -> None:
        if kill:
            proc.kill()
        else:
            proc.close(None, 10.0)
        with self._lock:
            self._procs.discard(proc)

    def _slot(self, jobs: queue.Queue, out: queue.Queue) -> None:
        proc, done = None, 0
        try:
            while not self._stop.is_set():
                try:
                    job = jobs.get_nowait()
                except queue.Empty:
                    return
                if proc is None or done >= self.max_tasks_per_worker:
                    if proc is not None:
                        self._retire(proc)
                    proc, done = self._start(), 0
                try:
                    proc.send(job)
                    outcome = proc.receive()
                    done += 1
                except (EOFError, OSError, pickle.UnpicklingError):
                    if self._stop.is_set():
                        return
                    code = proc.wait()
                    self._retire(proc, kill=True)
                    proc = None
                    outcome = TaskOutcome(job[0], None, f"worker process died (exit code {code}; killed, "
                                                        f"crashed or out of memory)", 0.0)
                out.put(outcome)
        finally:
            if proc is not None:
                self._retire(proc, kill=self._stop.is_set())
            out.put(None)

    def run(self, jobs: Iterable[Job]) -> Iterator[TaskOutcome]:
        pending: queue.Queue = queue.Queue()
        count = 0
        for job in jobs:
            pending.put(job)
            count += 1
        if count == 0:
            return
        out: queue.Queue = queue.Queue()
        slots = min(self.workers, count)
        self._stop.clear()
        threads = [threading.Thread(target=self._slot, args=(pending, out), daemon=True) for _ in range(slots)]
        for t in threads:
            t.start()
        finished = 0
        try:
            while finished < slots:
                item = out.get()
                if item is None:
                    finished += 1
                else:
                    yield item
        finally:
            self._stop.set()
            with self._lock:
                procs = list(self._procs)
            for proc in procs:
                proc.kill(wait=False)
            for t in threads:
                t.join(timeout=10)


class InProcessPool:
    """Runs jobs one after another in this process (workers=1 without start-up cost; tests, debugging)."""

    def run(self, jobs: Iterable[Job]) -> Iterator[TaskOutcome]:
        for job in jobs:
            yield run_task(*job)


class DaskPool:
    """Tasks on a ``dask.distributed`` cluster; at most ``window`` in flight (default 2 per worker thread)."""

    def __init__(self, client, window: int | None = None):
        self.client = client
        self.window = window

    @classmethod
    def connect(cls, address: str) -> "DaskPool":
        from ..errors import InputError

        try:
            from dask.distributed import Client
        except ImportError:
            raise InputError("--scheduler needs dask.distributed: pip install 'vibest[dask]'") from None
        try:
            return cls(Client(address, timeout=30))
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {address}: {exc}") from None

    def _threads(self) -> int:
        try:
            return max(1, sum(self.client.nthreads().values()))
        except Exception:  # pragma: no cover - scheduler without workers yet
            return 1

    def run(self, jobs: Iterable[Job]) -> Iterator[TaskOutcome]:
        from dask.distributed import as_completed

        window = self.window or 2 * self._threads()
        jobs = iter(jobs)
        ids = {}

        def submit():
            job = next(jobs, None)
            if job is None:
                return None
            fut = self.client.submit(run_task, *job, pure=False, key=f"vibest-task-{job[0]}-{os.getpid()}-{id(ids)}")
            ids[fut.key] = job[0]
            return fut

        first = [f for f in (submit() for _ in range(window)) if f is not None]
        if not first:
            return
        pending = as_completed(first)
        try:
            for fut in pending:
                try:
                    outcome = fut.result()
                except Exception as exc:  # the task or its worker failed (e.g. KilledWorker)
                    outcome = TaskOutcome(ids[fut.key], None, f"Dask task failed: {type(exc).__name__}: {exc}", 0.0)
                fut.release()
                yield outcome
                nxt = submit()
                if nxt is not None:
                    pending.add(nxt)
        finally:
            for fut in list(pending.futures) if hasattr(pending, "futures") else []:
                fut.cancel()
