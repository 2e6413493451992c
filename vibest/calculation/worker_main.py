"""Entry point of one Hessian worker process (see :mod:`vibest.calculation.workers`)."""

from __future__ import annotations

import pickle
import sys


def _main() -> None:
    from vibest.calculation.engine import make_engine
    from vibest.calculation.hessian import evaluate_block

    stdout = sys.stdout.buffer
    try:
        numbers, x0, charge, uhf, settings, guess, step, tasks = pickle.load(sys.stdin.buffer)
        engine = make_engine(numbers, x0, charge, uhf, settings)
        for task in tasks:
            (item,) = evaluate_block(engine, x0, guess, [task], step)
            pickle.dump(("result", item), stdout)
            stdout.flush()
        pickle.dump(("done", None), stdout)
    except Exception as exc:
        pickle.dump(("error", f"{type(exc).__name__}: {exc}"), stdout)
    stdout.flush()


if __name__ == "__main__":
    _main()
