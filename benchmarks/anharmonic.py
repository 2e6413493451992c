"""Would anharmonic corrections bring B3LYP's band positions closer than its scale models do?

For the training molecules whose B3LYP records ``fit_scale_factor.py --paired`` keeps (held-out
molecules are never computed), adds VPT2 corrections nu_i - w_i (vibest.analysis.anharmonic) to
B3LYP's harmonic wavenumbers and fits vibest's scale models to what is left: the models then scale
harmonic wavenumbers towards experiment minus the anharmonic correction. The corrections come from
cubic and semi-diagonal quartic force constants along B3LYP's own normal modes at its geometry
(vibest.calculation.anharmonic_forces, 2M + 1 Hessians per molecule), computed with
``--anharmonic-method``: GFN1-xTB or GFN2-xTB (seconds; a "hybrid" scheme, harmonic part from the
higher level), or B3LYP itself (hours for the set; ``--max-atoms`` limits it). Modes below
``--harmonic-below`` cm^-1 keep their harmonic value and are left out of the couplings
(rectilinear normal coordinates describe torsions and inversions badly). Prints the 4-fold
cross-validated MAD (cm^-1), mean [min-max] over the same 8 fold assignments as
``fit_scale_factor.py --paired``, with and without the corrections; with B3LYP corrections also
the MAD of unscaled VPT2 fundamentals.

    python benchmarks/fit_scale_factor.py --paired b3lyp --records paired-records   # the records
    python benchmarks/anharmonic.py --records paired-records/b3lyp.pkl --anharmonic-method gfn2
"""

from __future__ import annotations

import argparse
import dataclasses
import pickle
import sys
import time
from pathlib import Path

import numpy as np
from ase.units import Bohr

sys.path.insert(0, str(Path(__file__).resolve().parent))

from fit_scale_factor import PAIRED_SHUFFLES, compute_cases, trial_method  # noqa: E402

from vibest.analysis.anharmonic import dimensionless_force_constants, rotation_terms, vpt2  # noqa: E402
from vibest.analysis.calibration import cross_validated_mad, fit_uniform  # noqa: E402
from vibest.analysis.scaling import PER_COORDINATE, REGION, UNIFORM  # noqa: E402
from vibest.calculation.anharmonic_forces import mode_force_constants  # noqa: E402
from vibest.calculation.driver import calculation_options  # noqa: E402
from vibest.calculation.engine import EngineSettings, make_engine  # noqa: E402
from vibest.calculation.methods import method_named  # noqa: E402


def force_constants(cases, method: str, cache: Path, max_atoms: int) -> dict:
    """ModeForceConstants per SMILES along each case's modes, kept in ``cache`` (resumes); cases
    of more than ``max_atoms`` atoms are not computed."""
    forces = pickle.loads(cache.read_bytes()) if cache.exists() else {}
    settings = EngineSettings.for_method(method_named(method))
    for c in sorted(cases, key=lambda c: len(c.record.numbers)):
        r = c.record
        if r.smiles in forces or len(r.numbers) > max_atoms:
            continue
        t0 = time.perf_counter()
        engine = make_engine(r.numbers, np.asarray(r.positions_angstrom) / Bohr, r.charge, r.uhf, settings)
        forces[r.smiles] = mode_force_constants(engine, r.numbers, r.positions_angstrom, c.modes.masses_amu,
                                                c.modes.modes_mass_weighted, r.charge, r.uhf,
                                                workers=1 if settings.is_dft else 2)
        cache.write_bytes(pickle.dumps(forces))
        print(f"  {c.reference.name:<32} {len(r.numbers):3d} atoms  {time.perf_counter() - t0:7.1f} s",
              file=sys.stderr, flush=True)
    return forces


def corrections(case, forces, harmonic_below_cm1: float) -> np.ndarray:
    """nu_i - w_i (cm^-1) of the case's modes; 0 for modes below ``harmonic_below_cm1``."""
    w = case.modes.wavenumbers_cm1
    k3, k4 = dimensionless_force_constants(w, forces.cubic_au, forces.quartic_au)
    keep = w >= harmonic_below_cm1
    b, zetas = rotation_terms(case.record.positions_angstrom, case.modes.masses_amu, case.modes.modes_mass_weighted)
    result = vpt2(w[keep], k3[np.ix_(keep, keep, keep)], k4[np.ix_(keep, keep)], b, zetas[:, keep][:, :, keep])
    out = np.zeros(len(w))
    out[keep] = result.corrections_cm1
    return out


def corrected(case, delta_cm1):
    """The case with experiment minus the correction as its target (what the scale model fits)."""
    fund = case.reference.fundamentals_cm1.copy()
    for row, mode in zip(case.assignment.rows, case.assignment.modes):
        fund[row] -= delta_cm1[mode]
    return dataclasses.replace(case, reference=dataclasses.replace(case.reference, fundamentals_cm1=fund))


def unscaled_line(cases, deltas) -> str:
    """MAD of the unscaled VPT2 fundamentals beside that of the harmonic ones with one factor
    fitted on the same fundamentals (in sample)."""
    w = np.concatenate([c.modes.wavenumbers_cm1[list(c.assignment.modes)] for c in cases])
    d = np.concatenate([dc[list(c.assignment.modes)] for c, dc in zip(cases, deltas)])
    e = np.concatenate([c.experimental_cm1 for c in cases])
    s = w @ e / (w @ w)
    return (f"unscaled VPT2 fundamentals: MAD {np.abs(w + d - e).mean():.1f}; harmonic with one factor fitted on "
            f"these ({s:.4f}, in sample): MAD {np.abs(s * w - e).mean():.1f}")


def cv_row(cases, orders) -> str:
    parts = []
    for name in (UNIFORM, REGION, PER_COORDINATE):
        cv = [cross_validated_mad([cases[i] for i in order], model_name=name) for order in orders]
        parts.append(f"{np.mean(cv):5.1f} [{min(cv):.1f}-{max(cv):.1f}]")
    return f"{fit_uniform(cases):8.4f}  " + "  ".join(f"{p:>18}" for p in parts)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--records", type=Path, required=True, help="records of --harmonic-method (fit_scale_factor.py --paired)")
    ap.add_argument("--harmonic-method", default="b3lyp",
                    help="method of the records: b3lyp, or b3lyp/BASIS as in fit_scale_factor.py --paired")
    ap.add_argument("--anharmonic-method", default="gfn2", help="gfn1, gfn2, b3lyp or b3lyp/BASIS")
    ap.add_argument("--forces", type=Path, default=None, help="pickle to keep the force constants in")
    ap.add_argument("--max-atoms", type=int, default=1000, help="compute molecules of at most this many atoms")
    ap.add_argument("--only", default=None, help="comma-separated molecule names (fundamentals.csv) to use")
    ap.add_argument("--harmonic-below", default="0,500,2500",
                    help="comma-separated thresholds (cm^-1) to try, each a row [0,500,2500]")
    args = ap.parse_args()
    harmonic, anharmonic = trial_method(args.harmonic_method), trial_method(args.anharmonic_method)
    cases = compute_cases(verbose=False, cache=args.records, options=calculation_options(harmonic, workers=None),
                          cached_only=True)
    if args.only:
        names = set(args.only.split(","))
        cases = [c for c in cases if c.reference.name in names]
    forces = force_constants(cases, anharmonic, args.forces or args.records.with_name(f"forces-{anharmonic}.pkl"),
                             args.max_atoms)
    cases = sorted((c for c in cases if c.record.smiles in forces), key=lambda c: c.reference.name)
    if not cases:
        raise SystemExit(f"no {method_named(harmonic).name} records to use in {args.records}: make them with "
                         f"fit_scale_factor.py --paired {args.harmonic_method} --records DIR")
    orders = [np.random.default_rng(seed).permutation(len(cases)) for seed in range(PAIRED_SHUFFLES)]
    pairs = sum(len(c.experimental_cm1) for c in cases)
    print(f"{len(cases)} training molecules, {pairs} fundamentals; harmonic wavenumbers from "
          f"{method_named(harmonic).name}, VPT2 corrections from {method_named(anharmonic).name}")
    print(f"4-fold cross-validated MAD (cm-1), mean [min-max] over {PAIRED_SHUFFLES} fold assignments")
    print(f"{'corrections':<28} {'uniform factor':>14}  {UNIFORM:>18}  {REGION:>18}  {PER_COORDINATE:>18}")
    print(f"{'none (harmonic)':<28} {cv_row(cases, orders)}", flush=True)
    for below in (float(t) for t in args.harmonic_below.split(",")):
        deltas = [corrections(c, forces[c.record.smiles], below) for c in cases]
        shifted = [corrected(c, d) for c, d in zip(cases, deltas)]
        print(f"{f'VPT2, modes >= {below:.0f} cm-1':<28} {cv_row(shifted, orders)}", flush=True)
        if method_named(anharmonic).is_dft:
            print(f"{'':<28} {unscaled_line(cases, deltas)}")


if __name__ == "__main__":
    main()
