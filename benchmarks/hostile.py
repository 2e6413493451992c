"""A catalogue of bad and hostile inputs, run against the command line and the API; prints counts.

Each case says what must happen: ``refuse`` (exit code 2 and one line on stderr starting with
"vibest: error:"), ``ok`` (exit code 0), or for API cases ``InputError`` / ``ok``. Counted:
tracebacks (Python or C++), hangs (no answer within the time limit), wrong outcomes (e.g. exit 0
where the input cannot be right: a silent wrong answer), and lost results (an output error after
a calculation that left nothing in the store). Targets: zero of each.

    python benchmarks/hostile.py [--verbose]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

TIMEOUT_S = 120.0


def files(tmp: Path) -> dict[str, Path]:
    """Hostile and ordinary files, written once."""
    out = {}

    def put(name: str, data: bytes) -> None:
        out[name] = tmp / name
        out[name].write_bytes(data)

    x = [4000 - 4 * k for k in range(901)]
    absorb = "\n".join(f"{v},{0.05 + 0.9 * (abs(v - 1700) < 20)}" for v in x)
    put("good.csv", ("wavenumber,absorbance\n" + absorb).encode())
    put("zeros.csv", "\n".join(f"{v},0" for v in x).encode())
    put("flat.csv", "\n".join(f"{v},0.5" for v in x).encode())
    put("negative.csv", ("wavenumber,absorbance\n" + "\n".join(f"{v},-1" for v in x)).encode())
    put("t_over.csv", ("wavenumber,%T\n" + "\n".join(f"{v},{180 + (v % 7)}" for v in x)).encode())
    put("t_under.csv", ("wavenumber,transmittance\n" + "\n".join(f"{v},{-0.5 + 0.01 * (v % 7)}" for v in x)).encode())
    put("header_only.csv", b"wavenumber,absorbance\n")
    put("empty.csv", b"")
    put("one_column.csv", "\n".join(str(v) for v in x).encode())
    put("nan.csv", "\n".join(f"{v},{'nan' if v == 2000 else 0.1}" for v in x).encode())
    put("text.csv", b"hello world\nthis is not a spectrum\n")
    put("binary.jdx", bytes(range(256)) * 20)
    put("ambiguous_commas.csv", "\n".join(f"{v},5,0,{k % 9}" if k % 2 else f"{v},0,{k % 9}"
                                          for k, v in enumerate(x)).encode())
    put("unsorted.csv", "\n".join(f"{v},{0.1 + (v % 5) / 10}" for v in [1000, 3000, 2000, 1500] * 3).encode())
    put("partial.csv", ("wavenumber,absorbance\n" + "\n".join(
        f"{v},{0.05 + 0.9 * (abs(v - 1700) < 20)}" for v in x if v < 1800)).encode())
    jdx = ["##TITLE=test", "##JCAMP-DX=4.24", "##DATA TYPE=INFRARED SPECTRUM", "##XUNITS=1/CM",
           "##YUNITS=ABSORBANCE", "##XFACTOR=1", "##YFACTOR={yf}", "##FIRSTX=4000", "##LASTX=400", "##NPOINTS=901",
           "##XYDATA=(X++(Y..Y))"]
    rows = [f"{v} {int(100 + 900 * (abs(v - 1700) < 20))}" for v in x]
    put("yfactor0.jdx", ("\n".join(jdx).format(yf=0) + "\n" + "\n".join(rows) + "\n##END=\n").encode())
    put("good.jdx", ("\n".join(jdx).format(yf=0.001) + "\n" + "\n".join(rows) + "\n##END=\n").encode())
    put("jcamp_named.txt", out["good.jdx"].read_bytes())
    put("npoints_lie.jdx", out["good.jdx"].read_bytes().replace(b"NPOINTS=901", b"NPOINTS=5"))
    put("truncated.jdx", out["good.jdx"].read_bytes()[:700])
    put("two_blocks.jdx", b"##TITLE=link\n##BLOCKS=2\n" + out["good.jdx"].read_bytes() * 2 + b"##END=\n")
    put("micrometres_zero.jdx", out["good.jdx"].read_bytes().replace(b"1/CM", b"MICROMETERS").replace(
        b"##FIRSTX=4000", b"##FIRSTX=0"))
    put("cands_bom.txt", b"\xef\xbb\xbfO water\r\nCO methanol\r\n")
    put("cands_bad_bytes.txt", b"O water\n\xff\xfe\xfa bad\nCO methanol\n")
    put("cands_extra_col.csv", b"name,smiles\nwater,O,extra\nmethanol,CO\n")
    put("cands_empty_cell.csv", b"name,smiles\nwater,\nmethanol,CO\n")
    put("cands_all_bad.txt", b"C1CC broken\nXx nonsense\n")
    put("cands_empty.txt", b"# nothing here\n\n")
    put("cands_space.txt", b"CC(=O) C spaced\n")
    os.mkfifo(tmp / "pipe.csv")
    out["pipe.csv"] = tmp / "pipe.csv"
    return out


def cases(f: dict[str, Path], tmp: Path) -> list[tuple[str, list[str], str]]:
    """(name, vibest arguments, expected: 'refuse' or 'ok')."""
    out: list[tuple[str, list[str], str]] = []
    bad_smiles = ["", "   ", "C1CC", "C(C", "Xx", "[U]", "C*", "CC(=O) C", "c1ccccc1 C", "CCO\u2603", "C\tC",
                  "[Na+].[Cl-]", "C1C/C=C/C1", "[99CH4]", "[He]", "C" * 2500, "C" * 160, "[CH3]" * 0 + "Q",
                  "((((", "C1CCCCC2", "-C", "=O"]
    for s in bad_smiles:
        out.append((f"predict SMILES {s[:20]!r}", ["predict", s], "refuse"))
    opts = [["--fwhm", "0"], ["--fwhm", "-3"], ["--fwhm", "nan"], ["--fwhm", "1e9"], ["--scale-factor", "7"],
            ["--scale-factor", "0"], ["--range", "4000", "400"], ["--range", "500", "500"], ["--range", "-5", "100"],
            ["--seed", "99999999999999999999"], ["--seed", "-1"], ["--workers", "0"], ["--workers", "x"],
            ["--method", "nonsense"], ["--method", "b3lyp+gfn2"], ["--method", "gfn2+gfn1"], ["--solvent", "lava"],
            ["--solvent-model", "x"], ["--isotope", "99Xx"], ["--isotope", "2Xx@1"], ["--isotope", "13C@99"],
            ["--isotope", "D"], ["--isotope", ""], ["--thermo", "--temperature", "-5"],
            ["--thermo", "--pressure", "0"], ["--plot", str(tmp / "p.txt")], ["--csv", str(f["good.csv"].parent)],
            ["--csv", str(tmp / "same.out"), "--json", str(tmp / "same.out")],
            ["--csv", str(f["good.csv"] / "sub" / "x.csv")], ["--memory", "10", "--method", "b3lyp"],
            ["--method", "b3lyp", "--solvent", "water"], ["--line-shape", "square"], ["--scale-model", "x"]]
    for o in opts:
        expect = "ok" if o == ["--isotope", "D"] else "refuse"  # water's H are exchangeable: D is fine
        out.append((f"predict O {' '.join(o)[:40]}", ["predict", "O", *o], expect))
    for name in ("zeros.csv", "flat.csv", "negative.csv", "t_over.csv", "t_under.csv", "header_only.csv", "empty.csv",
                 "one_column.csv", "nan.csv", "text.csv", "binary.jdx", "ambiguous_commas.csv", "yfactor0.jdx",
                 "npoints_lie.jdx", "truncated.jdx", "two_blocks.jdx", "micrometres_zero.jdx", "pipe.csv"):
        out.append((f"compare {name}", ["compare", str(f[name]), "O"], "refuse"))
    out.append(("compare missing file", ["compare", str(tmp / "nope.csv"), "O"], "refuse"))
    out.append(("compare /dev/zero", ["compare", "/dev/zero", "O"], "refuse"))
    out.append(("compare a folder", ["compare", str(tmp), "O"], "refuse"))
    for rng in (["500", "501"], ["3800", "500"], ["5000", "6000"], ["nan", "100"]):
        out.append((f"compare range {' '.join(rng)}", ["compare", str(f["good.csv"]), "O", "--compare-range", *rng],
                    "refuse"))
    out.append(("compare --tolerance 0", ["compare", str(f["good.csv"]), "O", "--tolerance", "0"], "refuse"))
    out.append(("compare --block 9", ["compare", str(f["two_blocks.jdx"]), "O", "--block", "9"], "refuse"))
    out.append(("compare good.csv", ["compare", str(f["good.csv"]), "O"], "ok"))
    out.append(("compare good.jdx", ["compare", str(f["good.jdx"]), "O"], "ok"))
    out.append(("compare JCAMP named .txt", ["compare", str(f["jcamp_named.txt"]), "O"], "ok"))
    out.append(("compare partial coverage", ["compare", str(f["partial.csv"]), "O"], "ok"))
    for name in ("cands_bom.txt", "cands_bad_bytes.txt", "cands_extra_col.csv", "cands_empty_cell.csv"):
        out.append((f"rank {name}", ["rank", str(f["good.csv"]), "--candidates-file", str(f[name])], "ok"))
    # "CC(=O) C spaced" in a candidates file is SMILES "CC(=O)" named "C spaced": the format's own rule
    out.append(("rank cands_space.txt", ["rank", str(f["good.csv"]), "--candidates-file", str(f["cands_space.txt"])],
                "ok"))
    for name in ("cands_all_bad.txt", "cands_empty.txt"):
        out.append((f"rank {name}", ["rank", str(f["good.csv"]), "--candidates-file", str(f[name])], "refuse"))
    out.append(("rank no candidates", ["rank", str(f["good.csv"])], "refuse"))
    out.append(("rank --refine without DFT-able", ["rank", str(f["good.csv"]), "O", "--refine", "-1"], "refuse"))
    for name in ("cands_bom.txt", "cands_bad_bytes.txt", "cands_extra_col.csv", "cands_empty_cell.csv"):
        out.append((f"batch {name}", ["batch", str(f[name]), "-o", str(tmp / f"{name}.out.csv")], "ok"))
    for name in ("cands_empty.txt", "pipe.csv"):
        out.append((f"batch {name}", ["batch", str(f[name])], "refuse"))
    out.append(("batch missing", ["batch", str(tmp / "none.txt")], "refuse"))
    out.append(("check decoys -1", ["check", str(f["good.csv"]), "CC=O", "--decoys", "-1"], "refuse"))
    out.append(("check bad SMILES", ["check", str(f["good.csv"]), "C1CC"], "refuse"))
    out.append(("check ok", ["check", str(f["good.csv"]), "CC=O", "--decoys", "2"], "ok"))
    out.append(("check --refine -1", ["check", str(f["good.csv"]), "CC=O", "--refine", "-1"], "refuse"))
    out.append(("check --refine-method unknown", ["check", str(f["good.csv"]), "CC=O", "--refine", "2",
                                                 "--refine-method", "nonsense"], "refuse"))
    good = str(f["good.csv"])
    for name in ("zeros.csv", "flat.csv", "pipe.csv", "binary.jdx"):
        out.append((f"difference {name}", ["difference", good, str(f[name])], "refuse"))
    out.append(("difference no overlap", ["difference", good, str(f["partial.csv"]), "--scale-on", "100", "200"],
                "refuse"))
    out.append(("difference both scalings", ["difference", good, good, "--scale-on", "1600", "1800", "--no-scaling"],
                "refuse"))
    out.append(("difference ok", ["difference", good, str(f["partial.csv"]), "--start", "CC=O", "--product", "CC(=O)O"],
                "ok"))
    out.append(("components none", ["components", good], "refuse"))
    out.append(("components twice", ["components", good, "--smiles", "CC=O", "--smiles", "O=CC"], "refuse"))
    out.append(("components bad SMILES", ["components", good, "--smiles", "C1CC"], "refuse"))
    out.append(("components bad concentration", ["components", good, "--reference", f"{good}@lots"], "refuse"))
    out.append(("components ok", ["components", good, "--smiles", "CC=O acetaldehyde", "--smiles", "O water"], "ok"))
    out.append(("compare --atr glass", ["compare", good, "O", "--atr", "glass"], "refuse"))
    out.append(("compare --exclude-window reversed", ["compare", good, "O", "--exclude-window", "3000", "2800"], "refuse"))
    out.append(("compare --exclude-window all", ["compare", good, "O", "--exclude-window", "0", "9000"], "refuse"))
    out.append(("compare --matrix nujol", ["compare", good, "O", "--matrix", "nujol", "--atr", "znse"], "ok"))
    out.append(("compare --no-h-bonds as gas", ["compare", good, "CO", "--no-h-bonds", "--phase", "gas"], "ok"))
    out.append(("compare an acid, condensed", ["compare", good, "CC(=O)O", "--phase", "condensed"], "ok"))
    out.append(("compare an ammonium ion, condensed", ["compare", good, "C[NH3+]", "--phase", "condensed"], "ok"))
    out.append(("rank alcohols --no-h-bonds", ["rank", good, "CCO", "CC(C)O", "--no-h-bonds"], "ok"))
    out.append(("rank --ms on an IR file", ["rank", good, "CCO", "--ms", good], "refuse"))
    out.append(("rank --ms on a folder", ["rank", good, "CCO", "--ms", str(tmp)], "refuse"))
    out.append(("rank --formula nonsense", ["rank", good, "CCO", "--formula", "c2h6o"], "refuse"))
    out.append(("rank --mass 0", ["rank", good, "CCO", "--mass", "0"], "refuse"))
    out.append(("rank --ms-drop alone", ["rank", good, "CCO", "--ms-drop"], "refuse"))
    out.append(("rank --mass drops all", ["rank", good, "CCO", "--mass", "99", "--ms-drop"], "refuse"))
    out.append(("rank --formula ok", ["rank", good, "CCO", "CC=O", "--formula", "C2H6O", "--ms-drop"], "ok"))
    listing = tmp / "runs.csv"
    listing.write_text(f"file,time_min\n{good},0\n{good},not-a-time\n")
    out.append(("series bad time", ["series", "--list", str(listing), "--start", "CC=O", "--product", "CCO"],
                "refuse"))
    out.append(("series one file", ["series", good, "--start", "CC=O", "--product", "CCO"], "refuse"))
    out.append(("series undated files", ["series", good, good, "--start", "CC=O", "--product", "CCO"], "refuse"))
    valid = tmp / "runs2.csv"
    valid.write_text(f"file,time_min\n{good},0\n{good},10\n")
    out.append(("series same structures", ["series", "--list", str(valid), "--start", "CCO", "--product", "OCC"],
                "refuse"))
    foreign = tmp / "foreign.sqlite"
    import sqlite3

    con = sqlite3.connect(foreign)
    con.execute("CREATE TABLE invoices (id INTEGER)")
    con.commit()
    con.close()
    out.append(("store foreign sqlite", ["predict", "O", "--store", str(foreign)], "refuse"))
    out.append(("store is a folder", ["predict", "O", "--store", str(tmp)], "refuse"))
    garbage = tmp / "garbage.sqlite"
    garbage.write_bytes(os.urandom(5000))
    out.append(("store random bytes", ["predict", "O", "--store", str(garbage)], "refuse"))
    out.append(("store --list missing", ["store", "--store", str(tmp / "missing.sqlite"), "--list"], "refuse"))
    return out


API_CASES = [
    ("predict(123)", "vibest.predict(123)"),
    ("predict(None)", "vibest.predict(None)"),
    ("predict(fwhm_cm1='a')", "vibest.predict('O', fwhm_cm1='a')"),
    ("predict(range_cm1=5)", "vibest.predict('O', range_cm1=5)"),
    ("predict(workers='2')", "vibest.predict('O', workers='2')"),
    ("predict(seed=2.5)", "vibest.predict('O', seed=2.5)"),
    ("predict(method=[])", "vibest.predict('O', method=[])"),
    ("predict(scale_model=5)", "vibest.predict('O', scale_model=5)"),
    ("predict(solvent=3)", "vibest.predict('O', solvent=3)"),
    ("predict_many('CCO')", "vibest.predict_many('CCO')"),
    ("predict_many(5)", "vibest.predict_many(5)"),
    ("predict_many([5])", "vibest.predict_many([5])"),
    ("load_spectrum(3)", "vibest.load_spectrum('/nonexistent/file.csv')"),
    ("load_spectrum(kind=x)", "vibest.load_spectrum(JUNK, kind='x')"),
    ("compare(None, None)", "vibest.compare(vibest.predict('O'), vibest.load_spectrum('/nonexistent.csv'))"),
    ("rank_candidates([])", "vibest.rank_candidates(None, [])"),
    ("check_structure(refine, no level)", "vibest.check_structure(JUNK, 'CCO', refine=2)"),
    ("check_structure(refine_calc=str)", "vibest.check_structure(JUNK, 'CCO', refine=2, refine_calc='b3lyp')"),
    ("rank_candidates(refine='2')", "vibest.rank_candidates(JUNK, ['CCO'], refine='2')"),
    ("HessianRecord.load(junk)", "vibest.HessianRecord.load(JUNK)"),
    ("HessianRecord.load(binary)", "vibest.HessianRecord.load(sys.executable)"),
    ("RecordStore(dir)", "vibest.RecordStore('/').count()"),
]


def run_cli(args: list[str], env: dict) -> tuple[int | None, str, float]:
    t = time.perf_counter()
    try:
        res = subprocess.run([sys.executable, "-m", "vibest.cli", *args, "-q"] if args and args[0] != "store"
                             else [sys.executable, "-m", "vibest.cli", *args], capture_output=True, text=True,
                             timeout=TIMEOUT_S, env=env)
        return res.returncode, res.stderr, time.perf_counter() - t
    except subprocess.TimeoutExpired:
        return None, "", time.perf_counter() - t


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--verbose", action="store_true")
    args = ap.parse_args()
    counts = {"cases": 0, "tracebacks": 0, "hangs": 0, "wrong outcome": 0}
    with tempfile.TemporaryDirectory(prefix="vibest-hostile-") as tmpname:
        tmp = Path(tmpname)
        env = dict(os.environ, VIBEST_STORE=str(tmp / "store.sqlite"))
        f = files(tmp)
        catalogue = cases(f, tmp)
        for name, argv, expect in catalogue:
            code, err, seconds = run_cli(argv, env)
            counts["cases"] += 1
            lines = [line for line in err.splitlines() if line.strip() and not line.startswith("wrote ")]
            trace = "Traceback" in err or "Stacktrace" in err or "****" in err
            problem = ""
            if code is None:
                counts["hangs"] += 1
                problem = "hang"
            elif trace:
                counts["tracebacks"] += 1
                problem = "traceback"
            elif expect == "refuse" and not (code == 2 and lines and lines[-1].startswith("vibest: error:")):
                counts["wrong outcome"] += 1
                problem = f"expected a one-line refusal, got exit {code}"
            elif expect == "ok" and code != 0:
                counts["wrong outcome"] += 1
                problem = f"expected success, got exit {code}: {lines[-1] if lines else ''}"
            if problem or args.verbose:
                print(f"{'PROBLEM' if problem else 'ok':<8} {name:<48} exit {code} {seconds:5.1f} s  {problem}")
                if problem and err:
                    print("         " + "\n         ".join(err.strip().splitlines()[-3:]))
        for name, code in API_CASES:
            counts["cases"] += 1
            script = (f"import vibest, sys\nJUNK = {str(tmp / 'junk.txt')!r}\nopen(JUNK, 'w').write('junk')\n"
                      f"try:\n    {code}\n    print('NO ERROR')\n"
                      f"except vibest.InputError as e:\n    print('InputError', e)\n")
            try:
                res = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                                     timeout=TIMEOUT_S, env=env)
            except subprocess.TimeoutExpired:
                counts["hangs"] += 1
                print(f"PROBLEM  API {name}: hang")
                continue
            if "Traceback" in res.stderr:
                counts["tracebacks"] += 1
                print(f"PROBLEM  API {name}: {res.stderr.strip().splitlines()[-1]}")
            elif "InputError" not in res.stdout:
                counts["wrong outcome"] += 1
                print(f"PROBLEM  API {name}: {res.stdout.strip()}")
            elif args.verbose:
                print(f"ok       API {name}: {res.stdout.strip()[:80]}")
    print(f"\n{counts['cases']} hostile cases: {counts['tracebacks']} tracebacks, {counts['hangs']} hangs, "
          f"{counts['wrong outcome']} wrong outcomes (silent wrong answers or refusals that should not be)")


if __name__ == "__main__":
    main()
