"""Calibrate the confidence of a ranking on real measured gas-phase spectra, and print how it does.

Rankings (default comparison settings, the chosen level, benchmarks/data/measured_set.csv):
  all       every distinct molecule of the set as candidates;
  isomers   the molecules of the same formula (where there are several);
  decoys    the right structure with its decoys (vibest.decoys, up to 8);
  without   every molecule but the right one (the first candidate is always wrong).
For each ranking the first candidate's score s1, margin m to the second and share f of the
measured peaks it matches are the candidate features (for GFN2-xTB chosen by the cross-validated
calibration error and log loss among score, margin, the margin's noise, order flips, group
evidence against and matched share); each level then uses the subset of them, and the L2 penalty
on the weights, with the lowest held-out log loss, and whether the first candidate is the right
structure is the label. A logistic model P(right | s1, m, f) is fitted
(vibest.confidence.fit_logistic); its calibration is measured with folds that hold out whole
measured spectra (leave-one-spectrum-out), never with the model's own training rows; the ECE is
printed twice, with the chosen subset and penalty (shipped as cross_validated_ece), and nested
(the subset and penalty also chosen without the held-out spectrum: the fairer figure, about 100 s).
Printed: the reliability table, expected calibration error (ECE) beside the ECE that a perfectly
calibrated model would show with the same confidences (its sampling noise: about 0.10 on ~100
rankings), and the two targets (wrong first candidates flagged by low confidence or a poor fit;
right ones with confidence >= 0.7).

    python benchmarks/confidence.py [--method gfn2|gfn1] [--store FILE] [--write]
    python benchmarks/confidence.py --method gfn1 --refine 5 --refine-method b3lyp --store FILE [--write]

With ``--refine`` the rankings are refined as ``rank --refine K`` does (the all, isomers and
without rankings; the decoys have no records at the refining level) and the model is written to
vibest/data/confidence-METHOD-refineK-REFINE_METHOD.json.

``--write`` stores the features (benchmarks/data/confidence_features[-METHOD].csv; the test
refits from it) and the model fitted on all rows (vibest/data/confidence[-METHOD].json; GFN2-xTB
without a suffix).
"""

from __future__ import annotations

import argparse
import csv
import itertools
import json
import sys
from pathlib import Path

import numpy as np
from rdkit import Chem
from rdkit.Chem import rdMolDescriptors

sys.path.insert(0, str(Path(__file__).resolve().parent))

import measured_set  # noqa: E402

from vibest.calculation.driver import calculation_options  # noqa: E402
from vibest.calculation.methods import DEFAULT_METHOD  # noqa: E402
from vibest.comparison import DEFAULT_MAX_SHIFT_CM1, DEFAULT_SCORE, compare  # noqa: E402
from vibest.confidence import (LOW_CONFIDENCE, expected_calibration_error, fit_logistic,  # noqa: E402
                               margin_noise, matched_share)
from vibest.evidence import group_evidence  # noqa: E402
from vibest.decoys import make_decoys  # noqa: E402
from vibest.errors import VibestError  # noqa: E402
from vibest.measured import load_spectrum  # noqa: E402
from vibest.pipeline import SpectrumOptions  # noqa: E402
from vibest.ranking import predict_stored, refined_order  # noqa: E402
from vibest.store import RecordStore  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
FEATURES = ROOT / "benchmarks" / "data" / "confidence_features.csv"
MODEL = ROOT / "vibest" / "data" / "confidence.json"
DECOYS_PER_SPECTRUM = 8
#: The comparison settings the model holds for (vibest.comparison defaults; the benchmark files
#: are gas-phase spectra, compared with rotational contours).
SETTINGS = {"score": DEFAULT_SCORE, "method": "GFN2-xTB", "fit_shift": True, "max_shift_cm1": DEFAULT_MAX_SHIFT_CM1,
            "intensity_power": 0.5, "fwhm_cm1": 16.0, "range_cm1": [500.0, 3800.0], "phase": "gas"}


def formula(smiles: str) -> str:
    return rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(smiles))


def canonical(smiles: str) -> str:
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles))


def features(spectrum, candidates: list[str], right: str, preds: dict) -> dict:
    """Features of the first candidate of a ranking: score, margin, the margin's noise (spread
    under vibest.confidence.PERTURBATIONS) and how often the order flips under them, the share of
    measured peaks its prediction matches, the group evidence against it; and the label."""
    comps = {s: compare(preds[s], spectrum) for s in candidates}
    order = sorted(candidates, key=lambda s: -comps[s].score)
    return first_two_features(spectrum, order, comps, preds, right)


def refined_features(spectrum, candidates: list[str], right: str, preds: dict, refined_preds: dict,
                     refine: int) -> dict | None:
    """Features of a refined ranking (as vibest.ranking.rank_candidates(refine=K)): the best
    ``refine`` by their first-level score are ranked again by their score at the refining level
    (``refined_preds``; a candidate missing there is not refined and follows the refined ones);
    the features are those of the first two refined candidates (None when fewer than two are)."""
    comps = {s: compare(preds[s], spectrum) for s in candidates}
    top = sorted(candidates, key=lambda s: -comps[s].score)[:refine]
    new = {s: compare(refined_preds[s], spectrum) for s in top if s in refined_preds}
    if len(new) < 2:
        return None
    order = [top[k] for k in refined_order(top, refine, lambda s: new[s].score if s in new else None)]
    # agree: the refined first was first at the screening level too (else the ranking is flagged)
    return first_two_features(spectrum, order, new, refined_preds, right) | {"agree": int(order[0] == top[0])}


def first_two_features(spectrum, order: list[str], comps: dict, preds: dict, right: str) -> dict:
    """The features of :func:`features` for the first two of ``order`` (SMILES, best first),
    their comparisons ``comps`` and predictions ``preds``."""
    first, second = order[0], order[1]
    s1, s2 = comps[first].score, comps[second].score
    spread, flips = margin_noise(spectrum, preds[first], preds[second])
    c = comps[first]
    matched = matched_share(c)
    against = sum(e.against for e in group_evidence(preds[first], c))
    return {"score": round(s1, 6), "margin": round(s1 - s2, 6), "noise": round(spread, 6), "flips": len(flips),
            "matched": round(matched, 4), "against": against, "right": int(canonical(first) == canonical(right))}


def build_rows(store: RecordStore, method: str = "gfn2") -> list[dict]:
    folder = measured_set.fetch()
    entries = measured_set.entries()
    calc = calculation_options(method)
    preds = {}

    def pred(smi):
        if smi not in preds:
            preds[smi], _ = predict_stored(smi, calc, SpectrumOptions(), store)
        return preds[smi]

    every = sorted({e.smiles for e in entries})
    for smi in every:
        pred(smi)
    rows = []
    for e in entries:
        spectrum = load_spectrum(folder / e.file)
        sets = set_rankings(e.smiles, every)
        decoys = []
        for d in make_decoys(e.smiles):
            if len(decoys) == DECOYS_PER_SPECTRUM:
                break
            try:
                pred(d.smiles)
                decoys.append(d.smiles)
            except VibestError as exc:
                print(f"  decoy {d.smiles} of {e.name} left out: {exc}", file=sys.stderr)
        if decoys:
            sets["decoys"] = [e.smiles] + decoys
        for kind, cands in sets.items():
            rows.append({"spectrum": e.name, "ranking": kind, "candidates": len(cands),
                         **features(spectrum, cands, e.smiles, preds)})
        print(f"  {e.name}: {len(sets)} rankings", file=sys.stderr)
    return rows


def set_rankings(right: str, every: list[str]) -> dict[str, list[str]]:
    """The rankings made of molecules of the set for the spectrum of ``right``: all of them, all
    but the right one, and its isomers (where it has any)."""
    sets = {"all": every, "without": [s for s in every if s != right]}
    iso = [s for s in every if formula(s) == formula(right)]
    if len(iso) > 1:
        sets["isomers"] = iso
    return sets


def stored_predictions(smiles: list[str], calc, store: RecordStore, compute: bool = True) -> dict:
    """SMILES -> prediction at ``calc`` from ``store`` (computed and stored when missing, unless
    ``compute`` is False: then a molecule without a stored record is left out, and said)."""
    preds = {}
    for smi in smiles:
        if not compute and store.get(smi, calc) is None:
            print(f"  {smi}: no stored record at {calc.method_name}: not refined", file=sys.stderr)
            continue
        try:
            preds[smi], _ = predict_stored(smi, calc, SpectrumOptions(), store)
        except VibestError as exc:
            print(f"  {smi}: {exc}", file=sys.stderr)
    return preds


def build_refined_rows(store: RecordStore, method: str, refine: int, refine_method: str) -> list[dict]:
    """Rows of refined rankings (the first ``refine`` at ``method`` recomputed at ``refine_method``,
    as ``rank --refine``): all, without and isomers of the set. The records at the refining level
    are taken from the store only (benchmarks/identification.py --refine computes them: hours);
    the decoy rankings are left out, since their decoys have no such records."""
    folder = measured_set.fetch()
    entries = measured_set.entries()
    every = sorted({e.smiles for e in entries})
    preds = stored_predictions(every, calculation_options(method), store)
    refined = stored_predictions(every, calculation_options(refine_method), store, compute=False)
    rows = []
    for e in entries:
        spectrum = load_spectrum(folder / e.file)
        for kind, cands in set_rankings(e.smiles, every).items():
            row = refined_features(spectrum, cands, e.smiles, preds, refined, refine)
            if row is None:
                print(f"  {e.name} {kind}: fewer than two refined candidates: left out", file=sys.stderr)
                continue
            rows.append({"spectrum": e.name, "ranking": kind, "candidates": len(cands), **row})
        print(f"  {e.name}: refined rankings done", file=sys.stderr)
    return rows


def paths(method: str) -> tuple[Path, Path]:
    """(features table, model file) of a method: the GFN2-xTB ones without a suffix."""
    if method == "gfn2":
        return FEATURES, MODEL
    return FEATURES.with_name(f"confidence_features-{method}.csv"), MODEL.with_name(f"confidence-{method}.json")


def read_rows(path: Path = FEATURES) -> list[dict]:
    with open(path) as fh:
        out = []
        for r in csv.DictReader(line for line in fh if not line.startswith("#")):
            out.append({**r, **{k: float(r[k]) for k in ("score", "margin", "noise", "matched")},
                        **{k: int(r[k]) for k in ("right", "candidates", "flips", "against", "agree") if k in r}})
        return out


#: The features a shipped model can weigh (vibest.confidence.ConfidenceModel); each level uses the
#: subset with the lowest leave-one-spectrum-out log loss (:func:`chosen_settings`).
FEATURE_NAMES = ("score", "margin", "matched")


#: L2 penalties on the logistic weights (features on their own scales) tried beside the subsets;
#: until 2026-12-04 a fixed 1e-3, which left the refined model overconfident at both ends.
PENALTIES = (1e-3, 1e-2, 3e-2, 0.1, 0.3, 1.0)


def log_loss(p: np.ndarray, y: np.ndarray) -> float:
    return float(-np.mean(y * np.log(np.clip(p, 1e-12, 1)) + (1 - y) * np.log(np.clip(1 - p, 1e-12, 1))))


def chosen_settings(rows: list[dict]) -> tuple[tuple[str, ...], float]:
    """The non-empty subset of :data:`FEATURE_NAMES` and the penalty of :data:`PENALTIES` whose
    model has the lowest held-out log loss (leave-one-spectrum-out on ``rows``; a proper score,
    not the calibration error that is reported)."""
    from itertools import combinations

    y = np.array([r["right"] for r in rows])
    best = None
    for k in range(1, len(FEATURE_NAMES) + 1):
        for subset in combinations(FEATURE_NAMES, k):
            for l2 in PENALTIES:
                loss = log_loss(cross_validated(rows, subset, l2)[0], y)
                if best is None or loss < best[0] - 1e-12:
                    best = (loss, subset, l2)
    return best[1], best[2]


def nested_cross_validated(rows: list[dict]) -> tuple[np.ndarray, np.ndarray]:
    """Held-out probabilities with the settings chosen without the held-out spectrum too: for each
    spectrum, :func:`chosen_settings` on the others, a fit on the others, its rows predicted."""
    def fit(train):
        features, l2 = chosen_settings(train)
        return fit_rows(train, features, l2), poor_fit_threshold(train)

    p, y, _ = _leave_one_spectrum_out(rows, fit)
    return p, y


def fit_rows(rows: list[dict], features: tuple[str, ...] = FEATURE_NAMES, l2: float = PENALTIES[0]) -> np.ndarray:
    """[intercept, weight of each of FEATURE_NAMES] (0 for a feature not in ``features``), with L2
    penalty ``l2`` on the weights."""
    x = np.array([[r[k] for k in features] for r in rows])
    y = np.array([r["right"] for r in rows])
    coef = fit_logistic(x, y, l2=l2)
    full = dict(zip(features, coef[1:]))
    return np.array([coef[0], *(full.get(k, 0.0) for k in FEATURE_NAMES)])


def probability(coef: np.ndarray, row: dict) -> float:
    z = coef[0] + sum(c * row[k] for c, k in zip(coef[1:], FEATURE_NAMES))
    return float(1.0 / (1.0 + np.exp(-z)))


def poor_fit_threshold(rows: list[dict]) -> float:
    """The 5th percentile of the scores of right first candidates (below it: 'no good fit')."""
    right = np.array([r["score"] for r in rows if r["right"]])
    return float(np.percentile(right, 5)) if len(right) else 0.0


def cross_validated(rows: list[dict], features: tuple[str, ...] = FEATURE_NAMES,
                    l2: float = PENALTIES[0]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Held-out probabilities by leave-one-spectrum-out (every ranking of a spectrum held out
    together), with the poor-fit threshold also fitted without it; returns (p, labels, poor)."""
    return _leave_one_spectrum_out(rows, lambda train: (fit_rows(train, features, l2), poor_fit_threshold(train)))


def _leave_one_spectrum_out(rows: list[dict], fit) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For each spectrum, ``fit(rows of the others)`` -> (coefficients, poor-fit threshold), and
    its own rows predicted with them; returns (p, labels, poor)."""
    p = np.zeros(len(rows))
    poor = np.zeros(len(rows), dtype=bool)
    for name in sorted({r["spectrum"] for r in rows}):
        coef, threshold = fit([r for r in rows if r["spectrum"] != name])
        for k, r in enumerate(rows):
            if r["spectrum"] == name:
                p[k] = probability(coef, r)
                poor[k] = r["score"] < threshold
    return p, np.array([r["right"] for r in rows]), poor


def calibrated_ece(p: np.ndarray, draws: int = 2000) -> tuple[float, float]:
    """The calibration error that a perfectly calibrated model with these confidences would show on
    this many rankings, from its sampling noise alone: labels drawn as Bernoulli(p), the ECE of p
    against them, over ``draws`` draws (consistency resampling, Broecker & Smith 2007, from
    memory; fixed seed). Returns (median, 95th percentile): an ECE below the latter cannot be told
    from perfect calibration with this sample."""
    rng = np.random.default_rng(20261204)
    values = [expected_calibration_error(p, rng.random(len(p)) < p) for _ in range(draws)]
    return float(np.median(values)), float(np.quantile(values, 0.95))


def best_threshold_share(p: np.ndarray, right: np.ndarray, vetoed: np.ndarray, wrong_flagged: float = 0.8) -> float:
    """The largest share of right first candidates with confidence ``p`` at or above some threshold
    (and not ``vetoed`` by another flag) while at least ``wrong_flagged`` of the wrong ones fall
    below it or are vetoed: the trade-off the confidences allow at any threshold, not only 0.7."""
    shares = [float(((p >= t) & ~vetoed)[right].mean()) for t in np.unique(p)
              if (~((p >= t) & ~vetoed))[~right].mean() >= wrong_flagged]
    return max(shares, default=0.0)


def threshold_rule_bound(rows: list[dict], features: tuple[str, ...] = FEATURE_NAMES, wrong_flagged: float = 0.8,
                         steps: int = 41) -> tuple[float, dict]:
    """The largest share of right first candidates that a rule "sure when every feature is at or
    above its threshold" (and, for refined rankings, the levels agree) leaves unflagged while it
    flags at least ``wrong_flagged`` of the wrong ones, over thresholds at ``steps`` quantiles
    of each feature. The thresholds are chosen on the rankings they are judged on, so the figure
    is optimistic: a bound on what score, margin and matched share can separate, not a model.
    Returns (share, thresholds by feature)."""
    x = np.array([[float(r[f]) for f in features] for r in rows])
    y = np.array([bool(r["right"]) for r in rows])
    vetoed = np.array([not r.get("agree", True) for r in rows])
    grids = np.quantile(x, np.linspace(0, 1, steps), axis=0).T  # (features, steps)
    best, at = 0.0, {}
    for cut in itertools.product(*grids):
        sure = np.all(x >= np.array(cut), axis=1) & ~vetoed
        if (~sure[~y]).mean() >= wrong_flagged and sure[y].mean() > best:
            best, at = float(sure[y].mean()), dict(zip(features, (float(c) for c in cut)))
    return best, at


def report(rows: list[dict], features: tuple[str, ...] = FEATURE_NAMES, l2: float = PENALTIES[0],
           nested: bool = True) -> dict:
    p, y, poor = cross_validated(rows, features, l2)
    ece = expected_calibration_error(p, y)
    noise_median, noise_95 = calibrated_ece(p)
    pn, yn = nested_cross_validated(rows) if nested else (None, None)
    nested_ece = expected_calibration_error(pn, yn) if nested else None
    print(f"{len(rows)} rankings of {len({r['spectrum'] for r in rows})} spectra; first candidate right in "
          f"{y.mean():.0%}")
    for kind in ("all", "isomers", "decoys", "without"):
        sel = np.array([r["ranking"] == kind for r in rows])
        if sel.any():
            print(f"  {kind:<8} {sel.sum():>3} rankings, right first {y[sel].mean():5.0%}, "
                  f"mean held-out confidence {p[sel].mean():.2f}")
    print("\nreliability (held-out, leave-one-spectrum-out):")
    print(f"  {'confidence':<12} {'rankings':>8} {'right':>7} {'mean p':>7}")
    edges = np.linspace(0, 1, 6)
    for lo, hi in zip(edges[:-1], edges[1:]):
        sel = (p >= lo) & ((p < hi) | (hi == 1.0))
        if sel.any():
            print(f"  {lo:.1f}-{hi:.1f}      {sel.sum():>8} {y[sel].mean():7.0%} {p[sel].mean():7.2f}")
    disagree = np.array([not r.get("agree", True) for r in rows])  # refined rankings: the levels-disagree flag
    vetoed = poor | disagree  # flagged whatever the confidence
    flagged = (p < LOW_CONFIDENCE) | vetoed
    if "agree" in rows[0]:
        for kind in ("all", "isomers", "without"):
            sel = np.array([r["ranking"] == kind for r in rows])
            print(f"  {kind:<8} levels agree: right first {y[sel & ~disagree].sum()} of {(sel & ~disagree).sum()}; "
                  f"disagree: {y[sel & disagree].sum()} of {(sel & disagree).sum()}")
    wrong, right = y == 0, y == 1
    print(f"\nexpected calibration error (10 bins, held out): {ece:.3f}   (target <= 0.10)")
    print(f"  a perfectly calibrated model with these confidences would show {noise_median:.3f} (median), "
          f"up to {noise_95:.3f} (95th percentile), from the sample's size alone")
    if nested:
        print(f"  with features and penalty also chosen without the held-out spectrum (nested): {nested_ece:.3f}")
    print(f"wrong first candidates flagged (confidence < {LOW_CONFIDENCE}, no good fit"
          + (", levels disagree" if "agree" in rows[0] else "") + "): "
          f"{flagged[wrong].mean():.0%} of {wrong.sum()}   (target >= 80 %)")
    print(f"right first candidates with confidence >= {LOW_CONFIDENCE} (and no poor-fit flag): "
          f"{(~flagged[right]).mean():.0%} of {right.sum()}   (target >= 80 %)")
    print("  the same per kind of ranking (wrong flagged; right sure):")
    for kind in ("all", "isomers", "decoys", "without"):
        sel = np.array([r["ranking"] == kind for r in rows])
        if sel.any():
            w, g = sel & wrong, sel & right
            print(f"  {kind:<8} {flagged[w].sum():>3} of {w.sum():>3} wrong flagged; "
                  f"{(~flagged[g]).sum():>3} of {g.sum():>3} right with confidence >= {LOW_CONFIDENCE}")
    moved = best_threshold_share(p, y.astype(bool), vetoed)
    bound, cut = threshold_rule_bound(rows)
    print("how far apart right and wrong first candidates lie (right ones kept sure while >= 80 % of wrong ones "
          "are flagged):")
    print(f"  held-out confidences, at the best threshold instead of {LOW_CONFIDENCE}: {moved:.0%}")
    # the features alone, judged on the rankings they were fitted to (only the levels-disagree flag kept)
    coef = fit_rows(rows, FEATURE_NAMES, 0.0)
    fitted = np.array([probability(coef, r) for r in rows])
    print(f"  a logistic model of {', '.join(FEATURE_NAMES)}, unpenalised, judged on the rankings it was fitted to "
          f"(optimistic), at its best threshold: {best_threshold_share(fitted, y.astype(bool), disagree):.0%}")
    print(f"  a rule 'sure when {', '.join(FEATURE_NAMES)} are each above a threshold', thresholds chosen on these "
          f"same rankings (optimistic): {bound:.0%} (at " + ", ".join(f"{k} {v:.3f}" for k, v in cut.items()) + ")")
    return {"ece": ece, "nested_ece": nested_ece, "log_loss": log_loss(p, y), "threshold_rule_bound": bound,
            "wrong_flagged": float(flagged[wrong].mean()), "right_confident": float((~flagged[right]).mean())}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--store", default=None, help="result store (SQLite) [the default store]")
    ap.add_argument("--write", action="store_true", help="write the features table and vibest/data/confidence.json")
    ap.add_argument("--from-table", action="store_true", help="use the stored features table instead of computing")
    ap.add_argument("--dump", default=None, help="also write the features to this CSV file")
    ap.add_argument("--method", default=DEFAULT_METHOD, choices=["gfn2", "gfn1"],
                    help="level of theory of the predictions [the default level]")
    ap.add_argument("--refine", type=int, default=0, metavar="K",
                    help="calibrate refined rankings: the best K recomputed at --refine-method (stored records)")
    ap.add_argument("--refine-method", default="b3lyp", help="level of theory of the refined candidates")
    args = ap.parse_args()
    tag = f"{args.method}-refine{args.refine}-{args.refine_method}" if args.refine else args.method
    features_path, model_path = paths(tag)
    settings = SETTINGS | {"method": calculation_options(args.method).method_name}
    if args.refine:
        settings = SETTINGS | {"method": calculation_options(args.refine_method).method_name,
                               "screened_with": settings["method"], "refine": args.refine}
    if args.from_table:
        rows = read_rows(features_path)
    else:
        try:
            if args.refine:
                rows = build_refined_rows(RecordStore(args.store), args.method, args.refine, args.refine_method)
            else:
                rows = build_rows(RecordStore(args.store), args.method)
        except measured_set.FetchError as exc:
            print(f"skipped: {exc}")
            return
    features, l2 = chosen_settings(rows)
    print(f"features and penalty (lowest held-out log loss among subsets of {', '.join(FEATURE_NAMES)} and "
          f"penalties {', '.join(f'{x:g}' for x in PENALTIES)}): {', '.join(features)}; {l2:g}")
    figures = report(rows, features, l2)
    print(f"held-out log loss {figures['log_loss']:.4f}")
    coef = fit_rows(rows, features, l2)
    print(f"\nmodel on all rows: P = 1 / (1 + exp(-({coef[0]:.3f} + {coef[1]:.3f} s1 + {coef[2]:.3f} m "
          f"+ {coef[3]:.3f} f))); poor fit below s1 = {poor_fit_threshold(rows):.3f}")
    if args.dump:
        with open(args.dump, "w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=list(rows[0]))
            w.writeheader()
            w.writerows(rows)
    if args.write:
        if not args.from_table:
            with open(features_path, "w", newline="") as fh:
                if args.refine:
                    fh.write(f"# Refined rankings: the best {args.refine} at {args.method} recomputed at "
                             f"{args.refine_method} (decoy rankings left out).\n")
                fh.write("# Features of rankings of real measured spectra (benchmarks/confidence.py; spectra from the\n"
                         "# jcamp 1.3.2 sdist, benchmarks/data/measured_set.csv). score: first candidate's score;\n"
                         "# margin: to the second; right: whether the first is the measured compound.\n")
                w = csv.DictWriter(fh, fieldnames=["spectrum", "ranking", "candidates", "score", "margin", "noise", "flips",
                                                   "matched", "against", "right"] + (["agree"] if args.refine else []))
                w.writeheader()
                w.writerows(rows)
        model_path.write_text(json.dumps({
            "intercept": round(float(coef[0]), 6), "score_weight": round(float(coef[1]), 6),
            "margin_weight": round(float(coef[2]), 6), "matched_weight": round(float(coef[3]), 6), "settings": settings,
            "features": list(features), "l2_penalty": l2,
            "poor_fit_score": round(poor_fit_threshold(rows), 6), "cross_validated_ece": round(figures["ece"], 4),
            "nested_cross_validated_ece": round(figures["nested_ece"], 4),
            "script": "benchmarks/confidence.py", "rankings": len(rows)}, indent=1) + "\n")
        print(f"wrote {features_path.relative_to(ROOT)} and {model_path.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
