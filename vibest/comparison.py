"""Comparison of a predicted with a measured spectrum: scores, scale/shift fit, peak matching.

Both spectra are brought to absorbance on one grid (default 500-3800 cm^-1, 2 cm^-1 steps),
clipped at zero, scaled to a maximum of 1 and raised to the power ``intensity_power`` (default
0.5). Predicted bands get gas-phase rotational contours when the measured sample was a gas
(:mod:`vibest.gas_phase`). Scores (all 1 for identical spectra):

* ``pearson``: Pearson correlation coefficient of the two curves (insensitive to offsets and scale).
* ``spearman``: Spearman rank correlation (Pearson of the ranks; robust to non-linear intensity errors).
* ``cosine``: a.b / (|a| |b|), the cosine of the angle between the curves as vectors.
* ``overlap``: sum(min(a, b)) / sum(max(a, b)) after scaling each curve to unit area
  (weighted Jaccard / Ruzicka similarity): the shared fraction of band area, 0 to 1.
* ``regional``: Pearson correlation computed separately in the regions below 1500, 1500-2500
  and above 2500 cm^-1 and averaged with weights max(a, b) of each region: the fingerprint
  region counts as much as the X-H stretches that dominate a whole-range correlation (and whose
  GFN2-xTB intensities are too strong). When the default was chosen, benchmarks/identification.py
  gave isomers top-1 79 % with ``pearson`` and 100 % with ``regional``; current figures are in the
  README's accuracy section.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, signal, stats

from .errors import InputError
from .measured import MeasuredSpectrum, as_measured, preprocess
from .pipeline import Prediction, is_real
from .spectrum import broaden, grid, line_shape_values

SCORES = ("pearson", "spearman", "cosine", "overlap", "regional")
#: Region edges of the ``regional`` score (cm^-1).
REGIONAL_EDGES_CM1 = (1500.0, 2500.0)
#: Chosen with benchmarks/identification.py on the training spectra (figures at the time, older
#: scale factors): pearson top-1 61 %, top-3 72 %, isomers 79 %; regional 64 %, 81 %, 100 %.
#: Current figures: README, accuracy section (rerun the benchmark to refresh them).
DEFAULT_SCORE = "regional"
DEFAULT_COMPARE_RANGE_CM1 = (500.0, 3800.0)
#: Narrowest range compared (cm^-1): a few bands' worth.
MIN_COMPARE_WIDTH_CM1 = 50.0
DEFAULT_COMPARE_STEP_CM1 = 2.0
DEFAULT_MATCH_TOLERANCE_CM1 = 40.0
#: Both normalised curves are compared as y**p: p = 0.5 (square root) lets medium and weak bands
#: count against the strongest one (GFN2-xTB intensities are uneven); benchmarks/identification.py
#: measured p = 1, 0.7, 0.5, 0.33 on real spectra.
DEFAULT_INTENSITY_POWER = 0.5
#: A common shift of the predicted wavenumbers is fitted by default within +-DEFAULT_MAX_SHIFT_CM1:
#: it absorbs the systematic error left after scaling (e.g. sp3 C-H stretches ~20-30 cm^-1
#: high) equally for every candidate. benchmarks/identification.py when chosen (older scale
#: factors): top-1 50 % without a shift, 56-61 % with bounds of 10, 20, 30 or 40 cm^-1 (61 % at 20).
DEFAULT_FIT_SHIFT = True
DEFAULT_MAX_SHIFT_CM1 = 20.0


def _pearson(a: np.ndarray, b: np.ndarray) -> float:
    if a.std() == 0 or b.std() == 0:
        return 0.0
    return float(np.corrcoef(a, b)[0, 1])


def _regional(a: np.ndarray, b: np.ndarray, grid_cm1: np.ndarray) -> float:
    edges = (-np.inf, *REGIONAL_EDGES_CM1, np.inf)
    values, weights = [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        part = (grid_cm1 >= lo) & (grid_cm1 < hi)
        if part.sum() < 10:
            continue
        values.append(_pearson(a[part], b[part]))
        weights.append(max(a[part].max(), b[part].max()))
    if not values or sum(weights) <= 0:
        return _pearson(a, b)
    return float(np.average(values, weights=weights))


def score(a, b, name: str = DEFAULT_SCORE, grid_cm1=None) -> float:
    """Similarity of two curves on the same grid (see module docstring); ``regional`` needs
    the grid (cm^-1)."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    if a.shape != b.shape:
        raise ValueError("curves must share one grid")
    if name == "pearson":
        return _pearson(a, b)
    if name == "regional":
        if grid_cm1 is None:
            raise ValueError("the regional score needs the wavenumber grid")
        return _regional(a, b, np.asarray(grid_cm1, float))
    if name == "spearman":
        if a.std() == 0 or b.std() == 0:
            return 0.0
        return float(stats.spearmanr(a, b).statistic)
    if name == "cosine":
        na, nb = np.linalg.norm(a), np.linalg.norm(b)
        return float(a @ b / (na * nb)) if na > 0 and nb > 0 else 0.0
    if name == "overlap":
        sa, sb = a.clip(0).sum(), b.clip(0).sum()
        if sa <= 0 or sb <= 0:
            return 0.0
        pa, pb = a.clip(0) / sa, b.clip(0) / sb
        return float(np.minimum(pa, pb).sum() / np.maximum(pa, pb).sum())
    raise InputError(f"unknown score {name!r}; choose one of {', '.join(SCORES)}")


def all_scores(a, b, grid_cm1) -> dict[str, float]:
    return {n: score(a, b, n, grid_cm1) for n in SCORES}


@dataclass(frozen=True)
class Peak:
    """A picked peak: position (cm^-1) and height (normalised absorbance)."""

    wavenumber_cm1: float
    height: float


@dataclass(frozen=True)
class PeakMatch:
    """A row of the peak-match table; a side is None when unmatched."""

    measured_cm1: float | None
    measured_height: float | None
    predicted_cm1: float | None
    predicted_height: float | None
    character: str

    @property
    def shift_cm1(self) -> float | None:
        if self.measured_cm1 is None or self.predicted_cm1 is None:
            return None
        return self.predicted_cm1 - self.measured_cm1

    @property
    def matched(self) -> bool:
        return self.measured_cm1 is not None and self.predicted_cm1 is not None

    def to_dict(self) -> dict:
        return {"measured_cm1": self.measured_cm1, "measured_height": self.measured_height,
                "predicted_cm1": self.predicted_cm1, "predicted_height": self.predicted_height,
                "shift_cm1": self.shift_cm1, "matched": self.matched, "character": self.character}


@dataclass(frozen=True)
class Comparison:
    """Result of comparing one prediction with one measured spectrum.

    Attributes:
        score_name, score: the chosen similarity and its value.
        scores: every similarity at the final alignment.
        extra_scale: factor applied on top of the prediction's scaling (1 unless fitted).
        shift_cm1: shift applied to predicted wavenumbers (0 unless fitted).
        grid_cm1, measured_curve, predicted_curve: the two processed curves.
        matches: peak-match table, highest measured wavenumber first.
        band_adjustments: the per-band condensed-phase shifts, intensity factors and widths that
            were applied (:class:`vibest.condensed_phase.BandAdjustments`), or None (a gas).
    """

    smiles: str
    score_name: str
    score: float
    scores: dict[str, float]
    extra_scale: float
    shift_cm1: float
    grid_cm1: np.ndarray
    measured_curve: np.ndarray
    predicted_curve: np.ndarray
    matches: tuple[PeakMatch, ...]
    settings: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    band_adjustments: object | None = None

    @property
    def coverage(self) -> float:
        """Fraction of the requested comparison range that the measured data cover."""
        return float(self.settings.get("coverage", 1.0))

    def to_dict(self, include_curves: bool = False) -> dict:
        d = {"smiles": self.smiles, "score_name": self.score_name, "score": self.score, "scores": self.scores,
             "extra_scale": self.extra_scale, "shift_cm1": self.shift_cm1, "settings": self.settings,
             "notes": list(self.notes), "peak_matches": [m.to_dict() for m in self.matches]}
        if include_curves:
            d["grid_cm1"] = self.grid_cm1.tolist()
            d["measured_curve"] = self.measured_curve.tolist()
            d["predicted_curve"] = self.predicted_curve.tolist()
        return d


def predicted_curve(pred: Prediction, grid_cm1, extra_scale: float = 1.0, shift_cm1: float = 0.0,
                    fwhm_cm1: float | None = None, line_shape: str | None = None, gas_phase: bool = False,
                    temperature_K: float = 298.15, contour: tuple | None = None,
                    adjustments=None) -> np.ndarray:
    """The prediction broadened on ``grid_cm1`` after nu -> extra_scale * nu + shift, max 1.

    With ``gas_phase`` each band gets a rotational P/Q/R contour (:mod:`vibest.gas_phase`);
    ``contour`` is its (B, Q fractions) when already known. ``adjustments``
    (:class:`vibest.condensed_phase.BandAdjustments`) move, strengthen and widen single bands first."""
    nu = pred.wavenumbers_cm1 * extra_scale + shift_cm1
    intensities = pred.intensities_km_mol
    fwhm = fwhm_cm1 or pred.spectrum.fwhm_cm1
    shape = line_shape or pred.spectrum.line_shape
    if adjustments is not None:
        nu = nu + adjustments.shift_cm1
        intensities = intensities * adjustments.intensity_factor
    if gas_phase:
        from .gas_phase import band_contour_inputs, envelope_spectrum

        b, q = contour if contour is not None else band_contour_inputs(pred)
        y = envelope_spectrum(nu, intensities, b, q, fwhm, shape, grid_cm1, temperature_K).absorption_km_mol_cm1
    else:
        own = adjustments.fwhm_cm1 if adjustments is not None else np.full(len(nu), np.nan)
        common = ~np.isfinite(own)
        y = broaden(nu[common], intensities[common], fwhm, shape, grid_cm1).absorption_km_mol_cm1
        for k in np.flatnonzero(~common):  # a hydrogen-bonded band's own width
            y = y + broaden(nu[k:k + 1], intensities[k:k + 1], float(own[k]), shape, grid_cm1).absorption_km_mol_cm1
    return y / y.max() if y.max() > 0 else y


def smooth(curve, step_cm1: float, fwhm_cm1: float) -> np.ndarray:
    """Gaussian smoothing of a curve on a uniform grid (FWHM in cm^-1), peak scaled back to the original maximum."""
    y = np.asarray(curve, dtype=float)
    if fwhm_cm1 <= 0 or len(y) < 3:
        return y
    half = int(np.ceil(2 * fwhm_cm1 / step_cm1))
    x = np.arange(-half, half + 1) * step_cm1
    k = line_shape_values(x, 0.0, fwhm_cm1, "gaussian")
    out = np.convolve(y, k / k.sum(), mode="same")
    return out * (y.max() / out.max()) if out.max() > 0 else out


def pick_peaks(x, y, prominence: float = 0.03, min_separation_cm1: float = 8.0) -> list[Peak]:
    """Local maxima with at least ``prominence`` (fraction of the curve maximum), scipy.signal.find_peaks."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if len(x) < 3 or y.max() <= 0:
        return []
    step = abs(x[1] - x[0])
    idx, _ = signal.find_peaks(y, prominence=prominence * y.max(), distance=max(1, int(min_separation_cm1 / step)))
    return [Peak(float(x[i]), float(y[i])) for i in idx]


def _band_character(pred: Prediction, position: float, extra_scale: float, shift: float, fwhm: float,
                    shape: str) -> str:
    nu = pred.wavenumbers_cm1 * extra_scale + shift
    contrib = pred.intensities_km_mol * line_shape_values(nu, position, fwhm, shape)
    if contrib.max() <= 0:
        return ""
    return pred.bands[int(np.argmax(contrib))].character


def match_peaks(measured: list[Peak], predicted: list[Peak], tolerance_cm1: float = DEFAULT_MATCH_TOLERANCE_CM1
                ) -> list[tuple[Peak | None, Peak | None]]:
    """One-to-one assignment minimising total |shift| (Hungarian method, scipy linear_sum_assignment);
    pairs farther apart than ``tolerance_cm1`` stay unmatched."""
    pairs: list[tuple[Peak | None, Peak | None]] = []
    used_m, used_p = set(), set()
    if measured and predicted:
        cost = np.abs(np.subtract.outer([m.wavenumber_cm1 for m in measured], [p.wavenumber_cm1 for p in predicted]))
        big = 1e6
        rows, cols = optimize.linear_sum_assignment(np.where(cost <= tolerance_cm1, cost, big))
        for r, c in zip(rows, cols):
            if cost[r, c] <= tolerance_cm1:
                pairs.append((measured[r], predicted[c]))
                used_m.add(r)
                used_p.add(c)
    pairs += [(m, None) for k, m in enumerate(measured) if k not in used_m]
    pairs += [(None, p) for k, p in enumerate(predicted) if k not in used_p]
    return sorted(pairs, key=lambda mp: -(mp[0] or mp[1]).wavenumber_cm1)


def check_range(range_cm1) -> None:
    """A comparison range must be two numbers, low < high, at least MIN_COMPARE_WIDTH_CM1 apart."""
    try:
        lo, hi = (float(v) for v in range_cm1)
    except (TypeError, ValueError):
        raise InputError(f"comparison range {range_cm1!r}: give two wavenumbers, low and high") from None
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo >= hi:
        raise InputError(f"comparison range {lo:g}-{hi:g} cm^-1: the low end must be below the high end")
    if hi - lo < MIN_COMPARE_WIDTH_CM1:
        raise InputError(f"comparison range {lo:g}-{hi:g} cm^-1 is narrower than {MIN_COMPARE_WIDTH_CM1:.0f} cm^-1")
    if lo < 0 or hi > 10000:
        raise InputError(f"comparison range {lo:g}-{hi:g} cm^-1 must lie within 0-10000 cm^-1")


@dataclass(frozen=True)
class ComparisonOptions:
    """How a prediction is compared with a measured spectrum (one object for the API, the CLI,
    rankings and verdicts).

    Attributes:
        score_name: similarity to report and fit by (:data:`SCORES`).
        range_cm1, step_cm1: compared range and grid step (cm^-1).
        fit_scale, scale_bounds: fit an extra factor on the predicted wavenumbers within bounds.
        fit_shift, shift_bounds_cm1: fit a common shift (cm^-1) within bounds (default +-20).
        fwhm_cm1, line_shape: band width (cm^-1) and shape; None: the prediction's own.
        baseline: subtract a fitted baseline from the measured curve.
        tolerance_cm1, prominence: peak matching (largest |shift|, cm^-1) and picking (fraction of
            the maximum).
        gas_phase: rotational contours for a gas sample (None: when the measured file says gas).
        condensed_shifts: in a condensed phase, move bands with a known shift (:mod:`vibest.condensed_phase`).
        hydrogen_bonding: in a condensed phase (with ``condensed_shifts``), compute hydrogen-bonded
            clusters for candidates with O-H/N-H donors (:mod:`vibest.hydrogen_bonding`; rankings,
            verdicts and the ``compare`` command attach them, :func:`compare` uses what a
            prediction carries).
        smooth_measured_cm1: Gaussian smoothing (FWHM, cm^-1) of the measured curve; 0: none.
        intensity_power: both normalised curves are compared as y**p (0.1-2).
        atr: ATR correction of the measured spectrum (:mod:`vibest.sampling`): "auto" (when the
            file says ATR, with a diamond crystal), "off", or a crystal ("diamond", "znse", "ge").
        atr_angle_deg: angle of incidence of the ATR correction (degrees).
        keep_atmospheric: keep the windows of atmospheric CO2 and water vapour found in a
            condensed-phase spectrum (:mod:`vibest.atmosphere`); by default they are left out.
        exclude_cm1: further windows (low, high cm^-1) left out of the comparison, e.g. the
            bands of a mull oil or of water in a KBr pellet (:data:`vibest.sampling.MATRIX_WINDOWS`).
    """

    score_name: str = DEFAULT_SCORE
    range_cm1: tuple[float, float] = DEFAULT_COMPARE_RANGE_CM1
    step_cm1: float = DEFAULT_COMPARE_STEP_CM1
    fit_scale: bool = False
    scale_bounds: tuple[float, float] = (0.95, 1.05)
    fit_shift: bool = DEFAULT_FIT_SHIFT
    shift_bounds_cm1: tuple[float, float] = (-DEFAULT_MAX_SHIFT_CM1, DEFAULT_MAX_SHIFT_CM1)
    fwhm_cm1: float | None = None
    line_shape: str | None = None
    baseline: bool = False
    tolerance_cm1: float = DEFAULT_MATCH_TOLERANCE_CM1
    prominence: float = 0.03
    gas_phase: bool | None = None
    condensed_shifts: bool = True
    hydrogen_bonding: bool = True
    smooth_measured_cm1: float = 0.0
    intensity_power: float = DEFAULT_INTENSITY_POWER
    atr: str = "auto"
    atr_angle_deg: float = 45.0
    keep_atmospheric: bool = False
    exclude_cm1: tuple[tuple[float, float], ...] = ()

    def is_gas_phase(self, measured: MeasuredSpectrum) -> bool:
        """Whether ``measured`` is compared as a gas: :attr:`gas_phase`, or when None what the file says."""
        return measured.phase == "gas" if self.gas_phase is None else bool(self.gas_phase)

    def computes_hydrogen_bonding(self, measured: MeasuredSpectrum) -> bool:
        """Whether predictions compared with ``measured`` should carry computed hydrogen bonding
        (a condensed sample with condensed-phase adjustments on)."""
        return self.condensed_shifts and self.hydrogen_bonding and not self.is_gas_phase(measured)

    def checked(self) -> "ComparisonOptions":
        """These options, or an InputError naming the first unusable one."""
        if self.score_name not in SCORES:
            raise InputError(f"unknown score {self.score_name!r}; choose one of {', '.join(SCORES)}")
        check_range(self.range_cm1)
        if not (0.1 <= self.intensity_power <= 2.0):
            raise InputError(f"intensity power {self.intensity_power} must be between 0.1 and 2")
        if self.tolerance_cm1 <= 0:
            raise InputError(f"peak-match tolerance {self.tolerance_cm1:g} cm^-1 must be positive")
        for name, value in (("band width fwhm_cm1", self.fwhm_cm1), ("grid step step_cm1", self.step_cm1)):
            if value is not None and not (is_real(value) and value > 0):
                raise InputError(f"{name} {value!r} cm^-1 must be a positive number")
        from .sampling import CRYSTALS

        if self.atr not in ("auto", "off", *CRYSTALS):
            raise InputError(f"ATR setting {self.atr!r}: choose auto, off or a crystal ({', '.join(CRYSTALS)})")
        for window in self.exclude_cm1:
            lo, hi = (float(v) for v in window)
            if not (np.isfinite(lo) and np.isfinite(hi)) or lo >= hi:
                raise InputError(f"excluded window {lo:g}-{hi:g} cm^-1: the low end must be below the high end")
        return self

    @property
    def max_shift_cm1(self) -> float:
        return float(max(abs(b) for b in self.shift_bounds_cm1))


def comparison_options(options: ComparisonOptions | None = None, **changes) -> ComparisonOptions:
    """``options`` (default: :class:`ComparisonOptions`()) with ``changes`` applied, checked; an
    unknown option name is an InputError."""
    import dataclasses

    base = options or ComparisonOptions()
    unknown = set(changes) - {f.name for f in dataclasses.fields(ComparisonOptions)}
    if unknown:
        hint = ("; the level of theory goes in calc=vibest.calculation_options('gfn2')"
                if unknown & {"method", "level"} else "")
        raise InputError(f"unknown comparison option(s) {', '.join(sorted(unknown))}{hint}")
    return dataclasses.replace(base, **changes).checked() if changes else base.checked()


@dataclass(frozen=True)
class _Prepared:
    """Stage 1 of a comparison: both sides ready on one grid."""

    range_cm1: tuple[float, float]  # the compared range: the requested one within the measured one
    grid_cm1: np.ndarray
    mask: np.ndarray  # True where the grid is left out (atmospheric, mull or matrix windows)
    measured_linear: np.ndarray  # normalised measured absorbance
    measured_curve: np.ndarray  # measured_linear ** intensity_power
    fwhm_cm1: float
    line_shape: str
    gas_phase: bool
    contour: tuple | None
    adjustments: object | None  # vibest.condensed_phase.BandAdjustments in a condensed phase
    coverage: float
    notes: tuple[str, ...]


def prepare(pred: Prediction, measured: MeasuredSpectrum, opts: ComparisonOptions) -> _Prepared:
    """Stage 1: the compared range (requested range within the measured one), the measured curve
    on the grid, the band width and shape, and the phase treatment of the predicted bands."""
    lo, hi = opts.range_cm1
    mlo, mhi = measured.range_cm1
    lo, hi = max(lo, mlo), min(hi, mhi)
    if hi - lo < MIN_COMPARE_WIDTH_CM1:
        raise InputError(f"{measured.source}: the measured range {mlo:.0f}-{mhi:.0f} cm^-1 overlaps the comparison "
                         f"range {opts.range_cm1[0]:.0f}-{opts.range_cm1[1]:.0f} cm^-1 by less than "
                         f"{MIN_COMPARE_WIDTH_CM1:.0f} cm^-1")
    coverage = (hi - lo) / (opts.range_cm1[1] - opts.range_cm1[0])
    notes = []
    if coverage < 0.9:
        notes.append(f"the measured data cover {lo:.0f}-{hi:.0f} cm^-1, {coverage:.0%} of the compared "
                     f"{opts.range_cm1[0]:.0f}-{opts.range_cm1[1]:.0f} cm^-1: bands outside are not judged")
    gas_phase = opts.is_gas_phase(measured)
    if opts.gas_phase is None and measured.sampling:
        notes.append(f"phase: {'gas' if gas_phase else 'condensed'} ({measured.sampling}, from the file's "
                     f"{measured.sampling_from})")
    measured, atr_note = _atr(measured, opts)
    notes += atr_note
    g = grid(lo, hi, opts.step_cm1)
    windows = list(opts.exclude_cm1)
    if not gas_phase and not opts.keep_atmospheric:
        from .atmosphere import atmospheric_bands

        found = atmospheric_bands(measured)
        windows += found.windows_cm1
        notes += [f"{n}: left out of the comparison (--keep-atmospheric keeps it)" for n in found.notes()]
    mask = np.zeros(len(g), dtype=bool)
    for a, b in windows:
        mask |= (g >= min(a, b)) & (g <= max(a, b))
    if mask.all():
        raise InputError("the excluded windows cover the whole compared range")
    m_linear = preprocess(measured, g, baseline=opts.baseline, normalise=False)
    if opts.smooth_measured_cm1 > 0:
        m_linear = smooth(m_linear, opts.step_cm1, opts.smooth_measured_cm1)
    m_linear = _masked_normalised(m_linear, mask)
    contour = adjustments = None
    fwhm = opts.fwhm_cm1 or pred.spectrum.fwhm_cm1
    if gas_phase:
        from .gas_phase import band_contour_inputs

        contour = band_contour_inputs(pred)  # once, not once per trial scale/shift
    elif opts.condensed_shifts:
        from .condensed_phase import condensed_bands
        adjustments = condensed_bands(pred, fwhm)
        notes += adjustments.notes
        if opts.hydrogen_bonding:
            notes += _hydrogen_bonding_gap(pred)
    return _Prepared((lo, hi), g, mask, m_linear, m_linear ** opts.intensity_power, fwhm,
                     opts.line_shape or pred.spectrum.line_shape, gas_phase, contour, adjustments, coverage,
                     tuple(notes))


def _hydrogen_bonding_gap(pred) -> list[str]:
    """A note when a condensed comparison of a molecule with an O-H/N-H donor has no computed
    hydrogen bonding (never compared free in silence)."""
    from .hydrogen_bonding import NOT_COMPUTED, cluster_skipped, needs_hydrogen_bonding

    first = pred.first_prediction
    free = "its O-H/N-H bands are those of a free molecule"
    failed = [n for n in getattr(pred, "notes", ()) if n.startswith(NOT_COMPUTED)]
    if failed:
        return [f"{failed[0]}: {free}"]
    skipped = cluster_skipped(first.record)
    if skipped:
        return [f"{NOT_COMPUTED} ({skipped}): {free}"]
    if needs_hydrogen_bonding(pred):
        return [f"{NOT_COMPUTED} for this prediction: {free} (vibest.hydrogen_bonding.with_hydrogen_bonding "
                "computes them)"]
    return []


class _AlignedCurve:
    """The normalised predicted absorbance on the prepared grid after nu -> f nu + s. A pure
    shift translates the broadened curve, so it is computed once on a padded grid and moved."""

    def __init__(self, pred: Prediction, prep: _Prepared, opts: ComparisonOptions):
        self.pred, self.prep = pred, prep
        self.shifted_base = None
        if opts.fit_shift and not opts.fit_scale:
            step = opts.step_cm1
            pad = opts.max_shift_cm1 + 2 * step
            padded = grid(prep.grid_cm1[0] - pad, prep.grid_cm1[-1] + pad, step)
            self.shifted_base = (padded, self._broadened(padded, 1.0, 0.0))

    def _broadened(self, g, f: float, s: float) -> np.ndarray:
        p = self.prep
        return predicted_curve(self.pred, g, f, s, p.fwhm_cm1, p.line_shape, p.gas_phase, contour=p.contour,
                               adjustments=p.adjustments)

    def __call__(self, f: float, s: float) -> np.ndarray:
        g = self.prep.grid_cm1
        y = np.interp(g - s, *self.shifted_base) if self.shifted_base is not None and f == 1.0 else \
            self._broadened(g, f, s)
        return _masked_normalised(y, self.prep.mask)


def _masked_normalised(y: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """The curve with the left-out windows at zero, scaled to a maximum of 1 over the rest."""
    if mask.any():
        y = np.where(mask, 0.0, y)
    top = y.max()
    return y / top if top > 0 else y


def _atr(measured: MeasuredSpectrum, opts: ComparisonOptions) -> tuple[MeasuredSpectrum, list[str]]:
    """The measured spectrum ATR-corrected when asked or when the file says ATR (and the note)."""
    from .sampling import ATR, DEFAULT_CRYSTAL, atr_corrected

    crystal = DEFAULT_CRYSTAL if opts.atr == "auto" and measured.sampling == ATR else \
        (opts.atr if opts.atr not in ("auto", "off") else None)
    if crystal is None:
        return measured, []
    out = atr_corrected(measured, crystal, opts.atr_angle_deg)
    return out, [out.notes[-1]]


def fit_alignment(curve: _AlignedCurve, opts: ComparisonOptions) -> tuple[float, float]:
    """Stage 2: (extra scale, shift in cm^-1) that maximise the score within the bounds: a coarse
    grid, then a bounded refinement (scipy.optimize.minimize_scalar, or Powell for both);
    (1, 0) when neither is fitted."""
    prep = curve.prep

    def value(f, s):
        return score(prep.measured_curve, curve(f, s) ** opts.intensity_power, opts.score_name, prep.grid_cm1)

    if opts.fit_scale and opts.fit_shift:
        fs = np.linspace(*opts.scale_bounds, 11)
        ss = np.linspace(*opts.shift_bounds_cm1, 9)
        vals = np.array([[value(f, s) for s in ss] for f in fs])
        i, j = np.unravel_index(np.argmax(vals), vals.shape)
        res = optimize.minimize(lambda p: -value(p[0], p[1]), x0=[fs[i], ss[j]], method="Powell",
                                bounds=[opts.scale_bounds, opts.shift_bounds_cm1], options={"xtol": 1e-4, "ftol": 1e-6})
        return (float(res.x[0]), float(res.x[1])) if -res.fun >= vals[i, j] else (fs[i], ss[j])
    if not (opts.fit_scale or opts.fit_shift):
        return 1.0, 0.0
    bounds = opts.scale_bounds if opts.fit_scale else opts.shift_bounds_cm1
    pts = np.linspace(*bounds, 41)
    fun = (lambda v: value(v, 0.0)) if opts.fit_scale else (lambda v: value(1.0, v))
    vals = [fun(v) for v in pts]
    k = int(np.argmax(vals))
    a, b = pts[max(k - 1, 0)], pts[min(k + 1, len(pts) - 1)]
    res = optimize.minimize_scalar(lambda v: -fun(v), bounds=(a, b), method="bounded",
                                   options={"xatol": 1e-5 if opts.fit_scale else 1e-2})
    best = float(res.x) if -res.fun >= vals[k] else float(pts[k])
    return (best, 0.0) if opts.fit_scale else (1.0, best)


def peak_table(pred: Prediction, prep: _Prepared, predicted_linear: np.ndarray, extra_scale: float, shift_cm1: float,
               opts: ComparisonOptions) -> tuple[PeakMatch, ...]:
    """Stage 3: peaks of both curves matched one to one, each predicted peak with the character
    of the band that makes most of it. Peaks are picked on the normalised absorbances themselves
    (before the intensity power, which would lift noise to the prominence of real bands)."""
    g = prep.grid_cm1
    rows = []
    for m, p in match_peaks(pick_peaks(g, prep.measured_linear, opts.prominence),
                            pick_peaks(g, predicted_linear, opts.prominence), opts.tolerance_cm1):
        char = _band_character(pred, p.wavenumber_cm1, extra_scale, shift_cm1, prep.fwhm_cm1, prep.line_shape) \
            if p else ""
        rows.append(PeakMatch(m.wavenumber_cm1 if m else None, m.height if m else None,
                              p.wavenumber_cm1 if p else None, p.height if p else None, char))
    return tuple(rows)


def compare(pred: Prediction, measured: MeasuredSpectrum | str, options: ComparisonOptions | None = None,
            **changes) -> Comparison:
    """Score a prediction (from :func:`vibest.predict`) against a measured spectrum (or the path of
    its file), optionally fitting a scale factor and/or shift.

    ``options`` (:class:`ComparisonOptions`; default settings when None), with any of its fields
    given as keywords on top (``compare(pred, spec, fit_scale=True)``).

    ``gas_phase`` gives predicted bands rotational contours (for spectra of gases; None: when
    the measured file says the sample was a gas); otherwise the sample is taken as a condensed
    phase and, with ``condensed_shifts``, bands with a known condensed-phase shift are moved
    (:mod:`vibest.condensed_phase`);
    ``smooth_measured_cm1`` smooths the measured curve with a Gaussian of that FWHM (resolved
    rotational lines become an envelope); ``intensity_power`` p compares y**p of both normalised
    curves (p < 1 lets weak bands count more against strong ones).

    By default a common shift of the predicted wavenumbers (within +-20 cm^-1) is fitted
    (:data:`DEFAULT_FIT_SHIFT`); ``fit_shift=False`` compares the prediction as it is.
    Three stages: :func:`prepare` (grid, measured curve, phase), :func:`fit_alignment` (scale
    and/or shift maximising the score) and :func:`peak_table`. The fitted values are reported in
    the result; the prediction itself is not changed.
    """
    if not hasattr(pred, "spectrum"):
        raise InputError(f"compare takes a prediction (vibest.predict(smiles)), not {type(pred).__name__}")
    measured = as_measured(measured)
    opts = comparison_options(options, **changes)
    prep = prepare(pred, measured, opts)
    curve = _AlignedCurve(pred, prep, opts)
    f_best, s_best = fit_alignment(curve, opts)
    p_linear = curve(f_best, s_best)
    p_curve = p_linear ** opts.intensity_power
    scores = all_scores(prep.measured_curve, p_curve, prep.grid_cm1)
    g = prep.grid_cm1
    settings = {"range_cm1": list(prep.range_cm1), "step_cm1": opts.step_cm1, "fwhm_cm1": prep.fwhm_cm1,
                "line_shape": prep.line_shape, "baseline": opts.baseline, "fit_scale": opts.fit_scale,
                "fit_shift": opts.fit_shift, "tolerance_cm1": opts.tolerance_cm1, "prominence": opts.prominence,
                "gas_phase": prep.gas_phase,
                "condensed_shifts": bool(prep.adjustments is not None and prep.adjustments.changes_anything),
                "smooth_measured_cm1": opts.smooth_measured_cm1, "intensity_power": opts.intensity_power,
                "coverage": prep.coverage, "excluded_points": int(prep.mask.sum())}
    return Comparison(pred.smiles, opts.score_name, scores[opts.score_name], scores, f_best, s_best, g,
                      prep.measured_curve, p_curve, peak_table(pred, prep, p_linear, f_best, s_best, opts),
                      settings, prep.notes, prep.adjustments)
