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


def test_kernels_that_poll_for_cancellation_run_on_any_host(extension_path):
    """Mixture EM, the simplex of a binned fit and the exact KS walk ask the host whether
    the statement was interrupted; on a host older than 3.41.0 (Debian 12's 3.40.1) there
    is no way to ask, and they must run to the end rather than fail (they used to stop with
    "internal error: a panic was caught": the adapted API table reported a newer version).

    References: math.fsum for the one-component mean of [1e16, 1, -1e16, 2] (exact 0.75);
    scipy.stats.ks_2samp(x, y, method='exact').pvalue (scipy 1.17.1) for the p-value.
    """
    if cli_version() < MIN_VERSION:
        pytest.skip("the extension refuses this host; covered by the test above")
    import math

    from scipy import stats

    x = [0.1, 0.4, 0.7, 1.3, 2.2, 2.9]
    y = [1.1, 1.9, 2.5, 3.3, 3.8, 4.6, 5.0]
    xs = ",".join(f"({v!r}, 0)" for v in x) + "," + ",".join(f"({v!r}, 1)" for v in y)
    script = (
        f".load {extension_path}\n"
        "SELECT dist_mixture(column1, 1) ->> '$.components[0].mean'\n"
        "  FROM (VALUES (1e16), (1), (-1e16), (2));\n"
        "SELECT dist_mixture(column1, 2) ->> '$.k' FROM (VALUES (1), (2), (3), (10), (11), (12));\n"
        "SELECT dist_fit(column1 + 1, 'gamma', 1) ->> '$.resolution'\n"
        "  FROM (VALUES (1), (2), (2), (3), (5), (8));\n"
        f"SELECT ks_test(column1, column2, 'two-sided', 'exact') ->> '$.p' FROM (VALUES {xs});\n"
    )
    res = run_cli(script)
    assert res.returncode == 0, res.stderr
    assert "panic" not in res.stderr and "internal error" not in res.stderr, res.stderr
    mean, k, resolution, p = res.stdout.strip().splitlines()
    assert float(mean) == math.fsum([1e16, 1, -1e16, 2]) / 4
    assert int(k) == 2
    assert float(resolution) == 1.0
    want = stats.ks_2samp(x, y, method="exact").pvalue
    assert float(p) == pytest.approx(want, rel=1e-14)
