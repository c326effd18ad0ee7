# Shared helpers of the install and test scripts (sourced, not run).

step() { printf '\n==> %s\n' "$*"; }
die() { printf '\nerror: %s\n' "$*" >&2; exit 1; }

# The oldest toolchain the workspace builds with (Cargo.toml rust-version).
MIN_RUST_MINOR=95

require_rust() {
  command -v cargo >/dev/null 2>&1 || die "cargo not found. Install Rust with rustup (https://rustup.rs), then rerun."
  local minor
  minor=$(rustc --version | sed -E 's/^rustc 1\.([0-9]+).*/\1/')
  [ "${minor:-0}" -ge "$MIN_RUST_MINOR" ] || die "rustc $(rustc --version) is older than 1.$MIN_RUST_MINOR; run 'rustup update stable'."
}

require_python() {
  command -v python3 >/dev/null 2>&1 || die "python3 not found; install Python 3.9 or newer."
}

# Chooses the Python used for the cross-checks: a virtual environment under
# target/ when the venv module works, else the system python3 with --user installs.
python_env() {
  if [ -x target/python/bin/python ]; then
    PY=target/python/bin/python
  elif python3 -m venv target/python >/dev/null 2>&1; then
    PY=target/python/bin/python
  else
    PY=python3
    export PIP_USER=1
  fi
  export PY
}

# The external reference data (NIST StRD) live in ../shared/reference beside the
# checkout. Without them the accuracy tests cannot run, and we say so loudly.
check_reference_data() {
  local dir="${PLUMBLINE_REFERENCE_DIR:-../shared/reference}"
  if [ ! -f "$dir/nist-strd/certified.json" ]; then
    die "external reference data not found at $dir/nist-strd/certified.json.
The accuracy tests check against NIST StRD certified values; place shared/ beside
the checkout or set PLUMBLINE_REFERENCE_DIR."
  fi
}

# Headless Chromium renders the HTML reports in a browser test. Installed from
# Debian's packages when missing and we are root (as in CI); otherwise we say how.
require_chromium() {
  if command -v chromium >/dev/null 2>&1 || command -v chromium-browser >/dev/null 2>&1; then
    return
  fi
  if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    step "installing Debian's chromium for the browser rendering test"
    apt-get update -qq >/dev/null
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null
  else
    die "headless Chromium is needed for the HTML rendering test; install it (Debian: 'sudo apt-get install chromium') and rerun."
  fi
}
