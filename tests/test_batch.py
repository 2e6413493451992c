"""Batch runs: local pool, Dask LocalCluster, interruption by SIGKILL, stored failures, CLI.

External references: SQLite's ``PRAGMA integrity_check``; dask.distributed's LocalCluster runs
the same task function on real Dask workers; the cross-checks compare vibest with itself
through different executors (same numbers expected to SCF noise, common practice, no source).
"""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from click.testing import CliRunner

from vibest.batch import predict_many
from vibest.batch.pool import LocalPool
from vibest.batch.task import run_task
from vibest.cli import main
from vibest.pipeline import CalculationOptions
from vibest.store import RecordStore

SMALL = [("water", "O"), ("methanol", "CO"), ("formaldehyde", "C=O"), ("acetonitrile", "CC#N"),
         ("ammonia", "N")]


def _records(store: RecordStore, smiles_list):
    return [store.get(s, CalculationOptions()) for s in smiles_list]


def test_local_pool_matches_in_process_and_rerun_skips(tmp_path):
    rows = SMALL + [("broken", "C1CC"), ("methanol again", "OC")]
    pooled = predict_many(rows, store=tmp_path / "pool.sqlite", workers=2)
    predict_many(rows, store=tmp_path / "serial.sqlite", workers=1)
    assert [e.status for e in pooled] == ["computed"] * 5 + ["failed", "computed"]
    assert "cannot parse" in pooled[5].reason
    assert [e.row for e in pooled] == list(range(1, 8)) and pooled[6].canonical_smiles == "CO"
    for a, b in zip(_records(RecordStore(tmp_path / "pool.sqlite"), [s for _, s in SMALL]),
                    _records(RecordStore(tmp_path / "serial.sqlite"), [s for _, s in SMALL])):
        assert abs(a.energy_hartree - b.energy_hartree) < 1e-9
        np.testing.assert_allclose(a.hessian_hartree_bohr2, b.hessian_hartree_bohr2, atol=1e-6)
    assert RecordStore(tmp_path / "pool.sqlite").count() == 5  # the duplicate methanol is computed once
    again = predict_many(rows, store=tmp_path / "pool.sqlite", workers=2)
    assert [e.status for e in again] == ["stored"] * 5 + ["failed", "stored"]
    assert [e.key_bands for e in again] == [e.key_bands for e in pooled]


def test_key_bands_are_trade_facts(tmp_path):
    """Strongest band of acetonitrile is the C#N stretch near 2250 cm^-1 (common practice, no source;
    GFN2-xTB puts it higher, so the window is wide), degenerate C-H stretches of methane count once."""
    entries = predict_many([("acetonitrile", "CC#N"), ("methane", "C")], store=tmp_path / "s.sqlite", workers=1)
    top = entries[0].key_bands[0]
    assert "C\u2261N stretch" in top.label and 2150 < top.wavenumber_cm1 < 2350
    ch = [b for b in entries[1].key_bands if "C-H stretch" in b.label]
    assert len(ch) == len({round(b.wavenumber_cm1) for b in ch})


def test_failure_is_stored_and_retried_on_request(tmp_path):
    store = tmp_path / "s.sqlite"
    first = predict_many([("helium", "[He]"), ("water", "O")], store=store, workers=1)
    assert first[0].status == "failed" and first[0].reason and first[1].status == "computed"
    second = predict_many([("helium", "[He]")], store=store, workers=1)
    assert second[0].status == "failed" and "stored failure" in second[0].reason
    third = predict_many([("helium", "[He]")], store=store, workers=1, retry_failed=True)
    assert third[0].status == "failed" and "stored failure" not in third[0].reason


def test_worker_death_is_reported_for_that_molecule_only():
    """A worker killed mid-job (as the kernel's OOM killer would) fails its molecule; the pool goes on."""
    jobs = [(0, "CCCCCCCCCCCCCCCC", CalculationOptions()), (1, "O", CalculationOptions())]
    pool = LocalPool(1)
    gen = pool.run(jobs)
    killer_started = time.perf_counter()

    def kill_soon():
        while time.perf_counter() - killer_started < 20:
            with pool._lock:
                procs = list(pool._procs)
            if procs:
                time.sleep(1.5)  # inside the first (slow) job
                procs[0].kill(wait=False)  # a signal, as the OOM killer sends
                return
            time.sleep(0.05)

    import threading

    threading.Thread(target=kill_soon, daemon=True).start()
    got = {o.job_id: o for o in gen}
    assert set(got) == {0, 1}
    assert got[0].record is None and "worker process died" in got[0].reason
    assert got[1].record is not None


@pytest.mark.slow
def test_dask_local_cluster_gives_the_same_results(tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as cluster, distributed.Client(cluster) as client:
        dask_entries = predict_many(SMALL, store=tmp_path / "dask.sqlite", client=client)
    local_entries = predict_many(SMALL, store=tmp_path / "local.sqlite", workers=2)
    assert [e.status for e in dask_entries] == ["computed"] * len(SMALL)
    for a, b in zip(_records(RecordStore(tmp_path / "dask.sqlite"), [s for _, s in SMALL]),
                    _records(RecordStore(tmp_path / "local.sqlite"), [s for _, s in SMALL])):
        assert abs(a.energy_hartree - b.energy_hartree) < 1e-9
        np.testing.assert_allclose(a.hessian_hartree_bohr2, b.hessian_hartree_bohr2, atol=1e-6)
    assert [[(round(k.wavenumber_cm1, 3), k.label) for k in e.key_bands] for e in dask_entries] == \
           [[(round(k.wavenumber_cm1, 3), k.label) for k in e.key_bands] for e in local_entries]


#: The last four are larger (seconds each), so that the batch is still at work when it is stopped:
#: with small molecules only, a stop that came late (the test's read of the busy store can lag)
#: found every row done, and the batch rightly ended with exit 0 (a flake seen once in CI, 2026-12-04).
KILL_SET = ["CCCCCC", "Cc1ccccc1", "CCOC(C)=O", "CC(=O)Nc1ccccc1", "CCCCO", "c1ccc2ccccc2c1", "CCN(CC)CC",
            "OC(=O)c1ccccc1", "CCCCCCC", "CC(C)CC(C)C", "CCc1ccccc1", "COc1ccccc1", "CCCC(=O)OC", "CC(C)O",
            "NCCc1ccccc1", "Oc1ccccc1C", "CCCCCCCCCCCC", "c1ccc(cc1)-c1ccccc1", "CC(C)(C)c1ccc(O)cc1",
            "CCCCCCCCCCO"]


def _worker_children(pid: int) -> list[int]:
    out = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/cmdline", "rb") as fh:
                    if b"vibest.batch.worker_main" in fh.read():
                        out.append(int(entry))
            except OSError:
                pass
    return out


def _stored_count(path) -> int:
    """Records in the store, read without writing and without waiting on the batch's writes (a
    RecordStore would run its schema set-up, which can wait seconds for the write lock, long
    enough for a small batch to finish before it is interrupted)."""
    import contextlib
    import sqlite3

    try:
        with contextlib.closing(sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=0.2)) as conn:
            return int(conn.execute("SELECT COUNT(*) FROM records").fetchone()[0])
    except sqlite3.Error:
        return 0


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGINT], ids=["SIGKILL", "SIGINT"])
def test_killed_batch_then_rerun_completes(tmp_path, sig):
    inp = tmp_path / "set.txt"
    inp.write_text("".join(f"{s} mol{i:02d}\n" for i, s in enumerate(KILL_SET)))
    store_path = tmp_path / "store.sqlite"
    cmd = [sys.executable, "-m", "vibest.cli", "batch", str(inp), "--store", str(store_path), "--workers", "2",
           "-q", "-o", str(tmp_path / "out.csv")]
    before = set(_worker_children(0))
    log = tmp_path / "batch.log"
    with open(log, "w") as err:
        # a shell without job control starts background commands with SIGINT ignored, and a
        # child inherits that (the batch would then finish as if never interrupted): restore it
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=err,
                                preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.time() + 120
    while time.time() < deadline and proc.poll() is None:
        if _stored_count(store_path) >= 3:
            break
        time.sleep(0.1)
    assert proc.poll() is None, "batch finished before it could be killed; use a larger set"
    os.kill(proc.pid, sig)
    code = proc.wait(timeout=60)
    if sig == signal.SIGINT:  # an orderly stop: exit 130 and a table that says what is not done
        assert code == 130, log.read_text()
        with open(tmp_path / "out.csv") as fh:
            first = [r["status"] for r in csv.DictReader(l for l in fh if not l.startswith("#"))]
        assert len(first) == len(KILL_SET) and "not run" in first
    # the workers notice that their coordinator is gone and stop within seconds
    t0 = time.time()
    while set(_worker_children(0)) - before and time.time() - t0 < 10:
        time.sleep(0.2)
    assert not (set(_worker_children(0)) - before), "orphaned batch workers kept running"
    store = RecordStore(store_path)
    assert store.integrity_check() == "ok"
    kept = store.count()
    assert 3 <= kept < len(KILL_SET)
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    assert res.returncode == 0, res.stderr
    with open(tmp_path / "out.csv") as fh:
        rows = list(csv.DictReader(l for l in fh if not l.startswith("#")))
    assert len(rows) == len(KILL_SET)
    statuses = [r["status"] for r in rows]
    assert statuses.count("stored") >= kept and set(statuses) <= {"stored", "computed"}
    assert statuses.count("computed") == len(KILL_SET) - statuses.count("stored")
    store = RecordStore(store_path)
    assert store.integrity_check() == "ok"
    assert store.count() == len(KILL_SET)
    assert len({smiles for _, smiles, *_ in store.rows()}) == len(KILL_SET)


def test_cli_batch_writes_table_and_reports_failures(tmp_path):
    inp = tmp_path / "in.csv"
    inp.write_text("name,smiles\nwater,O\nnonsense,C1CC\nmethanol,CO\n")
    res = CliRunner().invoke(main, ["batch", str(inp), "--store", str(tmp_path / "s.sqlite"), "--workers", "1",
                                    "--output-dir", str(tmp_path / "files")])
    assert res.exit_code == 0, res.output
    assert "computed 2, from store 0, failed 1" in res.output and "row 2 nonsense" in res.output
    table = tmp_path / "in.vibest.csv"
    lines = table.read_text().splitlines()
    assert lines[0].startswith("row,name,smiles")  # a table from its first line; the caution beside it
    assert "Predicted spectra are estimates" in (tmp_path / "in.vibest.csv.meta.json").read_text()
    rows = list(csv.DictReader(lines))
    assert [r["status"] for r in rows] == ["computed", "failed", "computed"]
    assert all(os.path.exists(f) for f in rows[0]["files"].split(";"))
    res = CliRunner().invoke(main, ["store", "--store", str(tmp_path / "s.sqlite"), "--list"])
    assert res.exit_code == 0 and "2 records, 0 failures, integrity ok" in res.output  # unreadable SMILES fail at once, unstored


def test_cli_batch_bad_input_is_one_line(tmp_path):
    res = CliRunner().invoke(main, ["batch", str(tmp_path / "missing.txt")])
    assert res.exit_code == 2 and "no such file" in res.output and "Traceback" not in res.output


def test_run_task_never_raises_for_a_bad_molecule():
    out = run_task(3, "C1CC", CalculationOptions())
    assert out.job_id == 3 and out.record is None and "parse" in out.reason


def test_key_bands_lie_in_the_spectrum_range():
    """Ethanol's strongest GFN2-xTB band is its O-H torsion near 300 cm^-1 (below the 400 cm^-1 an
    IR spectrometer usually starts at): the batch table lists bands of the spectrum range."""
    from vibest.batch.run import key_bands

    from .conftest import prediction_of

    pred = prediction_of("CCO")
    assert min(b.wavenumber_cm1 for b in pred.strongest(1)) < 400  # the case the rule is for
    assert all(k.wavenumber_cm1 >= 400 for k in key_bands(pred))
