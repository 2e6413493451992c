"""Entry point of one batch worker process (see :mod:`vibest.batch.pool`).

Reads ``(job_id, smiles, options)`` pickles from stdin until ``None``; writes one
:class:`vibest.batch.task.TaskOutcome` pickle per job to the private result pipe. Anything a
library prints goes to stderr, never into the result stream. The worker exits by itself when
the coordinating process disappears (even after SIGKILL), within a second.
"""

from __future__ import annotations

import os
import pickle
import signal
import sys
import threading
import time


def _exit_when_orphaned(parent: int) -> None:
    while True:
        time.sleep(1.0)
        if os.getppid() != parent:
            os._exit(1)


def _main() -> None:
    # Ctrl-C reaches the whole process group: the coordinator decides, and kills workers itself.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    results = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # stray prints of libraries go to stderr
    sys.stdout = sys.stderr
    threading.Thread(target=_exit_when_orphaned, args=(os.getppid(),), daemon=True).start()
    from vibest.batch.task import run_task

    jobs = sys.stdin.buffer
    while True:
        try:
            job = pickle.load(jobs)
        except EOFError:
            return
        if job is None:
            return
        pickle.dump(run_task(*job), results)
        results.flush()


if __name__ == "__main__":
    _main()
