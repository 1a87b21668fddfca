"""Re-derives the Taylor coefficients of Temme's c_0..c_3 in src/stats/incomplete_gamma.rs.

Exact rational arithmetic (Python's fractions), independent of the Rust code: reverse the
series eta^2 / 2 = mu - ln(1 + mu), then c_0 = 1/mu - 1/eta and
c_k = (1/eta) c_{k-1}'(eta) + (-1)^k g_k / mu with the Stirling coefficients g_k of
Gamma*(a) (1/12, 1/288, -139/51840; Abramowitz and Stegun 6.1.37). Each c_k must come out
regular at eta = 0 (no negative powers), which checks the recursion's signs, and the
coefficients in the Rust source must equal the derived ones to 1 ulp (rel. 2.3e-16).
"""

import pathlib
import re
from fractions import Fraction as F

ROOT = pathlib.Path(__file__).resolve().parents[2]
N = 40


def mul(a, b):
    r = [F(0)] * N
    for i, x in enumerate(a):
        if x:
            for j, y in enumerate(b[: N - i]):
                r[i + j] += x * y
    return r


def compose(a, b):
    r, p = [F(0)] * N, [F(1)] + [F(0)] * (N - 1)
    for k in range(N):
        if k:
            p = mul(p, b)
        if a[k]:
            r = [r[i] + a[k] * p[i] for i in range(N)]
    return r


def derive():
    inner = [F(2 * (-1) ** k, k + 2) for k in range(N)]
    g = [F(0)] * N
    g[0] = F(1)
    for k in range(1, N):
        g[k] = (inner[k] - sum(g[i] * g[k - i] for i in range(1, k))) / 2
    eta_of_mu = [F(0)] + g[: N - 1]
    ident = [F(0), F(1)] + [F(0)] * (N - 2)
    mu = ident[:]
    for _ in range(N):
        e = compose(eta_of_mu, mu)
        mu = [mu[i] - (e[i] - ident[i]) for i in range(N)]
    ratio = mu[1:] + [F(0)]
    inv = [F(0)] * N
    inv[0] = 1 / ratio[0]
    for k in range(1, N):
        inv[k] = -sum(ratio[i] * inv[k - i] for i in range(1, k + 1)) / ratio[0]
    m = N - 4
    inv_mu = {i - 1: c for i, c in enumerate(inv[:m]) if c}

    def add(*ls):
        r = {}
        for l in ls:
            for k, v in l.items():
                r[k] = r.get(k, F(0)) + v
        return {k: v for k, v in r.items() if v}

    def scale(l, s):
        return {k: v * s for k, v in l.items()}

    def d_over_eta(l):
        return {k - 2: v * k for k, v in l.items() if k != 0}

    gam = [F(1), F(1, 12), F(1, 288), F(-139, 51840)]
    cs = [add(inv_mu, {-1: F(-1)})]
    for k in range(1, 4):
        cs.append(add(d_over_eta(cs[-1]), scale(inv_mu, (-1) ** k * gam[k])))
    for c in cs:
        assert min(c) >= 0, "a c_k with a pole at eta = 0"
    return [[float(c.get(k, F(0))) for k in range(25)] for c in cs]


def test_rust_coefficients_equal_the_derivation():
    text = (ROOT / "src" / "stats" / "incomplete_gamma.rs").read_text()
    for k, want in enumerate(derive()):
        block = re.search(rf"const C{k}: \[f64; 25\] = \[(.*?)\];", text, re.S).group(1)
        got = [float(v) for v in re.findall(r"-?[0-9.]+(?:e-?[0-9]+)?", block)]
        assert len(got) == 25
        for i, (g, w) in enumerate(zip(got, want)):
            assert abs(g - w) <= 2.3e-16 * abs(w), (k, i, g, w)
