"""quantile_sketch, sketch_merge, sketch_quantile and sketch_cdf through the loadable
extension.

References:
- exact ranks by enumeration: numpy.sort(x) and numpy.searchsorted(sorted, t,
  side="right") (count of values <= t) / side="left" (count < t), numpy 2.4.6. The stated
  guarantee is a rank error of at most epsilon * n (default epsilon 0.005).
- docs/sketch-format.md: `read_sketch` below is written from that page alone; its
  cdf and quantile must equal the extension's exactly, and its FNV-1a implementation is
  checked against the published test vector FNV-1a-64("a") = 0xaf63dc4c8601ec8c
  (from the FNV reference test suite by Fowler, Noll and Vo).
"""

import struct

import numpy as np
import pytest

from conftest import expect_error, rows, scalar

EPS = 0.005


def fnv1a64(data):
    h = 0xCBF29CE484222325
    for b in data:
        h = ((h ^ b) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
    return h


def read_sketch(blob):
    """A reader of the documented layout, independent of the Rust codec."""
    assert blob[:4] == b"OGQS" and blob[4] == 1 and blob[5] == 0
    (levels,) = struct.unpack_from("<H", blob, 6)
    k, reserved, n, lo, hi, s, rng = struct.unpack_from("<IIQdddQ", blob, 8)
    assert reserved == 0
    lens = struct.unpack_from(f"<{levels}I", blob, 56)
    m = sum(lens)
    assert len(blob) == 64 + 4 * levels + 8 * m
    assert struct.unpack_from("<Q", blob, len(blob) - 8)[0] == fnv1a64(blob[:-8])
    values = struct.unpack_from(f"<{m}d", blob, 56 + 4 * levels)
    out, at = [], 0
    for h, length in enumerate(lens):
        out.append(values[at : at + length])
        at += length
    assert sum(len(l) << h for h, l in enumerate(out)) == n
    return dict(k=k, n=n, min=lo, max=hi, S=s, levels=out)


def doc_cdf(sk, t):
    return sum(sum(1 for v in level if v <= t) << h for h, level in enumerate(sk["levels"])) / sk["n"]


def doc_quantile(sk, p):
    if p == 0:
        return sk["min"]
    if p == 1:
        return sk["max"]
    pairs = sorted((v, 1 << h) for h, level in enumerate(sk["levels"]) for v in level)
    acc = 0
    for v, w in pairs:
        acc += w
        if acc >= p * sk["n"]:
            return v
    return sk["max"]


def stream(kind, n, rng):
    if kind == "uniform":
        return rng.uniform(0, 100, n)
    if kind == "normal":
        return rng.normal(20, 5, n)
    if kind == "lognormal":
        return rng.lognormal(0, 1, n)
    if kind == "tied":
        return rng.integers(0, 5, n).astype(float)
    if kind == "sorted":
        return np.arange(n) * 0.25
    return np.arange(n)[::-1] * 0.25


def load(conn, xs, shards=1):
    conn.execute("CREATE TABLE t(shard INTEGER, x REAL)")
    with conn:
        conn.executemany("INSERT INTO t VALUES (?, ?)", [(i % shards, float(v)) for i, v in enumerate(xs)])


def check_against_exact(conn, blob, xs, eps):
    srt = np.sort(xs)
    n = len(srt)
    ts = np.quantile(srt, np.linspace(0, 1, 101))
    for t in ts:
        got = scalar(conn, "SELECT sketch_cdf(?, ?)", (blob, float(t)))
        exact = np.searchsorted(srt, t, side="right")
        assert abs(got * n - exact) <= eps * n, (t, got, exact / n)
    for p in np.linspace(0, 1, 101):
        q = scalar(conn, "SELECT sketch_quantile(?, ?)", (blob, float(p)))
        below = np.searchsorted(srt, q, side="left")
        at_or_below = np.searchsorted(srt, q, side="right")
        assert below <= p * n + eps * n and at_or_below >= p * n - eps * n, (p, q, below, at_or_below)


@pytest.mark.parametrize("kind", ["uniform", "normal", "lognormal", "tied", "sorted", "reverse"])
def test_sketch_within_stated_bound_and_documented_reader_agrees(conn, kind):
    rng = np.random.default_rng(41)
    xs = stream(kind, 60_000, rng)
    load(conn, xs)
    blob = scalar(conn, "SELECT quantile_sketch(x) FROM t")
    check_against_exact(conn, blob, xs, EPS)
    sk = read_sketch(blob)
    assert sk["n"] == len(xs) and sk["k"] == 2635
    assert (sk["min"], sk["max"]) == (float(xs.min()), float(xs.max()))
    for t in np.quantile(xs, [0.01, 0.3, 0.5, 0.77, 0.99]):
        assert doc_cdf(sk, t) == scalar(conn, "SELECT sketch_cdf(?, ?)", (blob, float(t)))
    for p in [0.0, 0.01, 0.5, 0.9, 0.999, 1.0]:
        assert doc_quantile(sk, p) == scalar(conn, "SELECT sketch_quantile(?, ?)", (blob, p))


def test_merge_of_64_shards_keeps_the_bound(conn):
    rng = np.random.default_rng(42)
    xs = rng.lognormal(1, 0.7, 150_000)
    load(conn, xs, shards=64)
    merged = scalar(conn, "SELECT sketch_merge(s) FROM (SELECT quantile_sketch(x) AS s FROM t GROUP BY shard)")
    assert read_sketch(merged)["n"] == len(xs)
    check_against_exact(conn, merged, xs, EPS)
    # A coarser epsilon, deeper levels: still within its bound.
    merged = scalar(conn, "SELECT sketch_merge(s) FROM (SELECT quantile_sketch(x, 0.05) AS s FROM t GROUP BY shard)")
    check_against_exact(conn, merged, xs, 0.05)


def test_same_rows_same_bytes_and_nulls(conn):
    rng = np.random.default_rng(43)
    load(conn, rng.normal(0, 1, 20_000))
    a = scalar(conn, "SELECT quantile_sketch(x, 0.01) FROM (SELECT x FROM t ORDER BY rowid)")
    b = scalar(conn, "SELECT quantile_sketch(x, 0.01) FROM (SELECT x FROM t ORDER BY rowid)")
    assert a == b
    conn.execute("INSERT INTO t VALUES (0, NULL)")
    assert scalar(conn, "SELECT quantile_sketch(x, 0.01) FROM (SELECT x FROM t ORDER BY rowid)") == a
    assert scalar(conn, "SELECT quantile_sketch(x) FROM t WHERE 0") is None
    assert scalar(conn, "SELECT quantile_sketch(x, NULL) FROM t") is None
    assert scalar(conn, "SELECT sketch_merge(NULL) FROM t") is None
    assert scalar(conn, "SELECT sketch_quantile(NULL, 0.5)") is None
    assert scalar(conn, "SELECT sketch_quantile(?, NULL)", (a,)) is None
    assert scalar(conn, "SELECT sketch_cdf(?, NULL)", (a,)) is None
    # Exact while nothing was compacted: a small group is answered exactly.
    assert scalar(conn, "SELECT sketch_cdf(quantile_sketch(column1), 2) FROM (VALUES (1), (2), (2), (5))") == 0.75


def flipped(blob, at):
    b = bytearray(blob)
    b[at] ^= 0x10
    return bytes(b)


@pytest.mark.parametrize(
    "sql, params, message",
    [
        ("SELECT quantile_sketch(x, 0.7) FROM t", (), "quantile_sketch: epsilon must be greater than 0 and less than 0.5"),
        ("SELECT quantile_sketch(x, 0) FROM t", (), "quantile_sketch: epsilon must be greater than 0 and less than 0.5 (the rank error as a share of n, for example 0.005), got 0"),
        ("SELECT quantile_sketch(x, -0.1) FROM t", (), "quantile_sketch: epsilon must be greater than 0"),
        ("SELECT quantile_sketch(x, 1e-7) FROM t", (), "quantile_sketch: epsilon must be at least 0.00001"),
        ("SELECT quantile_sketch(x, x / 100.0) FROM t", (), "quantile_sketch: epsilon must be the same on every row of a group"),
        ("SELECT quantile_sketch('warm') FROM t", (), "quantile_sketch: x must be a number"),
        ("SELECT sketch_quantile(x'00', 0.5)", (), "sketch_quantile: the BLOB is not a valid quantile sketch (1 bytes is too short"),
        ("SELECT sketch_cdf('abc', 1)", (), "sketch_cdf: s must be a BLOB made by quantile_sketch or sketch_merge, got TEXT 'abc'"),
        ("SELECT sketch_merge(x) FROM t", (), "sketch_merge: s must be a BLOB made by quantile_sketch or sketch_merge, got 1"),
        ("SELECT sketch_quantile(quantile_sketch(x), 1.5) FROM t", (), "sketch_quantile: p must be between 0 and 1, got 1.5"),
        (
            "SELECT sketch_merge(s) FROM (SELECT quantile_sketch(x, 0.01) AS s FROM t UNION ALL SELECT quantile_sketch(x, 0.02) FROM t)",
            (),
            "sketch_merge: cannot merge sketches built with different parameters",
        ),
        ("SELECT sketch_cdf(?, 1)", "flip-value", "sketch_cdf: the BLOB is not a valid quantile sketch (its checksum does not match"),
        ("SELECT sketch_cdf(?, 1)", "cut", "the BLOB is not a valid quantile sketch"),
        ("SELECT sketch_cdf(?, 1)", "magic", "it does not start with the sketch marker OGQS"),
    ],
)
def test_bad_input_gives_named_errors(conn, sql, params, message):
    conn.execute("CREATE TABLE t(x)")
    conn.execute("INSERT INTO t VALUES (1), (2), (3)")
    if isinstance(params, str):
        blob = scalar(conn, "SELECT quantile_sketch(x) FROM t")
        params = ({"flip-value": flipped(blob, len(blob) - 12), "cut": blob[:-9], "magic": flipped(blob, 0)}[params],)
    expect_error(conn, sql, message, params)


def test_fnv_test_vector():
    # FNV-1a 64 of "a", from the FNV reference test vectors (Fowler, Noll and Vo).
    assert fnv1a64(b"a") == 0xAF63DC4C8601EC8C
