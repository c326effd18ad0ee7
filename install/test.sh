#!/usr/bin/env bash
# Runs every Plumbline test: Rust unit, integration, property, accuracy and
# kernel-protocol tests, then the Python cross-checks (numpy/scipy/mpmath) and
# the protocol conformance suite (jupyter_kernel_test, jupyter_client, nbclient)
# and the browser test (JupyterLab in headless chromium through Playwright).
# This is the command README.md names and .ci/run calls. Idempotent; needs only
# a Rust toolchain and Python 3 (and installs Debian's chromium and postgresql
# when root); starts a throwaway PostgreSQL server for the database tests.
set -euo pipefail
cd "$(dirname "$0")/.."
source install/lib.sh

require_rust
require_python
python_env
step "installing the Python references and front ends (numpy, scipy, pytest, mpmath, pillow, jupyter_client, nbclient, JupyterLab, Playwright…)"
"$PY" -m pip install --quiet --disable-pip-version-check -r tests/python/requirements.txt

check_reference_data
require_chromium

step "checking formatting and lints (cargo fmt --check, clippy -D warnings)"
cargo fmt --all --check
cargo clippy --workspace --all-targets --locked -- -D warnings
step "building the API documentation with warnings denied (cargo doc --no-deps)"
# `--examples` (there are none) makes cargo resolve features with the
# dev-dependencies, as clippy --all-targets did: the same feature set, so
# rustdoc reuses every dependency clippy checked instead of checking ~80 again.
RUSTDOCFLAGS="-D warnings" cargo doc --no-deps --workspace --lib --examples --locked

# Everything the tests run (binaries, libraries, one test binary per crate,
# doc tests); the benchmarks are linted above but not linked.
step "building the workspace and its tests"
cargo test --workspace --no-run --locked

# The evaluation engine's build directory for the tests: compiled once per run
# (at optimisation level 0 to keep CI short), shared by every kernel test.
export PLUMBLINE_ENGINE_DIR="$PWD/target/engine-test"
export PLUMBLINE_ENGINE_OPT=0
# No standby kernels in the background of the tests (test_kernel_standby.py
# turns them on for its own kernels).
export PLUMBLINE_STANDBY=off
step "warming the evaluation engine (compiles plumbline inside the engine once)"
./target/debug/plumbline install --prefix target/kernelspec

start_test_postgres

step "Rust tests"
cargo test --workspace --locked

step "Python cross-checks and protocol conformance"
PLUMBLINE_BIN="$PWD/target/debug/plumbline" "$PY" -m pytest tests/python -q -p no:cacheprovider
