"""How sure a ranking is: a calibrated probability that its first candidate is right, and flags.

**Confidence.** A logistic model of the first candidate's score s1, its margin m = s1 - s2 to
the second and the share f of the measured peaks its prediction matches (within the comparison's
tolerance), P(right) = 1 / (1 + exp(-(a + b s1 + c m + d f))), fitted by benchmarks/confidence.py on
rankings of real measured gas-phase spectra (benchmarks/data/measured_set.csv): every molecule of
the set as candidates, its isomers, the right structure with its decoys (vibest.decoys), and the
set without the right structure. The coefficients, the comparison settings they hold for and
their cross-validated calibration are shipped in vibest/data/confidence.json; with other
settings (another score, level of theory or comparison option) no confidence is given.

**Flags** (plain words, each checkable on its own):
* the fitted shift sits at its bound (the prediction wanted more shift than allowed);
* in a refined ranking, the refining level puts another candidate first than the screening level
  did (in the benchmark's refined rankings of all molecules, the first was right in 4 of 8 such
  cases, against 25 of 28 when the levels agreed);
* the best score is below what right answers scored in that benchmark ("no candidate explains
  this spectrum well");
* the margin is inside the score's own noise: the first two candidates are compared again with
  the measured spectrum perturbed within its uncertainties (baseline removed, noise added, a
  different width, a different intensity power) and their order flips, or the margin is not
  larger than twice the spread of the margins (or is a tie, below 0.001).
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from importlib import resources

import numpy as np

from .analysis.scaling import DEFAULT_METHOD_NAME

CONFIDENCE_FILE = "confidence.json"
#: Level of theory (method name) of the first candidates -> its shipped confidence model
#: (benchmarks/confidence.py --method [--refine K --refine-method M]); the B3LYP one is for
#: rankings screened at GFN1-xTB with the best 5 refined at B3LYP (its settings say so).
CONFIDENCE_FILES = {"GFN2-xTB": CONFIDENCE_FILE, "GFN1-xTB": "confidence-gfn1.json",
                    "B3LYP-D3(BJ)/6-31G(d)": "confidence-gfn1-refine5-b3lyp.json"}
#: A confidence below this is called low.
LOW_CONFIDENCE = 0.7
#: A margin this small is a tie whatever the noise.
TIE_MARGIN = 1e-3
#: A fitted shift within this of its bound (cm^-1) counts as at the bound.
BOUND_SLACK_CM1 = 0.5
#: Said beside a refined ranking's confidence when generated decoys are ranked: the refined
#: model's calibration rankings had none (their density-functional records would take hours).
REFINED_DECOYS_NOTE = ("the refined level's confidence was calibrated on rankings of the benchmark's own "
                       "molecules, none with generated decoys: read it as approximate here")

SHIFT_AT_BOUND = "shift at bound"
LEVELS_DISAGREE = "levels disagree"
POOR_FIT = "no good fit"
MARGIN_IN_NOISE = "margin within noise"
LOW = "low confidence"


@dataclass(frozen=True)
class Flag:
    """A warning about a ranking: ``kind`` (one of the module's constants) and a sentence."""

    kind: str
    message: str

    def to_dict(self) -> dict:
        return {"kind": self.kind, "message": self.message}


@dataclass(frozen=True)
class ConfidenceModel:
    """The shipped logistic model (see the module docstring).

    Attributes:
        intercept, score_weight, margin_weight, matched_weight: a, b, c, d of
            P = 1 / (1 + exp(-(a + b s1 + c m + d f))).
        settings: comparison settings and level of theory the model was fitted for.
        poor_fit_score: a best score below this is flagged (a low percentile of the scores of
            right first candidates in the benchmark).
        cross_validated_ece: expected calibration error over held-out folds.
    """

    intercept: float
    score_weight: float
    margin_weight: float
    matched_weight: float
    settings: dict
    poor_fit_score: float
    cross_validated_ece: float

    def probability(self, score: float, margin: float, matched: float) -> float:
        z = self.intercept + self.score_weight * score + self.margin_weight * margin + self.matched_weight * matched
        return float(1.0 / (1.0 + np.exp(-z)))

    def applies_to(self, settings: dict) -> bool:
        """Whether ``settings`` (keys of :attr:`settings`) are those the model was fitted for."""
        return all(_same(settings.get(k), v) for k, v in self.settings.items())


def _same(a, b) -> bool:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return abs(float(a) - float(b)) < 1e-9
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    return a == b


def shipped_model(method_name: str = DEFAULT_METHOD_NAME) -> ConfidenceModel | None:
    """The model shipped for a level of theory (vibest/data/confidence*.json), or None."""
    name = CONFIDENCE_FILES.get(method_name)
    if name is None:
        return None
    path = resources.files("vibest.data").joinpath(name)
    if not path.is_file():
        return None
    d = json.loads(path.read_text())
    return ConfidenceModel(d["intercept"], d["score_weight"], d["margin_weight"], d["matched_weight"], d["settings"],
                           d["poor_fit_score"], d["cross_validated_ece"])


def matched_share(comparison) -> float:
    """Share of the measured peaks that a predicted peak was paired with (the peak table)."""
    picked = sum(m.measured_cm1 is not None for m in comparison.matches)
    return sum(m.matched for m in comparison.matches) / picked if picked else 0.0


def fit_logistic(features: np.ndarray, labels: np.ndarray, l2: float = 1e-3) -> np.ndarray:
    """Coefficients (intercept, weights...) of a logistic regression of ``labels`` (0/1) on
    ``features`` (n, k), maximum likelihood with a small L2 penalty on the weights (scipy)."""
    from scipy.optimize import minimize

    x = np.column_stack([np.ones(len(features)), np.asarray(features, float)])
    y = np.asarray(labels, float)

    def loss(w):
        z = x @ w
        return float(np.sum(np.logaddexp(0.0, z) - y * z) + l2 * np.sum(w[1:] ** 2))

    def grad(w):
        p = 1.0 / (1.0 + np.exp(-(x @ w)))
        g = x.T @ (p - y)
        g[1:] += 2 * l2 * w[1:]
        return g

    res = minimize(loss, np.zeros(x.shape[1]), jac=grad, method="BFGS", options={"gtol": 1e-10, "maxiter": 1000})
    return res.x


def expected_calibration_error(probabilities, labels, bins: int = 10) -> float:
    """Mean |accuracy - confidence| over equal-width probability bins, weighted by bin size."""
    p = np.asarray(probabilities, float)
    y = np.asarray(labels, float)
    edges = np.linspace(0.0, 1.0, bins + 1)
    idx = np.clip(np.digitize(p, edges[1:-1]), 0, bins - 1)
    total = 0.0
    for b in range(bins):
        sel = idx == b
        if sel.any():
            total += sel.sum() * abs(y[sel].mean() - p[sel].mean())
    return float(total / max(len(p), 1))


def shift_flag(comparison, max_shift_cm1: float) -> Flag | None:
    """Flag a fitted shift at its bound."""
    if not comparison.settings.get("fit_shift") or max_shift_cm1 <= 0:
        return None
    if abs(comparison.shift_cm1) >= max_shift_cm1 - BOUND_SLACK_CM1:
        return Flag(SHIFT_AT_BOUND, f"the fitted shift ({comparison.shift_cm1:+.1f} cm^-1) sits at its bound "
                                    f"(+-{max_shift_cm1:g}): the prediction's bands are further off than the "
                                    "comparison allows")
    return None


def levels_flag(ranking) -> Flag | None:
    """Flag a refined ranking whose first candidate was not first at the screening level."""
    first = next(e for e in ranking.entries if e.comparison is not None)
    if not first.refined or first.screening_rank in (None, 1):
        return None
    before = next(e for e in ranking.entries if e.screening_rank == 1)
    return Flag(LEVELS_DISAGREE, f"{ranking.screening_method} put {before.candidate.name} first; the refining level "
                                 f"({first.method}) puts {first.candidate.name} first ({first.screening_rank}"
                                 f"{_ordinal(first.screening_rank)} at {ranking.screening_method})")


def _ordinal(n: int) -> str:
    return "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")


#: Perturbations of the measured spectrum and comparison within their uncertainties (the noise
#: of a margin): keyword changes to vibest.comparison.compare.
PERTURBATIONS: tuple[tuple[str, dict], ...] = (
    ("baseline removed", {"baseline": True}),
    ("width 12 cm^-1", {"fwhm_cm1": 12.0}),
    ("width 22 cm^-1", {"fwhm_cm1": 22.0}),
    ("intensity power 0.4", {"intensity_power": 0.4}),
    ("intensity power 0.6", {"intensity_power": 0.6}),
    ("noise added", {"noise": 0.01}),
)


def margin_noise(measured, first, second, options=None) -> tuple[float, list[str]]:
    """Spread (standard deviation) of the margin score(first) - score(second) under
    :data:`PERTURBATIONS` of ``options`` (a :class:`vibest.comparison.ComparisonOptions`; None:
    the defaults), and the perturbations under which their order flips."""
    from .comparison import compare, comparison_options

    margins, flips = [], []
    for name, change in PERTURBATIONS:
        spectrum = measured
        if "noise" in change:
            spectrum, opts = _noisy(measured, change["noise"]), comparison_options(options)
        else:
            opts = comparison_options(options, **change)
        m = compare(first, spectrum, opts).score - compare(second, spectrum, opts).score
        margins.append(m)
        if m < 0:
            flips.append(name)
    return float(np.std(margins)), flips


def _noisy(measured, fraction: float):
    """The measured spectrum with Gaussian noise of ``fraction`` of its absorbance range added
    (fixed seed: the same input gives the same flags)."""
    import dataclasses

    rng = np.random.default_rng(20261203)
    a = measured.absorbance().values
    noise = rng.normal(0.0, fraction * (a.max() - a.min()), size=a.shape)
    return dataclasses.replace(measured.absorbance(), values=a + noise)


@dataclass(frozen=True)
class Assessment:
    """How sure a ranking is: the calibrated probability that its first candidate is right (None
    when the shipped model does not hold for the settings used, with the reason in ``note``) and
    the flags that apply."""

    confidence: float | None
    flags: tuple[Flag, ...]
    note: str = ""

    @property
    def sure(self) -> bool:
        """Confidence at least :data:`LOW_CONFIDENCE` and no flag."""
        return self.confidence is not None and self.confidence >= LOW_CONFIDENCE and not self.flags

    def to_dict(self) -> dict:
        return {"confidence": self.confidence, "flags": [f.to_dict() for f in self.flags], "note": self.note,
                "low_confidence_below": LOW_CONFIDENCE}


def comparison_settings(method_name: str, options, fwhm_cm1: float, gas_phase: bool = True,
                        refine: int = 0, screening_method: str = "") -> dict:
    """The settings a confidence model is checked against (keys of ConfidenceModel.settings), from
    the :class:`vibest.comparison.ComparisonOptions` used, the prediction's band width (cm^-1),
    whether the sample was compared as a gas, and for a refined ranking the K refined and the
    level they were screened at (a model without these keys holds for unrefined rankings only)."""
    settings = {"score": options.score_name, "method": method_name, "fit_shift": bool(options.fit_shift),
                "max_shift_cm1": options.max_shift_cm1, "intensity_power": float(options.intensity_power),
                "fwhm_cm1": float(options.fwhm_cm1 or fwhm_cm1), "range_cm1": [float(v) for v in options.range_cm1],
                "phase": "gas" if gas_phase else "condensed"}
    if refine:
        settings |= {"refine": refine, "screened_with": screening_method}
    return settings


def _ranking_kind(settings: dict) -> str:
    """A ranking's levels in words, from its :func:`comparison_settings` (or a model's)."""
    if "refine" not in settings:
        return f"rankings at {settings.get('method')}"
    return (f"rankings at {settings.get('screened_with')} with the best {settings['refine']} refined at "
            f"{settings.get('method')}")


def _why_not_calibrated(model: ConfidenceModel, settings: dict) -> str:
    """Why ``model`` does not hold for a ranking of ``settings`` (:func:`comparison_settings`),
    in one sentence; "" when it holds."""
    if model.applies_to(settings) and ("refine" in model.settings or "refine" not in settings):
        return ""
    differing = [k for k, v in model.settings.items() if not _same(settings.get(k), v)]
    if "phase" in differing:
        return (f"confidence is calibrated on gas-phase spectra only; this sample was compared as "
                f"{settings['phase']}, where scores and margins run differently")
    refined = "refine" in model.settings or "refine" in settings
    if refined and ({"refine", "screened_with", "method"} & set(differing) or "refine" not in model.settings):
        return (f"confidence is calibrated for {_ranking_kind(model.settings)} with the default comparison only, "
                f"not for {_ranking_kind(settings)}")
    return (f"confidence is calibrated for the default comparison at {model.settings.get('method')} only; here the "
            f"{', '.join(name.replace('_', ' ') for name in differing)} {'differs' if len(differing) == 1 else 'differ'}")


def assess(ranking, method_name: str | None = None, fwhm_cm1: float | None = None,
           model: ConfidenceModel | None = None) -> Assessment:
    """Confidence and flags of a :class:`vibest.ranking.Ranking` (see the module docstring), for
    the comparison options it was made with, the level of theory of its first entries
    (``method_name``; None: the first candidate's own) and the band width in cm^-1 (None: the
    first candidate's prediction's). ``model``: a model of your own instead of the shipped one."""
    scored = [e for e in ranking.entries if e.comparison is not None]
    if not scored:
        return Assessment(None, (), "no candidate could be scored")
    first = scored[0]
    method_name = method_name or first.method
    fwhm_cm1 = fwhm_cm1 or first.prediction.spectrum.fwhm_cm1
    model = model or shipped_model(method_name) or shipped_model()
    flags = []
    refine = ranking.refine if first.refined else 0
    settings = comparison_settings(method_name, ranking.options, fwhm_cm1,
                                   bool(first.comparison.settings.get("gas_phase", True)), refine,
                                   ranking.screening_method)
    flags += [f for f in (shift_flag(first.comparison, settings["max_shift_cm1"]), levels_flag(ranking)) if f]
    confidence, note = None, ""
    if model is None:
        note = "no confidence model is shipped"
    elif withheld := _why_not_calibrated(model, settings):
        note = withheld
    else:
        if first.score < model.poor_fit_score:
            flags.append(Flag(POOR_FIT, f"the best score ({first.score:.3f}) is below what right answers scored in "
                                        f"the benchmark (5 % of them below {model.poor_fit_score:.3f}): no candidate "
                                        "explains this spectrum well"))
        if len(scored) > 1 and not (first.refined ^ scored[1].refined):
            confidence = model.probability(first.score, first.score - scored[1].score, matched_share(first.comparison))
            if refine and any(e.candidate.decoy_of for e in scored):
                note = REFINED_DECOYS_NOTE
        elif len(scored) == 1:
            note = "one candidate only: nothing to be sure against"
        else:
            note = "only the first candidate was refined: nothing at its level to be sure against"
    if len(scored) > 1 and first.refined == scored[1].refined:
        spread, flips = margin_noise(ranking.measured, first.prediction, scored[1].prediction, ranking.options)
        margin = first.score - scored[1].score
        if flips or margin <= max(2 * spread, TIE_MARGIN):
            why = f"the order flips when {', '.join(flips)}" if flips else f"its spread is {spread:.3f}"
            flags.append(Flag(MARGIN_IN_NOISE, f"the margin of {first.candidate.name} over {scored[1].candidate.name} "
                                               f"({margin:.3f}) is within the score's noise: {why}"))
    if confidence is not None and confidence < LOW_CONFIDENCE:
        flags.append(Flag(LOW, f"confidence {confidence:.2f} that {first.candidate.name} is right is below "
                               f"{LOW_CONFIDENCE}"))
    return Assessment(confidence, tuple(flags), note)
