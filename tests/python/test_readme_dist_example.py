"""Runs the README's worked example ("Distributions as values") on invented demo data: a
seeded fleet of six trailers over two weeks, one of which runs warm in the second week.
Checks that the SQL runs as printed, that the merged fleet value equals dist_empirical over
all of the week's readings (bit for bit), and that the warm trailer is the one flagged."""

import pathlib
import re

import numpy as np

from conftest import rows, scalar

README = pathlib.Path(__file__).resolve().parents[2] / "README.md"


def example_blocks():
    text = README.read_text()
    section = text.split("<!-- dist-example:start -->")[1].split("<!-- dist-example:end -->")[0]
    return re.findall(r"```sql\n(.*?)```", section, flags=re.S)


def printed_rows():
    """The result rows the README prints under the example."""
    text = README.read_text().split("<!-- dist-example:start -->")[1]
    table = text.split("| trailer | week |")[1].split("\n\n")[0]
    lines = [l for l in table.splitlines() if l.startswith("| T")]
    return [[cell.strip() for cell in l.strip("|").split("|")] for l in lines]


def invented_fleet(conn):
    """Invented demo data (seed 7): readings every five minutes for two weeks."""
    rng = np.random.default_rng(7)
    conn.execute("CREATE TABLE readings(trailer TEXT, ts TEXT, temp_c REAL)")
    start = np.datetime64("2026-03-02T00:00")
    minutes = np.arange(0, 14 * 24 * 60, 5)
    data = []
    for k in range(6):
        trailer = f"T{k + 1:02d}"
        temps = rng.normal(3.0, 0.7, len(minutes))
        # Door-open excursions: short warm spikes.
        temps[rng.random(len(minutes)) < 0.01] += rng.uniform(2, 6)
        if trailer == "T04":
            temps[minutes >= 7 * 24 * 60] += 1.5  # a failing unit in week two
        stamps = (start + minutes.astype("timedelta64[m]")).astype(str)
        data += [(trailer, str(t).replace("T", " "), round(float(v), 2)) for t, v in zip(stamps, temps)]
    with conn:
        conn.executemany("INSERT INTO readings VALUES (?, ?, ?)", data)


def test_readme_example_runs_and_flags_the_warm_trailer(conn):
    invented_fleet(conn)
    build, compare, plots = example_blocks()
    conn.execute(build)
    weeks = [w for (w,) in rows(conn, "SELECT DISTINCT week FROM weekly ORDER BY week")]
    assert len(weeks) == 2
    for week in weeks:
        merged = scalar(conn, "SELECT d FROM fleet WHERE week = ?", (week,))
        direct = scalar(
            conn,
            "SELECT dist_empirical(temp_c) FROM readings WHERE strftime('%Y-%W', ts) = ?",
            (week,),
        )
        assert merged == direct
    out = rows(conn, compare)
    # Week two against week one's fleet: the warm trailer, and only it, drifts.
    assert len(out) == 6 and {r[1] for r in out} == {weeks[1]}
    assert [t for t, *_, drifts in out if drifts == 1] == ["T04"]
    assert out[0][0] == "T04" and out[0][5] == max(r[5] for r in out)
    # The rows the README prints are the ones this data gives.
    printed = printed_rows()
    assert printed and printed == [[str(v) for v in r] for r in out[: len(printed)]]
    for statement in [s for s in plots.split(";") if s.strip()]:
        assert rows(conn, statement), statement
