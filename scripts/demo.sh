#!/usr/bin/env bash
# Demo: set up, then predict the spectrum of the demo sample and write table, CSV, JSON and plot
# to out/demo/. Scenario (invented): the Halvorsen Lab checks that solvent recovered from batch
# HX-07 is 2-butanone before it goes back into use.
# bash scripts/demo.sh --with-dft also recomputes the best three candidates at B3LYP (about
# 6 minutes on 2 cores).
set -euo pipefail
with_dft=0
for arg in "$@"; do
  case "$arg" in
    --with-dft) with_dft=1 ;;
    *) echo "usage: bash scripts/demo.sh [--with-dft]" >&2; exit 2 ;;
  esac
done
cd "$(dirname "$0")/.."
bash scripts/setup.sh
mkdir -p out/demo
.venv/bin/vibest predict "CCC(C)=O" -v \
  --plot out/demo/hx07-2-butanone.png \
  --csv out/demo/hx07-2-butanone-spectrum.csv \
  --bands-csv out/demo/hx07-2-butanone-bands.csv \
  --json out/demo/hx07-2-butanone.json
echo
echo "== ranking candidate solvents against the (invented) measured spectrum of batch HX-07 =="
.venv/bin/vibest rank examples/hx07-recovered-solvent.csv --candidates-file examples/hx07-candidates.txt \
  --y-kind transmittance --store out/demo/store.sqlite --csv out/demo/hx07-ranking.csv --plot-dir out/demo/hx07-overlays
echo
echo "== is batch HX-07 2-butanone? verdict with decoys, confidence and group evidence =="
.venv/bin/vibest check examples/hx07-recovered-solvent.csv "CCC(C)=O" --name 2-butanone --y-kind transmittance \
  --store out/demo/store.sqlite --json out/demo/hx07-verdict.json --plot out/demo/hx07-verdict.png \
  --report out/demo/hx07-verdict.html
if [ "$with_dft" = 1 ]; then
  echo
  echo "== the best three candidates again at B3LYP-D3(BJ)/6-31G(d) (minutes) =="
  .venv/bin/vibest rank examples/hx07-recovered-solvent.csv --candidates-file examples/hx07-candidates.txt \
    --y-kind transmittance --store out/demo/store.sqlite --refine 3 --refine-method b3lyp \
    --csv out/demo/hx07-ranking-b3lyp.csv --plot-dir out/demo/hx07-overlays-b3lyp
fi
echo "demo outputs are in out/demo/"
