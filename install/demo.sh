#!/usr/bin/env bash
# The main job on the shipped demo data, from a fresh clone: build the
# optimised `plumbline` program, install the notebook kernel for this user
# (which builds the evaluation engine's copy of plumbline once), then run the
# Wrenmoor valuation study notebook headlessly — load and screen the sales,
# compare candidate models, check diagnostics, choose a model, run the ratio
# study and value the 40 subject properties — and write the executed notebook
# and its HTML report. Needs only a Rust toolchain.
#
#   ./install/demo.sh                 # outputs in target/study/
#   PLUMBLINE_STUDY_OUT=DIR ./install/demo.sh
#   PLUMBLINE_BIN=path/to/plumbline ./install/demo.sh   # use that program; no build, no kernel install
#
# Dependencies are compiled twice at most: once for the program
# (target/release) and once for the engine, in the engine folder
# `plumbline install` fills (~/.cache/plumbline/engine-<version>, or
# PLUMBLINE_ENGINE_DIR). The study runs in that same engine folder, so a
# second run compiles nothing.
set -euo pipefail
cd "$(dirname "$0")/.."
source install/lib.sh

started=$(date +%s)
# PLUMBLINE_BIN names an already built plumbline to use instead (the test
# command passes its own build and its own engine folder, so CI compiles the
# workspace only once).
if [ -n "${PLUMBLINE_BIN:-}" ]; then
  plumbline="$PLUMBLINE_BIN"
else
  require_rust
  step "building plumbline, optimised (the first build compiles polars and faer; about 13 minutes on 2 cores)"
  cargo build --release -p plumbline-kernel --locked
  plumbline="$PWD/target/release/plumbline"
  step "installing the notebook kernel and building the engine's copy of plumbline (the first time about 8 minutes on 2 cores)"
  "$plumbline" install
fi

out="${PLUMBLINE_STUDY_OUT:-target/study}"
step "running the Wrenmoor valuation study"
"$plumbline" run notebooks-demo/valuation-study.ipynb \
  -o "$out/valuation-study.ipynb" --html "$out/valuation-study.html"
step "done in $(( $(date +%s) - started )) s: $out/valuation-study.html"

cat <<NOTE

Open the HTML report in a browser, or the executed notebook in any Jupyter
front end ("Plumbline (Rust)" is installed as a kernel). To rerun the study on
next quarter's sales and see what moved:

  $plumbline run notebooks-demo/valuation-study.ipynb -o target/study/rerun.ipynb \\
      --set sales_file=data/sales-next-quarter.csv --set valuation_date=2026-04-01
  $plumbline diff notebooks-demo/valuation-study.ipynb target/study/rerun.ipynb

These figures are analytical estimates from invented demo data, not appraisals.
Real valuations follow local assessment law and licensed appraisal practice.
NOTE
