"""Predicted infrared intensities against measured gas-phase band intensities, per level of theory.

For each row of benchmarks/data/gas_intensities.csv (a fundamental of a molecule of
vibest/data/fundamentals.csv, its integrated band intensity in km/mol) the computed modes that
the calibration's assignment pairs with that fundamental (by symmetry class and character,
vibest.analysis.assignment; degenerate components summed) give the predicted intensity. Printed
per level: the median |log10(I_pred / I_exp)| and the share of bands within a factor of 2, then
every band. Levels: gfn2 (GFN2-xTB), gfn2+b3lyp (GFN2-xTB modes, B3LYP-D3(BJ)/6-31G(d) dipole
derivatives at the GFN2-xTB geometry), b3lyp (everything at B3LYP-D3(BJ)/6-31G(d)), and the
modern alternatives as intensity methods: gfn2+wb97x (wB97X-D3(BJ)/def2-SVP), gfn2+r2scan
(r2SCAN-D3(BJ)/def2-SVP).

    python benchmarks/intensities.py [--levels gfn1,gfn2,gfn2+b3lyp,b3lyp,gfn2+wb97x,gfn2+r2scan] [--records DIR]

``--records DIR`` keeps computed records in DIR/<level>-records.pkl (the same files
benchmarks/fit_scale_factor.py --records writes, so a fit's DFT records are reused).
The measured values were written from memory (see the data file's header): read the figures as
indicative, good for differences larger than ~30 %.
"""

from __future__ import annotations

import argparse
import csv
import pickle
import sys
from pathlib import Path

import numpy as np

from vibest.analysis.calibration import prepare_case, reference_molecules
from vibest.analysis.harmonic import harmonic_analysis
from vibest.calculation.driver import calculation_options
from vibest.calculation.methods import parse_level
from vibest.reference_records import REFERENCE_OPTIONS, computed_with, reference_record

DATA = Path(__file__).resolve().parent / "data" / "gas_intensities.csv"


def measured_rows() -> list[dict]:
    with open(DATA) as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


def mode_numbers() -> dict[str, list[str]]:
    """Per molecule, the mode number of every expanded row of fundamentals.csv (table order)."""
    from importlib import resources

    text = resources.files("vibest.data").joinpath("fundamentals.csv").read_text()
    out: dict[str, list[str]] = {}
    for row in csv.DictReader(line for line in text.splitlines() if not line.startswith("#")):
        out.setdefault(row["molecule"], []).extend([row["mode"]] * int(row["degeneracy"]))
    return out


def records_for(level: str, smiles_list: list[str], cache_dir: Path | None) -> dict:
    """Reference records of ``smiles_list`` at ``level`` (kept in the cache between runs)."""
    key = parse_level(level).key
    path = cache_dir / f"{key}-records.pkl" if cache_dir else None
    records = pickle.loads(path.read_bytes()) if path and path.exists() else {}
    options = REFERENCE_OPTIONS if key == "gfn2" else calculation_options(level)
    for smiles in smiles_list:
        if smiles in records and not isinstance(records[smiles], str) and not computed_with(records[smiles], options):
            print(f"  {level}: cached {smiles} is of an older version of the method: recomputed", file=sys.stderr)
            del records[smiles]
        if smiles not in records:
            print(f"  {level}: computing {smiles}", file=sys.stderr)
            records[smiles] = reference_record(smiles, options)
            if path:
                path.write_bytes(pickle.dumps(records))
    return records


def band_intensities(level_records: dict, rows: list[dict]) -> list[tuple[dict, float]]:
    """(measured row, predicted intensity km/mol) for every row whose fundamental was assigned."""
    refs = {r.name: r for r in reference_molecules()}
    numbers = mode_numbers()
    out = []
    for row in rows:
        ref = refs[row["molecule"]]
        record = level_records[ref.smiles]
        case = prepare_case(ref, record)
        modes = harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2,
                                  record.dipole_derivatives_e)
        wanted = {k for k, m in enumerate(numbers[ref.name]) if m == row["mode"]}
        assigned = [mode for r, mode in zip(case.assignment.rows, case.assignment.modes) if r in wanted]
        if len(assigned) != len(wanted):
            continue  # the assignment left a component unpaired: no fair comparison
        out.append((row, float(modes.intensities_km_mol[assigned].sum())))
    return out


def summary(pairs: list[tuple[dict, float]]) -> dict:
    ratio = np.array([np.log10(max(p, 1e-3) / float(r["intensity_km_mol"])) for r, p in pairs])
    return {"bands": len(pairs), "median_abs_log10": float(np.median(np.abs(ratio))),
            "within_factor_2": float(np.mean(np.abs(ratio) <= np.log10(2.0)))}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", default="gfn1,gfn2,gfn2+b3lyp,b3lyp,gfn2+wb97x,gfn2+r2scan")
    ap.add_argument("--records", type=Path, default=None, help="directory for cached records")
    args = ap.parse_args()
    rows = measured_rows()
    refs = {r.name: r for r in reference_molecules()}
    smiles = sorted({refs[r["molecule"]].smiles for r in rows})
    levels = [lv.strip() for lv in args.levels.split(",") if lv.strip()]
    results = {}
    for level in levels:
        results[level] = band_intensities(records_for(level, smiles, args.records), rows)
    print(f"{len(rows)} measured bands of {len(smiles)} molecules (values from memory: see {DATA.name})\n")
    print(f"{'level':<14} {'bands':>5} {'median |log10 ratio|':>21} {'within x2':>10}")
    for level, pairs in results.items():
        s = summary(pairs)
        print(f"{level:<14} {s['bands']:>5} {s['median_abs_log10']:21.3f} {100 * s['within_factor_2']:9.0f}%")
    print(f"\n{'molecule':<18} {'mode':>4} {'cm-1':>6} {'measured':>9} " + " ".join(f"{lv:>12}" for lv in levels))
    for row in rows:
        cells = []
        for level in levels:
            got = [p for r, p in results[level] if r is row]
            cells.append(f"{got[0]:12.1f}" if got else f"{'-':>12}")
        print(f"{row['molecule']:<18} {row['mode']:>4} {row['wavenumber_cm1']:>6} {float(row['intensity_km_mol']):9.1f} "
              + " ".join(cells))


if __name__ == "__main__":
    main()
