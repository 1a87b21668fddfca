#!/usr/bin/env bash
# Builds the release extension and runs the side-by-side benchmarks; writes bench/RESULTS.md.
# OpenBLAS tuning variables, where a machine sets them, slow numpy: unset them for this run.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --manifest-path ext/Cargo.toml
if [ ! -x .venv/bin/python ]; then
    python3 -m venv .venv && .venv/bin/pip install --quiet -r tests/requirements.txt
fi
exec env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE .venv/bin/python bench/run.py "$@"
