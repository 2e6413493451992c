"""Two-column text spectra: CSV, TSV, semicolon or space separated; with or without header;
dot or comma decimals; X ascending or descending. Errors name the file and line."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import InputError

_NUMBER = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$")


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return line.split()
    return [f.strip() for f in line.split(delimiter)]


def _choose_delimiter(lines: list[str]) -> tuple[str | None, bool]:
    """(delimiter, comma_decimal) from the first data-like lines."""
    sample = lines[:20]
    if all("\t" in l for l in sample):
        return "\t", any("," in l for l in sample)
    if all(";" in l for l in sample):
        return ";", any("," in l for l in sample)
    if all(l.count(",") == 1 for l in sample):
        return ",", False
    if all(l.count(",") == 3 for l in sample):  # "1234,5,0,87" : comma decimals and comma delimiter
        return "comma-pairs", True
    if all(len(l.split()) >= 2 for l in sample):
        return None, any("," in l for l in sample)
    return ",", False


def read_delimited(path: Path, data: bytes | None = None) -> tuple[np.ndarray, np.ndarray, list[str], str]:
    """X and Y columns (first two) of a delimited text file, with notes, and the header line
    ("" without one). ``data``: the file's bytes when already read."""
    if data is None:
        from ..files import read_limited
        from .jcamp import MAX_SPECTRUM_BYTES

        data = read_limited(path, MAX_SPECTRUM_BYTES, "spectrum file")
    raw = data.decode("utf-8-sig", errors="replace").replace("\x1a", "")
    numbered = [(k, l.strip()) for k, l in enumerate(raw.splitlines(), start=1)]
    numbered = [(k, l) for k, l in numbered if l and not l.startswith("#")]
    if not numbered:
        raise InputError(f"{path}: the file is empty")
    notes: list[str] = []
    first_data = 0
    _refuse_ambiguous_commas(path, [l for _, l in numbered[1:]])
    delimiter, comma_decimal = _choose_delimiter([l for _, l in numbered[1:]] or [numbered[0][1]])
    fields = _fields(numbered[0][1], delimiter, comma_decimal)
    header = ""
    if not (len(fields) >= 2 and all(_NUMBER.match(f) for f in fields[:2])):
        first_data = 1
        header = numbered[0][1]
        notes.append(f"header line: {header[:60]!r}")
    if len(numbered) <= first_data:
        raise InputError(f"{path}: a header but no data lines")
    xs, ys = [], []
    for lineno, line in numbered[first_data:]:
        f = _fields(line, delimiter, comma_decimal)
        if len(f) < 2:
            raise InputError(f"{path}:{lineno}: expected two columns (wavenumber, value), got {line[:40]!r}")
        try:
            xs.append(float(f[0].replace(",", ".")))
            ys.append(float(f[1].replace(",", ".")))
        except ValueError:
            raise InputError(f"{path}:{lineno}: not a number in {line[:40]!r}") from None
        if not (np.isfinite(xs[-1]) and np.isfinite(ys[-1])):
            raise InputError(f"{path}:{lineno}: missing value (NaN or infinity) in {line[:40]!r}")
    if comma_decimal:
        notes.append("comma decimals read")
    return np.array(xs), np.array(ys), notes, header


def _refuse_ambiguous_commas(path, lines: list[str]) -> None:
    """Commas as both decimal mark and separator with a varying count per line ("1000,5,0,87" beside
    "1001,0,9"): which comma separates cannot be told, so the file is refused rather than misread."""
    sample = lines[:200]
    if not sample or any("." in l or ";" in l or "\t" in l for l in sample):
        return
    counts = {l.count(",") for l in sample}
    if len(counts) > 1 and counts <= {2, 3}:
        raise InputError(f"{path}: commas are both decimal marks and separators, with 2 or 3 per line: ambiguous; "
                         "save the file with ';' or tab between the columns")


def _fields(line: str, delimiter: str | None, comma_decimal: bool) -> list[str]:
    if delimiter == "comma-pairs":
        parts = line.split(",")
        return [f"{parts[0]}.{parts[1]}", f"{parts[2]}.{parts[3]}"] if len(parts) == 4 else parts
    return _split(line, delimiter)
