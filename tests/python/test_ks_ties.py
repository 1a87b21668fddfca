"""The two-sample Kolmogorov-Smirnov p-value with ties at large sizes (method 'asymptotic, ties').

References, with the exact calls:
- A permutation test written here: numpy 2.4.6's Generator.multivariate_hypergeometric(counts,
  n1, size=R) draws, for each of R = 20000 random splits of the pooled sample, how many of each
  distinct value go to sample 1; D follows from the cumulative counts, in integers
  (n1 n2 (F1 - F2)). ogive's p must lie within 3 binomial standard errors plus 5% relative of
  the permutation p.
- scipy 1.17.1: scipy.stats.ks_2samp(x, y, alternative=A, method='asymp') where there are no
  ties (the tie-free path must be unchanged), to 1e-10 relative.
"""

import json

import numpy as np
import pytest
import scipy.stats

from conftest import scalar

N = 80_000
RESAMPLES = 20_000


def load(conn, x, y):
    conn.execute("CREATE TABLE t(x REAL, second INTEGER)")
    with conn:
        conn.executemany("INSERT INTO t VALUES (?, 0)", [(float(v),) for v in x])
        conn.executemany("INSERT INTO t VALUES (?, 1)", [(float(v),) for v in y])


def numerators(c1, counts, n1, n2):
    """n1 n2 (F1 - F2) at the ends of the tie blocks, for cumulative sample-1 counts c1."""
    c2 = np.cumsum(counts) - c1
    return c1 * n2 - c2 * n1


def permutation_p(x, y, alt, rng):
    values, inverse = np.unique(np.concatenate([x, y]), return_inverse=True)
    counts = np.bincount(inverse).astype(np.int64)
    n1, n2 = len(x), len(y)
    first = np.bincount(inverse[:n1], minlength=len(values)).astype(np.int64)
    draws = rng.multivariate_hypergeometric(counts, n1, size=RESAMPLES).astype(np.int64)
    diff = numerators(np.cumsum(draws, axis=1), counts, n1, n2)
    obs = numerators(np.cumsum(first), counts, n1, n2)
    pick = {"two-sided": np.abs, "greater": lambda v: v, "less": lambda v: -v}[alt]
    stat = np.maximum(pick(diff).max(axis=1), 0)
    observed = max(pick(obs).max(), 0)
    return float(np.mean(stat >= observed)), len(values)


@pytest.mark.parametrize("shift, seed", [(0.004, 1), (0.008, 1), (0.008, 4)])
def test_rounded_readings_match_a_permutation_test(conn, shift, seed):
    rng = np.random.default_rng(seed)
    x = np.round(rng.normal(0.0, 1.0, N) * 2) / 2  # rounded to 0.5
    y = np.round(rng.normal(shift, 1.0, N) * 2) / 2
    load(conn, x, y)
    perm_rng = np.random.default_rng(100 + seed)
    for alt in ["two-sided", "greater", "less"]:
        got = json.loads(scalar(conn, "SELECT ks_test(x, second, ?) FROM t", (alt,)))
        want, distinct = permutation_p(x, y, alt, perm_rng)
        assert got["method"] == "asymptotic, ties", got
        se = np.sqrt(want * (1 - want) / RESAMPLES)
        assert abs(got["p"] - want) <= 3 * se + 0.05 * want, (alt, got, want, distinct)
        if alt == "two-sided":
            # The premise of the check: a p-value in the range that matters, from few values.
            assert 0.005 <= want <= 0.25 and distinct < 40, (want, distinct)
            # dist_ks and dist_distance give the same p on the values.
            d = json.loads(scalar(
                conn,
                "SELECT dist_ks(a, b) FROM (SELECT dist_empirical(x) FILTER (WHERE second = 0) "
                "AS a, dist_empirical(x) FILTER (WHERE second = 1) AS b FROM t)"))
            assert d["p"] == got["p"] and d["method"] == "asymptotic, ties"
            dd = json.loads(scalar(
                conn,
                "SELECT dist_distance(a, b, 'ks') FROM (SELECT dist_empirical(x) FILTER "
                "(WHERE second = 0) AS a, dist_empirical(x) FILTER (WHERE second = 1) AS b "
                "FROM t)"))
            assert dd["p"] == got["p"] and dd["method"] == "asymptotic, ties"


def test_without_ties_the_asymptotic_path_is_unchanged(conn):
    rng = np.random.default_rng(9)
    x, y = rng.normal(0.0, 1.0, 12_000), rng.normal(0.03, 1.0, 11_000)
    load(conn, x, y)
    for alt in ["two-sided", "greater", "less"]:
        got = json.loads(scalar(conn, "SELECT ks_test(x, second, ?) FROM t", (alt,)))
        want = scipy.stats.ks_2samp(x, y, alternative=alt, method="asymp").pvalue
        assert got["method"] == "asymptotic"
        assert abs(got["p"] - want) <= 1e-10 * want, (alt, got, want)


def test_forced_asymp_on_small_tied_samples_uses_the_tied_limit(conn):
    x = [0, 0, 1, 1, 1, 2, 2, 3]
    y = [1, 2, 2, 3, 3, 3, 4, 4]
    load(conn, x, y)
    got = json.loads(scalar(conn, "SELECT ks_test(x, second, 'two-sided', 'asymp') FROM t"))
    assert got["method"] == "asymptotic, ties" and 0 <= got["p"] <= 1
    # All values equal: D = 0 and p = 1 whatever the method.
    conn.execute("DELETE FROM t")
    conn.execute("INSERT INTO t VALUES (1, 0), (1, 1), (1, 1)")
    got = json.loads(scalar(conn, "SELECT ks_test(x, second, 'two-sided', 'asymp') FROM t"))
    assert got["p"] == 1.0
