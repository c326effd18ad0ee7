#!/usr/bin/env bash
# The main job on the shipped demo data: fit a log-price valuation model to the
# sales of the invented town of Wrenmoor and value its 40 unsold subject
# properties with 95 % prediction intervals. Needs only a Rust toolchain.
set -euo pipefail
cd "$(dirname "$0")/.."
source install/lib.sh

require_rust
step "building plumbline (the first build compiles polars and faer; a few minutes)"
cargo build -p plumbline-kernel --locked

step "fitting the Wrenmoor valuation model and valuing the subject properties"
./target/debug/plumbline fit notebooks-demo/data/sales.csv \
  --target sale_price --log-target \
  --log living_area --log lot_size \
  --terms age,quality,bathrooms,months_since_start \
  --category district --reference district=Larkfield \
  --cov hc3 \
  --predict notebooks-demo/data/subjects.csv

cat <<'NOTE'

These figures are analytical estimates from invented demo data, not appraisals.
Real valuations follow local assessment law and licensed appraisal practice.
NOTE
