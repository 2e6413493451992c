"""Fit vibest's scale models for GFN2-xTB harmonic wavenumbers and print their errors.

Computes every molecule of vibest/data/fundamentals.csv with default settings (flexible molecules
in their lowest conformer, vibest.reference_records), assigns computed modes to the tabulated
fundamentals by symmetry class and mode character (vibest.analysis.assignment), and fits on a
training split of molecules (stratified by functional group: within each class of
vibest.analysis.calibration.SPLIT_CLASSES every 4th molecule from the 3rd is held out):
  1. uniform: one factor s = sum(w_calc w_exp) / sum(w_calc^2);
  2. region: one such factor per region of the harmonic wavenumber (<1000, 1000-1600,
     1600-2000, 2000-2700, >2700 cm^-1);
  3. per-coordinate: scaled force field (Pulay et al.), one force-constant factor per coordinate type,
     fitted with a soft-L1 loss (vibest.analysis.calibration.fit_per_coordinate).
Prints MAD / RMS / max per model on train and held-out molecules, per coordinate type (of the
mode's dominant coordinate), per molecule, and the rows the assignment could not pair. The
default model is the one with the lowest 4-fold cross-validated MAD over the training molecules;
coordinate types (vibest.analysis.scaling) are chosen by the same figure, so that the held-out
split stays an honest estimate, reported and never used to choose.

    python benchmarks/fit_scale_factor.py            # print only
    python benchmarks/fit_scale_factor.py --write    # also update vibest/data/scale_factors.json
"""

from __future__ import annotations

import argparse
import json
import pickle
import sys
import time
from pathlib import Path

import numpy as np

from vibest.analysis.calibration import (cross_validated_mad, error_statistics, fit_per_coordinate, fit_regions,
                                         fit_uniform, held_out_names, pooled, predicted_wavenumbers, prepare_case,
                                         reference_molecules, split_train_test)
from vibest.analysis.scaling import PER_COORDINATE, REGION, UNIFORM, ScaleModel
from vibest.calculation.driver import calculation_options
from vibest.errors import VibestError
from vibest.calculation.methods import parse_level
from vibest.calculation.record import HessianRecord
from vibest.reference_records import REFERENCE_OPTIONS, computed_with, reference_record


def compute_cases(verbose: bool = True, cache: Path | None = None, options=REFERENCE_OPTIONS,
                  cached_only: bool = False, references=None):
    """Assigned cases of every reference molecule; records are kept in ``cache`` (a pickle,
    written after each new molecule, so that an interrupted run resumes). ``cached_only`` leaves
    out molecules not in the cache (a partial fit, said in the output). A cached failure (the
    message) is tried again by a run that computes: a newer version may compute the molecule
    (iodomethane at B3LYP, refused until the effective core potential of 2026-12-04)."""
    records = {}
    if cached_only and not (cache and cache.exists()):
        sys.exit("--cached-only needs the records file of an earlier run (--records FILE)"
                 + (f": {cache} does not exist" if cache else ""))
    if cache and cache.exists():
        records = pickle.loads(cache.read_bytes())
    cases = []
    for ref in reference_molecules() if references is None else references:
        t0 = time.perf_counter()
        stale = records.get(ref.smiles)
        if isinstance(stale, HessianRecord) and not computed_with(stale, options):
            print(f"  {ref.name:<36} cached record is of an older version of the method: recomputed",
                  file=sys.stderr)
            del records[ref.smiles]
        elif isinstance(stale, str) and not cached_only:
            del records[ref.smiles]
        if ref.smiles not in records and cached_only:
            print(f"  {ref.name:<36} not computed yet: left out (--cached-only)", file=sys.stderr)
            continue
        if ref.smiles not in records:
            try:
                records[ref.smiles] = reference_record(ref.smiles, options)
            except VibestError as exc:  # e.g. an element the basis set lacks
                records[ref.smiles] = str(exc)
            if cache:
                cache.write_bytes(pickle.dumps(records))
        if isinstance(records[ref.smiles], str):
            print(f"  {ref.name:<36} skipped: {records[ref.smiles]}", file=sys.stderr)
            continue
        case = prepare_case(ref, records[ref.smiles])
        if verbose:
            a = case.assignment
            print(f"  {ref.name:<36} {case.record.natoms:>3} atoms {time.perf_counter() - t0:6.1f} s  "
                  f"{len(a.rows)}/{len(ref.fundamentals_cm1)} assigned ({a.method})", file=sys.stderr)
        cases.append(case)
    if cache and not cached_only:  # a run that only reads never rewrites the file
        cache.write_bytes(pickle.dumps(records))
    return cases


def basis_size(smiles: str, options) -> int:
    """Basis functions of ``smiles`` in ``options``' density-functional basis (0 for tight binding)."""
    from rdkit import Chem

    from vibest.calculation.dft_engine import build_pyscf_molecule

    if not options.engine.is_dft:
        return 0
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    positions = np.arange(3 * len(numbers), dtype=float).reshape(-1, 3) * 3.0  # the size needs no geometry
    return int(build_pyscf_molecule(numbers, positions, Chem.GetFormalCharge(mol), 0, options.engine).nao)


#: Fold assignments averaged over by :func:`paired_comparison`.
PAIRED_SHUFFLES = 8


def trial_method(token: str) -> str:
    """``"b3lyp/6-31g**"``: a shipped density-functional method with another basis, registered
    for this process only under the key ``"b3lyp-6-31gss"`` (no "+": that separates levels);
    any other token is returned as it is."""
    import dataclasses

    from vibest.calculation.methods import METHODS, method_named

    if "/" not in token:
        return token
    name, basis = token.split("/", 1)
    base = method_named(name)
    if not base.is_dft or "+" in basis:
        raise SystemExit(f"{token}: give a density-functional method and a basis without '+'")
    key = f"{base.key}-{basis.lower().replace('*', 's')}"
    METHODS[key] = dataclasses.replace(base, key=key, name=f"{base.name.split('/')[0]}/{basis} (trial)",
                                       dft=dataclasses.replace(base.dft, basis=basis))
    return key


def paired_comparison(methods: list[str], max_basis: int, records: Path) -> None:
    """Methods side by side on the training molecules only (the held-out ones are never computed)
    of at most ``max_basis`` basis functions in every method's basis, smallest first: each method's
    4-fold cross-validated MAD of each scale model on the molecules all methods computed.
    Records are kept in ``records``/METHOD.pkl (an interrupted run resumes). A method may be
    METHOD/BASIS (:func:`trial_method`)."""
    methods = [trial_method(m) for m in methods]
    held = held_out_names()
    options = {m: calculation_options(m, workers=None) for m in methods}
    sized = []
    for ref in reference_molecules():
        if ref.name not in held:
            try:
                size = max(basis_size(ref.smiles, o) for o in options.values())
            except VibestError as exc:  # an element a basis lacks (6-31G(d,p) has no bromine)
                print(f"  {ref.name:<36} left out: {exc}", file=sys.stderr)
                continue
            if size <= max_basis:
                sized.append((size, ref))
    references = [ref for _, ref in sorted(sized, key=lambda t: t[0])]
    print(f"{len(references)} training molecules of at most {max_basis} basis functions", file=sys.stderr)
    records.mkdir(parents=True, exist_ok=True)
    cases = {m: compute_cases(cache=records / f"{m}.pkl", options=o, references=references)
             for m, o in options.items()}
    common = set.intersection(*({c.reference.name for c in cs} for cs in cases.values()))
    print(f"{len(common)} training molecules computed by every method: {', '.join(sorted(common))}")
    # the folds depend on the molecules' order (molecule k in fold k % 4), and on ~30 molecules
    # that alone moves a figure by up to ~3 cm^-1: every method gets the same PAIRED_SHUFFLES orders
    orders = [np.random.default_rng(seed).permutation(len(common)) for seed in range(PAIRED_SHUFFLES)]
    print(f"\n4-fold cross-validated MAD (cm-1), mean [min-max] over {PAIRED_SHUFFLES} fold assignments, the same for "
          "every method")
    width = max(8, *(len(m) for m in methods))
    print(f"{'method':<{width}} {'pairs':>5} {'uniform factor':>14}  " + "".join(f"{n:>22}" for n in (UNIFORM, REGION,
                                                                                               PER_COORDINATE)))
    for m, cs in cases.items():
        cs = sorted((c for c in cs if c.reference.name in common), key=lambda c: c.reference.name)
        row = []
        for name in (UNIFORM, REGION, PER_COORDINATE):
            cv = [cross_validated_mad([cs[i] for i in order], model_name=name) for order in orders]
            row.append(f"{np.mean(cv):.1f} [{min(cv):.1f}-{max(cv):.1f}]")
        pairs = sum(len(c.experimental_cm1) for c in cs)
        print(f"{m:<{width}} {pairs:>5} {fit_uniform(cs):14.4f}  " + "".join(f"{r:>22}" for r in row))


def fit_models(cases):
    """(train, test, {name: model}) fitted on the training split."""
    train, test = split_train_test(cases)
    s = fit_uniform(train)
    models = {
        "unscaled": ScaleModel(1.0, UNIFORM, "none"),
        UNIFORM: ScaleModel(s, UNIFORM, "fit"),
        REGION: ScaleModel(s, REGION, "fit", region_factors=fit_regions(train, s)),
        PER_COORDINATE: ScaleModel(s, PER_COORDINATE, "fit", fit_per_coordinate(train, s)),
    }
    return train, test, models


def stats(cases, model):
    return error_statistics(*pooled(cases, model))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--write", action="store_true", help="update the method's file in vibest/data (scale_factors*.json)")
    ap.add_argument("--method", default="gfn2", help="level whose Hessians are scaled (gfn2, gfn1, b3lyp)")
    ap.add_argument("--cached-only", action="store_true",
                    help="fit on the molecules already in --records only (a partial fit; the output says which)")
    ap.add_argument("--records", type=Path, default=None, help="pickle file to keep computed records between runs")
    ap.add_argument("--cv", action="store_true",  # kept for old command lines: the figure is always printed
                    help="also print the per-coordinate model's 4-fold cross-validated MAD over the training "
                         "molecules (the figure to choose coordinate types by; ~2 min)")
    ap.add_argument("--paired", default=None, metavar="M1,M2",
                    help="instead of fitting: compare methods side by side on the smaller training molecules "
                         "(cross-validated MAD only; records kept in --records, a folder here); "
                         "b3lyp/6-31g** tries a method with another basis")
    ap.add_argument("--max-basis", type=int, default=66,
                    help="with --paired: the largest molecule, in basis functions of every method's basis [66]")
    args = ap.parse_args()
    if args.paired:
        paired_comparison(args.paired.split(","), args.max_basis, args.records or Path("paired-records"))
        return
    level = parse_level(args.method)
    options = REFERENCE_OPTIONS if level.key == "gfn2" else calculation_options(args.method, workers=None if
                                                                               level.uses_dft else 1)
    cases = compute_cases(cache=args.records, options=options, cached_only=args.cached_only)
    if not cases:
        sys.exit(f"no reference molecule of {args.records} has a record at {args.method}: nothing to fit")
    train, test, models = fit_models(cases)
    n_rows = sum(len(c.reference.fundamentals_cm1) for c in cases)
    n_pairs = sum(len(c.assignment.rows) for c in cases)
    print(f"molecules: {len(cases)} ({len(train)} train, {len(test)} held out: {', '.join(c.reference.name for c in test)})")
    print(f"fundamentals: {n_rows} (degenerate ones counted per component), assigned {n_pairs}, unassigned {n_rows - n_pairs}")
    by_method: dict[str, int] = {}
    for c in cases:
        by_method[c.assignment.method] = by_method.get(c.assignment.method, 0) + 1
    for m, n in sorted(by_method.items()):
        print(f"  assignment by {m}: {n} molecules")
    print(f"\n{'model':<16} {'split':<9} {'n':>4} {'MAD':>7} {'RMS':>7} {'max':>7}   (cm-1)")
    table = {}
    for name, model in models.items():
        for split, cs in (("train", train), ("held-out", test)):
            st = stats(cs, model)
            table[(name, split)] = st
            print(f"{name:<16} {split:<9} {st['count']:>4} {st['mad_cm1']:7.1f} {st['rms_cm1']:7.1f} {st['max_cm1']:7.1f}")
    # the default model is chosen by this figure, so it is always computed (~2 min)
    cv = {name: cross_validated_mad(train, model_name=name) for name in (UNIFORM, REGION)}
    cv[PER_COORDINATE] = cross_validated_mad(train, models[UNIFORM].factor)
    print("4-fold cross-validated MAD over the training molecules (the figure that chooses): "
          + ", ".join(f"{k} {v:.2f}" for k, v in cv.items()) + " cm-1")
    print(f"\nuniform factor {models[UNIFORM].factor:.4f}; region factors "
          + ", ".join(f"{f:.4f}" for f in models[REGION].region_factors) + " (<1000, 1000-1600, 1600-2000, 2000-2700, >2700)")
    print(f"\n{'coordinate type':<28} {'force-constant factor':>21} {'~wavenumber factor':>19}")
    fc = models[PER_COORDINATE].force_constants
    rows = [(t.name, v) for t, v in sorted(fc.types.items())] + \
        [(f"family: {f.value}", v) for f, v in fc.families.items()] + sorted(fc.couplings.items())
    for t, v in rows:
        print(f"{t:<28} {v:21.4f} {np.sqrt(v):19.4f}")
    print("\nerror by the dominant coordinate type of the mode (MAD / max, cm-1; train | held-out)")
    types = sorted({t for c in cases for t in c.dominant_types})
    print(f"{'type':<28} {'n':>4} " + " ".join(f"{n:>17}" for n in models if n != "unscaled"))
    for t in types:
        row = []
        for name, model in models.items():
            if name == "unscaled":
                continue
            parts = []
            for cs in (train, test):
                p, e = [], []
                for c in cs:
                    sel = [k for k, d in enumerate(c.dominant_types) if d == t]
                    if sel:
                        p.append(predicted_wavenumbers(c, model)[sel])
                        e.append(c.experimental_cm1[sel])
                st = error_statistics(np.concatenate(p), np.concatenate(e)) if p else None
                parts.append("   -   " if st is None else f"{st['mad_cm1']:3.0f}/{st['max_cm1']:3.0f}")
            row.append(" | ".join(parts))
        count = sum(d == t for c in cases for d in c.dominant_types)
        print(f"{t:<28} {count:>4} " + " ".join(f"{r:>17}" for r in row))
    print(f"\n{'molecule':<36} {'split':<9} {'MAD uni':>8} {'MAD reg':>8} {'MAD per':>8}  assignment")
    for c in cases:
        split = "held-out" if c in test else "train"
        st = [stats([c], models[m])["mad_cm1"] for m in (UNIFORM, REGION, PER_COORDINATE)]
        print(f"{c.reference.name:<36} {split:<9} {st[0]:8.1f} {st[1]:8.1f} {st[2]:8.1f}  {c.assignment.method}")
    print("\nunassigned rows:")
    for c in cases:
        for r in c.assignment.unassigned:
            print(f"  {c.reference.name}: {c.reference.fundamentals_cm1[r]:.0f} cm-1 {c.reference.symmetries[r]} "
                  f"{c.reference.descriptions[r]}")
    default = min(cv, key=cv.get)
    print(f"\ndefault model by cross-validated MAD over the training molecules: {default} "
          "(the held-out figures above are reported, never used to choose)")
    if args.write:
        from vibest.analysis.scaling import SCALE_FILE_FORMAT, SCALE_FILES

        path = Path(__file__).resolve().parents[1] / "vibest" / "data" / SCALE_FILES[options.engine.method]

        def summary(name):
            return {"train_mad_cm1": round(table[(name, "train")]["mad_cm1"], 1),
                    "heldout_mad_cm1": round(table[(name, "held-out")]["mad_cm1"], 1),
                    "train_molecules": len(train), "heldout_molecules": len(test)}

        out = {
            "format_version": SCALE_FILE_FORMAT,
            "default": default,
            "method": f"{options.engine.method}, vibest default settings; modes assigned by symmetry class and character"
                      + (f"; fitted on the {len(cases)} of 82 reference molecules computed so far" if args.cached_only
                         else ""),
            "script": "benchmarks/fit_scale_factor.py",
            "split": "stratified by functional group (vibest.analysis.calibration.split_train_test)",
            "cross_validated_mad_cm1": {k: round(v, 2) for k, v in cv.items()},
            "uniform": {"factor": round(models[UNIFORM].factor, 5), "fundamentals": table[(UNIFORM, "train")]["count"],
                        "molecules": len(train), **summary(UNIFORM)},
            REGION: {"region_factors": [round(f, 5) for f in models[REGION].region_factors], **summary(REGION)},
            PER_COORDINATE: {**models[PER_COORDINATE].force_constants.to_json(digits=5), **summary(PER_COORDINATE)},
        }
        path.write_text(json.dumps(out, indent=1) + "\n")
        print(f"wrote {path}")


if __name__ == "__main__":
    main()
