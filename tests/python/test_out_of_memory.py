"""Out of memory is an error, not a crash: under `ulimit -v` (a cap on the process's address
space) every function that keeps a group's values, run in the sqlite3 command-line shell,
fails its statement with SQLITE_NOMEM (the CLI prints the code, 7) and a message that names
the function and says it ran out of memory, and the CLI exits normally instead of aborting
(exit code 134, SIGABRT, is what Rust's default out-of-memory handler gives).

The cases reach the growth paths of the issue: a group's values as they grow (step), the
finalizers' buffers (the BLOB of dist_empirical, the tie blocks of ks_test's lattice walk),
the window quantile's order-statistic tree, and dist_merge's decoding and union.
"""

import os
import re
import shutil
import subprocess

import pytest

CLI = shutil.which("sqlite3")
# 200 MB of address space: the CLI, SQLite and the extension load in about 30 MB, so a
# group of tens of millions of values cannot fit.
LIMIT_KB = 200_000

pytestmark = pytest.mark.skipif(
    CLI is None and not os.environ.get("OGIVE_REQUIRE_SQLITE3_CLI"),
    reason="no sqlite3 CLI on this machine (CI installs Debian's and requires it)",
)


CASES = [
    ("profile", "SELECT length(profile(value)) FROM generate_series(1, 30000000)"),
    ("quantile", "SELECT quantile(value, 0.5) FROM generate_series(1, 30000000)"),
    ("dist_empirical", "SELECT length(dist_empirical(value)) FROM generate_series(1, 30000000)"),
    # Fits while collected (16M slots), not as its 72 MB BLOB: the finalizer's buffer.
    ("dist_empirical", "SELECT length(dist_empirical(value)) FROM generate_series(1, 9000000)"),
    ("dist_empirical", "SELECT length(dist_empirical(value, 1.5)) FROM generate_series(1, 30000000)"),
    ("dist_fit", "SELECT dist_fit(value, 'normal') FROM generate_series(1, 30000000)"),
    ("dist_fit", "SELECT dist_fit(value, 'weibull') FROM generate_series(1, 30000000)"),
    ("ks_test", "SELECT ks_test(value, value % 2 = 0) FROM generate_series(1, 30000000)"),
    # One value in sample 2: the exact lattice walk, whose tie blocks grow with n.
    ("ks_test", "SELECT ks_test(value, value = 1) FROM generate_series(1, 12000000)"),
    (
        "quantile",
        "SELECT max(q) FROM (SELECT quantile(value, 0.5) OVER (ORDER BY value ROWS BETWEEN "
        "UNBOUNDED PRECEDING AND CURRENT ROW) AS q FROM generate_series(1, 30000000))",
    ),
    (
        "dist_merge",
        "SELECT length(dist_merge(d)) FROM (SELECT dist_empirical(value) AS d "
        "FROM generate_series(1, 9000000) GROUP BY value % 2)",
    ),
    (
        "dist_merge",
        "SELECT length(dist_merge(d)) FROM (SELECT dist_empirical(value) AS d "
        "FROM generate_series(1, 16000000) GROUP BY value % 2)",
    ),
]


def run_limited(extension_path, sql):
    script = f".load {extension_path.removesuffix('.so')}\n{sql};\n"
    return subprocess.run(
        ["bash", "-c", f'ulimit -v {LIMIT_KB}; exec "$0" -batch :memory:', CLI],
        input=script,
        capture_output=True,
        text=True,
        timeout=300,
    )


def test_cli_is_present():
    assert CLI is not None, "OGIVE_REQUIRE_SQLITE3_CLI is set but sqlite3 is missing"


def test_the_limit_leaves_room_for_small_queries(extension_path):
    # The median of 1..1001 is 501 exactly (the middle value).
    res = run_limited(extension_path, "SELECT quantile(value, 0.5) FROM generate_series(1, 1001)")
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == "501.0"


@pytest.mark.parametrize("name,sql", CASES, ids=[f"{n}-{i}" for i, (n, _) in enumerate(CASES)])
def test_out_of_memory_is_a_clean_error(extension_path, name, sql):
    res = run_limited(extension_path, sql)
    assert res.returncode >= 0 and res.returncode != 134, (res.returncode, res.stderr[-2000:])
    assert "memory allocation of" not in res.stderr, res.stderr[-2000:]
    # The CLI prints the message and, last, the result code: 7 is SQLITE_NOMEM.
    assert re.search(rf"\b{name}: ran out of memory\b.*\(7\)\s*$", res.stderr, re.S), res.stderr
    assert res.stdout.strip() == "", res.stdout
