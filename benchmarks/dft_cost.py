"""Wall time of the density-functional tiers against molecule size, on this machine.

For molecules of 3 to 24 atoms, runs both ways to use B3LYP-D3(BJ)/6-31G(d):
  intensities  gfn2+b3lyp: GFN2-xTB record, then B3LYP dipole derivatives at its geometry;
  full         b3lyp: GFN2-xTB pre-optimisation, B3LYP optimisation, analytic Hessian;
and prints atoms, basis functions, DFT gradients and seconds per stage, then fits
seconds = a * (basis functions / 100) ** b per tier (least squares in logs), the model
vibest.calculation.dft_engine.COST_MODEL uses to refuse hopeless requests. Time it on a quiet
machine: other work running beside it can change the figures by 2x.

    python benchmarks/dft_cost.py [--quick] [--tiers intensities,full] [--intensity-methods b3lyp,r2scan]
                                  [--only methyl] [--against-pyscf]

``--intensity-methods`` times the intensities tier of other density-functional methods too
(gfn2+KEY), side by side in the same run; the full tier is B3LYP's (the only one with scale models).
``--only TEXT`` keeps the molecules whose name contains TEXT. ``--against-pyscf`` runs every
calculation twice, side by side: the shipped way (the orbital-basis response of the
coupled-perturbed equations, vibest.calculation.orbital_response; the Hessian's assembly of
vibest.calculation.hessian_assembly: the functional's terms per atom pair, density-fitted
two-electron terms) and PySCF's own response and assembly (exact two-electron terms, the way
before 2026-12-04).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import vibest.calculation.dft_engine as dft_engine
from vibest.calculation.driver import calculation_options, compute_record
from vibest.calculation.hessian import default_workers
from vibest.calculation.orbital_response import orbital_response
from vibest.structure import build_molecule

VIBEST_ASSEMBLY = dft_engine.PySCFEngine._assembly
MOLECULES = [
    ("water", "O"),
    ("formaldehyde", "C=O"),
    ("acetone", "CC(C)=O"),
    ("benzene", "c1ccccc1"),
    ("toluene (7 heavy atoms)", "Cc1ccccc1"),
    ("acetophenone (9 heavy atoms)", "CC(=O)c1ccccc1"),
    ("methyl benzoate (10 heavy atoms)", "COC(=O)c1ccccc1"),
    ("4-ethylanisole (10 heavy atoms, 24 atoms)", "CCc1ccc(OC)cc1"),
]


def run(smiles: str, level: str, contractions: str = "vibest") -> dict:
    """Time one record; ``contractions``: "vibest" (the default) or "pyscf" (PySCF's own)."""
    ours = contractions == "vibest"
    dft_engine.orbital_response = orbital_response if ours else (lambda mf: None)
    dft_engine.PySCFEngine._assembly = VIBEST_ASSEMBLY if ours else (lambda self, hobj: hobj.partial_hess_elec)
    mol = build_molecule(smiles)
    options = calculation_options(level, allow_long=True)
    t0 = time.perf_counter()
    record, converged, _ = compute_record(mol, options)
    seconds = time.perf_counter() - t0
    t = record.timings
    return {"atoms": mol.natoms, "basis": t.get("basis_functions", 0), "seconds": seconds,
            "gradients": t.get("optimization_gradients", 0) if level == "b3lyp" else 0,
            "hessian_s": t.get("hessian_seconds", 0.0) if level == "b3lyp" else 0.0,
            "intensity_s": t.get("intensity_seconds", 0.0), "converged": converged}


def fit(points: list[tuple[int, float]]) -> tuple[float, float]:
    x = np.log(np.array([p[0] for p in points]) / 100.0)
    y = np.log(np.array([p[1] for p in points]))
    b, log_a = np.polyfit(x, y, 1)
    return float(np.exp(log_a)), float(b)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="the four smallest molecules only")
    ap.add_argument("--tiers", default="intensities,full")
    ap.add_argument("--intensity-methods", default="b3lyp", help="density-functional methods of the intensities tier")
    ap.add_argument("--only", default="", help="the molecules whose name contains this text")
    ap.add_argument("--against-pyscf", action="store_true",
                    help="time each calculation with vibest's contractions and with PySCF's own, side by side")
    args = ap.parse_args()
    levels = {"full": ["b3lyp"], "intensities": [f"gfn2+{m.strip()}" for m in args.intensity_methods.split(",")]}
    contractions = ["vibest", "pyscf"] if args.against_pyscf else ["vibest"]
    runs = [(level, how) for t in args.tiers.split(",") for level in levels[t.strip()] for how in contractions]
    molecules = [m for m in (MOLECULES[:4] if args.quick else MOLECULES) if args.only in m[0]]
    print(f"{default_workers()} cores; full tier B3LYP-D3(BJ)/6-31G(d) (grid level 2); intensities tier gfn2+METHOD")
    print(f"{'molecule':<42} {'level':<20} {'atoms':>5} {'basis':>5} {'grads':>5} {'Hessian s':>9} "
          f"{'intens. s':>9} {'total s':>8}")
    points: dict[tuple[str, str], list] = {run_: [] for run_ in runs}

    def label(level: str, how: str) -> str:
        return level + ("" if len(contractions) == 1 else f" ({how})")

    for name, smiles in molecules:
        for level, how in runs:
            r = run(smiles, level, how)
            points[(level, how)].append((r["basis"], r["seconds"]))
            print(f"{name:<42} {label(level, how):<20} {r['atoms']:>5} {r['basis']:>5} {r['gradients']:>5} {r['hessian_s']:9.1f} "
                  f"{r['intensity_s']:9.1f} {r['seconds']:8.1f}" + ("" if r["converged"] else "  (not converged)"),
                  flush=True)
    print("\nfitted seconds = a * (basis functions / 100) ** b on this machine:")
    for (level, how), pts in points.items():
        pts = [p for p in pts if p[0] >= 30]
        if len(pts) >= 2:
            a, b = fit(pts)
            print(f"  {label(level, how):<20} a = {a:8.1f} s, b = {b:4.2f}")


if __name__ == "__main__":
    main()
