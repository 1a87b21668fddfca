"""Ctrl-C latency of the shell on long finalizers (issue 15.3: within 0.2 s).

Runs the release shell (`target/release/ogive run`) on one statement whose finalizer
takes seconds, sends SIGINT once the rows have been read, and times from the signal to
the process's exit (status 130, "cancelled (Ctrl-C)" on standard error). Writes
bench/cancel.md. Standard library only:

    cargo build --release && python3 bench/cancel.py
"""

import os
import platform
import signal
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "ogive")

SETUP = """
CREATE TABLE t AS
  WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c WHERE i < 1000000)
  SELECT i, i * 0.6180339887 - CAST(i * 0.6180339887 AS INTEGER) AS u,
         i * 0.41421356 - CAST(i * 0.41421356 AS INTEGER) AS w FROM c;
CREATE TABLE two AS SELECT
  (SELECT dist_empirical(u) FROM t WHERE i <= 126000 AND i % 2 = 0) AS a,
  (SELECT dist_empirical(u + 0.3) FROM t WHERE i <= 126000 AND i % 2 = 1) AS b;
CREATE TABLE one AS SELECT dist_empirical(u + w) AS d, dist_fit(u + w, 'normal') AS m
  FROM t WHERE i <= 29800;
"""

CASES = [
    (
        "dist_mixture(x, 16), 1M distinct values",
        "SELECT dist_mixture(u + (i % 7) + 0.5 * w, 16) ->> '$.k' FROM t;",
        # reading 1M rows takes well under this; the fit alone takes about 10 s
        2.0,
    ),
    (
        "dist_ks exact, 63,000 + 63,000 values (lattice walk)",
        "SELECT dist_ks(a, b, 'two-sided', 'exact') ->> '$.p' FROM two;",
        0.5,
    ),
    (
        "dist_ks exact, one sample of 29,800 (Durbin matrix of order 999)",
        "SELECT dist_ks(d, m, 'two-sided', 'exact') ->> '$.p' FROM one;",
        0.5,
    ),
]

RUNS = 5
TARGET_MS = 200.0


def run(args, **kw):
    return subprocess.run([BIN, *args], capture_output=True, text=True, **kw)


def main():
    if not os.access(BIN, os.X_OK):
        sys.exit(f"build the release shell first: cargo build --release ({BIN})")
    work = tempfile.mkdtemp(prefix="ogive-cancel-")
    db = os.path.join(work, "cancel.db")
    setup = os.path.join(work, "setup.sql")
    with open(setup, "w") as f:
        f.write(SETUP)
    sqlite3.connect(db).close()  # ogive run opens existing databases only
    r = run(["run", setup, "--db", db])
    if r.returncode != 0:
        sys.exit(f"setup failed: {r.stderr}")
    rows = []
    for name, sql, delay in CASES:
        path = os.path.join(work, "case.sql")
        with open(path, "w") as f:
            f.write(sql + "\n")
        start = time.monotonic()
        full = run(["run", path, "--db", db])
        full_s = time.monotonic() - start
        latencies = []
        for _ in range(RUNS):
            p = subprocess.Popen(
                [BIN, "run", path, "--db", db],
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            )
            time.sleep(delay)
            t0 = time.monotonic()
            p.send_signal(signal.SIGINT)
            _, err = p.communicate(timeout=60)
            ms = 1000.0 * (time.monotonic() - t0)
            if p.returncode != 130 or "cancelled (Ctrl-C)" not in err:
                sys.exit(f"{name}: exit {p.returncode}, stderr {err!r}")
            latencies.append(ms)
        rows.append((name, full_s, full.returncode, delay, latencies))
        print(name, f"{full_s:.2f} s uninterrupted;", [f"{x:.0f}" for x in latencies], "ms")
    load = os.getloadavg()
    with open(os.path.join(ROOT, "bench", "cancel.md"), "w") as f:
        f.write("# Ctrl-C latency on long finalizers\n\n")
        f.write("Written by `python3 bench/cancel.py` (release shell); do not edit by hand.\n\n")
        f.write(
            f"- {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}, "
            f"{platform.machine()}, {os.cpu_count()} cores, load average after "
            f"{load[0]:.2f} (the machine may be shared)\n"
        )
        f.write(
            f"- SIGINT sent after the given delay; latency from the signal to the "
            f"shell's exit (status 130), {RUNS} runs; target {TARGET_MS:.0f} ms\n\n"
        )
        f.write("| statement | uninterrupted | signal after | latency median | max | target |\n")
        f.write("|---|---:|---:|---:|---:|---|\n")
        for name, full_s, code, delay, lat in rows:
            worst = max(lat)
            f.write(
                f"| {name} | {full_s:.2f} s (exit {code}) | {delay:.1f} s | "
                f"{statistics.median(lat):.0f} ms | {worst:.0f} ms | "
                f"{'met' if worst <= TARGET_MS else 'NOT met'} |\n"
            )


if __name__ == "__main__":
    main()
