"""A directory cache of Hessian records, keyed by structure and every setting that changes them.

Re-analysis (other scaling, widths, comparisons) reads a cached record instead of recomputing.
The key is a SHA-256 of the canonical SMILES, the calculation settings and the record format
version; files are written atomically (temporary file + rename), so an interrupted run never
leaves a half-written record.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

from .calculation.record import RECORD_VERSION, HessianRecord
from .errors import InputError
from .predict import CalculationOptions
from .structure import canonical_smiles


def default_cache_dir() -> Path:
    """$VIBEST_CACHE, else $XDG_CACHE_HOME/vibest/records, else ~/.cache/vibest/records."""
    env = os.environ.get("VIBEST_CACHE")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "vibest" / "records"


class RecordCache:
    """Records stored as JSON files in one directory."""

    def __init__(self, directory: str | Path | None = None):
        self.directory = Path(directory) if directory else default_cache_dir()

    def key(self, smiles: str, options: CalculationOptions) -> str:
        payload = json.dumps({"smiles": canonical_smiles(smiles), "options": options.to_dict(),
                              "record_version": RECORD_VERSION}, sort_keys=True, default=str)
        return hashlib.sha256(payload.encode()).hexdigest()[:32]

    def path(self, smiles: str, options: CalculationOptions) -> Path:
        return self.directory / f"{self.key(smiles, options)}.json"

    def get(self, smiles: str, options: CalculationOptions) -> HessianRecord | None:
        p = self.path(smiles, options)
        if not p.exists():
            return None
        try:
            return HessianRecord.load(p)
        except InputError:
            return None  # unreadable entry: recompute and overwrite

    def put(self, smiles: str, options: CalculationOptions, record: HessianRecord) -> Path:
        try:
            self.directory.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"cannot create cache directory {self.directory}: {exc.strerror or exc}") from None
        p = self.path(smiles, options)
        fd, tmp = tempfile.mkstemp(dir=self.directory, suffix=".tmp")
        with os.fdopen(fd, "w") as fh:
            json.dump(record.to_dict(), fh)
        os.replace(tmp, p)
        return p
