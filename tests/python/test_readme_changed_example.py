"""Runs the README's "Has it changed?" example on the invented demo fleet of
test_readme_dist_example.py (seed 7; one trailer, T04, runs 1.5 degC warm in week two), checks
that the SQL runs as printed, that the rows the README prints are the ones it gives, and that
the warm trailer, and only it, is flagged. The statistics themselves are checked against
scipy in test_dist_compare.py."""

import pathlib
import re

from conftest import rows
from test_readme_dist_example import example_blocks, invented_fleet

README = pathlib.Path(__file__).resolve().parents[2] / "README.md"


def section():
    text = README.read_text()
    return text.split("<!-- changed-example:start -->")[1].split("<!-- changed-example:end -->")[0]


def test_readme_changed_example_runs_and_prints_its_rows(conn):
    invented_fleet(conn)
    conn.execute(example_blocks()[0])  # the weekly and fleet tables
    (query,) = re.findall(r"```sql\n(.*?)```", section(), flags=re.S)
    out = rows(conn, query)
    printed = [[c.strip() for c in line.strip("|").split("|")]
               for line in section().splitlines() if line.startswith("| T")]
    assert printed == [[str(v) for v in r] for r in out]
    # The warm trailer is the one that changed (p below 0.001 by both tests, about 1.5 degC
    # of Wasserstein distance, the shift the generator adds); no other reaches p < 0.05.
    assert out[0][0] == "T04" and out[0][3] == "< 0.001" and out[0][4] == "<= 0.001"
    assert abs(out[0][5] - 1.5) < 0.05
    for trailer, _, _, ks_p, ad_p, moved in out[1:]:
        assert ks_p > 0.05 and moved < 0.1, trailer
        assert ad_p.startswith(">=") or float(ad_p) > 0.05, trailer
