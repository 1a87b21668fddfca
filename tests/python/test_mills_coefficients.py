"""Re-derives the coefficients of Mills' ratio in src/stats/mixture/binned.rs.

R(t) = Q(t) / phi(t) (Q the upper tail, phi the density of the standard normal) is
computed to 60 digits with Python's decimal, independent of the Rust code: below
x = t / sqrt 2 = 3 from the power series erf(x) = 2 / sqrt(pi) sum (-1)^n x^(2n+1) /
(n! (2n+1)) (Abramowitz and Stegun 7.1.5), R = (1 - erf x) sqrt(pi / 2) exp(x^2); above
from Laplace's continued fraction erfc(x) = exp(-x^2) / sqrt(pi) / (x + (1/2) / (x +
1 / (x + (3/2) / (x + ...)))) (A&S 7.1.14), R = 1 / (sqrt 2 F). pi comes from Machin's
formula. Each half of t (below and above 5) is interpolated at 40 Chebyshev nodes in
u (u = (3t - 5) / (t + 5) and (t - 15) / (t + 5)), truncated to degree 17 and written in
powers of u; the Rust source must hold those coefficients to 1 ulp (rel. 2.3e-16), the
first coefficient left out must be below 7e-19, and the truncated polynomials must give
R to 3e-17 relative on t in [0, 40].
"""

import pathlib
import re
from decimal import Decimal as D
from decimal import getcontext

getcontext().prec = 60
ROOT = pathlib.Path(__file__).resolve().parents[2]
NODES, TERMS, SPLIT = 40, 18, D(5)


def atan_inv(m):
    x = D(1) / m
    term, s, k = x, x, 1
    while abs(term) > D(10) ** -70:
        term *= -x * x
        k += 2
        s += term / k
    return s


PI = 16 * atan_inv(5) - 4 * atan_inv(239)


def cos(a):
    a = a % (2 * PI)
    s, term, k = D(1), D(1), 0
    while abs(term) > D(10) ** -70:
        term *= -a * a / ((k + 1) * (k + 2))
        k += 2
        s += term
    return s


def series(x):
    s, term, n = D(0), x, 0
    while abs(term) > D(10) ** -75:
        s += term / (2 * n + 1)
        n += 1
        term *= -x * x / n
    return (1 - 2 / PI.sqrt() * s) * (PI / 2).sqrt() * (x * x).exp()


def fraction(x, depth=2000):
    f = x
    for k in range(depth, 0, -1):
        f = x + D(k) / 2 / f
    return 1 / f / D(2).sqrt()


def mills(t):
    x = D(t) / D(2).sqrt()
    return series(x) if x <= 3 else fraction(x)


def t_of(u, half):
    # u = (3t - 5) / (t + 5) below the split, (t - 15) / (t + 5) above.
    return 5 * (1 + u) / (3 - u) if half == "low" else 5 * (3 + u) / (1 - u)


def chebyshev(half):
    nodes = [cos(PI * (j + D(1) / 2) / NODES) for j in range(NODES)]
    f = [mills(t_of(u, half)) for u in nodes]
    a = []
    for k in range(NODES):
        c = 2 * sum(v * cos(PI * k * (j + D(1) / 2) / NODES) for j, v in enumerate(f)) / NODES
        a.append(c / 2 if k == 0 else c)
    return a


def powers(a):
    t = [[1], [0, 1]]
    for k in range(2, len(a)):
        nxt = [0] * (k + 1)
        for i, v in enumerate(t[k - 1]):
            nxt[i + 1] += 2 * v
        for i, v in enumerate(t[k - 2]):
            nxt[i] -= v
        t.append(nxt)
    p = [D(0)] * len(a)
    for k, ak in enumerate(a):
        for i, v in enumerate(t[k]):
            p[i] += ak * v
    return p


def rust_array(name):
    src = (ROOT / "src/stats/mixture/binned.rs").read_text()
    body = re.search(rf"const {name}: \[f64; {TERMS}\] = \[(.*?)\];", src, re.S).group(1)
    return [float(v) for v in re.findall(r"-?[0-9.]+(?:e-?[0-9]+)?", body)]


def test_the_two_ways_to_r_agree_where_they_meet():
    # The series and the continued fraction at x = 3 (the switch) and beyond, to 1e-40
    # (the series loses digits to cancellation as x grows: 1e-52 at 3, 1e-41 at 5).
    for x in (D(3), D("3.5"), D(5)):
        assert abs(fraction(x) / series(x) - 1) < D(10) ** -40


def test_rust_coefficients_are_the_derived_ones():
    for half, name in (("low", "MILLS_LOW"), ("high", "MILLS_HIGH")):
        a = chebyshev(half)
        assert max(abs(v) for v in a[TERMS:]) < D("7e-19"), half
        p = powers(a[:TERMS])
        rust = rust_array(name)
        assert len(rust) == TERMS
        for mine, theirs in zip(rust, p):
            assert abs(D(mine) - theirs) <= D("2.3e-16") * abs(theirs), (half, mine, theirs)
        # The truncated polynomial (exact coefficients, decimal arithmetic) against R.
        ts = [D(i) / 4 for i in range(0, 20)] if half == "low" else [5 + D(i) * 7 / 4 for i in range(0, 21)]
        for t in ts:
            u = (3 * t - 5) / (t + 5) if half == "low" else (t - 15) / (t + 5)
            r = sum(c * u**k for k, c in enumerate(p))
            assert abs(r / mills(t) - 1) < D("3e-17"), (half, t)
