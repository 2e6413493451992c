"""Identification benchmark on real measured gas-phase IR spectra (benchmarks/data/measured_set.csv).

For every measured spectrum, all molecules of the set are ranked as candidates, and separately
only its isomers (same molecular formula). Prints top-1 / top-3 rates, mean rank and the margin
of the right answer per similarity score and broadening, then one line per molecule for the
default settings. Computed records are kept in the result store (--store).

    python benchmarks/identification.py [--store FILE] [--fwhm 16 30] [--quick]
"""

from __future__ import annotations

import argparse
import sys
from collections import defaultdict
from pathlib import Path

import numpy as np
from rdkit import Chem
from rdkit.Chem import rdMolDescriptors

sys.path.insert(0, str(Path(__file__).resolve().parent))

import measured_set  # noqa: E402

from vibest.comparison import DEFAULT_SCORE, SCORES, compare  # noqa: E402
from vibest.errors import VibestError  # noqa: E402
from vibest.measured import load_spectrum  # noqa: E402
from vibest.calculation.driver import calculation_options  # noqa: E402
from vibest.calculation.methods import DEFAULT_METHOD, parse_level  # noqa: E402
from vibest.pipeline import SpectrumOptions  # noqa: E402
from vibest.ranking import predict_stored, refined_order  # noqa: E402
from vibest.spectrum import DEFAULT_FWHM_CM1  # noqa: E402
from vibest.store import RecordStore  # noqa: E402


def formula(smiles: str) -> str:
    return rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(smiles))


def ranked(candidates, scores, refined_scores=None, refine: int = 0) -> list[str]:
    """Candidates best first, as vibest.ranking.rank_candidates orders them: by ``scores``; with
    ``refine`` K the first K again by ``refined_scores`` (a function of the SMILES)."""
    order = sorted(candidates, key=lambda s: -scores[s])
    if refine:  # refined_scores None: not refined, follows the refined ones
        order = [order[k] for k in refined_order(order, refine, refined_scores)]
    return order


def evaluate(entries, spectra, preds, score_name: str, fwhm: float, refine_preds=None, refine: int = 0, **compare_kw):
    """Per measured entry: (rank among all candidates, rank among isomers or None, margin, score,
    comparison, best candidate); the candidates are all molecules of ``preds``. With ``refine`` K,
    the best K are ranked again with ``refine_preds`` (a function SMILES -> prediction, called
    only for candidates that reach a top K; None: the candidate could not be refined and follows
    the refined ones, since scores of two levels are not compared)."""
    unique = sorted(preds)
    out = []
    for e in entries:
        comps = {smi: compare(preds[smi], spectra[e.file], score_name=score_name, fwhm_cm1=fwhm, **compare_kw)
                 for smi in unique}
        scores = {smi: c.score for smi, c in comps.items()}
        refined = {}

        def refined_score(smi):
            if smi not in refined:
                pred = refine_preds(smi)
                if pred is None:
                    return None
                refined[smi] = compare(pred, spectra[e.file], score_name=score_name, fwhm_cm1=fwhm, **compare_kw)
            return refined[smi].score

        order = ranked(unique, scores, refined_score, refine)
        rank = order.index(e.smiles) + 1
        final = {s: (refined[s].score if s in refined else scores[s]) for s in unique}
        same_level = [s for s in unique if s != e.smiles and (s in refined) == (e.smiles in refined)]
        margin = final[e.smiles] - max(final[s] for s in same_level) if same_level else float("nan")
        iso = [s for s in unique if formula(s) == formula(e.smiles)]
        iso_rank = ranked(iso, scores, refined_score, refine).index(e.smiles) + 1 if len(iso) > 1 else None
        comp = refined.get(e.smiles, comps[e.smiles])
        out.append((e, rank, iso_rank, margin, final[e.smiles], comp, order[0]))
    return out


def summary(rows) -> str:
    ranks = np.array([r[1] for r in rows])
    iso = np.array([r[2] for r in rows if r[2] is not None])
    margins = np.array([r[3] for r in rows if np.isfinite(r[3])])
    return (f"top-1 {np.mean(ranks == 1):6.1%}  top-3 {np.mean(ranks <= 3):6.1%}  mean rank {ranks.mean():5.2f}  "
            f"isomers top-1 {np.mean(iso == 1):6.1%} ({len(iso)})  median margin {np.median(margins):+.3f}")


NO_SHIFT = {"fit_shift": False}
VARIANTS = [  # (label, score, compare options): contour, intensity power, shift fit and score
    ("pearson, plain bands, y^1, no shift", "pearson", {"gas_phase": False, "intensity_power": 1.0, **NO_SHIFT}),
    ("pearson, plain bands, y^0.5, no shift", "pearson", {"gas_phase": False, **NO_SHIFT}),
    ("pearson, gas contours, y^1, no shift", "pearson", {"intensity_power": 1.0, **NO_SHIFT}),
    ("pearson, gas contours, y^0.5, no shift", "pearson", NO_SHIFT),
    ("pearson, same + shift +-20", "pearson", {}),
    ("regional, gas contours, y^0.5, no shift", "regional", NO_SHIFT),
    ("regional, same + shift +-10", "regional", {"shift_bounds_cm1": (-10.0, 10.0)}),
    ("regional, same + shift +-40", "regional", {"shift_bounds_cm1": (-40.0, 40.0)}),
    ("regional, same + shift +-20 (default)", DEFAULT_SCORE, {}),
]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--store", default=None, help="result store (SQLite file) [the default store]")
    ap.add_argument("--fwhm", type=float, nargs="+", default=[DEFAULT_FWHM_CM1, 30.0])
    ap.add_argument("--quick", action="store_true", help="default score and first FWHM only")
    ap.add_argument("--method", default=DEFAULT_METHOD,
                    help="level of theory of every candidate (gfn1, gfn2, b3lyp, gfn2+b3lyp) [the default level]")
    ap.add_argument("--refine", type=int, default=0, metavar="K", help="recompute the best K at --refine-method")
    ap.add_argument("--refine-method", default="b3lyp")
    ap.add_argument("--set", choices=["training", "blind"], default="training",
                    help="blind: the reserved NIST ADC files, ranked against all molecules of both sets; "
                         "looked at once (DEVELOPERS.md), never to choose a setting")
    args = ap.parse_args()
    table = measured_set.BLIND_TABLE if args.set == "blind" else measured_set.TABLE
    try:
        folder = measured_set.fetch(table=table)
    except measured_set.FetchError as exc:
        print(f"skipped: {exc}")
        return
    entries = measured_set.entries(table)
    pool = sorted({e.smiles for e in measured_set.entries()} | {e.smiles for e in entries})
    spectra = {e.file: load_spectrum(folder / e.file) for e in entries}
    store = RecordStore(args.store)
    calc = calculation_options(args.method)
    preds = {}
    # a molecule the level cannot compute (an open shell at a density-functional level) is computed with
    # the level's own tight-binding positions method, else the default level, and said here
    positions = parse_level(args.method).positions
    fallback = calculation_options(DEFAULT_METHOD if positions.is_dft else positions.key)
    for smi in pool:
        try:
            preds[smi], hit = predict_stored(smi, calc, SpectrumOptions(), store)
        except VibestError as exc:
            print(f"  {smi}: {exc}; {fallback.method_name} used instead")
            preds[smi], hit = predict_stored(smi, fallback, SpectrumOptions(), store)
        print(f"  predicted {smi:<16} {'(stored)' if hit else ''}", file=sys.stderr)
    refine_calc = calculation_options(args.refine_method) if args.refine else None
    refine_cache = {}

    def refine_preds(smi):
        if smi not in refine_cache:
            try:
                refine_cache[smi], hit = predict_stored(smi, refine_calc, SpectrumOptions(), store)
            except VibestError as exc:  # as rank --refine: not refined, it follows the refined ones
                print(f"  {smi}: not refined ({exc})")
                refine_cache[smi], hit = None, True
            print(f"  refined {smi:<16} at {refine_calc.method_name} {'(stored)' if hit else ''}", file=sys.stderr)
        return refine_cache[smi]

    print(f"level: {calc.method_name}" + (f"; best {args.refine} refined at {refine_calc.method_name}"
                                           if args.refine else ""))
    refine_kw = {"refine_preds": refine_preds, "refine": args.refine} if args.refine else {}
    groups = defaultdict(list)
    for e in entries:
        groups[formula(e.smiles)].append(e.name)
    print(f"{len(entries)} measured spectra, {len(preds)} distinct candidates; isomer groups: "
          + "; ".join(f"{f}: {', '.join(n)}" for f, n in groups.items() if len({x for x in n}) > 1))
    print("broadening and comparison (every file here is a gas-phase spectrum, so the default comparison "
          "gives predicted bands rotational P/Q/R contours, vibest.gas_phase):")
    default_variant = None
    # the blind set, and a refinement (whose cost grows with every variant's own best K): the
    # default comparison only
    only_default = args.set == "blind" or args.refine
    variants = [v for v in VARIANTS if not v[2] and v[1] == DEFAULT_SCORE] if only_default else VARIANTS
    for label, score_name, kw in variants:
        rows = evaluate(entries, spectra, preds, score_name, args.fwhm[0], **refine_kw, **kw)
        print(f"  {label:<40} {summary(rows)}", flush=True)
        if not kw and score_name == DEFAULT_SCORE:
            default_variant = rows
    quick = args.quick or only_default
    scores = [DEFAULT_SCORE] if quick else list(SCORES)
    widths = args.fwhm[:1] if quick else args.fwhm
    default_rows = None
    print("scores and widths (default comparison options):")
    for fwhm in widths:
        for name in scores:
            rows = evaluate(entries, spectra, preds, name, fwhm, **refine_kw) \
                if (name, fwhm) != (DEFAULT_SCORE, widths[0]) else default_variant
            print(f"  {name:<9} FWHM {fwhm:4.0f}: {summary(rows)}")
            if name == DEFAULT_SCORE and fwhm == widths[0]:
                default_rows = rows
    print(f"\nper molecule ({DEFAULT_SCORE}, FWHM {widths[0]:g} cm-1):")
    print(f"{'molecule':<22} {'rank':>4} {'iso':>4} {'score':>6} {'margin':>7}  {'strongest meas.':>15} {'pred.':>7}  best candidate")
    for e, rank, iso, margin, sc, comp, best in default_rows:
        g = comp.grid_cm1
        meas = g[int(np.argmax(comp.measured_curve))]
        pred = g[int(np.argmax(comp.predicted_curve))]
        print(f"{e.name:<22} {rank:>4} {iso if iso else '-':>4} {sc:6.3f} {margin:+7.3f}  {meas:15.0f} {pred:7.0f}  "
              f"{'' if best == e.smiles else best}")


if __name__ == "__main__":
    main()
