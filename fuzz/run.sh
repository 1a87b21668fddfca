#!/usr/bin/env bash
# Fuzzes every target in fuzz/fuzz_targets/ for a bounded time each: `bash fuzz/run.sh
# [SECONDS]` (default 60). arg_calls (random SQL calls of every registry function through
# the real registration) gets SECONDS; the two BLOB decoders (blob_decode, sketch_decode)
# two thirds of it each, so CI's 40 gives 40 + 26 + 26 s. One arg_calls input running past
# 10 s is a finding (-timeout), as a hang.
# Installs cargo-fuzz from crates.io when it is missing. cargo fuzz passes nightly-only flags
# (-Zsanitizer=address and friends) to rustc; RUSTC_BOOTSTRAP=1 lets the stable toolchain
# accept them, so no nightly toolchain is needed. Exits non-zero when a target finds a crash
# (the input is kept under fuzz/artifacts/).
set -euo pipefail
cd "$(dirname "$0")"
seconds="${1:-60}"

if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "== installing cargo-fuzz"
    cargo install cargo-fuzz --locked
fi
export RUSTC_BOOTSTRAP=1

log="$(mktemp)"
trap 'rm -f "$log"' EXIT
for target in $(cargo fuzz list); do
    mkdir -p "corpus/$target"
    extra=()
    if [ -d "seeds/$target" ]; then extra+=("seeds/$target"); elif [ "$target" = blob_decode ] && [ -d seeds ]; then extra+=(seeds); fi
    budget=$((seconds * 2 / 3))
    if [ "$target" = arg_calls ]; then budget="$seconds"; fi
    if [ "$budget" -lt 1 ]; then budget=1; fi
    flags=(-max_total_time="$budget" -print_final_stats=1 -max_len=4096)
    if [ "$target" = arg_calls ]; then flags+=(-timeout=10 -len_control=0); fi
    if [ -f "$target.dict" ]; then flags+=("-dict=$target.dict"); fi
    echo "== fuzzing $target for ${budget} s"
    set +e
    cargo fuzz run "$target" "corpus/$target" "${extra[@]}" -- "${flags[@]}" 2>&1 | tee "$log" |
        grep -E "^(#[0-9]+.*(INITED|DONE)|Done|==[0-9]+==ERROR|SUMMARY)|panicked"
    status="${PIPESTATUS[0]}"
    set -e
    runs="$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)"
    rate="$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -1)"
    echo "$target: ${runs:-?} executions, ${rate:-?} per second, exit status ${status}"
    if [ "$status" -ne 0 ]; then
        tail -n 60 "$log"
        exit "$status"
    fi
done
