"""The unit of batch work: one SMILES -> one Hessian record, or a reason why not.

A plain top-level function of picklable arguments, so that it runs the same in a local worker
process and on a Dask worker. It never raises for a problem of the molecule: the outcome says
what went wrong, so one bad molecule never stops a batch.
"""

from __future__ import annotations

import dataclasses
import time
import traceback
from dataclasses import dataclass

from ..calculation.record import HessianRecord
from ..errors import VibestError
from ..pipeline import CalculationOptions


@dataclass(frozen=True)
class TaskOutcome:
    """Result of one task: ``record`` when it worked, else ``reason`` (one line for the user)."""

    job_id: int
    record: HessianRecord | None
    reason: str | None
    seconds: float


def run_task(job_id: int, smiles: str, options: CalculationOptions) -> TaskOutcome:
    """Build the molecule of ``smiles`` and compute its record with ``options`` (one core)."""
    from ..pipeline import compute_record
    from ..structure import build_molecule

    t0 = time.perf_counter()
    options = dataclasses.replace(options, workers=1)  # parallel over molecules, not inside one
    try:
        mol = build_molecule(smiles, seed=options.seed, largest_fragment=options.largest_fragment,
                             allow_large=options.allow_long, start_conformers=options.start_conformers)
        record, _, _ = compute_record(mol, options)
        return TaskOutcome(job_id, record, None, time.perf_counter() - t0)
    except VibestError as exc:
        return TaskOutcome(job_id, None, str(exc), time.perf_counter() - t0)
    except MemoryError:
        return TaskOutcome(job_id, None, "out of memory", time.perf_counter() - t0)
    except Exception as exc:  # a defect in vibest or a library: keep the batch going, say what it was
        last = traceback.extract_tb(exc.__traceback__)[-1]
        return TaskOutcome(job_id, None, f"internal error {type(exc).__name__}: {exc} "
                                         f"({last.filename.rsplit('/', 1)[-1]}:{last.lineno})",
                           time.perf_counter() - t0)
