#!/usr/bin/env bash
# Runs every fuzz target for a bounded time (seconds, default 60 each). cargo-fuzz needs
# nightly flags; RUSTC_BOOTSTRAP=1 lets the stable toolchain accept them.
#   bash fuzz/run.sh [seconds]
set -euo pipefail
cd "$(dirname "$0")/.."
seconds="${1:-60}"
command -v cargo-fuzz >/dev/null || cargo install cargo-fuzz --locked
for target in $(RUSTC_BOOTSTRAP=1 cargo fuzz list --fuzz-dir fuzz); do
    dict=()
    if [ -f "fuzz/$target.dict" ]; then dict=("-dict=fuzz/$target.dict"); fi
    echo "== fuzzing $target for ${seconds}s"
    RUSTC_BOOTSTRAP=1 cargo fuzz run --fuzz-dir fuzz "$target" -- \
        -max_total_time="$seconds" -max_len=4096 "${dict[@]}"
done
