#!/usr/bin/env bash
# The whole test suite: Rust unit, doc and integration tests (also with the DataFusion
# and Ballista adapters), the loadable extension's own tests, and the Python cross-checks
# through the real extension (apsw and the sqlite3 CLI).
# Creates .venv from tests/requirements.txt on first use.
set -euo pipefail
cd "$(dirname "$0")/.."

echo "== building the loadable extension (ext/)"
cargo build --release --manifest-path ext/Cargo.toml
export OGIVE_EXTENSION="$PWD/ext/target/release/libogive.so"

echo "== cargo test (library, shell, integration)"
cargo test
echo "== cargo test --features datafusion,ballista (the DataFusion adapter, the shell on it, and"
echo "   a Ballista scheduler with two executors on 127.0.0.1)"
# DataFusion takes minutes to build the first time; the default build does not include it.
# One test build serves both adapters (ballista includes datafusion); the datafusion-only
# build is not built here (see .ci/run).
# ogive itself unoptimised here: Cargo.toml's debug opt-level 3 for ogive (the numerical unit
# tests) takes the optimiser through every DataFusion generic ogive instantiates, measured
# 10 min 7 s against 44 s at opt-level 0 for ogive's part of this build (2 cores, not
# incremental). These tests run little numerics.
fusion=(--config 'profile.dev.package.ogive.opt-level=0' --features datafusion,ballista)
cargo test "${fusion[@]}" --test datafusion --test shell_datafusion --test ballista
cargo test "${fusion[@]}" --lib -- datafusion:: ballista::
cargo test "${fusion[@]}" --doc -- datafusion ballista
echo "== cargo test (extension entry point)"
cargo test --release --manifest-path ext/Cargo.toml
# The entry point's own unit tests (host versions, a second SQLite library refused) need
# the loadable build of the library.
cargo test --lib --no-default-features --features loadable -- sqlite::extension

if [ ! -x .venv/bin/python ] || ! cmp -s tests/requirements.txt .venv/requirements.txt; then
    echo "== creating .venv for the Python cross-checks"
    python3 -m venv .venv
    .venv/bin/pip install --quiet --disable-pip-version-check -r tests/requirements.txt
    cp tests/requirements.txt .venv/requirements.txt
fi

echo "== pytest (cross-checks against numpy, scipy, statsmodels, scikit-learn)"
set +e
.venv/bin/python -m pytest -q tests/python "$@"
status=$?
set -e
if [ "$status" -eq 5 ]; then
    echo "pytest collected no tests"
    exit 1
fi
exit "$status"
