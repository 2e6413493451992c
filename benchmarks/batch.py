"""Batch throughput: molecules per minute with 1 and 2 local workers on the same set.

Each run starts from an empty result store (a temporary file), so every molecule is computed;
a third run over the filled store shows the cost of skipping stored molecules. With 1 worker the
molecules run in the coordinating process (no worker start-up; tblite's own OpenMP threads at
their default); with 2, in two single-threaded worker processes. With --dask, the
2-worker run is repeated on a dask.distributed LocalCluster (2 processes, 1 thread each).
Not a test: figures only.

    python benchmarks/batch.py [--quick] [--dask]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from vibest.batch import predict_many

# drug-like and small organic molecules, 8-40 atoms (a screening-script mix)
MOLECULES = [
    "CCO", "CC(C)=O", "CCOC(C)=O", "c1ccccc1", "Cc1ccccc1", "CC(=O)Nc1ccccc1", "CCCCCC", "CCCCO",
    "c1ccc2ccccc2c1", "CCN(CC)CC", "OC(=O)c1ccccc1", "CC(C)CC(C)C", "COc1ccccc1", "CCCC(=O)OC",
    "NCCc1ccccc1", "Oc1ccccc1C", "CC(=O)Oc1ccccc1C(=O)O", "CN1C=NC2=C1C(=O)N(C)C(=O)N2C",
    "CC(C)Cc1ccc(cc1)C(C)C(=O)O", "O=C(O)CCCCC(=O)O", "ClC(Cl)Cl", "FC(F)(F)c1ccccc1", "CCS", "N#Cc1ccccc1",
]


def run(molecules, workers=None, client=None, store=None):
    t0 = time.perf_counter()
    entries = predict_many(molecules, store=store, workers=workers, client=client)
    seconds = time.perf_counter() - t0
    bad = [e for e in entries if not e.ok]
    if bad:
        print("  failures:", "; ".join(f"{e.smiles}: {e.reason}" for e in bad))
    return seconds, entries


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="first 8 molecules only")
    ap.add_argument("--dask", action="store_true", help="also run on a Dask LocalCluster with 2 workers")
    args = ap.parse_args()
    mols = MOLECULES[:8] if args.quick else MOLECULES
    with tempfile.TemporaryDirectory() as tmp:
        results = {}
        for workers in (1, 2):
            store = Path(tmp) / f"w{workers}.sqlite"
            seconds, entries = run(mols, workers=workers, store=store)
            results[workers] = seconds
            computed = sum(e.status == "computed" for e in entries)
            print(f"{workers} worker(s): {computed} molecules computed in {seconds:7.1f} s = "
                  f"{60 * computed / seconds:6.1f} molecules/min")
        seconds, entries = run(mols, workers=2, store=Path(tmp) / "w2.sqlite")
        print(f"re-run over the filled store: {sum(e.status == 'stored' for e in entries)} stored, {seconds:.2f} s "
              f"({seconds / len(mols) * 1000:.0f} ms per molecule: analysis only)")
        print(f"speed-up 2 vs 1 worker: {results[1] / results[2]:.2f}x "
              f"(parallel efficiency {results[1] / results[2] / 2:.0%})")
        if args.dask:
            import distributed

            with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                          dashboard_address=None, silence_logs=40) as cluster, \
                    distributed.Client(cluster) as client:
                client.wait_for_workers(2)
                seconds, entries = run(mols, client=client, store=Path(tmp) / "dask.sqlite")
            print(f"Dask LocalCluster, 2 workers: {seconds:7.1f} s = {60 * len(mols) / seconds:6.1f} molecules/min "
                  "(cluster start-up not included)")


if __name__ == "__main__":
    main()
