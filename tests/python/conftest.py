"""Shared fixtures: a fresh apsw connection with the real loadable extension."""

import os
import pathlib

import apsw
import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
EXTENSION = pathlib.Path(
    os.environ.get("OGIVE_EXTENSION", ROOT / "ext" / "target" / "release" / "libogive.so")
)


@pytest.fixture(scope="session")
def extension_path():
    if not EXTENSION.exists():
        pytest.fail(
            f"{EXTENSION} is missing: build it with "
            "`cargo build --release --manifest-path ext/Cargo.toml`"
        )
    return str(EXTENSION)


@pytest.fixture()
def conn(extension_path):
    c = apsw.Connection(":memory:")
    c.enable_load_extension(True)
    c.load_extension(extension_path)
    yield c
    c.close()


def rows(conn, sql, params=()):
    return list(conn.execute(sql, params))


def scalar(conn, sql, params=()):
    out = rows(conn, sql, params)
    assert len(out) == 1 and len(out[0]) == 1, out
    return out[0][0]


def expect_error(conn, sql, message, params=()):
    """Runs `sql` and checks that it fails with an error containing `message`."""
    with pytest.raises(Exception) as err:
        rows(conn, sql, params)
    assert message in str(err.value), str(err.value)


def load_column(conn, table, values, groups=None, weights=None):
    """Creates `table(g, x, w)` and inserts the values in one transaction."""
    conn.execute(f"CREATE TABLE {table}(g INTEGER, x REAL, w REAL)")
    n = len(values)
    groups = groups if groups is not None else [0] * n
    weights = weights if weights is not None else [1.0] * n
    with conn:
        conn.executemany(
            f"INSERT INTO {table}(g, x, w) VALUES (?, ?, ?)",
            [
                (int(g), None if x is None else float(x), float(w))
                for g, x, w in zip(groups, values, weights)
            ],
        )
