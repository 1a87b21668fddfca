"""Runs the README's censored-readings example (invented lab assays with non-detects), checks
that the SQL runs as printed and gives the rows the README prints, and that its censored
medians are those of scipy 1.17.1's censored lognormal fit,
`scipy.stats.lognorm.fit(scipy.stats.CensoredData(uncensored=..., left=...), floc=0)`,
whose median is its scale."""

import pathlib
import re

import numpy as np
import scipy.stats as st

from conftest import rows

README = pathlib.Path(__file__).resolve().parents[2] / "README.md"


def section():
    text = README.read_text()
    return text.split("<!-- censored-example:start -->")[1].split("<!-- censored-example:end -->")[0]


def test_readme_censored_example_runs_and_prints_its_rows(conn):
    (query,) = re.findall(r"```sql\n(.*?)```", section(), flags=re.S)
    out = rows(conn, query)
    printed = [
        [c.strip() for c in line.strip("|").split("|")]
        for line in section().splitlines()
        if line.startswith("| well")
    ]
    assert printed == [[str(v) for v in r] for r in out]
    values = re.findall(r"\('(well [AB])', ([0-9.]+), (-?[01])\)", query)
    for site, *_, median_censored, _, _, _ in out:
        x = np.array([float(v) for s, v, _ in values if s == site])
        c = np.array([int(k) for s, _, k in values if s == site])
        fit = st.lognorm.fit(st.CensoredData(uncensored=x[c == 0], left=x[c == -1]), floc=0)
        # The README rounds to 2 decimals; scipy's optimiser stops near 1e-6 relative.
        assert abs(median_censored - fit[2]) < 0.005 + 1e-6, (site, median_censored, fit)
