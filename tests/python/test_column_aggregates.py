"""Cross-checks of the column aggregates (ecdf, quantile, weighted_quantile, quantiles,
profile) through the loadable extension, against numpy and scipy.

References, with the exact calls:
- numpy 2.4.6: numpy.quantile(x, p, method=M) for the nine Hyndman-Fan methods
  M in inverted_cdf, averaged_inverted_cdf, closest_observation, interpolated_inverted_cdf,
  hazen, weibull, linear, median_unbiased, normal_unbiased (types 1..9 in that order);
  numpy.quantile(x, p, weights=w, method="inverted_cdf") for weighted type 1;
  numpy.mean(x <= t) for the ECDF.
- scipy 1.17.1: scipy.stats.skew(x, bias=False), scipy.stats.kurtosis(x, fisher=True,
  bias=False), numpy.std(x, ddof=1).
"""

import json
import math

import numpy as np
import pytest
import scipy.stats

from conftest import expect_error, load_column, rows, scalar

METHODS = [
    "inverted_cdf",
    "averaged_inverted_cdf",
    "closest_observation",
    "interpolated_inverted_cdf",
    "hazen",
    "weibull",
    "linear",
    "median_unbiased",
    "normal_unbiased",
]
REL = 1e-12  # relative tolerance required by the foundation issue


def close(a, b, rel=REL):
    if a == b:
        return True
    return abs(a - b) <= rel * max(abs(a), abs(b))


def grouped_data(seed):
    """Groups of sizes 1, 2, 3, 7, 50 and 400 with heavy ties, at magnitudes 1e-300..1e300."""
    rng = np.random.default_rng(seed)
    groups, values = [], []
    g = 0
    for scale in [1e-300, 1e-150, 1.0, 1e150, 1e300]:
        for n in [1, 2, 3, 7, 50, 400]:
            # Rounded draws give ties, as measurements do; the sign varies.
            xs = np.round(rng.normal(0, 3, size=n)) * scale * 0.25
            groups += [g] * n
            values += list(xs)
            g += 1
    return np.array(groups), np.array(values)


PS = [0.0, 1.0, 0.5, 0.9, 0.25, 0.01, 0.999, 1 / 3, 0.123456789]


@pytest.mark.parametrize("seed", [1, 2])
def test_quantile_all_types_match_numpy(conn, seed):
    groups, values = grouped_data(seed)
    load_column(conn, "t", values, groups)
    for ty, method in enumerate(METHODS, start=1):
        for p in PS:
            got = dict(rows(conn, "SELECT g, quantile(x, ?, ?) FROM t GROUP BY g", (p, ty)))
            for g in np.unique(groups):
                xs = values[groups == g]
                want = float(np.quantile(xs, p, method=method))
                assert close(got[int(g)], want), (method, p, int(g), got[int(g)], want)


def test_default_type_is_linear_and_ecdf_matches_fraction(conn):
    groups, values = grouped_data(3)
    load_column(conn, "t", values, groups)
    for t in [0.0, 1.5, -0.25, 1e150, -1e300]:
        out = rows(conn, "SELECT g, quantile(x, 0.9), ecdf(x, ?) FROM t GROUP BY g", (t,))
        for g, q, e in out:
            xs = values[groups == g]
            assert close(q, float(np.quantile(xs, 0.9))), (g, q)  # method="linear" default
            assert e == float(np.mean(xs <= t)), (g, t, e)


def test_null_skipping_empty_groups_and_null_arguments(conn):
    conn.execute("CREATE TABLE t(g, x)")
    conn.execute("INSERT INTO t VALUES (1, NULL), (2, 1.0), (2, NULL), (2, 3.0)")
    got = rows(conn, "SELECT g, quantile(x, 0.5), ecdf(x, 2) FROM t GROUP BY g ORDER BY g")
    assert got == [(1, None, None), (2, 2.0, 0.5)]
    assert scalar(conn, "SELECT quantile(x, 0.5) FROM t WHERE 0") is None
    assert scalar(conn, "SELECT quantile(x, NULL) FROM t") is None
    assert scalar(conn, "SELECT ecdf(x, NULL) FROM t") is None
    assert scalar(conn, "SELECT quantile(x, 0.5, NULL) FROM t") is None


def test_infinities_are_ordered(conn):
    conn.execute("CREATE TABLE t(x)")
    conn.executemany("INSERT INTO t VALUES (?)", [(-math.inf,), (1.0,), (2.0,), (math.inf,)])
    xs = np.array([-math.inf, 1.0, 2.0, math.inf])
    for p in [0.0, 0.5, 1.0]:
        want = float(np.quantile(xs, p, method="inverted_cdf"))
        assert scalar(conn, "SELECT quantile(x, ?, 1) FROM t", (p,)) == want
    assert scalar(conn, "SELECT ecdf(x, 1e308) FROM t") == 0.75
    # Between -inf and +inf the interpolated median is undefined: NULL, not a number.
    conn.execute("DELETE FROM t WHERE abs(x) < 1e308")
    assert scalar(conn, "SELECT quantile(x, 0.5) FROM t") is None


def test_weighted_type1_matches_numpy_weights(conn):
    rng = np.random.default_rng(11)
    xs = np.round(rng.normal(5, 2, size=300), 1)
    ws = rng.uniform(0.1, 3.0, size=300)
    load_column(conn, "t", xs, weights=ws)
    for p in [0.0, 0.05, 0.3, 0.5, 0.77, 0.95, 1.0]:
        got = scalar(conn, "SELECT weighted_quantile(x, w, ?, 1) FROM t", (p,))
        want = float(np.quantile(xs, p, weights=ws, method="inverted_cdf"))
        assert got == want, (p, got, want)


def test_whole_weights_equal_replicated_rows_every_type(conn):
    rng = np.random.default_rng(12)
    xs = np.round(rng.normal(0, 1, size=60), 1)
    ws = rng.integers(0, 5, size=60)
    load_column(conn, "t", xs, weights=ws)
    replicated = np.repeat(xs, ws)
    for ty, method in enumerate(METHODS, start=1):
        for p in PS:
            got = scalar(conn, "SELECT weighted_quantile(x, w, ?, ?) FROM t", (p, ty))
            want = float(np.quantile(replicated, p, method=method))
            assert close(got, want), (method, p, got, want)
            assert scalar(conn, "SELECT ecdf(x, 0.3, w) FROM t") == float(np.mean(replicated <= 0.3))


def test_quantiles_json_matches_numpy(conn):
    rng = np.random.default_rng(13)
    xs = rng.lognormal(0, 1, size=1000)
    load_column(conn, "t", xs)
    ps = [0.0, 0.05, 0.5, 0.95, 1.0]
    for ty, method in enumerate(METHODS, start=1):
        got = json.loads(scalar(conn, "SELECT quantiles(x, ?, ?) FROM t", (json.dumps(ps), ty)))
        want = np.quantile(xs, ps, method=method)
        assert all(close(a, float(b)) for a, b in zip(got, want)), (method, got, want)


def test_profile_matches_numpy_and_scipy(conn):
    rng = np.random.default_rng(14)
    xs = rng.gamma(2.0, 3.0, size=5000)
    load_column(conn, "t", xs)
    prof = json.loads(scalar(conn, "SELECT profile(x) FROM t"))
    assert prof["n"] == 5000
    assert close(prof["mean"], float(np.mean(xs)), 1e-12)
    assert close(prof["sd"], float(np.std(xs, ddof=1)), 1e-12)
    assert close(prof["skewness"], float(scipy.stats.skew(xs, bias=False)), 1e-10)
    assert close(prof["excess_kurtosis"], float(scipy.stats.kurtosis(xs, fisher=True, bias=False)), 1e-10)
    q1, med, q3 = np.quantile(xs, [0.25, 0.5, 0.75])
    assert (prof["q1"], prof["median"], prof["q3"]) == (float(q1), float(med), float(q3))
    assert (prof["min"], prof["max"]) == (float(xs.min()), float(xs.max()))


@pytest.mark.parametrize(
    "sql, message",
    [
        ("SELECT quantile(x, 1.5) FROM t", "quantile: p must be between 0 and 1, got 1.5"),
        ("SELECT quantile(x, -0.1) FROM t", "quantile: p must be between 0 and 1, got -0.1"),
        ("SELECT quantile(x, 0.5, 10) FROM t", "quantile: type must be a whole number from 1 to 9"),
        ("SELECT quantile(x, 0.5, 2.5) FROM t", "quantile: type must be a whole number, got 2.5"),
        ("SELECT quantile('warm', 0.5) FROM t", "quantile: x must be a number (INTEGER or REAL), got TEXT 'warm'"),
        ("SELECT quantile(x'00ff', 0.5) FROM t", "quantile: x must be a number (INTEGER or REAL), got a BLOB of 2 bytes"),
        ("SELECT quantile(x, x / 10.0) FROM t", "quantile: p must be the same on every row of a group"),
        ("SELECT ecdf(x, 1, -2) FROM t", "ecdf: weights must be finite and >= 0, got -2"),
        ("SELECT ecdf(x, 'cold') FROM t", "ecdf: t must be a number"),
        ("SELECT weighted_quantile(x, 1e999, 0.5) FROM t", "weighted_quantile: weights must be finite and >= 0, got inf"),
        ("SELECT quantiles(x, '[0.5, 2]') FROM t", "quantiles: ps item 1 must be between 0 and 1, got 2"),
        ("SELECT quantiles(x, 'median') FROM t", "quantiles: ps must be a JSON array of probabilities"),
        ("SELECT quantiles(x, '[\"a\"]') FROM t", "quantiles: ps item 0 must be a number"),
        ("SELECT profile('x') FROM t", "profile: x must be a number"),
    ],
)
def test_bad_input_gives_named_errors(conn, sql, message):
    conn.execute("CREATE TABLE t(x)")
    conn.execute("INSERT INTO t VALUES (1), (2), (3)")
    expect_error(conn, sql, message)


def test_numeric_text_is_accepted(conn):
    # TEXT columns from CSV imports hold numbers as text; they count as numbers.
    assert scalar(conn, "SELECT quantile(column1, 0.5) FROM (VALUES ('1'), (' 2.5 '), ('4'))") == 2.5


# The lean per-row path (src/functions/raw.rs) takes every row after the first whose
# constant argument reads as the same number with the same bits; anything else goes
# through the full checks. These cases put the odd row after several ordinary ones, so
# that it meets the lean path. Expected values: numpy.quantile(x, 0.5) (linear) and
# numpy.mean(x <= t) on the rows that count.
LANE_ROWS = "(1.0, 0.5), (2.0, 0.5), (3, 0.5), (4.0, 0.5)"


@pytest.mark.parametrize(
    "odd_row, message",
    [
        ("(5.0, 0.25)", "quantile: p must be the same on every row of a group, got 0.5 and then 0.25"),
        ("(5.0, NULL)", "quantile: p must be the same on every row of a group, got 0.5 and then NULL"),
        ("(5.0, 'half')", "quantile: p must be a number (INTEGER or REAL), got TEXT 'half'"),
        ("(5.0, '0.25 or so')", "quantile: p must be a number (INTEGER or REAL), got TEXT '0.25 or so'"),
        ("(5.0, x'00')", "quantile: p must be a number (INTEGER or REAL), got a BLOB of 1 bytes"),
        ("('warm', 0.5)", "quantile: x must be a number (INTEGER or REAL), got TEXT 'warm'"),
    ],
)
def test_lean_path_still_rejects_a_late_odd_row(conn, odd_row, message):
    expect_error(conn, f"SELECT quantile(column1, column2) FROM (VALUES {LANE_ROWS}, {odd_row})", message)


def test_lean_path_counts_what_the_full_path_counts(conn):
    # A late NULL x is skipped, numeric TEXT x counts, an INTEGER constant equals its REAL.
    values = f"VALUES {LANE_ROWS}, (NULL, 0.5), (' 2.5 ', 0.5), (10, 0.5)"
    want = float(np.quantile([1.0, 2.0, 3.0, 4.0, 2.5, 10.0], 0.5))
    assert scalar(conn, f"SELECT quantile(column1, column2) FROM ({values})") == want
    t_rows = "VALUES (1.0, 3), (2.0, 3.0), (3.0, 3), (4.0, 3.0), (NULL, 3), (2.5, 3)"
    want = float(np.mean(np.array([1.0, 2.0, 3.0, 4.0, 2.5]) <= 3.0))
    assert scalar(conn, f"SELECT ecdf(column1, column2) FROM ({t_rows})") == want
    # 0.0 and -0.0 are the same threshold (their bits differ, so the full path decides).
    zeros = "VALUES (-1.0, 0.0), (0.0, -0.0), (1.0, 0.0), (-0.0, -0.0)"
    assert scalar(conn, f"SELECT ecdf(column1, column2) FROM ({zeros})") == 0.75
    # A zero constant always takes the full path, so a late NULL or word is still caught.
    expect_error(
        conn,
        "SELECT ecdf(column1, column2) FROM (VALUES (1.0, 0), (2.0, 0.0), (3.0, 'zero'))",
        "ecdf: t must be a number (INTEGER or REAL), got TEXT 'zero'",
    )
    expect_error(
        conn,
        "SELECT ecdf(column1, column2) FROM (VALUES (1.0, 0), (2.0, 0.0), (3.0, NULL))",
        "ecdf: t must be the same on every row of a group, got 0.0 and then NULL",
    )


@pytest.mark.parametrize("where", ["first", "middle", "last"])
@pytest.mark.parametrize(
    "function, constant, message",
    [
        ("quantile", "0.5", "quantile: p must be a number (INTEGER or REAL), got TEXT '0.5abc'"),
        ("ecdf", "0.5", "ecdf: t must be a number (INTEGER or REAL), got TEXT '0.5abc'"),
        (
            "quantile_sketch",
            "0.25",
            "quantile_sketch: epsilon must be a number (INTEGER or REAL), got TEXT '0.25abc'",
        ),
    ],
)
def test_a_text_constant_is_refused_wherever_it_sits(conn, where, function, constant, message):
    # SQLite reads TEXT '0.5abc' as the double 0.5 (its prefix), the same bits as the
    # group's constant 0.5; the answer must not depend on where such a row sits.
    rows = [f"({x}, {constant})" for x in ("1.0", "2.0", "3.0", "4.0")]
    at = {"first": 0, "middle": 2, "last": len(rows)}[where]
    rows.insert(at, f"(2.5, '{constant}abc')")
    expect_error(conn, f"SELECT {function}(column1, column2) FROM (VALUES {', '.join(rows)})", message)


@pytest.mark.parametrize("where", ["first", "middle", "last"])
def test_a_text_value_is_refused_wherever_it_sits_in_a_one_argument_sketch(conn, where):
    # quantile_sketch(x) has no constant; its fast lane must still refuse TEXT x such as
    # '2.5abc' (which SQLite would read as 2.5) wherever the row sits.
    rows = ["(1.0)", "(2.0)", "(3.0)", "(4.0)"]
    rows.insert({"first": 0, "middle": 2, "last": len(rows)}[where], "('2.5abc')")
    expect_error(
        conn,
        f"SELECT quantile_sketch(column1) FROM (VALUES {', '.join(rows)})",
        "quantile_sketch: x must be a number (INTEGER or REAL), got TEXT '2.5abc'",
    )


def test_median_is_numpy_median_as_aggregate_and_window(conn):
    # Reference: numpy.median (the mean of the two middle values of an even count),
    # per group and per sliding frame of 5 rows; exact equality (both are one addition and
    # one halving of the same two values, or one value).
    rng = np.random.default_rng(1216)
    xs = np.round(rng.normal(4.0, 2.0, 200), 1)
    load_column(conn, "m", xs.tolist(), groups=[i % 3 for i in range(200)])
    got = dict(rows(conn, "SELECT g, median(x) FROM m GROUP BY g"))
    for g in range(3):
        assert got[g] == float(np.median(xs[g::3]))
    frames = rows(
        conn,
        "SELECT median(x) OVER (ORDER BY rowid ROWS BETWEEN 4 PRECEDING AND CURRENT ROW) FROM m",
    )
    for i, (m,) in enumerate(frames):
        assert m == float(np.median(xs[max(0, i - 4) : i + 1])), i
    expect_error(conn, "SELECT median(column1) FROM (VALUES (1), ('warm'))",
                 "median: x must be a number (INTEGER or REAL), got TEXT 'warm'")
