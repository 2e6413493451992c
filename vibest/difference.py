"""Difference of two measured spectra (before/after a reaction step): what appeared, what went.

Both spectra are brought to absorbance on one grid over the range they share (2 cm^-1 steps).
The *before* spectrum is scaled so that a band both share has the same height in both: a band
the user names (a window, e.g. a band of the solvent or of an internal standard) or,
automatically, the band strongest in both among the peaks they share (within 8 cm^-1): in a
reaction mixture usually a C-H stretch of the skeleton that starting material and product have
in common. The band used is reported; ``scale=1.0`` keeps both as recorded (same cell, same
path length). The difference after - s * before then shows growing bands positive and
shrinking ones negative. Each change larger than :data:`CHANGE_THRESHOLD` of the largest one is
listed and, when the structures of the starting material and the product are given, assigned
to the predicted band of the product (a band that appears) or of the starting material (a band
that goes) within the peak-match tolerance of the comparison (40 cm^-1) that makes most of the
broadened predicted absorbance there. Gas-phase spectra show a band's rotational P and R
branches as separate peaks (about 20-30 cm^-1 either side of the centre): each is listed, and
both fall within the tolerance of the band.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .comparison import DEFAULT_MATCH_TOLERANCE_CM1, MIN_COMPARE_WIDTH_CM1, pick_peaks
from .errors import InputError
from .measured import MeasuredSpectrum, as_measured, preprocess
from .pipeline import CAUTION, PLOT_CAUTION, Prediction
from .spectrum import grid, line_shape_values

#: Grid step of the difference (cm^-1).
STEP_CM1 = 2.0
#: A change is listed when its height is at least this fraction of the largest change.
CHANGE_THRESHOLD = 0.15
#: Shared peaks: positions within this distance (cm^-1).
SHARED_PEAK_CM1 = 8.0
#: A predicted band names a change only if its intensity is at least this fraction of the
#: prediction's strongest band (GFN2-xTB gives some real bands, e.g. O-H stretches, a few per cent).
MIN_ASSIGNED_SHARE = 0.02
APPEARS, GOES = "appears", "goes"


@dataclass(frozen=True)
class BandChange:
    """A band that grew (``kind`` "appears") or shrank ("goes") between the two spectra.

    Attributes:
        wavenumber_cm1: position of the change (cm^-1).
        change_absorbance: after - s * before at that position (absorbance units of *after*).
        assigned: the predicted band it is assigned to, e.g. "C=O stretch (ketone) of the product
            at 1742 cm^-1"; "" when no structure was given or no predicted band is near.
    """

    wavenumber_cm1: float
    change_absorbance: float
    kind: str
    assigned: str = ""

    def describe(self) -> str:
        what = self.assigned.split(" at ")[0] if self.assigned else "band"
        verb = "appears" if self.kind == APPEARS else "gone" if self.kind == GOES else self.kind
        return f"{what} near {self.wavenumber_cm1:.0f} cm^-1 {verb}"

    def to_dict(self) -> dict:
        return {"wavenumber_cm1": self.wavenumber_cm1, "change_absorbance": self.change_absorbance,
                "kind": self.kind, "assigned": self.assigned}


@dataclass(frozen=True)
class Difference:
    """Two measured spectra on one grid and their difference.

    Attributes:
        grid_cm1: the shared range (cm^-1, ascending).
        before, after: absorbance on the grid; ``before`` already multiplied by ``scale``.
        difference: after - before (as scaled).
        scale: factor applied to the *before* spectrum.
        scaled_on: which band set the scale, in words.
        changes: the bands that appear or go, largest change first.
    """

    before_source: str
    after_source: str
    grid_cm1: np.ndarray
    before: np.ndarray
    after: np.ndarray
    difference: np.ndarray
    scale: float
    scaled_on: str
    changes: tuple[BandChange, ...]
    notes: tuple[str, ...] = ()

    def summary(self) -> str:
        lines = [f"difference {self.after_source} - {self.scale:.3f} x {self.before_source}",
                 f"scaled on {self.scaled_on}"]
        lines += [f"  {c.describe()} ({c.change_absorbance:+.3f} A)" for c in self.changes] or ["  no band changes"]
        lines += [f"# note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "before": self.before_source, "after": self.after_source, "scale": self.scale,
                "scaled_on": self.scaled_on, "changes": [c.to_dict() for c in self.changes], "notes": list(self.notes)}

    def write_csv(self, path: str | Path) -> None:
        """Curves on the grid (header row first); the changes and the caution in ``<path>.meta.json``."""
        from .files import write_table

        rows = ([f"{x:.1f}", f"{b:.6g}", f"{a:.6g}", f"{d:.6g}"]
                for x, b, a, d in zip(self.grid_cm1, self.before, self.after, self.difference))
        write_table(path, ["wavenumber_cm1", "before_scaled_absorbance", "after_absorbance", "difference_absorbance"],
                    rows, {"what": "vibest difference spectrum", **self.to_dict()})


def _shared_range(before: MeasuredSpectrum, after: MeasuredSpectrum) -> tuple[float, float]:
    lo = max(before.range_cm1[0], after.range_cm1[0])
    hi = min(before.range_cm1[1], after.range_cm1[1])
    if hi - lo < MIN_COMPARE_WIDTH_CM1:
        raise InputError(f"{before.source} ({before.range_cm1[0]:.0f}-{before.range_cm1[1]:.0f} cm^-1) and "
                         f"{after.source} ({after.range_cm1[0]:.0f}-{after.range_cm1[1]:.0f} cm^-1) share less than "
                         f"{MIN_COMPARE_WIDTH_CM1:.0f} cm^-1")
    return lo, hi


def _scale_on_window(g, before, after, window: tuple[float, float]) -> tuple[float, str]:
    lo, hi = sorted(float(v) for v in window)
    sel = (g >= lo) & (g <= hi)
    if sel.sum() < 2:
        raise InputError(f"scaling band {lo:.0f}-{hi:.0f} cm^-1 lies outside the shared range "
                         f"{g[0]:.0f}-{g[-1]:.0f} cm^-1")
    b, a = before[sel].max(), after[sel].max()
    if b <= 0 or a <= 0:
        raise InputError(f"no band in {lo:.0f}-{hi:.0f} cm^-1 in both spectra to scale on")
    return a / b, f"the band in {lo:.0f}-{hi:.0f} cm^-1 (given)"


def _scale_on_shared_peaks(g, before, after) -> tuple[float, str]:
    """Scale on the band strongest in both spectra among those they share (within
    :data:`SHARED_PEAK_CM1`): in a reaction mixture usually a C-H stretch of the skeleton that
    starting material and product have in common."""
    pb = pick_peaks(g, before, 0.05)
    pa = pick_peaks(g, after, 0.05)
    pairs = [(p, min(pa, key=lambda q: abs(q.wavenumber_cm1 - p.wavenumber_cm1))) for p in pb] if pa else []
    pairs = [(p, q) for p, q in pairs if abs(q.wavenumber_cm1 - p.wavenumber_cm1) <= SHARED_PEAK_CM1]
    if not pairs:
        return after.max() / before.max(), "the strongest absorbance of each (no band in common found)"
    p, q = max(pairs, key=lambda pq: min(pq[0].height / before.max(), pq[1].height / after.max()))
    return q.height / p.height, f"the band near {p.wavenumber_cm1:.0f} cm^-1, the strongest both share (automatic)"


def _assigned(pred: Prediction | None, position: float, role: str) -> str:
    """The predicted band of ``pred`` within the match tolerance of ``position`` that makes most of
    its broadened absorbance there, if at least :data:`MIN_ASSIGNED_SHARE` of its strongest band."""
    if pred is None or not len(pred.bands):
        return ""
    nu, intensity = pred.wavenumbers_cm1, pred.intensities_km_mol
    near = (np.abs(nu - position) <= DEFAULT_MATCH_TOLERANCE_CM1) & (intensity >= MIN_ASSIGNED_SHARE * intensity.max())
    if not near.any():
        return ""
    contrib = np.where(near, intensity * line_shape_values(nu, position, pred.spectrum.fwhm_cm1,
                                                             pred.spectrum.line_shape), -1.0)
    band = pred.bands[int(np.argmax(contrib))]
    return f"{band.label or band.character} of the {role} at {band.wavenumber_cm1:.0f} cm^-1"


def _changes(g, diff, start: Prediction | None, product: Prediction | None) -> tuple[BandChange, ...]:
    top = np.abs(diff).max()
    if top <= 0:
        return ()
    out = []
    for sign, kind, pred, role in ((1.0, APPEARS, product, "product"), (-1.0, GOES, start, "starting material")):
        y = np.clip(sign * diff, 0.0, None)
        for p in pick_peaks(g, y, 0.05):
            if p.height >= CHANGE_THRESHOLD * top:
                out.append(BandChange(p.wavenumber_cm1, sign * p.height, kind, _assigned(pred, p.wavenumber_cm1, role)))
    return tuple(sorted(out, key=lambda c: -abs(c.change_absorbance)))


def difference_spectrum(before: MeasuredSpectrum | str, after: MeasuredSpectrum | str, *, scale_on_cm1: tuple[float, float] | None = None,
               scale: float | None = None, start: Prediction | None = None, product: Prediction | None = None,
               baseline: bool = False) -> Difference:
    """after - s * before on the range both cover (see the module docstring).

    ``scale_on_cm1``: a window (cm^-1) holding a band that does not change, to scale on (None:
    automatic); ``scale``: a fixed factor instead (1.0: no scaling); ``start``/``product``: predictions of the starting material and the product, to
    assign the bands that go and appear; ``baseline``: subtract a rubber-band baseline first.
    ``before`` and ``after`` may also be paths of spectrum files."""
    before, after = as_measured(before, "before"), as_measured(after, "after")
    lo, hi = _shared_range(before, after)
    g = grid(lo, hi, STEP_CM1)
    b = preprocess(before, g, baseline=baseline, normalise=False)
    a = preprocess(after, g, baseline=baseline, normalise=False)
    for spec, curve in ((before, b), (after, a)):
        if curve.max() <= 0:
            raise InputError(f"{spec.source}: no absorbance in {lo:.0f}-{hi:.0f} cm^-1")
    if scale is not None and scale_on_cm1 is not None:
        raise InputError("give a scaling band or a fixed scale factor, not both")
    if scale is not None:
        if not (np.isfinite(scale) and scale > 0):
            raise InputError(f"scale factor {scale} must be a positive number")
        scale, scaled_on = float(scale), "a fixed factor (given)"
    elif scale_on_cm1 is not None:
        scale, scaled_on = _scale_on_window(g, b, a, scale_on_cm1)
    else:
        scale, scaled_on = _scale_on_shared_peaks(g, b, a)
    notes = []
    if not 0.1 <= scale <= 10.0:
        notes.append(f"the before spectrum was scaled by {scale:.2f}: check that both were recorded alike")
    d = a - scale * b
    return Difference(before.source, after.source, g, scale * b, a, d, float(scale), scaled_on,
                      _changes(g, d, start, product), tuple(notes))


def plot_difference(diff: Difference, path: str | Path, title: str = "") -> None:
    """Both spectra (before scaled) above, the difference below with the changes marked and named."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .files import write_with

    fig, (ax, axd) = plt.subplots(2, 1, figsize=(10, 6.5), dpi=120, sharex=True, gridspec_kw={"height_ratios": [2, 1.8]})
    ax.plot(diff.grid_cm1, diff.before, color="#1f4e79", lw=1.0, label=f"before x {diff.scale:.2f}: {Path(diff.before_source).name}")
    ax.plot(diff.grid_cm1, diff.after, color="#c55a11", lw=1.0, label=f"after: {Path(diff.after_source).name}")
    ax.set_ylabel("absorbance")
    ax.legend(loc="upper left", fontsize=7.5, frameon=False)
    ax.set_title(title or "difference spectrum (after - before)", fontsize=9.5)
    axd.plot(diff.grid_cm1, diff.difference, color="#404040", lw=0.9)
    axd.axhline(0, color="#999999", lw=0.6)
    from .output import place_labels

    top = np.abs(diff.difference).max() or 1.0
    span = float(diff.grid_cm1[-1] - diff.grid_cm1[0])
    for kind, sign, color in ((APPEARS, 1.0, "#2e7d32"), (GOES, -1.0, "#b71c1c")):
        chosen = [c for c in diff.changes[:12] if c.kind == kind]
        texts = [f"{c.wavenumber_cm1:.0f} {'+' if sign > 0 else '-'}\n{(c.assigned.split(' of the ')[0] or 'band')[:28]}"
                 for c in chosen]
        widths = [max(len(line) for line in t.split("\n")) * 0.0055 * span for t in texts]
        heights = [abs(c.change_absorbance) / top for c in chosen]
        for c, t, y in zip(chosen, texts, place_labels([c.wavenumber_cm1 for c in chosen], heights, widths, span,
                                                       levels=3, step=0.5, gap=0.06)):
            axd.plot([c.wavenumber_cm1], [c.change_absorbance], "v" if sign > 0 else "^", color=color, ms=4)
            if y is not None:
                axd.annotate(t, (c.wavenumber_cm1, sign * y * top), ha="center", va="bottom" if sign > 0 else "top",
                             fontsize=6.5, color=color)
    axd.set_ylim(-3.2 * top, 3.2 * top)
    axd.set_ylabel("after - before")
    axd.set_xlabel("wavenumber / cm$^{-1}$")
    axd.set_xlim(max(4000, diff.grid_cm1[-1]), min(400, diff.grid_cm1[0]))
    fig.text(0.01, 0.005, PLOT_CAUTION, fontsize=6.5,
             color="#7f7f7f")
    fig.tight_layout(rect=(0, 0.02, 1, 1))
    write_with(path, fig.savefig)
    plt.close(fig)
