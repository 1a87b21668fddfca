#!/usr/bin/env bash
# The cost of the `sqlite-alloc` feature (the extension's memory taken from the host
# SQLite): builds ext/ twice into separate target dirs, times four cases in the Debian
# sqlite3 CLI (`.timer on`, a fresh process per run, the two builds interleaved A, B, A,
# B ...), checks that both builds give the same results and that only the feature makes
# PRAGMA hard_heap_limit stop a 5M-row quantile, and writes bench/alloc.md.
# The last case (a million one-row groups, so a million states and buffers allocated and
# freed) weighs the cost per allocation; the others are the ones issue 17 names.
# Usage: bash bench/alloc.sh [RUNS]   (default 5)
set -euo pipefail
cd "$(dirname "$0")/.."
runs=${1:-5}
sqlite=${SQLITE:-sqlite3}
base=target/alloc-bench
CARGO_TARGET_DIR=$base/system cargo build --quiet --release --manifest-path ext/Cargo.toml
CARGO_TARGET_DIR=$base/sqlite cargo build --quiet --release --manifest-path ext/Cargo.toml \
    --features sqlite-alloc
lib_a=$base/system/release/libogive
lib_b=$base/sqlite/release/libogive

tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# 1M values from three normal components (means 0, 6, 12; sd 1, 1.5, 2), by Box-Muller on
# a fixed linear congruential sequence, so every run fits the same data.
"$sqlite" "$tmp/mix.db" "
CREATE TABLE t(x REAL);
WITH RECURSIVE u(i, a, b) AS (
  SELECT 1, 12345, 67890
  UNION ALL
  SELECT i + 1, (a * 1103515245 + 12345) % 2147483648, (b * 69069 + 1) % 4294967296
  FROM u WHERE i < 1000000)
INSERT INTO t SELECT (i % 3) * 6.0 + (1.0 + 0.5 * (i % 3))
    * sqrt(-2.0 * ln((a + 1.0) / 2147483649.0)) * cos(2.0 * pi() * b / 4294967296.0) FROM u;"

names=(
    "quantile(value, 0.5), 5M rows"
    "length(dist_empirical(value)), 5M rows"
    "quantile(value, 0.5) GROUP BY value % 1000, 5M rows"
    "dist_mixture(x, 3), 1M rows"
    "quantile(value, 0.5) GROUP BY value, 1M groups of one row"
)
queries=(
    "SELECT quantile(value, 0.5) FROM generate_series(1, 5000000);"
    "SELECT length(dist_empirical(value)) FROM generate_series(1, 5000000);"
    "SELECT count(*), sum(q) FROM (SELECT quantile(value, 0.5) AS q FROM generate_series(1, 5000000) GROUP BY value % 1000);"
    "SELECT dist_mixture(x, 3) FROM t;"
    "SELECT count(*), sum(q) FROM (SELECT quantile(value, 0.5) AS q FROM generate_series(1, 1000000) GROUP BY value);"
)

# One run: prints the query's output lines, then the wall time in seconds on the last line.
run() {
    local lib=$1 q=$2
    # The query through stdin: the CLI times only what it reads as input.
    printf '%s\n' "$q" | "$sqlite" "$tmp/mix.db" -cmd ".load $lib" -cmd ".timer on" \
        | awk '/^Run Time:/ { t = $4; next } { print } END { print t }'
}
median() { sort -g | awk '{ v[NR] = $1 } END { m = int((NR + 1) / 2); print (NR % 2) ? v[m] : (v[m] + v[m + 1]) / 2 }'; }

load_before=$(cut -d' ' -f1-3 /proc/loadavg)
start=$(date +%s)
declare -A times
for ((c = 0; c < ${#queries[@]}; c++)); do
    for ((r = 1; r <= runs; r++)); do
        for v in a b; do
            lib=$lib_a; [ "$v" = b ] && lib=$lib_b
            out=$(run "$lib" "${queries[$c]}")
            result=$(echo "$out" | sed '$d')
            times[$c$v]+="$(echo "$out" | tail -n 1) "
            if [ -z "${first[$c]:-}" ]; then
                first[$c]=$result
            elif [ "$result" != "${first[$c]}" ]; then
                echo "results differ for ${names[$c]}: ${first[$c]} vs $result" >&2
                exit 1
            fi
        done
    done
done
load_after=$(cut -d' ' -f1-3 /proc/loadavg)

# The heap-limit check: the feature's build must fail cleanly naming quantile; the
# default build passes the limit.
limit_q="PRAGMA hard_heap_limit=10000000; SELECT quantile(value, 0.5) FROM generate_series(1, 5000000);"
check() {
    local lib=$1
    set +e
    "$sqlite" :memory: -cmd ".load $lib" "$limit_q" >"$tmp/out" 2>"$tmp/err"
    echo "exit $?; stdout: $(tail -n 1 "$tmp/out" | tr -d '\n'); stderr: $(tr -d '\n' <"$tmp/err")"
    set -e
}
limit_a=$(check "$lib_a")
limit_b=$(check "$lib_b")
ok=yes
[[ $limit_a == "exit 0; stdout: 2500000.5;"* ]] || ok=no
[[ $limit_b == *"quantile: ran out of memory"*"(7)" ]] || ok=no

{
    echo "# The sqlite-alloc feature: cost and effect"
    echo
    echo "Written by \`bash bench/alloc.sh $runs\` (do not edit by hand) on $(date -u '+%Y-%m-%d %H:%M UTC'),"
    echo "commit $(git rev-parse --short HEAD)$(git diff --quiet HEAD -- ext src || echo ' (with local changes)'),"
    echo "$(rustc --version), $("$sqlite" --version | cut -d' ' -f1) (\`$(command -v "$sqlite")\`),"
    echo "$(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //'), $(nproc) cores (shared with other jobs)."
    echo "Load average before: $load_before; after: $load_after; $(($(date +%s) - start)) s in all."
    echo
    echo "A = default build (Rust's system allocator), B = \`--features sqlite-alloc\`. Each run is a"
    echo "fresh \`sqlite3\` process loading the extension; the time is \`.timer on\`'s real time of the"
    echo "query; A and B alternate. Median of $runs runs each; both builds gave the same results."
    echo
    echo "| case | A: system (s) | B: sqlite-alloc (s) | B / A | A runs | B runs |"
    echo "|---|---:|---:|---:|---|---|"
    for ((c = 0; c < ${#queries[@]}; c++)); do
        ma=$(echo "${times[${c}a]}" | tr ' ' '\n' | grep . | median)
        mb=$(echo "${times[${c}b]}" | tr ' ' '\n' | grep . | median)
        ratio=$(awk -v a="$ma" -v b="$mb" 'BEGIN { printf "%.3f", b / a }')
        echo "| \`${names[$c]}\` | $ma | $mb | $ratio | ${times[${c}a]% } | ${times[${c}b]% } |"
    done
    echo
    echo "## PRAGMA hard_heap_limit = 10000000, 5M-row quantile"
    echo
    echo "- A: $limit_a"
    echo "- B: $limit_b"
    echo
    echo "Expected: A passes the limit (the extension's memory is not counted), B fails with"
    echo "SQLITE_NOMEM (7) naming quantile. As expected: $ok."
} >bench/alloc.md
cat bench/alloc.md
[ "$ok" = yes ]
