"""Conversion over time from a series of measured spectra of a reaction (start -> product).

Times come from a list file (CSV with a ``file`` column and a time column: ``time``, or
``time_<unit>`` such as ``time_min``; files relative to the list) or, without one, from the
JCAMP-DX date/time labels of the files (minutes since the first). Two ways to a conversion:

* ``band`` (default): a diagnostic band of the starting material, chosen from the predicted
  spectra (strong in the starting material, with the product's predicted absorbance there below
  :data:`MAX_OTHER_SHARE` of it, so free of overlap; the strongest such band). Its measured height
  (largest absorbance within the band's window, after a rubber-band baseline) at time t against
  the first spectrum gives conversion = 1 - S(t) / S(t0). It assumes the first spectrum is the
  starting material before the reaction and that the sample's path length does not change (an
  in-situ probe or the same cell). A product band chosen the same way is reported alongside as a
  check (it should grow as the conversion does).
* ``fit``: each spectrum fitted by the two predicted components (:mod:`vibest.components`);
  conversion = the product's estimated mole fraction (from predicted integrated intensities).
  Rough for condensed samples, but independent of the first spectrum.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .comparison import pick_peaks
from .errors import InputError
from .measured import MeasuredSpectrum, load_spectrum, preprocess, rubber_band_baseline
from .pipeline import CAUTION, PLOT_CAUTION, Prediction
from .spectrum import broaden, grid, line_shape_values

BAND, FIT = "band", "fit"
METHODS = (BAND, FIT)
#: The other structure's predicted absorbance at a diagnostic band must stay below this share of
#: the band's own (both per mole, same width).
MAX_OTHER_SHARE = 0.15
#: Half-width (cm^-1) of the window in which a diagnostic band's measured height is read.
WINDOW_HALF_CM1 = 15.0
MAX_LIST_BYTES = 1_000_000


@dataclass(frozen=True)
class DiagnosticBand:
    """A band that tells one structure from the other: position (cm^-1, predicted), whose it is
    ("starting material" or "product"), its label and its predicted share of the other's absorbance."""

    wavenumber_cm1: float
    owner: str
    label: str
    other_share: float

    def describe(self) -> str:
        return (f"{self.label} of the {self.owner} near {self.wavenumber_cm1:.0f} cm^-1 (the other structure's "
                f"predicted absorbance there: {self.other_share:.0%} of it)")


@dataclass(frozen=True)
class SeriesPoint:
    """One spectrum of the series: its time, source, conversion and the diagnostic-band heights."""

    time: float
    source: str
    conversion: float
    start_band_absorbance: float | None = None
    product_band_absorbance: float | None = None


@dataclass(frozen=True)
class Series:
    """Conversion against time. ``time_unit`` says what the times are in; ``how`` which method
    and band gave the conversion."""

    points: tuple[SeriesPoint, ...]
    time_unit: str
    method: str
    how: str
    start_band: DiagnosticBand | None
    product_band: DiagnosticBand | None
    notes: tuple[str, ...] = ()

    def summary(self) -> str:
        lines = [f"conversion by {self.how}"]
        lines.append(f"{'time/' + self.time_unit:>12} {'conversion':>11}  spectrum")
        lines += [f"{p.time:12.4g} {p.conversion:11.3f}  {Path(p.source).name}" for p in self.points]
        lines += [f"# note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "method": self.method, "how": self.how, "time_unit": self.time_unit,
                "start_band": None if self.start_band is None else self.start_band.describe(),
                "product_band": None if self.product_band is None else self.product_band.describe(),
                "points": [p.__dict__ for p in self.points], "notes": list(self.notes)}

    def write_csv(self, path: str | Path) -> None:
        from .files import write_table

        rows = [[f"{p.time:.6g}", p.source, f"{p.conversion:.4f}",
                 "" if p.start_band_absorbance is None else f"{p.start_band_absorbance:.5g}",
                 "" if p.product_band_absorbance is None else f"{p.product_band_absorbance:.5g}"] for p in self.points]
        write_table(path, [f"time_{self.time_unit}", "file", "conversion", "start_band_absorbance",
                           "product_band_absorbance"], rows, {"what": "vibest conversion series", **self.to_dict()})


def read_series_list(path: str | Path) -> tuple[list[tuple[float, Path]], str]:
    """((time, file) rows in file order, time unit) from a list CSV: a ``file`` column and a time
    column named ``time`` or ``time_<unit>``. Files are taken relative to the list's folder."""
    from .files import read_limited

    p = Path(path)
    data = read_limited(p, MAX_LIST_BYTES, "series list")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{p}: not UTF-8 text") from None
    lines = [line for line in text.splitlines() if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise InputError(f"{p}: empty series list")
    try:
        rows = [next(csv.reader([line])) for line in lines]
    except csv.Error as exc:
        raise InputError(f"{p}: not a readable CSV list ({exc})") from None
    header = [h.strip().lower() for h in rows[0]]
    time_cols = [k for k, h in enumerate(header) if h == "time" or h.startswith("time_")]
    if "file" not in header or len(time_cols) != 1:
        raise InputError(f"{p}: the first line must name a 'file' column and one time column ('time' or "
                         f"'time_<unit>', e.g. time_min)")
    f_col, t_col = header.index("file"), time_cols[0]
    unit = header[t_col][5:] or "given unit"
    out = []
    for k, row in enumerate(rows[1:], start=2):
        if len(row) <= max(f_col, t_col) or not row[f_col].strip():
            raise InputError(f"{p}: row {k} lacks a file or a time")
        try:
            t = float(row[t_col])
        except ValueError:
            raise InputError(f"{p}: row {k}: time {row[t_col]!r} is not a number") from None
        if not np.isfinite(t):
            raise InputError(f"{p}: row {k}: time {row[t_col]!r} is not a number")
        out.append((t, (p.parent / row[f_col].strip())))
    if len(out) < 2:
        raise InputError(f"{p}: a series needs at least two spectra")
    return out, unit


def times_from_files(spectra: list[MeasuredSpectrum]) -> list[float]:
    """Minutes since the first spectrum, from the files' recording times (InputError if one lacks it)."""
    missing = [s.source for s in spectra if s.recorded_at is None]
    if missing:
        raise InputError(f"{missing[0]} has no recording time (JCAMP-DX ##LONGDATE or ##DATE/##TIME): "
                         "give the times in a list file (file,time_min)")
    t0 = spectra[0].recorded_at
    return [(s.recorded_at - t0).total_seconds() / 60.0 for s in spectra]


def _per_mole_curve(pred: Prediction, g: np.ndarray, fwhm: float) -> np.ndarray:
    return broaden(pred.wavenumbers_cm1, pred.intensities_km_mol, fwhm, "lorentzian", g).absorption_km_mol_cm1


def diagnostic_band(own: Prediction, other: Prediction, owner: str, range_cm1: tuple[float, float],
                    fwhm_cm1: float = 16.0) -> DiagnosticBand:
    """The strongest predicted band of ``own`` where ``other`` absorbs less than
    :data:`MAX_OTHER_SHARE` of it (per mole, same width); InputError if there is none."""
    g = grid(range_cm1[0], range_cm1[1], 1.0)
    a, b = _per_mole_curve(own, g, fwhm_cm1), _per_mole_curve(other, g, fwhm_cm1)
    best = None
    for peak in pick_peaks(g, a, 0.05):
        k = int(np.searchsorted(g, peak.wavenumber_cm1))
        window = np.abs(g - peak.wavenumber_cm1) <= WINDOW_HALF_CM1
        share = float(b[window].max() / a[k])
        if share < MAX_OTHER_SHARE and (best is None or a[k] > best[0]):
            best = (a[k], peak.wavenumber_cm1, share)
    if best is None:
        raise InputError(f"no band of the {owner} is free of the other structure's bands in "
                         f"{range_cm1[0]:.0f}-{range_cm1[1]:.0f} cm^-1: use --conversion-by fit")
    contrib = own.intensities_km_mol * line_shape_values(own.wavenumbers_cm1, best[1], fwhm_cm1, "lorentzian")
    band = own.bands[int(np.argmax(contrib))]  # the band that makes most of the peak
    return DiagnosticBand(best[1], owner, band.label or band.character, best[2])


def _band_height(spec: MeasuredSpectrum, band: DiagnosticBand) -> float:
    lo, hi = band.wavenumber_cm1 - 4 * WINDOW_HALF_CM1, band.wavenumber_cm1 + 4 * WINDOW_HALF_CM1
    g = grid(max(lo, spec.range_cm1[0]), min(hi, spec.range_cm1[1]), 1.0)
    if len(g) < 5:
        raise InputError(f"{spec.source} does not cover the diagnostic band near {band.wavenumber_cm1:.0f} cm^-1")
    y = preprocess(spec, g, normalise=False)
    y = y - rubber_band_baseline(g, y)
    return float(y[np.abs(g - band.wavenumber_cm1) <= WINDOW_HALF_CM1].max())


def conversion_series(spectra: list[MeasuredSpectrum], times: list[float], start: Prediction, product: Prediction,
                      *, time_unit: str = "min", method: str = BAND,
                      range_cm1: tuple[float, float] = (500.0, 3800.0)) -> Series:
    """Conversion of ``start`` to ``product`` at each time (see the module docstring)."""
    if method not in METHODS:
        raise InputError(f"unknown method {method!r}; choose one of {', '.join(METHODS)}")
    if len(spectra) != len(times) or len(spectra) < 2:
        raise InputError("a series needs at least two spectra, each with a time")
    if start.smiles == product.smiles:
        raise InputError("the starting material and the product are the same structure")
    order = np.argsort(times, kind="stable")
    spectra, times = [spectra[k] for k in order], [float(times[k]) for k in order]
    notes = []
    if method == FIT:
        from .components import Component, fit_components

        points = []
        for t, s in zip(times, spectra):
            fit = fit_components(s, [Component("start", start), Component("product", product)], range_cm1=range_cm1)
            x = fit.shares[1].mole_fraction
            points.append(SeriesPoint(t, s.source, float(x if x is not None else fit.shares[1].absorbance_fraction)))
        how = "component fit (estimated mole fraction of the product, predicted integrated intensities)"
        return Series(tuple(points), time_unit, method, how, None, None, tuple(notes))
    sb = diagnostic_band(start, product, "starting material", range_cm1)
    try:
        pb = diagnostic_band(product, start, "product", range_cm1)
    except InputError:
        pb = None
        notes.append("no product band free of the starting material's bands: no cross-check")
    s_heights = [_band_height(s, sb) for s in spectra]
    if s_heights[0] <= 0:
        raise InputError(f"{spectra[0].source}: the first spectrum shows no band near {sb.wavenumber_cm1:.0f} "
                         "cm^-1, so it cannot be the starting material before the reaction")
    p_heights = [_band_height(s, pb) for s in spectra] if pb else [None] * len(spectra)
    points = tuple(SeriesPoint(t, s.source, 1.0 - h / s_heights[0], h, p)
                   for t, s, h, p in zip(times, spectra, s_heights, p_heights))
    if pb and p_heights[-1] <= p_heights[0]:
        notes.append(f"the product band near {pb.wavenumber_cm1:.0f} cm^-1 does not grow: check the structures")
    how = f"the fading {sb.describe()}; 1 - S(t)/S({times[0]:g} {time_unit})"
    return Series(points, time_unit, method, how, sb, pb, tuple(notes))


def plot_series(series: Series, path: str | Path, title: str = "") -> None:
    """Conversion against time (and the product band, scaled to its last value, as a check)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .files import write_with

    t = [p.time for p in series.points]
    fig, ax = plt.subplots(figsize=(7, 4.2), dpi=120)
    ax.plot(t, [p.conversion for p in series.points], "o-", color="#1f4e79", label="conversion")
    if series.product_band is not None and series.points[-1].product_band_absorbance:
        last = series.points[-1].product_band_absorbance
        ax.plot(t, [p.product_band_absorbance / last for p in series.points], "s--", color="#c55a11", ms=4,
                label=f"product band near {series.product_band.wavenumber_cm1:.0f} cm$^{{-1}}$ (relative to last)")
    ax.set_xlabel(f"time / {series.time_unit}")
    ax.set_ylabel("conversion")
    ax.set_ylim(-0.05, 1.1)
    ax.legend(loc="lower right", fontsize=7.5, frameon=False)
    ax.set_title(title or "conversion over time", fontsize=9.5)
    fig.text(0.01, 0.005, PLOT_CAUTION, fontsize=6.5,
             color="#7f7f7f")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    write_with(path, fig.savefig)
    plt.close(fig)


def load_series(list_path: str | Path | None, files: list[str], kind: str | None = None
                ) -> tuple[list[MeasuredSpectrum], list[float], str]:
    """(spectra, times, time unit) from a list file, or from ``files`` and their recording times."""
    if list_path is not None:
        if files:
            raise InputError("give the spectra in the list file or as arguments, not both")
        rows, unit = read_series_list(list_path)
        return [load_spectrum(f, kind=kind) for _, f in rows], [t for t, _ in rows], unit
    if len(files) < 2:
        raise InputError("a series needs at least two spectra (or a list file with file,time_min columns)")
    spectra = [load_spectrum(f, kind=kind) for f in files]
    return spectra, times_from_files(spectra), "min"
