"""Fit vibest's scale models for GFN2-xTB harmonic wavenumbers and print their errors.

Computes every molecule of vibest/data/fundamentals.csv with default settings, pairs computed
and experimental fundamentals by sorted order within each molecule, and fits on a training split
of molecules (every 4th molecule from the 3rd is held out):
  1. uniform: s = sum(w_calc w_exp) / sum(w_calc^2);
  2. per-coordinate: scaled force field, one force-constant factor per coordinate type.
Prints MAD / RMS / max per model on train and held-out molecules, per molecule, and per type.
The default model is the one with the lower held-out MAD.

    python benchmarks/fit_scale_factor.py            # print only
    python benchmarks/fit_scale_factor.py --write    # also update vibest/data/scale_factors.json
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

from vibest.analysis.calibration import (error_statistics, fit_per_coordinate, prepare_case, reference_molecules,
                                         scaled_wavenumbers, split_train_test)
from vibest.analysis.harmonic import harmonic_analysis
from vibest.analysis.scaling import PER_COORDINATE, UNIFORM, ScaleModel, fit_uniform_factor
from vibest.predict import CalculationOptions, compute_record
from vibest.structure import build_molecule


def compute_cases(verbose: bool = True):
    cases = []
    for ref in reference_molecules():
        mol = build_molecule(ref.smiles)
        record, converged, _ = compute_record(mol, CalculationOptions(workers=1))
        if verbose:
            print(f"  computed {ref.name:<22} {mol.natoms:>3} atoms{'' if converged else '  (not converged)'}",
                  file=sys.stderr)
        cases.append(prepare_case(ref, record))
    return cases


def fit_models(cases):
    """(train, test, uniform model, per-coordinate model) fitted on the training split."""
    train, test = split_train_test(cases)
    calc = np.concatenate([np.sort(harmonic_analysis(c.record.numbers, c.record.positions_angstrom,
                                                     c.record.hessian_hartree_bohr2).wavenumbers_cm1) for c in train])
    exp = np.concatenate([np.sort(c.reference.fundamentals_cm1) for c in train])
    s = fit_uniform_factor(calc, exp)
    uniform = ScaleModel(s, UNIFORM, "fit")
    per = ScaleModel(s, PER_COORDINATE, "fit", fit_per_coordinate(train, s))
    return train, test, uniform, per


def stats(cases, model):
    p = np.concatenate([scaled_wavenumbers(c, model) for c in cases])
    e = np.concatenate([np.sort(c.reference.fundamentals_cm1) for c in cases])
    return error_statistics(p, e)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--write", action="store_true", help="update vibest/data/scale_factors.json")
    args = ap.parse_args()
    cases = compute_cases()
    train, test, uniform, per = fit_models(cases)
    unscaled = ScaleModel(1.0, UNIFORM, "none")
    print(f"molecules: {len(train)} train, {len(test)} held out: {', '.join(c.reference.name for c in test)}")
    print(f"\n{'model':<16} {'split':<9} {'n':>4} {'MAD':>7} {'RMS':>7} {'max':>7}   (cm-1)")
    table = {}
    for name, model in (("unscaled", unscaled), ("uniform", uniform), ("per-coordinate", per)):
        for split, cs in (("train", train), ("held-out", test)):
            st = stats(cs, model)
            table[(name, split)] = st
            print(f"{name:<16} {split:<9} {st['count']:>4} {st['mad_cm1']:7.1f} {st['rms_cm1']:7.1f} {st['max_cm1']:7.1f}")
    print(f"\nuniform factor {uniform.factor:.4f}")
    print(f"\n{'coordinate type':<28} {'force-constant factor':>21} {'~wavenumber factor':>19}")
    for t, v in sorted(per.force_constant_factors.items()):
        print(f"{t:<28} {v:21.4f} {np.sqrt(v):19.4f}")
    print(f"\n{'molecule':<22} {'split':<9} {'MAD uniform':>11} {'MAD per-coord':>13}")
    for c in cases:
        split = "held-out" if c in test else "train"
        print(f"{c.reference.name:<22} {split:<9} {stats([c], uniform)['mad_cm1']:11.1f} {stats([c], per)['mad_cm1']:13.1f}")
    default = PER_COORDINATE if table[("per-coordinate", "held-out")]["mad_cm1"] < table[("uniform", "held-out")]["mad_cm1"] else UNIFORM
    print(f"\ndefault model by held-out MAD: {default}")
    if args.write:
        path = Path(__file__).resolve().parents[1] / "vibest" / "data" / "scale_factors.json"
        out = {
            "default": default,
            "method": "GFN2-xTB (tblite), vibest default settings; matching by sorted order per molecule",
            "script": "benchmarks/fit_scale_factor.py",
            "uniform": {"factor": round(uniform.factor, 5), "fundamentals": table[("uniform", "train")]["count"],
                        "molecules": len(train), "train_mad_cm1": round(table[("uniform", "train")]["mad_cm1"], 1),
                        "heldout_mad_cm1": round(table[("uniform", "held-out")]["mad_cm1"], 1)},
            PER_COORDINATE: {"force_constant_factors": {k: round(v, 5) for k, v in sorted(per.force_constant_factors.items())},
                             "train_molecules": len(train),
                             "train_mad_cm1": round(table[("per-coordinate", "train")]["mad_cm1"], 1),
                             "heldout_mad_cm1": round(table[("per-coordinate", "held-out")]["mad_cm1"], 1)},
        }
        path.write_text(json.dumps(out, indent=1) + "\n")
        print(f"wrote {path}")


if __name__ == "__main__":
    main()
