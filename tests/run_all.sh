#!/usr/bin/env bash
# Runs every test of loadloom, setting up what they need first:
#   - a Python virtual environment (.venv) with the pinned reference libraries
#     of tests/requirements.txt, for the cross-checks;
#   - the release build, the one profile tests, benchmarks and the demo share;
#   - rustfmt, clippy and rustdoc (warnings are errors), before anything else;
#   - Debian's slurm-wlm and munge for the scheduler test (test_slurm.py),
#     installed with apt-get where they are missing and this can (as root);
#     elsewhere that test is skipped and says why.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    export DEBIAN_FRONTEND=noninteractive
    apt_install() { apt-get install -y -q --no-install-recommends slurm-wlm munge >/dev/null 2>&1; }
    apt_install || { apt-get update -q >/dev/null 2>&1 && apt_install; } ||
      echo "note: slurm-wlm and munge could not be installed; tests/python/test_slurm.py will be skipped"
  else
    echo "note: slurm-wlm and munge are missing (install them as root); tests/python/test_slurm.py will be skipped"
  fi
fi

python3 -m venv .venv
.venv/bin/pip install --quiet --disable-pip-version-check -r tests/requirements.txt

# Formatting and lints first: they are the cheapest to fail.
cargo fmt --all --check
cargo clippy --release --workspace --all-targets -- -D warnings
# Both libraries warn on a public item without docs (so clippy above fails
# on one); rustdoc must then build the docs with no broken link.
RUSTDOCFLAGS="-D warnings" cargo doc --release --workspace --no-deps

cargo build --release --workspace
cargo test --release --workspace
# The benchmarks must keep compiling (they share the release build's artifacts).
cargo bench --workspace --no-run

LOADLOOM_BIN="$PWD/target/release/loadloom" .venv/bin/python -m pytest -q tests/python
