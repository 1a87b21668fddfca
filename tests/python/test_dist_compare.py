"""Cross-checks of dist_ks and dist_distance on empirical distribution values, through the
loadable extension.

References, with the exact calls (scipy 1.17.1):
- scipy.stats.ks_2samp(x, y, alternative=A, method=M), A in two-sided, less, greater and M in
  exact, asymp (dist_ks's 'exact' and 'asymp');
- scipy.stats.cramervonmises_2samp(x, y, method=M), M in exact, asymptotic;
- scipy.stats.anderson_ksamp([x, y], variant='midrank');
- scipy.stats.wasserstein_distance(x, y) and
  scipy.stats.wasserstein_distance(x, y, u_weights=wx, v_weights=wy);
- exhaustive enumeration of every split of a pooled sample with ties (enumerate_p of
  test_compare.py, itertools.combinations) for the conditional exact KS p-value;
- ks_test over the same rows (the aggregate, itself checked against scipy in
  test_compare.py): dist_ks must give the same JSON text, character for character.
Samples are seeded numpy draws; "with ties" means rounded to a coarse grid.
"""

import json
import math
import warnings

import numpy as np
import pytest
import scipy.stats

from conftest import expect_error, rows, scalar
from test_compare import assert_matches_ks_2samp, close, enumerate_p

ALTERNATIVES = ["two-sided", "less", "greater"]


def load_pairs(conn, pairs, weights=None):
    """pairs: list of (x, y) -> table t(g, s, x, w) with s = 1 for x and 2 for y, and the
    tables a(g, d) and b(g, d) of their empirical distributions (weighted by w when weights,
    a list of (wx, wy), is given)."""
    conn.execute("CREATE TABLE t(g INTEGER, s INTEGER, x REAL, w REAL)")
    with conn:
        for g, (x, y) in enumerate(pairs):
            wx, wy = weights[g] if weights else (np.ones(len(x)), np.ones(len(y)))
            conn.executemany("INSERT INTO t VALUES (?, 1, ?, ?)",
                             [(g, float(v), float(w)) for v, w in zip(x, wx)])
            conn.executemany("INSERT INTO t VALUES (?, 2, ?, ?)",
                             [(g, float(v), float(w)) for v, w in zip(y, wy)])
    build = "dist_empirical(x, w)" if weights else "dist_empirical(x)"
    for name, s in [("a", 1), ("b", 2)]:
        conn.execute(f"CREATE TABLE {name} AS SELECT g, {build} AS d FROM t WHERE s = {s} GROUP BY g")


def per_group(conn, call, params=()):
    """{g: parsed JSON} of `call` (an expression in a.d and b.d) for every group."""
    out = rows(conn, f"SELECT a.g, {call} FROM a JOIN b USING (g) ORDER BY a.g", params)
    return {g: None if v is None else json.loads(v) for g, v in out}


def seeded_pairs(seed, sizes, ties):
    rng = np.random.default_rng(seed)
    pairs = []
    for n1, n2, shift in sizes:
        x, y = rng.normal(0, 1, n1), rng.normal(shift, 1.3, n2)
        if ties:
            x, y = np.round(x * 2) / 2, np.round(y * 2) / 2
        pairs.append((x, y))
    return pairs


SIZES = [(8, 11, 0.0), (20, 17, 0.8), (25, 25, 0.5), (60, 45, 0.2), (150, 400, 0.1),
         (1, 5, 0.0), (333, 200, 0.25)]


# ---------------------------------------------------------------------------------------
# dist_ks


def test_dist_ks_matches_scipy_ks_2samp_without_ties(conn):
    pairs = seeded_pairs(40, SIZES, ties=False)
    load_pairs(conn, pairs)
    for alt in ALTERNATIVES:
        for method in ["exact", "asymp"]:
            out = per_group(conn, "dist_ks(a.d, b.d, ?, ?)", (alt, method))
            for g, (x, y) in enumerate(pairs):
                assert_matches_ks_2samp(out[g], x, y, alt, method)


def test_dist_ks_with_ties_matches_scipy_asymp_and_enumeration(conn):
    # With ties scipy's exact p-value ignores the tie pattern, so the exact p-value is checked
    # against exhaustive enumeration (n1 + n2 <= 14, 1e-12 absolute), while d is checked
    # against scipy.stats.ks_2samp(x, y, alternative=A, method='asymp') to 1e-14 relative.
    # The asymptotic p-value with ties is the Brownian bridge watched at the distinct pooled
    # values ('asymptotic, ties'; checked against a permutation test in test_ks_ties.py); its
    # sup over a subset of [0, 1] cannot exceed the continuous limit, so p must be at most
    # scipy.stats.kstwobign.sf(z) (two-sided) or exp(-2 z^2) (one-sided, Smirnov's limit),
    # z = sqrt(n1 n2 / (n1 + n2)) d, up to 1e-12.
    pairs = seeded_pairs(41, SIZES, ties=True)
    small = seeded_pairs(42, [(5, 7, 0.5), (6, 6, 0.0), (4, 9, 1.0), (7, 7, 0.3)], ties=True)
    load_pairs(conn, pairs + small)
    for alt in ALTERNATIVES:
        asymp = per_group(conn, "dist_ks(a.d, b.d, ?, 'asymp')", (alt,))
        for g, (x, y) in enumerate(pairs):
            want = scipy.stats.ks_2samp(x, y, alternative=alt, method="asymp")
            assert close(asymp[g]["d"], float(want.statistic), 1e-14), (g, alt)
            z = math.sqrt(len(x) * len(y) / (len(x) + len(y))) * asymp[g]["d"]
            bound = scipy.stats.kstwobign.sf(z) if alt == "two-sided" else math.exp(-2 * z * z)
            assert asymp[g]["method"] == "asymptotic, ties", asymp[g]
            assert 0 <= asymp[g]["p"] <= bound + 1e-12, (g, alt, asymp[g], bound)
        exact = per_group(conn, "dist_ks(a.d, b.d, ?, 'exact')", (alt,))
        for k, (x, y) in enumerate(small):
            got = exact[len(pairs) + k]["p"]
            assert abs(got - enumerate_p(x, y, alt)) <= 1e-12, (k, alt)


def test_dist_ks_is_ks_test_on_the_same_rows(conn):
    # The requirement: dist_ks(d1, d2) gives the same result as ks_test over the rows;
    # here the same JSON text, for every alternative and method, with and without ties, up to
    # the large size (3000 and 2500, exact by default).
    pairs = (seeded_pairs(43, SIZES, ties=False) + seeded_pairs(44, SIZES, ties=True)
             + seeded_pairs(45, [(3000, 2500, 0.05)], ties=False))
    load_pairs(conn, pairs)
    for alt in ALTERNATIVES:
        for method in ["auto", "exact", "asymp"]:
            if method == "exact" and alt != "two-sided":
                continue  # the large case makes this slow; two-sided covers the exact path
            via_values = dict(rows(conn, "SELECT a.g, dist_ks(a.d, b.d, ?, ?) FROM a JOIN b USING (g)",
                                   (alt, method)))
            via_rows = dict(rows(conn, "SELECT g, ks_test(x, s = 2, ?, ?) FROM t GROUP BY g",
                                 (alt, method)))
            assert len(via_values) == len(pairs)
            assert via_values == via_rows, (alt, method)
    # Default arguments too.
    assert dict(rows(conn, "SELECT a.g, dist_ks(a.d, b.d) FROM a JOIN b USING (g)")) == dict(
        rows(conn, "SELECT g, ks_test(x, s = 2) FROM t GROUP BY g"))


def test_whole_weights_are_replicated_rows(conn):
    # dist_empirical(x, w) with whole w: dist_ks and the rank metrics of dist_distance equal
    # ks_test / dist_distance on the rows repeated w times (same JSON text). Reference: the
    # replicated rows, built here with numpy.repeat.
    rng = np.random.default_rng(46)
    pairs, weights = [], []
    for n1, n2 in [(6, 9), (30, 25), (80, 120)]:
        x, y = np.round(rng.normal(0, 1, n1), 1), np.round(rng.normal(0.3, 1, n2), 1)
        pairs.append((x, y))
        weights.append((rng.integers(0, 5, n1).astype(float), rng.integers(1, 4, n2).astype(float)))
    load_pairs(conn, pairs, weights)
    conn.execute("CREATE TABLE r(g INTEGER, s INTEGER, x REAL)")
    with conn:
        for g, ((x, y), (wx, wy)) in enumerate(zip(pairs, weights)):
            for s, v, w in [(1, x, wx), (2, y, wy)]:
                conn.executemany("INSERT INTO r VALUES (?, ?, ?)",
                                 [(g, s, float(u)) for u in np.repeat(v, w.astype(int))])
    for alt in ALTERNATIVES:
        got = dict(rows(conn, "SELECT a.g, dist_ks(a.d, b.d, ?) FROM a JOIN b USING (g)", (alt,)))
        want = dict(rows(conn, "SELECT g, ks_test(x, s = 2, ?) FROM r GROUP BY g", (alt,)))
        assert got == want, alt
        for g, ((_, _), (wx, wy)) in enumerate(zip(pairs, weights)):
            parsed = json.loads(got[g])
            assert (parsed["n1"], parsed["n2"]) == (int(wx.sum()), int(wy.sum()))
    for metric in ["ks", "cvm", "ad"]:
        got = dict(rows(conn, "SELECT a.g, dist_distance(a.d, b.d, ?) FROM a JOIN b USING (g)",
                        (metric,)))
        want = dict(rows(conn,
                         "SELECT a.g, dist_distance(a.d, b.d, ?) FROM "
                         "(SELECT g, dist_empirical(x) AS d FROM r WHERE s = 1 GROUP BY g) AS a JOIN "
                         "(SELECT g, dist_empirical(x) AS d FROM r WHERE s = 2 GROUP BY g) AS b "
                         "USING (g)", (metric,)))
        assert got == want, metric


# ---------------------------------------------------------------------------------------
# dist_distance


def test_distance_ks_is_the_two_sided_test(conn):
    # metric 'ks' reports dist_ks's two-sided statistic and p-value (method auto), which are
    # checked against scipy.stats.ks_2samp(x, y) (method auto: exact at these sizes) to 1e-10.
    pairs = seeded_pairs(47, SIZES[:5], ties=False)
    load_pairs(conn, pairs)
    dist = per_group(conn, "dist_distance(a.d, b.d, 'ks')")
    test = per_group(conn, "dist_ks(a.d, b.d)")
    for g, (x, y) in enumerate(pairs):
        got = dist[g]
        assert got["metric"] == "ks"
        assert (got["statistic"], got["p"], got["method"]) == (test[g]["d"], test[g]["p"],
                                                               test[g]["method"])
        want = scipy.stats.ks_2samp(x, y)
        assert close(got["statistic"], float(want.statistic), 1e-14)
        assert close(got["p"], float(want.pvalue), 1e-10), (g, got, want)


def test_cvm_matches_scipy_cramervonmises_2samp(conn):
    # scipy.stats.cramervonmises_2samp(x, y, method=M). Statistic: 1e-12 relative. Without
    # ties and max(n1, n2) <= 20, ogive's p is exact, as scipy's method='auto' is: 1e-12
    # relative against method='exact'. Otherwise ogive's p is asymptotic (with ties at any
    # size, where scipy's 'exact' would be the distribution for untied data): 1e-7 absolute
    # against method='asymptotic' (scipy stops its series once a term is below 1e-7).
    untied = seeded_pairs(48, [(5, 7, 0.5), (12, 9, 1.0), (20, 20, 0.4), (21, 15, 0.2),
                               (100, 80, 0.3), (400, 350, 0.1)], ties=False)
    tied = seeded_pairs(49, [(6, 8, 0.5), (15, 20, 0.2), (120, 90, 0.3)], ties=True)
    load_pairs(conn, untied + tied)
    out = per_group(conn, "dist_distance(a.d, b.d, 'cvm')")
    for g, (x, y) in enumerate(untied + tied):
        got = out[g]
        assert got["metric"] == "cvm" and (got["n1"], got["n2"]) == (len(x), len(y))
        exact = g < len(untied) and max(len(x), len(y)) <= 20
        want = scipy.stats.cramervonmises_2samp(x, y, method="exact" if exact else "asymptotic")
        assert close(got["statistic"], float(want.statistic), 1e-12), (g, got, want)
        if exact:
            assert got["method"] == "exact"
            assert close(got["p"], float(want.pvalue), 1e-12), (g, got, want)
        else:
            assert got["method"] == "asymptotic"
            assert abs(got["p"] - float(want.pvalue)) < 1e-7, (g, got, want)


def test_ad_matches_scipy_anderson_ksamp_midrank(conn):
    # scipy.stats.anderson_ksamp([x, y], variant='midrank'): statistic 1e-10 relative; p 1e-9
    # relative where interpolated; where scipy caps p at 0.25 or floors it at 0.001 (with a
    # warning), ogive reports the same number with p_range 'at_least' or 'at_most'.
    pairs = (seeded_pairs(50, [(10, 12, 0.0), (30, 40, 0.6), (50, 50, 0.45), (60, 45, 1.5),
                               (200, 150, 0.2), (3, 2, 0.5)], ties=False)
             + seeded_pairs(51, [(15, 20, 0.5), (40, 30, 0.3), (100, 120, 0.05)], ties=True))
    load_pairs(conn, pairs)
    out = per_group(conn, "dist_distance(a.d, b.d, 'ad')")
    ranges = set()
    for g, (x, y) in enumerate(pairs):
        got = out[g]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            want = scipy.stats.anderson_ksamp([x, y], variant="midrank")
        assert got["metric"] == "ad" and got["method"] == "interpolated"
        assert close(got["statistic"], float(want.statistic), 1e-10), (g, got, want)
        assert close(got["p"], float(want.pvalue), 1e-9), (g, got, want)
        expected_range = {0.25: "at_least", 0.001: "at_most"}.get(float(want.pvalue), "value")
        assert got["p_range"] == expected_range, (g, got)
        ranges.add(got["p_range"])
    assert ranges == {"value", "at_least", "at_most"}  # every branch was exercised


def test_wasserstein_matches_scipy_with_and_without_weights(conn):
    # scipy.stats.wasserstein_distance(x, y) and, weighted,
    # scipy.stats.wasserstein_distance(x, y, u_weights=wx, v_weights=wy) with whole,
    # fractional and some zero weights; 1e-12 relative.
    pairs = seeded_pairs(52, [(5, 9, 0.5), (40, 40, 0.0), (300, 200, 0.7)], ties=False) + \
        seeded_pairs(53, [(25, 30, 0.2)], ties=True)
    load_pairs(conn, pairs)
    out = per_group(conn, "dist_distance(a.d, b.d, 'wasserstein')")
    for g, (x, y) in enumerate(pairs):
        want = scipy.stats.wasserstein_distance(x, y)
        assert out[g]["metric"] == "wasserstein" and "p" not in out[g]
        assert close(out[g]["statistic"], float(want), 1e-12), (g, out[g], want)
        assert (out[g]["n1"], out[g]["n2"]) == (len(x), len(y))

    rng = np.random.default_rng(54)
    weights = []
    for x, y in pairs:
        wx = rng.uniform(0.1, 3.0, len(x))
        wx[rng.random(len(x)) < 0.2] = 0.0
        weights.append((wx, rng.integers(1, 5, len(y)).astype(float)))
    conn.execute("DROP TABLE t")
    conn.execute("DROP TABLE a")
    conn.execute("DROP TABLE b")
    load_pairs(conn, pairs, weights)
    out = per_group(conn, "dist_distance(a.d, b.d, 'wasserstein')")
    for g, ((x, y), (wx, wy)) in enumerate(zip(pairs, weights)):
        want = scipy.stats.wasserstein_distance(x, y, u_weights=wx, v_weights=wy)
        assert close(out[g]["statistic"], float(want), 1e-12), (g, out[g], want)
        assert close(out[g]["n1"], float(wx.sum()), 1e-12)


def test_a_distribution_against_itself(conn):
    # By definition: identical samples have D = 0, W1 = 0, p = 1 for KS (exact count: every
    # split reaches D >= 0).
    conn.execute("CREATE TABLE v(x REAL)")
    conn.executemany("INSERT INTO v VALUES (?)", [(float(i % 7),) for i in range(40)])
    ks = json.loads(scalar(conn, "SELECT dist_ks(d, d) FROM (SELECT dist_empirical(x) AS d FROM v)"))
    assert (ks["d"], ks["p"]) == (0.0, 1.0)
    w = json.loads(scalar(conn, "SELECT dist_distance(d, d, 'wasserstein') "
                                "FROM (SELECT dist_empirical(x) AS d FROM v)"))
    assert w["statistic"] == 0.0


# ---------------------------------------------------------------------------------------
# NULL, small samples, infinities, errors


def test_nulls_and_too_small_samples(conn):
    conn.execute("CREATE TABLE v(g INTEGER, x REAL)")
    conn.execute("INSERT INTO v VALUES (1, 1.0), (2, 2.0), (2, 3.0), (3, 5.0), (3, 5.0), "
                 "(4, 1.0), (4, 2.0), (4, 3.0), (5, NULL)")
    d = lambda g: f"(SELECT dist_empirical(x) FROM v WHERE g = {g})"
    # A NULL argument (dist_empirical of an empty group is NULL) gives NULL.
    for sql in [f"SELECT dist_ks({d(5)}, {d(2)})", f"SELECT dist_ks({d(2)}, NULL)",
                f"SELECT dist_ks({d(1)}, {d(2)}, NULL)", f"SELECT dist_ks({d(1)}, {d(2)}, 'less', NULL)",
                f"SELECT dist_distance({d(2)}, {d(5)}, 'wasserstein')",
                f"SELECT dist_distance({d(2)}, {d(4)}, NULL)"]:
        assert scalar(conn, sql) is None, sql
    # One value in a sample is enough for KS and Wasserstein ...
    ks = json.loads(scalar(conn, f"SELECT dist_ks({d(1)}, {d(2)})"))
    assert (ks["n1"], ks["n2"], ks["d"]) == (1, 2, 1.0)
    assert json.loads(scalar(conn, f"SELECT dist_distance({d(1)}, {d(2)}, 'wasserstein')"))[
        "statistic"] == 1.5
    # ... but not for cvm (2 values in each sample) or ad (4 in all, two distinct): NULL.
    assert scalar(conn, f"SELECT dist_distance({d(1)}, {d(2)}, 'cvm')") is None
    assert scalar(conn, f"SELECT dist_distance({d(1)}, {d(2)}, 'ad')") is None
    assert scalar(conn, f"SELECT dist_distance({d(3)}, {d(3)}, 'ad')") is None
    assert scalar(conn, f"SELECT dist_distance({d(2)}, {d(4)}, 'ad')") is not None
    assert scalar(conn, f"SELECT dist_distance({d(2)}, {d(3)}, 'cvm')") is not None


def test_infinite_values_never_give_nan(conn):
    # Ranks are defined with infinities, so the rank tests work; W1 is infinite when one side
    # has an infinite value the other lacks, and JSON shows that as null, never NaN.
    conn.execute("CREATE TABLE v(s INTEGER, x REAL)")
    conn.executemany("INSERT INTO v VALUES (?, ?)",
                     [(1, v) for v in [1.0, 2.0, 3.0, float("inf")]]
                     + [(2, v) for v in [0.5, 2.5, 3.5, 4.5, float("-inf")]])
    a = "(SELECT dist_empirical(x) FROM v WHERE s = 1)"
    b = "(SELECT dist_empirical(x) FROM v WHERE s = 2)"
    texts = [scalar(conn, f"SELECT dist_ks({a}, {b})")] + [
        scalar(conn, f"SELECT dist_distance({a}, {b}, ?)", (m,)) for m in ["ks", "cvm", "ad", "wasserstein"]]
    for t in texts:
        assert "NaN" not in t and "Infinity" not in t, t
    assert json.loads(texts[-1])["statistic"] is None
    # Same ranks as with large finite values in place of the infinities (definition of a
    # rank statistic).
    finite = scalar(conn, "SELECT dist_ks(dist_empirical(CASE WHEN s = 1 THEN min(x, 1e300) END), "
                          "dist_empirical(CASE WHEN s = 2 THEN max(x, -1e300) END)) FROM v")
    assert json.loads(finite) == json.loads(texts[0])


D = "(SELECT dist_empirical(column1) FROM (VALUES (1), (2), (3)))"
W = "(SELECT dist_empirical(column1, column2) FROM (VALUES (1, 1.5), (2, 1), (3, 2)))"


@pytest.mark.parametrize(
    "sql, message",
    [
        (f"SELECT dist_distance({D}, {D}, 'energy')",
         "dist_distance: metric must be 'ks', 'wasserstein', 'cvm' or 'ad', got 'energy'"),
        (f"SELECT dist_distance({D}, {D}, 3)", "dist_distance: metric must be TEXT, got 3"),
        (f"SELECT dist_ks({D}, {D}, 'bigger')",
         "dist_ks: alternative must be 'two-sided', 'less' or 'greater', got 'bigger'"),
        (f"SELECT dist_ks({D}, {D}, 'less', 'bootstrap')",
         "dist_ks: method must be 'auto', 'exact', 'asymp' or 'lilliefors', got 'bootstrap'"),
        (f"SELECT dist_ks({W}, {D})",
         "dist_ks: argument 1 has the fractional weight 1.5; this test counts a weight as that "
         "many rows, so weights must be whole numbers"),
        (f"SELECT dist_distance({D}, {W}, 'cvm')",
         "dist_distance: argument 2 has the fractional weight 1.5"),
        (f"SELECT dist_distance({D}, {W}, 'ks')", "dist_distance: argument 2 has the fractional weight"),
        (f"SELECT dist_distance({D}, {W}, 'ad')", "dist_distance: argument 2 has the fractional weight"),
        (f"SELECT dist_ks({D}, (SELECT dist_empirical(1, 2e7)))",
         "dist_ks: argument 2 has weights summing to 20000000; this test counts a weight as that "
         "many rows, up to 10000000 per distribution"),
        (f"SELECT dist_ks({D}, 3.5)", "dist_ks: argument 2 must be a distribution value"),
        (f"SELECT dist_ks('warm', {D})", "dist_ks: argument 1 must be a distribution value"),
        (f"SELECT dist_distance({D}, x'894f4756', 'ks')",
         "dist_distance: argument 2 is not an empirical distribution"),
    ],
)
def test_bad_input_gives_named_errors(conn, sql, message):
    expect_error(conn, sql, message)


def test_fractional_weights_are_fine_for_wasserstein(conn):
    # W1 of {1 (1.5), 2 (1), 3 (2)} against {1, 2, 3}: the cdfs differ by |1.5/4.5 - 1/3| = 0
    # on [1, 2) and |2.5/4.5 - 2/3| = 1/9 on [2, 3): W1 = 1/9 (hand computation).
    got = json.loads(scalar(conn, f"SELECT dist_distance({W}, {D}, 'wasserstein')"))
    assert abs(got["statistic"] - 1 / 9) < 1e-15
    assert got["n1"] == 4.5 and got["n2"] == 3
