"""Entry point of one persistent Hessian worker process (see :mod:`vibest.calculation.workers`).

Serves jobs until it reads "exit" or its input closes; exits by itself within a second when the
coordinating process disappears. Stray prints of libraries go to stderr, never into the result
stream. Ctrl-C is left to the coordinating process.
"""

from __future__ import annotations

import pickle
import sys


def _main() -> None:
    from vibest.calculation.worker_setup import detach, jobs

    results = detach()
    from vibest.calculation.engine import make_engine
    from vibest.calculation.hessian import evaluate_block

    pickle.dump(("ready", None), results)  # imports done: the pool may count on this worker
    results.flush()

    stream = sys.stdin.buffer
    for header in jobs(stream):
        try:
            numbers, x0, charge, uhf, settings, guess, steps = header
            engine = make_engine(numbers, x0, charge, uhf, settings)
            for task in jobs(stream):  # until the job's closing None
                (item,) = evaluate_block(engine, x0, guess, [task], steps)
                pickle.dump(("result", item), results)
                results.flush()
            pickle.dump(("done", None), results)
            results.flush()
        except Exception as exc:
            pickle.dump(("error", f"{type(exc).__name__}: {exc}"), results)
            results.flush()
            return


if __name__ == "__main__":
    _main()
