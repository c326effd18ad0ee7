#!/usr/bin/env bash
# The main job on the shipped demo data: run the Wrenmoor valuation study
# notebook headlessly — load and screen the sales, compare candidate models,
# check diagnostics, choose a model, run the ratio study and value the 40
# subject properties — and write the executed notebook and its HTML report.
# Needs only a Rust toolchain.
#
#   ./install/demo.sh                 # outputs in target/study/
#   PLUMBLINE_STUDY_OUT=DIR ./install/demo.sh
#   PLUMBLINE_BIN=path/to/plumbline ./install/demo.sh   # skip the build
#
# The evaluation engine builds plumbline once into its own folder (several
# minutes the first time). Unless PLUMBLINE_ENGINE_DIR / PLUMBLINE_ENGINE_OPT
# are set, the demo uses target/engine-demo at optimisation level 0, which
# compiles fastest and runs this study in about a minute.
set -euo pipefail
cd "$(dirname "$0")/.."
source install/lib.sh

# PLUMBLINE_BIN names an already built plumbline to use instead (the test
# command passes its own build, so CI compiles the workspace only once).
if [ -n "${PLUMBLINE_BIN:-}" ]; then
  plumbline="$PLUMBLINE_BIN"
else
  require_rust
  step "building plumbline, optimised (the first build compiles polars and faer; several minutes)"
  cargo build --release -p plumbline-kernel --locked
  plumbline=./target/release/plumbline
fi

out="${PLUMBLINE_STUDY_OUT:-target/study}"
export PLUMBLINE_ENGINE_DIR="${PLUMBLINE_ENGINE_DIR:-$PWD/target/engine-demo}"
export PLUMBLINE_ENGINE_OPT="${PLUMBLINE_ENGINE_OPT:-0}"
step "running the Wrenmoor valuation study (the first run builds the engine's copy of plumbline)"
"$plumbline" run notebooks-demo/valuation-study.ipynb \
  -o "$out/valuation-study.ipynb" --html "$out/valuation-study.html"

cat <<'NOTE'

Open the HTML report in a browser, or the executed notebook in any Jupyter
front end. To rerun the study on next quarter's sales and see what moved:

  ./target/release/plumbline run notebooks-demo/valuation-study.ipynb -o target/study/rerun.ipynb \
      --set sales_file=data/sales-next-quarter.csv --set valuation_date=2026-04-01
  ./target/release/plumbline diff notebooks-demo/valuation-study.ipynb target/study/rerun.ipynb

These figures are analytical estimates from invented demo data, not appraisals.
Real valuations follow local assessment law and licensed appraisal practice.
NOTE
