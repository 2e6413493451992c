"""Mixtures of real measured gas-phase spectra at known fractions, fitted by vibest.components.

Absorbances of gases add (Beer-Lambert), so f * A1 + (1 - f) * A2 of two real spectra of the
measured set (benchmarks/data/measured_set.csv; jcamp 1.3.2 sdist, fetched and checked) is the
spectrum of a mixture whose absorbance fraction of component 1 over the fitted range is known:
f int A1 / (f int A1 + (1 - f) int A2). Gaussian noise of 1 % of the mixture's largest absorbance
is added (fixed seed). Each mixture is fitted twice: with the two measured spectra as references,
and with the two predicted spectra (GFN2-xTB, gas-phase contours) as components. Printed: the
absorbance-fraction error per pair and fraction, and the mean/max absolute error per kind.

    python benchmarks/mixtures.py [--store FILE]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from scipy.integrate import trapezoid

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import measured_set  # noqa: E402

from vibest.components import Component, fit_components  # noqa: E402
from vibest.measured import ABSORBANCE, MeasuredSpectrum, load_spectrum, preprocess  # noqa: E402
from vibest.spectrum import grid  # noqa: E402

#: (file 1, SMILES 1, file 2, SMILES 2): isomers, an alcohol and water, an aromatic pair.
PAIRS = (("m-xylene.jdx", "Cc1cccc(C)c1", "p-xylene.jdx", "Cc1ccc(C)cc1"),
         ("methanol.jdx", "CO", "water.jdx", "O"),
         ("benzene.jdx", "c1ccccc1", "toluene.jdx", "Cc1ccccc1"),
         ("ethanol.jdx", "CCO", "propane.jdx", "CCC"))
FRACTIONS = (0.1, 0.3, 0.5, 0.7, 0.9)
RANGE_CM1 = (500.0, 3800.0)
NOISE = 0.01


def mixture(a: MeasuredSpectrum, b: MeasuredSpectrum, f: float, seed: int) -> tuple[MeasuredSpectrum, float]:
    """(the mixed spectrum on a 1 cm^-1 grid of the shared range, true absorbance fraction of ``a``)."""
    lo = max(a.range_cm1[0], b.range_cm1[0], RANGE_CM1[0])
    hi = min(a.range_cm1[1], b.range_cm1[1], RANGE_CM1[1])
    g = grid(lo, hi, 1.0)
    ya, yb = preprocess(a, g, normalise=False), preprocess(b, g, normalise=False)
    y = f * ya + (1 - f) * yb
    y = y + np.random.default_rng(seed).normal(0.0, NOISE * y.max(), size=y.shape)
    area_a, area_b = trapezoid(ya, g), trapezoid(yb, g)
    return MeasuredSpectrum(g, y, ABSORBANCE, f"mix {f:.1f}", phase="gas"), f * area_a / (f * area_a + (1 - f) * area_b)


def main() -> None:
    import vibest

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--store", default=None, help="result store for the predicted components")
    args = ap.parse_args()
    folder = measured_set.fetch()
    errors: dict[str, list[float]] = {"measured references": [], "predicted components": []}
    print(f"{'pair':<28} {'f':>4} {'true':>6} {'measured ref.':>14} {'predicted':>10}   (absorbance fraction of the first)")
    for k, (f1, s1, f2, s2) in enumerate(PAIRS):
        a, b = load_spectrum(folder / f1), load_spectrum(folder / f2)
        pa, pb = vibest.predict(s1, store=args.store), vibest.predict(s2, store=args.store)
        for j, f in enumerate(FRACTIONS):
            mix, truth = mixture(a, b, f, seed=100 * k + j)
            refs = fit_components(mix, [Component(f1, reference=a), Component(f2, reference=b)], range_cm1=RANGE_CM1)
            pred = fit_components(mix, [Component(s1, pa), Component(s2, pb)], range_cm1=RANGE_CM1)
            got_r, got_p = refs.shares[0].absorbance_fraction, pred.shares[0].absorbance_fraction
            errors["measured references"].append(abs(got_r - truth))
            errors["predicted components"].append(abs(got_p - truth))
            print(f"{f1[:-4] + ' + ' + f2[:-4]:<28} {f:4.1f} {truth:6.3f} {got_r:14.3f} {got_p:10.3f}")
    for kind, e in errors.items():
        print(f"{kind}: mean |error| {np.mean(e):.3f}, max {np.max(e):.3f} over {len(e)} mixtures")


if __name__ == "__main__":
    main()
