"""Measured spectra: reading (JCAMP-DX, CSV/TSV), units, conversions and preprocessing.

Every reader returns a :class:`MeasuredSpectrum` on an ascending wavenumber axis (cm^-1) whose
values are absorbance (decadic, A = -log10 T) or transmittance (fraction 0-1), with notes that
say what was converted or guessed.
"""

from __future__ import annotations

import dataclasses
import datetime
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from .delimited import read_delimited
from .jcamp import read_jcamp

ABSORBANCE, TRANSMITTANCE = "absorbance", "transmittance"
#: Transmittance below this is clipped before taking -log10 (A at most 4).
MIN_TRANSMITTANCE = 1e-4


@dataclass(frozen=True)
class MeasuredSpectrum:
    """A measured spectrum.

    Attributes:
        wavenumbers_cm1: ascending axis, cm^-1.
        values: absorbance (decadic) or transmittance (fraction 0-1), per ``kind``.
        kind: "absorbance" or "transmittance".
        source: file name or description.
        title: the file's title, if any.
        notes: conversions and guesses made while reading.
        phase: "gas" when the file says the sample was a gas or vapour (JCAMP-DX ##STATE), else "".
        recorded_at: when the spectrum was recorded, if the file says (JCAMP-DX ##LONGDATE, or
            ##DATE YY/MM/DD with ##TIME); None otherwise.
        header: descriptive labels of a JCAMP-DX file as (label, text) pairs: origin, owner,
            state, sampling procedure, resolution, instrument, date ... (for reports).
        sampling: how the sample was recorded ("gas", "ATR", "film", "KBr pellet", "mull",
            "solution" or "" when not said), from ##STATE, ##SAMPLING PROCEDURE or the title
            (:func:`vibest.sampling.sampling_of`); ``sampling_from`` says which.
    """

    wavenumbers_cm1: np.ndarray
    values: np.ndarray
    kind: str
    source: str = ""
    title: str = ""
    notes: tuple[str, ...] = ()
    phase: str = ""
    recorded_at: datetime.datetime | None = None
    header: tuple[tuple[str, str], ...] = ()
    sampling: str = ""
    sampling_from: str = ""

    def with_note(self, note: str) -> "MeasuredSpectrum":
        return dataclasses.replace(self, notes=self.notes + (note,))

    def absorbance(self) -> "MeasuredSpectrum":
        """As absorbance: A = -log10(T), T clipped to at least 1e-4 (A <= 4)."""
        if self.kind == ABSORBANCE:
            return self
        t = np.clip(self.values, MIN_TRANSMITTANCE, None)
        return dataclasses.replace(self, values=-np.log10(t), kind=ABSORBANCE,
                                   notes=self.notes + ("converted transmittance to absorbance, A = -log10 T",))

    def resampled(self, grid_cm1) -> np.ndarray:
        """Values linearly interpolated on ``grid_cm1`` (zero outside the measured range)."""
        return np.interp(np.asarray(grid_cm1, float), self.wavenumbers_cm1, self.values, left=0.0, right=0.0)

    @property
    def range_cm1(self) -> tuple[float, float]:
        return float(self.wavenumbers_cm1[0]), float(self.wavenumbers_cm1[-1])


def rubber_band_baseline(x, y) -> np.ndarray:
    """Lower convex hull of the points (x, y) ("rubber band"), interpolated at x.

    A robust, parameter-free baseline for absorbance: it touches the spectrum only at points where
    a band-free stretch reaches down, and never rises above the data.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    hull: list[int] = []
    for k in range(len(x)):  # Andrew's monotone chain, lower part
        while len(hull) >= 2:
            i, j = hull[-2], hull[-1]
            if (x[j] - x[i]) * (y[k] - y[i]) - (y[j] - y[i]) * (x[k] - x[i]) <= 0:
                hull.pop()
            else:
                break
        hull.append(k)
    return np.interp(x, x[hull], y[hull])


def preprocess(spec: MeasuredSpectrum, grid_cm1, baseline: bool = False, normalise: bool = True) -> np.ndarray:
    """Absorbance on ``grid_cm1``: converted, optionally baseline-corrected, scaled to max 1."""
    a = spec.absorbance()
    x, y = a.wavenumbers_cm1, a.values.copy()
    if baseline:
        y = y - rubber_band_baseline(x, y)
    out = np.interp(np.asarray(grid_cm1, float), x, y, left=0.0, right=0.0)
    out = np.clip(out, 0.0, None)
    if normalise and out.max() > 0:
        out = out / out.max()
    return out


def _classify_yunits(units: str, values: np.ndarray, path: str) -> tuple[np.ndarray, str, list[str]]:
    u = units.strip().upper()
    notes: list[str] = []
    if "TRANSMIT" in u or u in ("%T", "T"):
        if "%" in u or "PERCENT" in u or np.nanmax(values) > 1.5:
            values = values / 100.0
            notes.append("transmittance given in percent: divided by 100")
        return values, TRANSMITTANCE, notes
    if "ABSORBANCE" in u or u == "A":
        return values, ABSORBANCE, notes
    if ("ABSORPTION" in u or "ABSORPTIVITY" in u or "COEFFICIENT" in u or "EXTINCTION" in u
            or "BASE 10" in u or re.search(r"\)\s*-1", u)):
        notes.append(f"Y units {units.strip()!r} read as absorbance (absorbance-like, base 10)")
        return values, ABSORBANCE, notes
    raise InputError(f"{path}: Y units {units.strip()!r} are not transmittance or absorbance")


def _x_to_cm1(x: np.ndarray, units: str, path: str) -> tuple[np.ndarray, list[str]]:
    u = units.strip().upper()
    if u in ("1/CM", "CM-1", "CM^-1", "1/CM-1", "WAVENUMBERS", "WAVENUMBER"):
        return x, []
    if u in ("MICROMETERS", "MICRONS", "UM", "MICROMETER"):
        if np.any(x <= 0):
            raise InputError(f"{path}: micrometre X values must be positive")
        return 1e4 / x, ["X converted from micrometres to cm^-1 (1e4 / x)"]
    if u in ("NANOMETERS", "NM"):
        if np.any(x <= 0):
            raise InputError(f"{path}: nanometre X values must be positive")
        return 1e7 / x, ["X converted from nanometres to cm^-1 (1e7 / x)"]
    raise InputError(f"{path}: X units {units.strip()!r} are not 1/CM or MICROMETERS")


def finish(x, y, kind: str, source: str, title: str = "", notes=()) -> MeasuredSpectrum:
    """Check values, sort ascending, drop exact duplicates; raise InputError naming the file."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if len(x) < 3:
        raise InputError(f"{source}: fewer than 3 data points")
    bad = ~np.isfinite(x) | ~np.isfinite(y)
    if bad.any():
        raise InputError(f"{source}: {int(bad.sum())} value(s) are missing or not numbers (first at point {int(np.argmax(bad)) + 1})")
    d = np.diff(x)
    if not (np.all(d > 0) or np.all(d < 0)):
        raise InputError(f"{source}: X values are not monotonic (first break at point {int(np.argmax(d * np.sign(d[0]) <= 0)) + 2})")
    order = np.argsort(x)
    return MeasuredSpectrum(x[order], y[order], kind, source, title, tuple(notes))


def load_spectrum(path: str | Path, kind: str | None = None, block: int | None = None) -> MeasuredSpectrum:
    """Read a measured spectrum from JCAMP-DX or CSV/TSV/TXT, by content (a file whose first line
    starts with ``##`` is JCAMP-DX whatever its name).

    Args:
        kind: "absorbance" or "transmittance" to state what Y is; None to use the file's units
            (JCAMP-DX), the CSV header's column name, or a guess (with a note saying so).
        block: which spectrum of a multi-block JCAMP-DX file (1-based).

    Raises InputError (one line) for a file that cannot be read or values that cannot be a
    spectrum (flat, all zero, transmittance far outside 0-100 %, mostly negative absorbance).
    """
    from ..files import read_limited
    from .jcamp import MAX_SPECTRUM_BYTES

    if kind not in (None, ABSORBANCE, TRANSMITTANCE):
        raise InputError(f"kind must be {ABSORBANCE!r} or {TRANSMITTANCE!r}, not {kind!r}")
    p = Path(path)
    data = read_limited(p, MAX_SPECTRUM_BYTES, "spectrum file")
    looks_jcamp = data.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"##")
    suffix = p.suffix.lower()
    if looks_jcamp or suffix in (".jdx", ".dx", ".jcamp", ".jcm"):
        spec = _from_jcamp(p, data, kind, block)
        if looks_jcamp and suffix not in (".jdx", ".dx", ".jcamp", ".jcm"):
            spec = spec.with_note(f"read as JCAMP-DX by its content (the name ends in {suffix or 'nothing'})")
        return check_values(spec)
    x, y, notes, header = read_delimited(p, data)
    if kind is None:
        kind = _kind_from_header(header)
        if kind is not None:
            notes.append(f"Y taken as {kind}, as the header says")
    if kind is None:
        kind, guess = guess_kind(y)
        notes.append(guess)
    if kind == TRANSMITTANCE and np.nanmax(y) > 1.5:
        y = y / 100.0
        notes.append("transmittance given in percent: divided by 100")
    return check_values(_with_sampling(finish(x, y, kind, str(path), p.stem, notes)))


def as_measured(value, what: str = "measured") -> MeasuredSpectrum:
    """``value`` as a :class:`MeasuredSpectrum`: one as it is, a path (str or os.PathLike) read by
    :func:`load_spectrum`; anything else is an InputError naming the argument (``what``)."""
    if isinstance(value, MeasuredSpectrum):
        return value
    if isinstance(value, (str, os.PathLike)):
        return load_spectrum(value)
    raise InputError(f"{what} must be a measured spectrum (vibest.load_spectrum(path)) or a file path, "
                    f"not {type(value).__name__}")


def _with_sampling(spec: MeasuredSpectrum, state: str = "", procedure: str = "") -> MeasuredSpectrum:
    from ..sampling import GAS, sampling_of

    kind, where = sampling_of(state, procedure, spec.title)
    out = dataclasses.replace(spec, sampling=kind, sampling_from=where)
    return dataclasses.replace(out, phase="gas") if kind == GAS and where != "title" else out


def _from_jcamp(p: Path, data: bytes, kind: str | None, block: int | None) -> MeasuredSpectrum:
    blk = read_jcamp(p, block=block, data=data)
    x, xnotes = _x_to_cm1(blk.x, blk.labels.get("XUNITS", "1/CM"), str(p))
    y = blk.y
    if kind is None:
        y, kind, ynotes = _classify_yunits(blk.labels.get("YUNITS", ""), y, str(p))
    else:
        ynotes = [f"Y taken as {kind} as requested"]
    state = blk.labels.get("STATE", "").strip().lower()
    spec = finish(x, y, kind, str(p), blk.title(), xnotes + ynotes)
    if state.startswith(("gas", "vapor", "vapour")):
        spec = dataclasses.replace(spec, phase="gas")
    when = recorded_at(blk.labels)
    if when is not None:
        spec = dataclasses.replace(spec, recorded_at=when)
    header = tuple((name, " ".join(blk.labels[key].split())[:200]) for key, name in REPORTED_LABELS.items()
                   if blk.labels.get(key, "").strip())
    return _with_sampling(dataclasses.replace(spec, header=header), state, blk.labels.get("SAMPLINGPROCEDURE", ""))


#: JCAMP-DX labels (normalised) carried into reports, with their display names.
REPORTED_LABELS = {"ORIGIN": "origin", "OWNER": "owner", "STATE": "state", "SAMPLINGPROCEDURE": "sampling procedure",
                   "RESOLUTION": "resolution", "SPECTROMETERDATASYSTEM": "spectrometer", "INSTRUMENTPARAMETERS":
                   "instrument parameters", "PATHLENGTH": "path length", "PRESSURE": "pressure", "TEMPERATURE":
                   "temperature", "LONGDATE": "date", "DATE": "date", "TIME": "time", "CASREGISTRYNO": "CAS number",
                   "MOLFORM": "formula", "SOURCEREFERENCE": "source reference"}


_LONGDATE = re.compile(r"^\s*(\d{4})[/-](\d{1,2})[/-](\d{1,2})(?:[ T]+(\d{1,2}):(\d{2})(?::(\d{2})(?:\.\d*)?)?)?")
_SHORT = re.compile(r"^\s*(\d{2})/(\d{1,2})/(\d{1,2})\s*$")
_TIME = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2}))?")


def recorded_at(labels: dict[str, str]) -> datetime.datetime | None:
    """The recording time of a JCAMP-DX block: ##LONGDATE (YYYY/MM/DD [HH:MM[:SS]], JCAMP-DX 5.01)
    or else ##DATE (YY/MM/DD, JCAMP-DX 4.24, years 00-69 read as 20xx; or YYYY/MM/DD) with
    ##TIME; None when absent, only a year, or not a valid date. A time zone is ignored."""
    try:
        m = _LONGDATE.match(labels.get("LONGDATE", "")) or _LONGDATE.match(labels.get("DATE", ""))
        if m and not m.group(4) and labels.get("TIME") and not labels.get("LONGDATE"):
            t = _TIME.match(labels.get("TIME", ""))
            if t:
                h, mi, s = (int(v) if v else 0 for v in t.groups())
                return datetime.datetime(int(m.group(1)), int(m.group(2)), int(m.group(3)), h, mi, s)
        if m:
            y, mo, d, h, mi, s = (int(v) if v else 0 for v in m.groups())
            return datetime.datetime(y, mo, d, h, mi, s)
        m = _SHORT.match(labels.get("DATE", ""))
        if m:
            yy, mo, d = (int(v) for v in m.groups())
            t = _TIME.match(labels.get("TIME", ""))
            h, mi, s = (int(v) if v else 0 for v in t.groups()) if t else (0, 0, 0)
            return datetime.datetime(2000 + yy if yy < 70 else 1900 + yy, mo, d, h, mi, s)
    except ValueError:  # month 13, hour 25, ...
        return None
    return None


def _kind_from_header(header: str) -> str | None:
    """What the Y column's name in a CSV header says it is, if anything."""
    cells = re.split(r"[,;\t]|\s{2,}", header.lower())
    name = cells[1].strip() if len(cells) > 1 else ""
    if re.search(r"transm|%t\b|^t\b|\bt\s*\(", name):
        return TRANSMITTANCE
    if re.search(r"absorb|^a\b|\ba\s*\(|\babs\b", name):
        return ABSORBANCE
    return None


#: Transmittance (fraction) below TRANSMITTANCE_LOWEST or above TRANSMITTANCE_HIGHEST cannot be
#: noise or baseline drift around 0-100 %. Real digitised gas-phase spectra of the benchmark set
#: reach 110 % (ethane, DOW); 150 % leaves room, and a Y column of absorbance or of misread
#: percent goes far beyond.
TRANSMITTANCE_LOWEST, TRANSMITTANCE_HIGHEST = -0.1, 1.5


def check_values(spec: MeasuredSpectrum) -> MeasuredSpectrum:
    """Refuse values that cannot be a spectrum; note what is odd but usable (one line each)."""
    y = spec.values
    span = float(y.max() - y.min())
    if span <= 1e-9 * max(1.0, float(np.abs(y).max())):
        what = "all zero" if not np.any(y) else f"flat (every value {y[0]:g})"
        raise InputError(f"{spec.source}: the data are {what}: no band to compare")
    if spec.kind == TRANSMITTANCE:
        lo, hi = float(y.min()), float(y.max())
        if lo < TRANSMITTANCE_LOWEST or hi > TRANSMITTANCE_HIGHEST:
            raise InputError(f"{spec.source}: transmittance from {100 * lo:.0f} to {100 * hi:.0f} %: it cannot be "
                             "below 0 or far above 100 %; is the Y column absorbance? (--y-kind)")
        if lo < 0 or hi > 1.0:
            spec = spec.with_note(f"transmittance reaches {100 * lo:.1f}-{100 * hi:.1f} %: noise or baseline drift "
                                  "around 0/100 %, taken as it is (clipped where used)")
    else:
        lo, hi = float(y.min()), float(y.max())
        if hi <= 0:
            raise InputError(f"{spec.source}: every absorbance value is zero or negative: no band to compare; "
                             "is the Y column transmittance? (--y-kind)")
        if lo < -0.2 * hi:
            spec = spec.with_note(f"absorbance goes down to {lo:.3g} (maximum {hi:.3g}): an offset baseline? "
                                  "negative values count as zero; --baseline removes a baseline")
    return spec


def guess_kind(y) -> tuple[str, str]:
    """Guess absorbance or transmittance from the values; the note says it was a guess.

    Transmittance spectra sit near their maximum (100 % or 1) most of the time, with bands
    dipping down; absorbance spectra sit near zero with bands rising (common practice, no source).
    """
    y = np.asarray(y, float)
    lo, hi, med = np.nanmin(y), np.nanmax(y), np.nanmedian(y)
    if hi > 0 and (med - lo) > 0.5 * (hi - lo) and lo >= -0.05 * hi:
        return TRANSMITTANCE, "Y not stated: guessed transmittance (values sit near their maximum); say --y-kind to be sure"
    return ABSORBANCE, "Y not stated: guessed absorbance (values sit near zero); say --y-kind to be sure"
