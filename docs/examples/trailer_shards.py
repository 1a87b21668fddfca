"""Worked example for docs/scale.md: per-day SQLite files, per-shard sketch BLOBs, merged
centrally. Invented data: the refrigerated-trailer demo scenario (a food distributor's
trailers log cargo temperature every five minutes), generated here from a fixed seed.

    cargo build --release --manifest-path ext/Cargo.toml
    .venv/bin/python docs/examples/trailer_shards.py            # 7 day files in a temp dir

Each day's file summarises itself (one quantile_sketch per trailer), the BLOBs are
copied into a central fleet file, and the fleet answers per route and for the whole fleet
by merging them. For comparison the script also computes the exact answers from every raw
row and reports how far apart the two are, in ranks (the sketch promises at most 0.5% of
n).
"""

import os
import pathlib
import sys
import tempfile

import apsw
import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
EXTENSION = os.environ.get("OGIVE_EXTENSION", str(ROOT / "ext" / "target" / "release" / "libogive.so"))
ROUTES = ["north", "coast", "valley", "city"]
TRAILERS = 120
READINGS_PER_DAY = 288  # every five minutes


def connect(path):
    c = apsw.Connection(str(path))
    c.enable_load_extension(True)
    c.load_extension(EXTENSION)
    return c


def make_day(path, day, rng):
    """One day's readings for every trailer: steady cooling near 3 degC, door-open
    excursions, and one route that runs warmer."""
    c = connect(path)
    c.execute("CREATE TABLE readings(trailer TEXT, route TEXT, ts INTEGER, temp_c REAL)")
    rows = []
    for t in range(TRAILERS):
        route = ROUTES[t % len(ROUTES)]
        offset = 0.4 if route == "valley" else 0.0
        steady = 3.0 + offset + rng.normal(0, 0.6, READINGS_PER_DAY)
        door = (rng.random(READINGS_PER_DAY) < 0.02) * rng.uniform(3, 8, READINGS_PER_DAY)
        temps = np.round(steady + door, 1)
        base = day * 86_400
        rows += [(f"T{t:03d}", route, base + 300 * i, float(v)) for i, v in enumerate(temps)]
    with c:
        c.executemany("INSERT INTO readings VALUES (?, ?, ?, ?)", rows)
    c.close()


# 1. In each day's file: one sketch per trailer (the shard's state).
SHARD_SQL = """
CREATE TABLE trailer_day_sketch AS
SELECT trailer, route, count(temp_c) AS n, quantile_sketch(temp_c) AS sketch
FROM readings GROUP BY trailer, route
"""

# 2. In the fleet file: collect the BLOBs shipped from every day.
COLLECT_SQL = """
INSERT INTO day_sketches(day, trailer, route, n, sketch)
SELECT ?, trailer, route, n, sketch FROM day.trailer_day_sketch
"""

# 3. Merge: per route, and for the whole fleet.
ROUTE_SQL = """
SELECT route, n,
       sketch_quantile(merged, 0.95) AS p95,
       1 - sketch_cdf(merged, 5.0) AS share_above_5
FROM (SELECT route, sum(n) AS n, sketch_merge(sketch) AS merged
      FROM day_sketches GROUP BY route)
ORDER BY route
"""

FLEET_SQL = """
SELECT sketch_quantile(merged, 0.95), 1 - sketch_cdf(merged, 5.0), length(merged)
FROM (SELECT sketch_merge(sketch) AS merged FROM day_sketches)
"""


def run(folder, days=7, out=print):
    folder = pathlib.Path(folder)
    rng = np.random.default_rng(20261202)
    day_files = []
    for day in range(days):
        path = folder / f"day{day + 1}.db"
        make_day(path, day, rng)
        c = connect(path)
        c.execute(SHARD_SQL)
        c.close()
        day_files.append(path)

    fleet = connect(folder / "fleet.db")
    fleet.execute("CREATE TABLE day_sketches(day INTEGER, trailer TEXT, route TEXT, n INTEGER, sketch BLOB)")
    for day, path in enumerate(day_files, start=1):
        fleet.execute("ATTACH ? AS day", (str(path),))
        with fleet:
            fleet.execute(COLLECT_SQL, (day,))
        fleet.execute("DETACH day")
    shipped = fleet.execute("SELECT count(*), sum(length(sketch)) FROM day_sketches").fetchone()
    route_rows = list(fleet.execute(ROUTE_SQL))
    fleet_p95, fleet_above, fleet_bytes = fleet.execute(FLEET_SQL).fetchone()

    # The exact answers, from every raw row (only possible here because the raw files
    # are at hand; in production they would not need to be).
    temps, routes = [], []
    for path in day_files:
        c = connect(path)
        for route, t in c.execute("SELECT route, temp_c FROM readings"):
            routes.append(route)
            temps.append(t)
        c.close()
    temps, routes = np.array(temps), np.array(routes)

    def rank_error(xs, q, p):
        """Distance in ranks, as a share of n, between q and the exact p-quantile position
        (0 when q's tied ranks cover p * n)."""
        srt = np.sort(xs)
        n = len(srt)
        lo, hi = np.searchsorted(srt, q, "left"), np.searchsorted(srt, q, "right")
        target = p * n
        return max(0.0, lo - target, target - hi) / n

    report = []
    out(f"shipped {shipped[0]} sketch BLOBs, {shipped[1]:,} bytes in all, for {len(temps):,} readings")
    out("")
    out("| route | readings | p95 from merged sketches | exact p95 (type 1) | rank error | share > 5 degC, sketch | exact |")
    out("|---|---|---|---|---|---|---|")
    for route, n, p95, above in route_rows:
        xs = temps[routes == route]
        exact = float(np.quantile(xs, 0.95, method="inverted_cdf"))
        err = rank_error(xs, p95, 0.95)
        exact_above = float(np.mean(xs > 5.0))
        report.append((route, n, p95, exact, err, above, exact_above))
        out(f"| {route} | {n:,} | {p95} | {exact} | {err:.4%} | {above:.4f} | {exact_above:.4f} |")
    exact = float(np.quantile(temps, 0.95, method="inverted_cdf"))
    err = rank_error(temps, fleet_p95, 0.95)
    exact_above = float(np.mean(temps > 5.0))
    report.append(("fleet", len(temps), fleet_p95, exact, err, fleet_above, exact_above))
    out(f"| whole fleet | {len(temps):,} | {fleet_p95} | {exact} | {err:.4%} | {fleet_above:.4f} | {exact_above:.4f} |")
    out("")
    out(f"the fleet-wide merged sketch is {fleet_bytes:,} bytes")
    fleet.close()
    return report


if __name__ == "__main__":
    days = int(sys.argv[1]) if len(sys.argv) > 1 else 7
    with tempfile.TemporaryDirectory() as d:
        run(d, days)
