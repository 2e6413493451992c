"""Entry point of one batch worker process (see :mod:`vibest.batch.pool`).

Reads ``(job_id, smiles, options)`` pickles from stdin until ``None``; writes one
:class:`vibest.batch.task.TaskOutcome` pickle per job to the private result pipe. Anything a
library prints goes to stderr, never into the result stream. The worker exits by itself when
the coordinating process disappears (even after SIGKILL), within a second.
"""

from __future__ import annotations

import pickle
import sys


def _main() -> None:
    from vibest.calculation.worker_setup import detach, jobs

    results = detach()
    from vibest.batch.task import run_task

    for job in jobs(sys.stdin.buffer):
        pickle.dump(run_task(*job), results)
        results.flush()


if __name__ == "__main__":
    _main()
