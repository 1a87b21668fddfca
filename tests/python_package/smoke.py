"""Checks of the installed `ogive` package, one client per subcommand; run by smoke.sh.

    python smoke.py module sqlite3|apsw|pysqlite3   ogive.load into that module's connection
    python smoke.py pandas                          pandas.read_sql on a loaded sqlite3 connection
    python smoke.py errors                          TypeError, ExtensionLoadingUnavailable, SQL errors
    python smoke.py side-by-side [pysqlite3]        sqlite3 and apsw (and pysqlite3) connections in
                                                    one process, used in turns
    python smoke.py no-loading                      the real error of a sqlite3 without loading
    python smoke.py sqlite-version sqlite3|pysqlite3  prints that module's SQLite version
    python smoke.py free-port                       prints a free TCP port on 127.0.0.1
    python smoke.py datasette PORT SQLITE_VERSION   waits for datasette, checks a JSON query

Every check compares with a value worked out by hand from the data below and exits non-zero
(with the reason) when it differs.
"""

import json
import os
import socket
import sys
import time
import urllib.error
import urllib.parse
import urllib.request

# The data of every check: trailer a has 3.1, 4.2, 5.9 (median 4.2, the middle value);
# trailer b has 2.0, 6.5 (median (2.0 + 6.5) / 2 = 4.25, exact in binary).
ROWS = [("a", 3.1), ("a", 4.2), ("a", 5.9), ("b", 2.0), ("b", 6.5)]
MEDIANS = [("a", 4.2), ("b", 4.25)]
MEDIAN_SQL = "SELECT trailer, quantile(temp_c, 0.5) FROM readings GROUP BY trailer ORDER BY trailer"


def fail(message):
    print(f"FAIL: {message}", file=sys.stderr)
    sys.exit(1)


def expect(what, got, want):
    if got != want:
        fail(f"{what}: got {got!r}, want {want!r}")
    print(f"ok: {what} = {got!r}")


def check_installed():
    import ogive

    library = ogive.path()
    if not os.path.isabs(library) or os.path.basename(library) != "libogive.so":
        fail(f"ogive.path() = {library!r}: not an absolute path to libogive.so")
    if not library.startswith(sys.prefix):
        fail(f"ogive.path() = {library!r} is not inside this venv ({sys.prefix})")
    return ogive


def module(name):
    ogive = check_installed()
    if name == "sqlite3":
        import sqlite3

        conn = sqlite3.connect(":memory:")
    elif name == "pysqlite3":
        from pysqlite3 import dbapi2

        conn = dbapi2.connect(":memory:")
    elif name == "apsw":
        import apsw

        conn = apsw.Connection(":memory:")
    else:
        fail(f"unknown module {name}")
    if ogive.load(conn) is not conn:
        fail("ogive.load did not return its connection")
    expect(
        f"{name}: quantile(column1, 0.5) over 1, 2, 3",
        conn.execute("SELECT quantile(column1, 0.5) FROM (VALUES (1),(2),(3))").fetchall(),
        [(2.0,)],
    )
    conn.execute("CREATE TABLE readings (trailer TEXT, temp_c REAL)")
    conn.executemany("INSERT INTO readings VALUES (?, ?)", ROWS)
    expect(f"{name}: medians per trailer", list(conn.execute(MEDIAN_SQL).fetchall()), MEDIANS)
    # Loading is switched off again after ogive.load: SQL cannot load a library itself.
    try:
        conn.execute("SELECT load_extension('/nonexistent/libx')").fetchall()
    except Exception as e:  # each module has its own error class
        if "not authorized" not in str(e):
            fail(f"{name}: load_extension after ogive.load failed unexpectedly: {e}")
        print(f"ok: {name}: extension loading is off after ogive.load ({e})")
    else:
        fail(f"{name}: load_extension from SQL still works after ogive.load")


def side_by_side(extra):
    """sqlite3 and apsw (each with its own SQLite) in one process. The shipped file loaded
    by path into both is refused by the second library with a message saying what to do
    (one loaded copy serves one SQLite library; before ogive refused it, apsw's calls went
    to the first library's code and the process died of a segmentation fault); ogive.load
    gives each module its own copy, and connections of every module then answer in turns."""
    import sqlite3

    import apsw

    ogive = check_installed()
    first = sqlite3.connect(":memory:")
    first.enable_load_extension(True)
    first.load_extension(ogive.path())
    second = apsw.Connection(":memory:")
    second.enable_load_extension(True)
    try:
        second.load_extension(ogive.path())
    except apsw.ExtensionLoadingError as e:
        if "ogive is already loaded into another SQLite library in this process" not in str(e):
            fail(f"side-by-side: unclear refusal of a second library: {e}")
        print(f"ok: side-by-side: the shipped file in a second library is refused ({e})")
    else:
        fail("side-by-side: the shipped file loaded into a second SQLite library")
    conns = {"sqlite3": first, "apsw": ogive.load(apsw.Connection(":memory:"))}
    if extra == ["pysqlite3"]:
        from pysqlite3 import dbapi2

        conns["pysqlite3"] = ogive.load(dbapi2.connect(":memory:"))
    for round_ in range(3):
        for name, conn in conns.items():
            got = conn.execute(
                "SELECT quantile(column1, 0.5), ecdf(column1, 2) FROM (VALUES (1),(2),(3),(4))"
            ).fetchall()
            # median of 1..4 is 2.5; 2 of 4 values at or below 2
            expect(f"side-by-side round {round_}: {name}", [tuple(r) for r in got], [(2.5, 0.5)])
            try:
                conn.execute("SELECT quantile(column1, 'x') FROM (VALUES (1))").fetchall()
            except Exception as e:  # each module has its own error class
                if not str(e).startswith("quantile: p must be a number"):
                    fail(f"side-by-side: {name}: unclear error: {e}")
            else:
                fail(f"side-by-side: {name}: a TEXT p gave no error")


def pandas_check():
    import sqlite3
    import warnings

    import pandas

    ogive = check_installed()
    conn = ogive.load(sqlite3.connect(":memory:"))
    conn.execute("CREATE TABLE readings (trailer TEXT, temp_c REAL)")
    conn.executemany("INSERT INTO readings VALUES (?, ?)", ROWS)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # pandas warns about connections it does not support
        frame = pandas.read_sql(
            "SELECT trailer, quantile(temp_c, 0.5) AS median, ecdf(temp_c, 4.2) AS share "
            "FROM readings GROUP BY trailer ORDER BY trailer",
            conn,
        )
    expect("pandas: columns", list(frame.columns), ["trailer", "median", "share"])
    expect(
        "pandas: rows",
        [tuple(r) for r in frame.itertuples(index=False)],
        # share of a at or below 4.2: 2 of 3; of b: 1 of 2
        [("a", 4.2, 2 / 3), ("b", 4.25, 0.5)],
    )


def errors():
    import sqlite3

    ogive = check_installed()
    for bad in (object(), "fleet.db", None):
        try:
            ogive.load(bad)
        except TypeError as e:
            if not str(e).startswith("ogive.load: expected a connection of sqlite3"):
                fail(f"ogive.load({bad!r}): unclear TypeError: {e}")
            print(f"ok: ogive.load({bad!r}) -> TypeError: {e}")
        else:
            fail(f"ogive.load({bad!r}) did not raise TypeError")

    class WithoutLoading(sqlite3.Connection):
        # What a connection of a sqlite3 built without loading looks like to ogive.load.
        enable_load_extension = None

    try:
        ogive.load(sqlite3.connect(":memory:", factory=WithoutLoading))
    except ogive.ExtensionLoadingUnavailable as e:
        for word in ("without extension loading", "apsw", "pysqlite3-binary", ".load"):
            if word not in str(e):
                fail(f"ExtensionLoadingUnavailable does not mention {word!r}: {e}")
        print(f"ok: sqlite3 without enable_load_extension -> {e}")
    else:
        fail("ogive.load on a connection without enable_load_extension did not raise")

    conn = ogive.load(sqlite3.connect(":memory:"))
    try:
        conn.execute("SELECT quantile(column1, 1.5) FROM (VALUES (1))").fetchall()
    except sqlite3.OperationalError as e:
        expect("a bad argument's error", str(e), "quantile: p must be between 0 and 1, got 1.5")
    else:
        fail("quantile with p = 1.5 did not fail")


def no_loading():
    """Run by an interpreter whose sqlite3 truly lacks enable_load_extension."""
    import sqlite3

    import ogive

    if hasattr(sqlite3.Connection, "enable_load_extension"):
        fail(f"{sys.executable}: this sqlite3 can load extensions; nothing to check")
    try:
        ogive.load(sqlite3.connect(":memory:"))
    except ogive.ExtensionLoadingUnavailable as e:
        print(f"ok: {sys.executable} (sqlite3 without loading) -> {e}")
    else:
        fail("ogive.load did not raise ExtensionLoadingUnavailable")


def sqlite_version(name):
    if name == "pysqlite3":
        from pysqlite3 import dbapi2 as mod
    else:
        import sqlite3 as mod
    print(mod.sqlite_version)


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        print(s.getsockname()[1])


def get_json(url, timeout=5):
    with urllib.request.urlopen(url, timeout=timeout) as response:
        return json.load(response)


def datasette(port, want_version):
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            versions = get_json(base + "/-/versions.json", timeout=2)
            break
        except (urllib.error.URLError, ConnectionError, OSError):
            if time.monotonic() > deadline:
                fail(f"datasette did not answer on {base} within 60 s")
            time.sleep(0.25)
    expect("datasette: the SQLite it runs on", versions["sqlite"]["version"], want_version)
    query = urllib.parse.urlencode({"sql": MEDIAN_SQL, "_shape": "array"})
    rows = get_json(f"{base}/db.json?{query}")
    expect(
        "datasette: /db.json medians per trailer",
        rows,
        [{"trailer": t, "quantile(temp_c, 0.5)": m} for t, m in MEDIANS],
    )
    query = urllib.parse.urlencode({"sql": "SELECT quantile(temp_c, 1.5) FROM readings"})
    try:
        get_json(f"{base}/db.json?{query}")
    except urllib.error.HTTPError as e:
        body = json.load(e)
        expect("datasette: a bad argument's error", body["error"],
               "quantile: p must be between 0 and 1, got 1.5")
    else:
        fail("datasette answered quantile with p = 1.5 without an error")


def main(argv):
    if not argv:
        fail(__doc__)
    command, rest = argv[0], argv[1:]
    if command == "module" and len(rest) == 1:
        module(rest[0])
    elif command == "pandas":
        pandas_check()
    elif command == "side-by-side" and len(rest) <= 1:
        side_by_side(rest)
    elif command == "errors":
        errors()
    elif command == "no-loading":
        no_loading()
    elif command == "sqlite-version" and len(rest) == 1:
        sqlite_version(rest[0])
    elif command == "free-port":
        free_port()
    elif command == "datasette" and len(rest) == 2:
        datasette(int(rest[0]), rest[1])
    else:
        fail(f"unknown command {argv!r}\n{__doc__}")


if __name__ == "__main__":
    main(sys.argv[1:])
