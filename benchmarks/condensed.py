"""Ranking of real condensed-phase spectra against isomers and close analogues, gas and condensed
models side by side.

Spectra: the indene spectrum of R. J. Lancashire's public-domain JCAMP-DX test files
(tests/data/lancashire/xyinc1.jdx; a neat film), and the two liquid alcohols of the jcamp 1.3.2
sdist (benchmarks/data/condensed_set.csv, fetched at run time: 2-propanol, ethanol).
Candidates: isomers and close analogues of each. Each is ranked with the default comparison
taking the sample as condensed (computed hydrogen bonding for molecules with O-H/N-H donors, C=O
shift, atmospheric windows, ATR when the file says so), condensed without the hydrogen-bonded
clusters (the model before them), and as a gas (rotational contours), at GFN1-xTB (the default)
and GFN2-xTB.

    python benchmarks/condensed.py [--store FILE]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

import measured_set  # noqa: E402
from vibest.calculation.driver import calculation_options  # noqa: E402
from vibest.measured import load_spectrum  # noqa: E402
from vibest.ranking import Candidate, rank_candidates  # noqa: E402
from vibest.store import RecordStore  # noqa: E402

INDENE = (("indene", "C1C=Cc2ccccc21"), ("1-phenylpropyne", "CC#Cc1ccccc1"), ("3-phenylpropyne", "C#CCc1ccccc1"),
          ("phenylallene", "C=C=Cc1ccccc1"), ("2-ethynyltoluene", "C#Cc1ccccc1C"),
          ("4-ethynyltoluene", "C#Cc1ccc(C)cc1"), ("indane", "C1Cc2ccccc2C1"), ("styrene", "C=Cc1ccccc1"),
          ("allylbenzene", "C=CCc1ccccc1"), ("naphthalene", "c1ccc2ccccc2c1"))
#: Isomers and close analogues of the two alcohols (C3H8O, C2H6O and their neighbours).
ALCOHOLS = (("2-propanol", "CC(C)O"), ("1-propanol", "CCCO"), ("ethyl methyl ether", "CCOC"), ("ethanol", "CCO"),
            ("dimethyl ether", "COC"), ("methanol", "CO"), ("2-butanol", "CCC(C)O"), ("acetone", "CC(C)=O"),
            ("propanal", "CCC=O"), ("allyl alcohol", "C=CCO"), ("acetaldehyde", "CC=O"))
MODELS = (("condensed", {"gas_phase": False}), ("no H-bond", {"gas_phase": False, "hydrogen_bonding": False}),
          ("gas", {"gas_phase": True}))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--store", default=None, help="result store (SQLite file) [the default store]")
    args = ap.parse_args()
    store = RecordStore(args.store)
    spectra = [(ROOT / "tests/data/lancashire/xyinc1.jdx", "indene", "C1C=Cc2ccccc21", INDENE)]
    try:
        folder = measured_set.fetch_condensed()
        spectra += [(folder / e.file, e.name, e.smiles, ALCOHOLS) for e in measured_set.entries(measured_set.CONDENSED_TABLE)]
    except measured_set.FetchError as exc:
        print(f"the jcamp sdist's liquid spectra skipped: {exc}")
    print(f"{'spectrum':<10} {'level':<9} {'model':<10} {'rank':>4} {'isomer rank':>11} {'score':>6}  first")
    for path, name, smiles, candidates in spectra:
        spectrum = load_spectrum(path)
        cands = [Candidate(n, s) for n, s in candidates]
        for method in ("gfn1", "gfn2"):
            calc = calculation_options(method)
            for model, kw in MODELS:
                ranking = rank_candidates(spectrum, cands, calc=calc, store=store, **kw)
                scored = [e for e in ranking.entries if e.comparison is not None]
                mine = next(e for e in scored if e.candidate.smiles == smiles)
                iso = [e for e in scored if len(e.candidate.smiles) and _formula(e.candidate.smiles) == _formula(smiles)]
                iso_rank = 1 + [e.candidate.smiles for e in iso].index(smiles)
                print(f"{name:<10} {method:<9} {model:<10} {mine.rank:>4} {iso_rank:>11} {mine.score:6.3f}  "
                      f"{scored[0].candidate.name}")


def _formula(smiles: str) -> str:
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    return rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(smiles))


if __name__ == "__main__":
    main()
