"""A persistent result store: Hessian records in an embedded SQLite database.

Re-analysis (other scaling, widths, isotopes, comparisons) reads a stored record instead of
recomputing. Each row is keyed by a SHA-256 of the canonical structure (InChIKey and canonical
SMILES) and every setting that changes the computed numbers (:class:`CalculationOptions`:
level of theory, solvent, embedding seed, convergence, finite-difference step) plus
:data:`CALCULATION_VERSION`, which is raised whenever a vibest release changes the numbers of the
expensive stage. The record (geometry, Hessian, dipole derivatives, settings, timings) is stored
as zlib-compressed JSON, exact to the float repr.

Safety:
- WAL journal mode and a busy timeout, so several processes may read and write at once; every
  write is one short ``BEGIN IMMEDIATE`` transaction, so a process killed at any moment leaves
  either the whole row or none of it.
- The schema version is SQLite's ``PRAGMA user_version``; :data:`MIGRATIONS` upgrades older
  files step by step when they are opened. A file newer than this vibest is refused, not altered.
"""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
import time
import zlib
from pathlib import Path
from typing import Callable, Iterator

from .calculation.methods import without_unused_dft_settings
from .calculation.record import RECORD_VERSION, HessianRecord
from .errors import InputError
from .pipeline import CalculationOptions

#: Raised when a vibest release changes the numbers of the expensive stage for the same settings.
CALCULATION_VERSION = 1
#: Current schema version (PRAGMA user_version).
SCHEMA_VERSION = 3
#: Seconds a writer waits for another writer's lock before giving up.
DEFAULT_TIMEOUT_S = 120.0


def default_store_path() -> Path:
    """$VIBEST_STORE, else $XDG_CACHE_HOME/vibest/store.sqlite, else ~/.cache/vibest/store.sqlite."""
    env = os.environ.get("VIBEST_STORE")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "vibest" / "store.sqlite"


def structure_identity(smiles: str) -> tuple[str, str]:
    """(canonical SMILES, InChIKey) of a SMILES; InChIKey is "" when InChI cannot be made.

    Raises InputError for a SMILES RDKit cannot read."""
    from rdkit import Chem, RDLogger

    from .structure import _check_text

    smiles = _check_text(smiles)  # whitespace and non-ASCII refused, as everywhere
    RDLogger.DisableLog("rdApp.*")
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        raise InputError(f"cannot parse SMILES {smiles!r}")
    canonical = Chem.MolToSmiles(mol)
    try:
        inchikey = Chem.MolToInchiKey(mol) or ""
    except Exception:  # pragma: no cover - InChI library failure
        inchikey = ""
    return canonical, inchikey


def _encode(record: HessianRecord) -> bytes:
    return zlib.compress(json.dumps(record.to_dict()).encode(), 6)


def _decode(blob: bytes) -> HessianRecord:
    return HessianRecord.from_dict(json.loads(zlib.decompress(blob)))


def _migrate_1(conn: sqlite3.Connection) -> None:
    """Version 1: one table of records."""
    conn.execute("""CREATE TABLE IF NOT EXISTS records (
        key TEXT PRIMARY KEY, inchikey TEXT NOT NULL, smiles TEXT NOT NULL, settings TEXT NOT NULL,
        created REAL NOT NULL, record BLOB NOT NULL)""")


def _migrate_2(conn: sqlite3.Connection) -> None:
    """Version 2: per-molecule failures, an InChIKey index, and atom count / energy columns
    (filled from the stored records) for queries without decoding records."""
    conn.execute("""CREATE TABLE IF NOT EXISTS failures (
        key TEXT PRIMARY KEY, inchikey TEXT NOT NULL, smiles TEXT NOT NULL, settings TEXT NOT NULL,
        created REAL NOT NULL, reason TEXT NOT NULL)""")
    conn.execute("ALTER TABLE records ADD COLUMN natoms INTEGER")
    conn.execute("ALTER TABLE records ADD COLUMN energy_hartree REAL")
    conn.execute("ALTER TABLE records ADD COLUMN vibest_version TEXT")
    conn.execute("CREATE INDEX IF NOT EXISTS records_inchikey ON records (inchikey)")
    rows = conn.execute("SELECT key, record FROM records").fetchall()
    for key, blob in rows:
        rec = _decode(blob)
        conn.execute("UPDATE records SET natoms = ?, energy_hartree = ? WHERE key = ?",
                     (rec.natoms, rec.energy_hartree, key))


def _migrate_3(conn: sqlite3.Connection) -> None:
    """Version 3: a SHA-256 checksum of every record (the integrity check verifies them), and
    claims: which process is computing which key, so that two batches on one store share the work."""
    conn.execute("ALTER TABLE records ADD COLUMN checksum TEXT")
    conn.execute("ALTER TABLE records ADD COLUMN name TEXT")
    for key, blob in conn.execute("SELECT key, record FROM records").fetchall():
        conn.execute("UPDATE records SET checksum = ? WHERE key = ?", (_checksum(blob), key))
    conn.execute("""CREATE TABLE IF NOT EXISTS claims (
        key TEXT PRIMARY KEY, host TEXT NOT NULL, pid INTEGER NOT NULL, created REAL NOT NULL)""")


def _claim_alive(host: str, pid: int, created: float, my_host: str, now: float) -> bool:
    if now - created > CLAIM_LIFETIME_S:
        return False
    if host != my_host:
        return True
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _rigid(mol) -> bool:
    """Whether an RDKit molecule (None: unparsable) has no rotor (one start conformer whatever
    the setting)."""
    from .structure import rotor_count

    return mol is None or rotor_count(mol) == 0


def _checksum(blob: bytes) -> str:
    return hashlib.sha256(blob).hexdigest()


#: schema version reached -> function that upgrades from the version before.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {1: _migrate_1, 2: _migrate_2, 3: _migrate_3}
#: The tables a vibest store has (another program's SQLite file is refused, never altered).
OWN_TABLES = {"records", "failures", "claims"}
#: A claim older than this (s) is void (its process died without releasing it, on another host).
CLAIM_LIFETIME_S = 24 * 3600.0


class RecordStore:
    """Hessian records (and per-molecule failures) in one SQLite file.

    Usable from several processes at once; open one store object per process (the connection is
    re-opened automatically after a fork). ``path=None`` uses :func:`default_store_path`.
    """

    def __init__(self, path: str | Path | None = None, timeout_s: float = DEFAULT_TIMEOUT_S):
        self.path = Path(path) if path else default_store_path()
        self.timeout_s = float(timeout_s)
        self._conn: sqlite3.Connection | None = None
        self._pid = -1

    # -- connection and schema -------------------------------------------------------------
    def _connect(self) -> sqlite3.Connection:
        if self._conn is not None and self._pid == os.getpid():
            return self._conn
        if self.path.exists() and self.path.is_dir():
            raise InputError(f"result store {self.path} is a directory; give a file name (e.g. store.sqlite)")
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            conn = sqlite3.connect(str(self.path), timeout=self.timeout_s, isolation_level=None)
        except (OSError, sqlite3.Error) as exc:
            raise InputError(f"cannot open result store {self.path}: {exc}") from None
        try:
            conn.execute(f"PRAGMA busy_timeout = {int(self.timeout_s * 1000)}")
            self._upgrade(conn)  # before WAL: another program's file is refused unaltered
            conn.execute("PRAGMA journal_mode = WAL")
            conn.execute("PRAGMA synchronous = NORMAL")
        except sqlite3.DatabaseError as exc:
            conn.close()
            raise InputError(f"{self.path} is not a usable vibest result store: {exc}") from None
        except InputError:
            conn.close()
            raise
        self._conn, self._pid = conn, os.getpid()
        return conn

    def _upgrade(self, conn: sqlite3.Connection) -> None:
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        if tables - OWN_TABLES:
            raise InputError(f"{self.path} is an SQLite file of another program (tables "
                             f"{', '.join(sorted(tables - OWN_TABLES))}): give a file of its own for the result store")
        if version > SCHEMA_VERSION:
            raise InputError(f"result store {self.path} has schema version {version}, newer than this vibest "
                             f"understands ({SCHEMA_VERSION}); upgrade vibest or use another file")
        if version == SCHEMA_VERSION:
            return
        with self._write(conn):
            version = conn.execute("PRAGMA user_version").fetchone()[0]  # another process may have upgraded
            for target in range(version + 1, SCHEMA_VERSION + 1):
                MIGRATIONS[target](conn)
                conn.execute(f"PRAGMA user_version = {target}")

    class _write:
        """One IMMEDIATE transaction (takes the write lock at once: no lock-upgrade deadlocks)."""

        def __init__(self, conn: sqlite3.Connection):
            self.conn = conn

        def __enter__(self):
            self.conn.execute("BEGIN IMMEDIATE")
            return self.conn

        def __exit__(self, kind, value, tb):
            self.conn.execute("COMMIT" if kind is None else "ROLLBACK")
            return False

    def close(self) -> None:
        if self._conn is not None and self._pid == os.getpid():
            self._conn.close()
        self._conn = None

    def __enter__(self) -> "RecordStore":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __getstate__(self):  # picklable: the connection is not sent
        return {"path": self.path, "timeout_s": self.timeout_s}

    def __setstate__(self, state):
        self.__init__(state["path"], state["timeout_s"])

    # -- keys ------------------------------------------------------------------------------
    @staticmethod
    def settings_of(options: CalculationOptions, canonical: str | None = None) -> dict:
        """Everything in the key besides the structure.

        The default Hessian displacements ("vibrational", 6N-12 gradients) give the numbers of
        the 6N Cartesian ones to finite-difference noise, so they are left out of the key: records
        stored before the option existed (all Cartesian) keep serving default requests, and a
        store is not recomputed on upgrade. An explicit "cartesian" request has a key of its own.
        Likewise the search of start conformers is in the key only for flexible molecules
        (``canonical`` SMILES with a rotor): a rigid one has one start either way. The basis set
        of density-functional methods for elements past krypton is in the key only for molecules
        that have one, so adding that setting changed no other record's key."""
        from rdkit import Chem

        opts = options.to_dict()
        mol = None if canonical is None else Chem.MolFromSmiles(canonical)
        if opts.get("hessian_displacements") == "vibrational":
            del opts["hessian_displacements"]
        if not opts.get("start_conformers") or (canonical is not None and _rigid(mol)):
            opts.pop("start_conformers", None)
        if canonical is not None:
            opts = without_unused_dft_settings(opts, [] if mol is None else [a.GetAtomicNum() for a in mol.GetAtoms()])
        return {"options": opts, "record_version": RECORD_VERSION, "calculation_version": CALCULATION_VERSION}

    def key(self, smiles: str, options: CalculationOptions) -> str:
        canonical, inchikey = structure_identity(smiles)
        return self.key_of(canonical, inchikey, options)

    @classmethod
    def key_of(cls, canonical: str, inchikey: str, options: CalculationOptions) -> str:
        """Key from a canonical SMILES and InChIKey (see :func:`structure_identity`)."""
        payload = json.dumps({"smiles": canonical, "inchikey": inchikey, **cls.settings_of(options, canonical)},
                             sort_keys=True, default=str)
        return hashlib.sha256(payload.encode()).hexdigest()

    # -- records ---------------------------------------------------------------------------
    def get(self, smiles: str, options: CalculationOptions) -> HessianRecord | None:
        """The stored record for ``smiles`` with ``options``, or None."""
        return self.get_by_key(self.key(smiles, options))

    def get_by_key(self, key: str) -> HessianRecord | None:
        row = self._connect().execute("SELECT record, checksum FROM records WHERE key = ?", (key,)).fetchone()
        if row is None:
            return None
        if row[1] is not None and _checksum(row[0]) != row[1]:
            return None  # damaged row: recompute and replace
        try:
            return _decode(row[0])
        except (ValueError, KeyError, TypeError, zlib.error, InputError):
            return None  # unreadable row (e.g. a newer record format): recompute and replace

    def has(self, key: str) -> bool:
        return self._connect().execute("SELECT 1 FROM records WHERE key = ?", (key,)).fetchone() is not None

    def put(self, smiles: str, options: CalculationOptions, record: HessianRecord,
            identity: tuple[str, str] | None = None, name: str = "") -> str:
        """Store ``record`` (replacing any row with the same key, and clearing a stored failure); returns the key.

        ``identity``: the (canonical SMILES, InChIKey) of ``smiles`` when the caller has them already;
        ``name``: what the user called the molecule (shown by ``vibest store --list``)."""
        from . import __version__

        canonical, inchikey = identity or structure_identity(smiles)
        key = self.key_of(canonical, inchikey, options)
        blob = _encode(record)
        conn = self._connect()
        with self._write(conn):
            conn.execute("INSERT OR REPLACE INTO records (key, inchikey, smiles, settings, created, record, natoms, "
                         "energy_hartree, vibest_version, checksum, name) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                         (key, inchikey, canonical, json.dumps(self.settings_of(options, canonical), sort_keys=True, default=str),
                          time.time(), blob, record.natoms, record.energy_hartree, __version__, _checksum(blob),
                          name if name and name != smiles else ""))
            conn.execute("DELETE FROM failures WHERE key = ?", (key,))
        return key

    # -- failures --------------------------------------------------------------------------
    def put_failure(self, smiles: str, options: CalculationOptions, reason: str,
                    identity: tuple[str, str] | None = None) -> str:
        """Record that ``smiles`` failed with ``options`` (kept until it succeeds or is retried)."""
        try:
            canonical, inchikey = identity or structure_identity(smiles)
        except InputError:
            canonical, inchikey = smiles, ""
        key = self.key_of(canonical, inchikey, options)
        conn = self._connect()
        with self._write(conn):
            conn.execute("INSERT OR REPLACE INTO failures (key, inchikey, smiles, settings, created, reason) "
                         "VALUES (?, ?, ?, ?, ?, ?)",
                         (key, inchikey, canonical, json.dumps(self.settings_of(options, canonical), sort_keys=True, default=str),
                          time.time(), reason))
        return key

    def failure(self, key: str) -> str | None:
        row = self._connect().execute("SELECT reason FROM failures WHERE key = ?", (key,)).fetchone()
        return None if row is None else row[0]

    # -- inspection ------------------------------------------------------------------------
    def count(self) -> int:
        return self._connect().execute("SELECT COUNT(*) FROM records").fetchone()[0]

    def failure_count(self) -> int:
        return self._connect().execute("SELECT COUNT(*) FROM failures").fetchone()[0]

    def rows(self) -> Iterator[tuple[str, str, str, int, float, str, str]]:
        """(key, canonical SMILES, InChIKey, atoms, energy Eh, name, method) of every stored record."""
        for key, smiles, inchikey, natoms, energy, name, settings in self._connect().execute(
                "SELECT key, smiles, inchikey, natoms, energy_hartree, name, settings FROM records ORDER BY smiles"):
            try:
                engine = json.loads(settings)["options"]["engine"]
                method = engine.get("method", "")
            except (ValueError, KeyError, TypeError):
                method = ""
            yield key, smiles, inchikey, natoms, energy, name or "", method

    def integrity_check(self) -> str:
        """SQLite's ``PRAGMA integrity_check`` and every record's checksum ("ok" for a sound
        file; else what is wrong, naming damaged records by SMILES)."""
        conn = self._connect()
        problems = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall() if r[0] != "ok"]
        damaged = [smiles for smiles, blob, checksum in conn.execute("SELECT smiles, record, checksum FROM records")
                   if checksum is not None and _checksum(blob) != checksum]
        if damaged:
            problems.append(f"{len(damaged)} damaged record(s): {', '.join(sorted(damaged)[:5])}"
                            + (" ..." if len(damaged) > 5 else "") + " (they are recomputed when asked for)")
        return "; ".join(problems) or "ok"

    # -- claims (two batches on one store share the work) -----------------------------------
    def claim(self, keys: list[str]) -> tuple[list[str], dict[str, str]]:
        """Claim ``keys`` for this process: (the keys claimed now, {key: holder} of those another
        live process holds). A claim of a process that no longer runs (same host) or older than
        :data:`CLAIM_LIFETIME_S` is taken over."""
        import socket

        host, pid, now = socket.gethostname(), os.getpid(), time.time()
        mine, others = [], {}
        conn = self._connect()
        with self._write(conn):
            for key in keys:
                row = conn.execute("SELECT host, pid, created FROM claims WHERE key = ?", (key,)).fetchone()
                if row is not None and (row[0], row[1]) != (host, pid) and _claim_alive(*row, host, now):
                    others[key] = f"process {row[1]} on {row[0]}"
                    continue
                conn.execute("INSERT OR REPLACE INTO claims (key, host, pid, created) VALUES (?, ?, ?, ?)",
                             (key, host, pid, now))
                mine.append(key)
        return mine, others

    def release(self, keys: list[str]) -> None:
        """Give up this process's claims of ``keys``."""
        if not keys:
            return
        conn = self._connect()
        with self._write(conn):
            conn.executemany("DELETE FROM claims WHERE key = ? AND pid = ?", [(k, os.getpid()) for k in keys])

    def schema_version(self) -> int:
        return self._connect().execute("PRAGMA user_version").fetchone()[0]


def open_store(store: "str | os.PathLike | RecordStore | None") -> RecordStore:
    """``store`` as a :class:`RecordStore`: one as it is, a path opened, None the default store;
    InputError for anything else."""
    if isinstance(store, RecordStore):
        return store
    if store is not None and not isinstance(store, (str, os.PathLike)):
        raise InputError(f"store must be a path or a RecordStore, not {type(store).__name__}")
    return RecordStore(store)

