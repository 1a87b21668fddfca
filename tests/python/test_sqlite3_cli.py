"""The loadable extension in the sqlite3 command-line shell the machine has (Debian 12 ships
3.40.1): `.load` either works and gives the numbers numpy gives, or prints a one-line
refusal naming the minimum version; either way the process exits normally.

Reference: numpy.quantile(x, p, method=M) and numpy.mean(x <= t) (numpy 2.4.6). The CLI
prints REAL values with 15 significant digits, hence the 1e-14 relative tolerance.
"""

import os
import shutil
import subprocess

import numpy as np
import pytest

MIN_VERSION = (3, 31, 0)
CLI = shutil.which("sqlite3")

pytestmark = pytest.mark.skipif(
    CLI is None and not os.environ.get("OGIVE_REQUIRE_SQLITE3_CLI"),
    reason="no sqlite3 CLI on this machine (CI installs Debian's and requires it)",
)


def cli_version():
    out = subprocess.run([CLI, "--version"], capture_output=True, text=True, check=True)
    return tuple(int(part) for part in out.stdout.split()[0].split("."))


def run_cli(script):
    return subprocess.run(
        [CLI, "-batch", ":memory:"],
        input=script,
        capture_output=True,
        text=True,
        timeout=60,
    )


def test_cli_is_present():
    assert CLI is not None, "OGIVE_REQUIRE_SQLITE3_CLI is set but sqlite3 is missing"


def test_load_and_grouped_quantiles_match_numpy(extension_path):
    version = cli_version()
    rng = np.random.default_rng(21)
    groups = np.repeat(np.arange(4), [1, 2, 37, 300])
    values = np.round(rng.normal(1.0, 2.0, size=groups.size), 1)
    inserts = ",".join(f"({int(g)}, {float(x)!r})" for g, x in zip(groups, values))
    script = (
        f".load {extension_path.removesuffix('.so')}\n"
        "CREATE TABLE t(g INTEGER, x REAL);\n"
        f"INSERT INTO t VALUES {inserts};\n"
        "SELECT g, quantile(x, 0.9), ecdf(x, 1.5), quantile(x, 0.25, 6) FROM t GROUP BY g ORDER BY g;\n"
    )
    res = run_cli(script)
    if version < MIN_VERSION:
        # A refused load is one line naming the minimum; the CLI itself exits normally.
        assert "ogive needs SQLite 3.31.0 or newer" in res.stderr, res.stderr
        assert len(res.stderr.strip().splitlines()) <= 2
        assert res.returncode in (0, 1), res.returncode
        return
    assert res.returncode == 0, res.stderr
    lines = res.stdout.strip().splitlines()
    assert len(lines) == 4, res.stdout
    for line in lines:
        g, q90, e, q25 = line.split("|")
        xs = values[groups == int(g)]
        assert float(q90) == pytest.approx(float(np.quantile(xs, 0.9)), rel=1e-14, abs=1e-300)
        assert float(e) == pytest.approx(float(np.mean(xs <= 1.5)), rel=1e-14)
        assert float(q25) == pytest.approx(
            float(np.quantile(xs, 0.25, method="weibull")), rel=1e-14, abs=1e-300
        )


def test_errors_reach_the_cli_and_it_carries_on(extension_path):
    if cli_version() < MIN_VERSION:
        pytest.skip("the extension refuses this host; covered by the test above")
    script = (
        f".load {extension_path}\n"
        "SELECT quantile(value, 1.5) FROM (SELECT 1 AS value);\n"
        "SELECT 'still here';\n"
    )
    res = run_cli(script)
    assert "quantile: p must be between 0 and 1, got 1.5" in res.stderr
    assert "still here" in res.stdout
