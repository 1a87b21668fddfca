#!/usr/bin/env bash
# Fuzzes the empirical-distribution BLOB decoder for a bounded time: `bash fuzz/run.sh [SECONDS]`
# (default 60). Installs cargo-fuzz from crates.io when it is missing. cargo fuzz passes
# nightly-only flags (-Zsanitizer=address and friends) to rustc; RUSTC_BOOTSTRAP=1 lets the
# stable toolchain accept them, so no nightly toolchain is needed. Exits non-zero when the
# fuzzer finds a crash (the input is kept under fuzz/artifacts/).
set -euo pipefail
cd "$(dirname "$0")"
seconds="${1:-60}"

if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "== installing cargo-fuzz"
    cargo install cargo-fuzz --locked
fi

export RUSTC_BOOTSTRAP=1
mkdir -p corpus/blob_decode
echo "== fuzzing blob_decode for ${seconds} s"
log="$(mktemp)"
trap 'rm -f "$log"' EXIT
set +e
cargo fuzz run blob_decode corpus/blob_decode seeds -- \
    -max_total_time="$seconds" -print_final_stats=1 2>&1 | tee "$log" | grep -E "^(#[0-9]+.*(INITED|DONE|pulse)|Done|==[0-9]+==ERROR|SUMMARY)|panicked" 
status="${PIPESTATUS[0]}"
set -e
runs="$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)"
secs="$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -1)"
echo "blob_decode: ${runs:-?} executions, ${secs:-?} per second, exit status ${status}"
if [ "$status" -ne 0 ]; then
    tail -n 60 "$log"
fi
exit "$status"
