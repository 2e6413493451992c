"""Start-up shared by vibest's worker processes (Hessian workers, batch workers)."""

from __future__ import annotations

import os
import signal
import sys
import threading
import time


def _exit_when_orphaned(parent: int) -> None:
    while True:
        time.sleep(1.0)
        if os.getppid() != parent:
            os._exit(1)


def detach():
    """Prepare a worker process and return the binary stream for its results.

    Ctrl-C is left to the coordinating process (it reaches the whole process group); stray
    prints of libraries go to stderr instead of the result stream; the worker exits by itself
    within a second when the coordinating process disappears (even after SIGKILL)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    results = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)
    sys.stdout = sys.stderr
    threading.Thread(target=_exit_when_orphaned, args=(os.getppid(),), daemon=True).start()
    return results


def jobs(stream):
    """Objects pickled to ``stream`` by the coordinator, until it closes or sends None or "exit"."""
    import pickle

    while True:
        try:
            job = pickle.load(stream)
        except EOFError:
            return
        if job is None or (isinstance(job, str) and job == "exit"):
            return
        yield job


def close_process(proc, timeout_s: float = 10.0) -> None:
    """Wait for a child process (killing it after ``timeout_s``) and close its pipes."""
    import subprocess

    try:
        proc.wait(timeout=timeout_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
    for pipe in (proc.stdin, proc.stdout):
        try:
            if pipe is not None:
                pipe.close()
        except (OSError, ValueError):
            pass
