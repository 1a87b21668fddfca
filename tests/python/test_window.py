"""quantile and ecdf as window functions, through the loadable extension, against numpy
frame by frame.

Each frame is enumerated here in Python from the definitions of SQLite's window frames
(https://sqlite.org/windowfunctions.html, sections on frame types, boundaries and the
EXCLUDE clause), then evaluated by an outside reference:

- numpy 2.4.6: numpy.quantile(frame, p, method=M) with the nine Hyndman-Fan methods
  (types 1..9, the same list as test_column_aggregates.py), tolerance 1e-12 relative;
- numpy.mean(frame <= t) for ecdf(x, t), exact equality;
- math.fsum(w where x <= t) / math.fsum(w) for ecdf(x, t, w), exact equality (the
  extension sums weights exactly and rounds once, as fsum does).

A frame holding no non-NULL value must give NULL. Data: seeded, with NULLs and heavy ties.
"""

import math

import numpy as np
import pytest

from conftest import rows
from test_column_aggregates import METHODS, close

N = 300


def load(conn, seed):
    rng = np.random.default_rng(seed)
    g = rng.choice([0, 0, 0, 1, 1, 2], size=N)
    o = rng.integers(0, 50, size=N)
    x = np.round(rng.normal(0, 2, size=N) * 2) / 2  # steps of 0.5: many ties
    x_null = rng.random(N) < 0.15
    w = np.round(rng.uniform(0, 10, size=N), 3)
    w_null = rng.random(N) < 0.1
    conn.execute("CREATE TABLE t(id INTEGER PRIMARY KEY, g INTEGER, o INTEGER, x REAL, w REAL)")
    with conn:
        conn.executemany(
            "INSERT INTO t VALUES (?, ?, ?, ?, ?)",
            [
                (i, int(g[i]), int(o[i]), None if x_null[i] else float(x[i]), None if w_null[i] else float(w[i]))
                for i in range(N)
            ],
        )
    return [
        dict(id=i, g=int(g[i]), o=int(o[i]), x=None if x_null[i] else float(x[i]), w=None if w_null[i] else float(w[i]))
        for i in range(N)
    ]


# (SQL after PARTITION BY, frame unit, start offset, end offset, exclude, descending).
# Offsets count rows (ROWS), order-key distance (RANGE) or peer groups (GROUPS); negative
# is PRECEDING, None is UNBOUNDED.
FRAMES = [
    ("ORDER BY o, id ROWS BETWEEN 9 PRECEDING AND CURRENT ROW", "rows", -9, 0, None, False),
    ("ORDER BY o, id ROWS BETWEEN 3 PRECEDING AND 5 FOLLOWING", "rows", -3, 5, None, False),
    ("ORDER BY o, id ROWS BETWEEN 7 PRECEDING AND 2 PRECEDING", "rows", -7, -2, None, False),
    ("ORDER BY o, id ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW", "rows", None, 0, None, False),
    ("ORDER BY o, id ROWS BETWEEN 2 FOLLOWING AND UNBOUNDED FOLLOWING", "rows", 2, None, None, False),
    ("ORDER BY o, id ROWS BETWEEN 4 PRECEDING AND 4 FOLLOWING EXCLUDE CURRENT ROW", "rows", -4, 4, "current", False),
    ("ORDER BY o RANGE BETWEEN 4 PRECEDING AND 2 FOLLOWING", "range", -4, 2, None, False),
    ("ORDER BY o", "range", None, 0, None, False),
    ("ORDER BY o DESC RANGE BETWEEN 3 PRECEDING AND CURRENT ROW", "range", -3, 0, None, True),
    ("ORDER BY o RANGE BETWEEN 2 PRECEDING AND 2 FOLLOWING EXCLUDE GROUP", "range", -2, 2, "group", False),
    ("ORDER BY o GROUPS BETWEEN 2 PRECEDING AND 1 FOLLOWING", "groups", -2, 1, None, False),
    ("ORDER BY o GROUPS BETWEEN CURRENT ROW AND 3 FOLLOWING EXCLUDE TIES", "groups", 0, 3, "ties", False),
    ("", "all", None, None, None, False),
]


def frames(data, unit, lo, hi, exclude, desc, partitioned):
    """For each row id, the list of rows in its frame."""
    out = {}
    parts = {}
    for r in data:
        parts.setdefault(r["g"] if partitioned else 0, []).append(r)
    for part in parts.values():
        sign = -1 if desc else 1
        part = sorted(part, key=lambda r: (sign * r["o"], r["id"]))
        keys = sorted({r["o"] for r in part}, key=lambda v: sign * v)
        group_of = {v: i for i, v in enumerate(keys)}
        for i, cur in enumerate(part):
            chosen = []
            for j, r in enumerate(part):
                if unit == "all":
                    inside = True
                elif unit == "rows":
                    d = j - i
                    inside = (lo is None or d >= lo) and (hi is None or d <= hi)
                elif unit == "range":
                    d = sign * (r["o"] - cur["o"])  # distance along the ORDER BY direction
                    inside = (lo is None or d >= lo) and (hi is None or d <= hi)
                else:
                    d = group_of[r["o"]] - group_of[cur["o"]]
                    inside = (lo is None or d >= lo) and (hi is None or d <= hi)
                peer = r["o"] == cur["o"] if unit != "rows" else r["id"] == cur["id"]
                if exclude == "current" and r["id"] == cur["id"]:
                    inside = False
                if exclude == "group" and peer:
                    inside = False
                if exclude == "ties" and peer and r["id"] != cur["id"]:
                    inside = False
                if inside:
                    chosen.append(r)
            out[cur["id"]] = chosen
    return out


def window(conn, call, clause, partitioned, params):
    partition = "PARTITION BY g" if partitioned else ""
    return dict(rows(conn, f"SELECT id, {call} OVER ({partition} {clause}) FROM t", params))


@pytest.mark.parametrize("seed", [21, 22])
@pytest.mark.parametrize("partitioned", [True, False])
def test_quantile_window_matches_numpy_per_frame(conn, seed, partitioned):
    data = load(conn, seed)
    cases = [(7, 0.5), (7, 0.95), (1, 0.3), (2, 0.5), (3, 0.25), (4, 0.8), (5, 0.1), (6, 0.9), (8, 0.6), (9, 0.4), (7, 0.0), (7, 1.0)]
    checked = 0
    for clause, unit, lo, hi, exclude, desc in FRAMES:
        per_row = frames(data, unit, lo, hi, exclude, desc, partitioned)
        for ty, p in cases:
            got = window(conn, "quantile(x, ?, ?)", clause, partitioned, (p, ty))
            for rid, frame in per_row.items():
                xs = [r["x"] for r in frame if r["x"] is not None]
                if not xs:
                    assert got[rid] is None, (clause, rid)
                    continue
                want = float(np.quantile(np.array(xs), p, method=METHODS[ty - 1]))
                assert close(got[rid], want), (clause, ty, p, rid, got[rid], want)
                checked += 1
    assert checked > 10_000


@pytest.mark.parametrize("seed", [23])
@pytest.mark.parametrize("partitioned", [True, False])
def test_ecdf_window_matches_numpy_and_fsum_per_frame(conn, seed, partitioned):
    data = load(conn, seed)
    for clause, unit, lo, hi, exclude, desc in FRAMES:
        per_row = frames(data, unit, lo, hi, exclude, desc, partitioned)
        for t in [-1.5, 0.0, 2.0]:
            plain = window(conn, "ecdf(x, ?)", clause, partitioned, (t,))
            weighted = window(conn, "ecdf(x, ?, w)", clause, partitioned, (t,))
            for rid, frame in per_row.items():
                xs = np.array([r["x"] for r in frame if r["x"] is not None])
                want = float(np.mean(xs <= t)) if len(xs) else None
                assert plain[rid] == want, (clause, t, rid, plain[rid], want)
                pairs = [(r["x"], r["w"]) for r in frame if r["x"] is not None and r["w"] is not None]
                total = math.fsum(w for _, w in pairs)
                want_w = math.fsum(w for x, w in pairs if x <= t) / total if total > 0 else None
                assert weighted[rid] == want_w, (clause, t, rid, weighted[rid], want_w)


def test_rolling_share_and_percentile_in_the_trailer_scenario(conn):
    # A trailer's cargo temperature; the rolling 95th percentile of the last 12 readings
    # (an hour at five-minute intervals) and the share above 5 degC, checked against
    # numpy.quantile(last12, 0.95) (method "linear") and numpy.mean(last12 > 5).
    rng = np.random.default_rng(31)
    temps = np.round(3 + rng.normal(0, 0.8, size=200) + (rng.random(200) < 0.05) * 4, 1)
    conn.execute("CREATE TABLE readings(ts INTEGER, temp_c REAL)")
    conn.executemany("INSERT INTO readings VALUES (?, ?)", [(i * 300, float(v)) for i, v in enumerate(temps)])
    got = rows(
        conn,
        "SELECT quantile(temp_c, 0.95) OVER w, 1 - ecdf(temp_c, 5.0) OVER w FROM readings "
        "WINDOW w AS (ORDER BY ts ROWS BETWEEN 11 PRECEDING AND CURRENT ROW) ORDER BY ts",
    )
    for i, (q, above) in enumerate(got):
        last = temps[max(0, i - 11) : i + 1]
        assert close(q, float(np.quantile(last, 0.95))), (i, q)
        assert close(above, float(np.mean(last > 5.0)), 1e-15), (i, above)
