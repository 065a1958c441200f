#!/usr/bin/env bash
# Runs every test of loadloom, setting up what they need first:
#   - a Python virtual environment (.venv) with the pinned reference libraries
#     of tests/requirements.txt, for the cross-checks;
#   - the release build, the one profile tests, benchmarks and the demo share;
#   - rustfmt and clippy (warnings are errors), before anything else.
set -euo pipefail
cd "$(dirname "$0")/.."

python3 -m venv .venv
.venv/bin/pip install --quiet --disable-pip-version-check -r tests/requirements.txt

# Formatting and lints first: they are the cheapest to fail.
cargo fmt --all --check
cargo clippy --release --workspace --all-targets -- -D warnings

cargo build --release --workspace
cargo test --release --workspace
# The benchmarks must keep compiling (they share the release build's artifacts).
cargo bench --workspace --no-run

LOADLOOM_BIN="$PWD/target/release/loadloom" .venv/bin/python -m pytest -q tests/python
