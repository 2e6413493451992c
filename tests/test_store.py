"""The SQLite result store: exact round trip, keys, schema migration, concurrent writers.

External references: SQLite's own ``PRAGMA integrity_check`` judges the file; RDKit's InChIKey
(standard InChI) is the structure identity.
"""

from __future__ import annotations

import dataclasses
import pickle
import os
import sqlite3
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from vibest.calculation.engine import EngineSettings
from vibest.errors import InputError
from vibest.pipeline import CalculationOptions
from vibest.store import MIGRATIONS, SCHEMA_VERSION, RecordStore, _encode, structure_identity

from .conftest import record_of


def test_round_trip_is_exact(tmp_path):
    rec = record_of("O")
    store = RecordStore(tmp_path / "s.sqlite")
    store.put("O", CalculationOptions(), rec)
    back = store.get("[H]O[H]", CalculationOptions())  # same structure, other spelling
    assert back is not None
    np.testing.assert_array_equal(back.hessian_hartree_bohr2, rec.hessian_hartree_bohr2)
    np.testing.assert_array_equal(back.dipole_derivatives_e, rec.dipole_derivatives_e)
    np.testing.assert_array_equal(back.positions_angstrom, rec.positions_angstrom)
    assert back.energy_hartree == rec.energy_hartree and back.bonds == rec.bonds
    assert store.integrity_check() == "ok" and store.count() == 1


def test_key_changes_with_every_result_setting(tmp_path):
    store = RecordStore(tmp_path / "s.sqlite")
    base = CalculationOptions()
    keys = {store.key("CCO", base),
            store.key("CCO", dataclasses.replace(base, seed=1)),
            store.key("CCO", dataclasses.replace(base, engine=EngineSettings(solvent="water"))),
            store.key("CCO", dataclasses.replace(base, hessian_step_bohr=0.01)),
            store.key("COC", base)}
    assert len(keys) == 5
    # the worker count does not change the numbers, so it does not change the key
    assert store.key("OCC", dataclasses.replace(base, workers=7)) == store.key("CCO", base)
    # explicit Cartesian displacements have a key of their own
    assert store.key("CCO", dataclasses.replace(base, hessian_displacements="cartesian")) not in keys


def test_records_stored_before_the_displacement_option_serve_default_requests(tmp_path):
    """A store written before CalculationOptions had hessian_displacements (its keys hashed the
    options without it) still answers default requests: the default displacements give the same
    numbers to finite-difference noise (tests/test_pipeline.py), so a store is not recomputed."""
    import hashlib
    import json

    from vibest.calculation.record import RECORD_VERSION
    from vibest.store import CALCULATION_VERSION

    rec = record_of("O")
    store = RecordStore(tmp_path / "s.sqlite")
    old_options = CalculationOptions().to_dict()
    del old_options["hessian_displacements"]
    del old_options["start_conformers"]  # water has no rotor: one start either way, not in its key
    canonical, inchikey = structure_identity("O")
    payload = json.dumps({"smiles": canonical, "inchikey": inchikey, "options": old_options,
                          "record_version": RECORD_VERSION, "calculation_version": CALCULATION_VERSION},
                         sort_keys=True, default=str)
    assert store.put("O", CalculationOptions(), rec) == hashlib.sha256(payload.encode()).hexdigest()
    assert store.get("O", CalculationOptions()) is not None
    assert store.get("O", CalculationOptions(hessian_displacements="cartesian")) is None


def test_structure_identity_uses_standard_inchikey():
    # Ethanol's standard InChIKey (PubChem CID 702, from memory): LFQSCWFLJHTTHZ-UHFFFAOYSA-N
    assert structure_identity("OCC") == ("CCO", "LFQSCWFLJHTTHZ-UHFFFAOYSA-N")
    with pytest.raises(InputError):
        structure_identity("C1CC")


def test_version_1_file_is_migrated(tmp_path):
    path = tmp_path / "old.sqlite"
    rec = record_of("O")
    conn = sqlite3.connect(path)
    MIGRATIONS[1](conn)
    conn.execute("INSERT INTO records VALUES (?, ?, ?, ?, ?, ?)",
                 ("k1", "XLYOFNOQVPJJNP-UHFFFAOYSA-N", "O", "{}", time.time(), _encode(rec)))
    conn.execute("PRAGMA user_version = 1")
    conn.commit()
    conn.close()
    store = RecordStore(path)
    assert store.schema_version() == SCHEMA_VERSION
    assert store.get_by_key("k1").energy_hartree == rec.energy_hartree
    assert list(store.rows()) == [("k1", "O", "XLYOFNOQVPJJNP-UHFFFAOYSA-N", 3, rec.energy_hartree, "", "")]
    assert store.integrity_check() == "ok"  # the migration gave the old row its checksum
    assert store.integrity_check() == "ok"


def test_newer_or_foreign_files_are_refused_not_altered(tmp_path):
    newer = tmp_path / "newer.sqlite"
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(InputError, match="newer"):
        RecordStore(newer).count()
    text = tmp_path / "notes.sqlite"
    text.write_text("this is not a database\n" * 100)
    with pytest.raises(InputError, match="not a usable"):
        RecordStore(text).count()
    assert text.read_text().startswith("this is not")
    with pytest.raises(InputError, match="directory"):
        RecordStore(tmp_path).count()


def test_failures_are_kept_until_success(tmp_path):
    store = RecordStore(tmp_path / "s.sqlite")
    opts = CalculationOptions()
    key = store.put_failure("O", opts, "SCF did not converge")
    assert store.failure(key) == "SCF did not converge" and store.failure_count() == 1
    store.put("O", opts, record_of("O"))
    assert store.failure(key) is None and store.count() == 1


WRITER = textwrap.dedent("""
    import dataclasses, pickle, sys
    from vibest.pipeline import CalculationOptions
    from vibest.store import RecordStore
    path, rec_file, worker, count = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])
    rec = pickle.load(open(rec_file, "rb"))
    store = RecordStore(path)
    for i in range(count):
        store.put("O", dataclasses.replace(CalculationOptions(), seed=1000 * worker + i), rec)
""")


def test_concurrent_writers_lose_nothing(tmp_path):
    """Four processes write 25 records each into one file at the same time."""
    rec_file = tmp_path / "rec.pkl"
    rec_file.write_bytes(pickle.dumps(record_of("O")))
    path = tmp_path / "shared.sqlite"
    procs = [subprocess.Popen([sys.executable, "-c", WRITER, str(path), str(rec_file), str(w), "25"],
                              stderr=subprocess.PIPE) for w in range(4)]
    for p in procs:
        _, err = p.communicate(timeout=120)
        assert p.returncode == 0, err.decode()
    store = RecordStore(path)
    assert store.count() == 100
    assert store.integrity_check() == "ok"
    for w in range(4):
        for i in (0, 24):
            assert store.get("O", dataclasses.replace(CalculationOptions(), seed=1000 * w + i)) is not None


def test_another_programs_sqlite_file_is_refused_and_left_unaltered(tmp_path):
    path = tmp_path / "theirs.sqlite"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE invoices (id INTEGER, total REAL)")
    conn.commit()
    conn.close()
    before = path.read_bytes()
    with pytest.raises(InputError, match="another program"):
        RecordStore(path).count()
    assert path.read_bytes() == before and not (tmp_path / "theirs.sqlite-wal").exists()


def test_a_damaged_record_is_found_by_the_integrity_check_and_recomputed(tmp_path):
    from .conftest import record_of

    store = RecordStore(tmp_path / "s.sqlite")
    options = CalculationOptions(workers=1)
    key = store.put("O", options, record_of("O"))
    conn = sqlite3.connect(tmp_path / "s.sqlite")
    blob = conn.execute("SELECT record FROM records WHERE key = ?", (key,)).fetchone()[0]
    damaged = bytearray(blob)
    damaged[len(damaged) // 2] ^= 0xFF  # one flipped byte inside the compressed record
    conn.execute("UPDATE records SET record = ? WHERE key = ?", (bytes(damaged), key))
    conn.commit()
    conn.close()
    fresh = RecordStore(tmp_path / "s.sqlite")
    assert "1 damaged record(s): O" in fresh.integrity_check()
    assert fresh.get("O", options) is None  # not served: computed anew on request


def test_claims_share_work_between_processes(tmp_path):
    """A key claimed by a live process is not claimed again; a dead process's claim is taken over."""
    import subprocess
    import sys as _sys

    store = RecordStore(tmp_path / "s.sqlite")
    store.count()
    mine, held = store.claim(["a", "b"])
    assert mine == ["a", "b"] and not held
    other = subprocess.run([_sys.executable, "-c", (
        "from vibest.store import RecordStore; import sys; s = RecordStore(sys.argv[1]);"
        "mine, held = s.claim(['b', 'c']); print(mine, sorted(held))"), str(tmp_path / "s.sqlite")],
        capture_output=True, text=True)
    assert other.stdout.strip() == "['c'] ['b']", other.stderr
    # the other process has exited: its claim on c is void and taken over
    assert store.claim(["c"]) == (["c"], {})
    store.release(["a", "b", "c"])
    assert sqlite3.connect(tmp_path / "s.sqlite").execute("SELECT COUNT(*) FROM claims").fetchone()[0] == 0


def test_a_store_that_cannot_be_written_or_read_never_costs_the_result(tmp_path, monkeypatch):
    """A read-only or full store (sqlite3 errors as SQLite raises them) only adds a note."""
    from vibest.pipeline import SpectrumOptions
    from vibest.ranking import predict_stored

    store = RecordStore(tmp_path / "s.sqlite")

    def full(*a, **k):
        raise sqlite3.OperationalError("database or disk is full")

    monkeypatch.setattr(store, "put", full)
    pred, hit = predict_stored("O", CalculationOptions(workers=1), SpectrumOptions(), store)
    assert pred.bands and not hit and any("could not be written" in n for n in pred.notes)

    def unreadable(*a, **k):
        raise sqlite3.OperationalError("attempt to read a locked database")

    monkeypatch.setattr(store, "get", unreadable)
    pred, hit = predict_stored("O", CalculationOptions(workers=1), SpectrumOptions(), store)
    assert pred.bands and any("could not be read" in n for n in pred.notes)


def test_start_conformer_search_is_in_the_key_of_flexible_molecules_only():
    """Records of a flexible molecule computed from one embedding (before the search existed, or
    with it switched off) do not answer default requests; a rigid molecule's key is unchanged."""
    import dataclasses

    on, off = CalculationOptions(), dataclasses.replace(CalculationOptions(), start_conformers=False)
    assert RecordStore.key_of("CCCCO", "", on) != RecordStore.key_of("CCCCO", "", off)
    assert RecordStore.key_of("c1ccccc1", "", on) == RecordStore.key_of("c1ccccc1", "", off)
