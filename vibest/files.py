"""Writing result files so that none is ever left half-written or silently overwritten.

* Every file is written to a temporary file in the same folder and renamed over the target
  (POSIX rename is atomic): a full disk or an interrupt leaves the old file or the new one,
  never a truncated one.
* CSV tables start with their header row (spreadsheets read them as tables); what describes
  them (caution, settings, source) goes into a sidecar JSON file beside them,
  ``<name>.csv.meta.json``.
* :func:`check_outputs` refuses, before any calculation, output paths that cannot be written
  and one path given for two outputs.
"""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from pathlib import Path
from typing import Callable, Iterable

from .errors import InputError

META_SUFFIX = ".meta.json"


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename."""
    target = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=str(target.parent or Path(".")))
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise


def atomic_write_text(path: str | Path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def write_with(path: str | Path, writer: Callable[[str], None]) -> None:
    """Let ``writer(temporary_path)`` write a file (e.g. matplotlib's savefig), then rename it to
    ``path``; the temporary file keeps the target's suffix so that format detection works."""
    target = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.stem}.", suffix=target.suffix, dir=str(target.parent or Path(".")))
    os.close(fd)
    try:
        writer(tmp)
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise


def write_table(path: str | Path, header: list[str], rows: Iterable[list], metadata: dict | None = None) -> None:
    """A CSV table (header row first) and, when given, its metadata in ``<path>.meta.json``."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for row in rows:
        w.writerow(row)
    atomic_write_text(path, buf.getvalue())
    if metadata is not None:
        atomic_write_text(meta_path(path), json.dumps(metadata, indent=1) + "\n")


def meta_path(path: str | Path) -> Path:
    return Path(str(path) + META_SUFFIX)


def check_outputs(paths: dict[str, str | None], suffixes: dict[str, tuple[str, ...]] | None = None) -> None:
    """Refuse (InputError, one line) before any work: an output path whose folder cannot be
    created or written, a path that is a folder, the same path for two outputs, or a suffix a
    writer cannot produce. ``paths`` maps an option name ("--csv") to its value (None: unused)."""
    seen: dict[Path, str] = {}
    for option, value in paths.items():
        if not value:
            continue
        p = Path(value).expanduser()
        allowed = (suffixes or {}).get(option)
        if allowed and p.suffix.lower() not in allowed:
            raise InputError(f"{option} {value}: the file type must be one of {', '.join(allowed)}")
        key = p.resolve()
        if key in seen:
            raise InputError(f"{seen[key]} and {option} both name {value}: give each output its own file")
        seen[key] = option
        if p.exists() and p.is_dir():
            raise InputError(f"{option} {value} is a folder; give a file name")
        folder = p.parent if str(p.parent) else Path(".")
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"{option} {value}: cannot create the folder {folder} ({exc.strerror or exc})") from None
        if not os.access(folder, os.W_OK):
            raise InputError(f"{option} {value}: the folder {folder} is not writable")
        if p.exists() and not os.access(p, os.W_OK):
            raise InputError(f"{option} {value}: the file exists and is not writable")


def read_limited(path: str | Path, max_bytes: int, what: str = "file") -> bytes:
    """The bytes of a regular file of at most ``max_bytes``; InputError (one line) for a missing
    file, a folder, a device or pipe (/dev/zero, a FIFO: never read until memory runs out), or a
    larger file."""
    import stat

    p = Path(path)
    try:
        st = p.stat()
    except FileNotFoundError:
        raise InputError(f"{path}: no such file") from None
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{path} is a folder, not a {what}")
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"{path} is not a regular file (a device or a pipe): give a {what} on disk")
    if st.st_size > max_bytes:
        raise InputError(f"{path} is {st.st_size / 1e6:.0f} MB, more than the {max_bytes / 1e6:.0f} MB a {what} may have")
    try:
        with open(p, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise InputError(f"{path} grew beyond {max_bytes / 1e6:.0f} MB while being read")
    return data
