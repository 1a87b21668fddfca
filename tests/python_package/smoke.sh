#!/usr/bin/env bash
# Smoke test of the Python package (python/): builds the wheel (cargo builds libogive.so in
# release), installs it into a fresh venv of Debian's python3 with the pinned clients of
# requirements.txt, and loads the extension through each of them: sqlite3, apsw, pandas
# read_sql, the sqlite-utils CLI and datasette (--load-extension), then pysqlite3-binary and,
# because sqlite-utils and datasette prefer pysqlite3 once it is installed, those two again.
#
#   bash tests/python_package/smoke.sh
#
# OGIVE_SMOKE_PYTHON picks the interpreter (default /usr/bin/python3, else python3); its
# sqlite3 must be able to load extensions. OGIVE_SMOKE_TIMEOUT bounds the whole run in
# seconds (default 1200). Needs network access to PyPI; leaves nothing behind.
set -euo pipefail
cd "$(dirname "$0")/../.."
ROOT=$PWD
HERE=$ROOT/tests/python_package

if [ -z "${OGIVE_SMOKE_BOUNDED:-}" ]; then
    export OGIVE_SMOKE_BOUNDED=1
    exec timeout -k 10 "${OGIVE_SMOKE_TIMEOUT:-1200}" bash "$HERE/smoke.sh" "$@"
fi

if [ -n "${OGIVE_SMOKE_PYTHON:-}" ]; then
    PY=$OGIVE_SMOKE_PYTHON
elif [ -x /usr/bin/python3 ]; then
    PY=/usr/bin/python3
else
    PY=python3
fi
if ! "$PY" -c 'import sqlite3, sys; sys.exit(not hasattr(sqlite3.Connection, "enable_load_extension"))'; then
    echo "smoke: $PY's sqlite3 cannot load extensions; set OGIVE_SMOKE_PYTHON to one that can (Debian's /usr/bin/python3 does)" >&2
    exit 1
fi

WORK=$(mktemp -d)
DATASETTE_PID=""
cleanup() {
    if [ -n "$DATASETTE_PID" ]; then
        kill "$DATASETTE_PID" 2>/dev/null || true
        wait "$DATASETTE_PID" 2>/dev/null || true
    fi
    rm -rf "$WORK"
}
trap cleanup EXIT
trap 'exit 143' TERM    # the outer timeout's signal: exit through cleanup
trap 'exit 130' INT

VENV=$WORK/venv
echo "== fresh venv: $PY ($("$PY" --version), sqlite3 $("$PY" -c 'import sqlite3; print(sqlite3.sqlite_version)'))"
"$PY" -m venv "$VENV"
V=$VENV/bin
PIP=("$V/python" -m pip --disable-pip-version-check)

echo "== building the wheel: pip wheel ./python (runs cargo build --release on ext/)"
"${PIP[@]}" wheel --quiet --no-deps ./python -w "$WORK/wheels"
WHEEL=$(ls "$WORK"/wheels/ogive-*.whl)
echo "built $(basename "$WHEEL")"
case "$(basename "$WHEEL")" in
    *-py3-none-linux_*.whl | *-py3-none-macosx_*.whl | *-py3-none-win_*.whl) ;;
    *) echo "smoke: the wheel is not tagged platform-specific: $WHEEL" >&2; exit 1 ;;
esac
"$V/python" -c 'import sys, zipfile; sys.exit("ogive/libogive.so" not in zipfile.ZipFile(sys.argv[1]).namelist())' "$WHEEL" \
    || { echo "smoke: the wheel holds no ogive/libogive.so" >&2; exit 1; }

echo "== installing the wheel and the pinned clients (requirements.txt)"
"${PIP[@]}" install --quiet "$WHEEL" -r "$HERE/requirements.txt"

cd "$WORK"    # so that nothing from the checkout shadows the installed package
SMOKE=("$V/python" "$HERE/smoke.py")
EXT=$("$V/python" -c 'import ogive; print(ogive.path())')
echo "ogive.path() = $EXT"

echo "== sqlite3, apsw, pandas, errors"
"${SMOKE[@]}" module sqlite3
"${SMOKE[@]}" module apsw
"${SMOKE[@]}" pandas
"${SMOKE[@]}" errors
"${SMOKE[@]}" side-by-side

# Makes db.sqlite with the readings every check expects (see smoke.py).
"$V/sqlite-utils" insert db.sqlite readings - --csv <<'EOF'
trailer,temp_c
a,3.1
a,4.2
a,5.9
b,2.0
b,6.5
EOF

# sqlite-utils CLI: the medians per trailer and the SQLite it ran on.
check_sqlite_utils() {
    local want_version=$1 got
    got=$("$V/sqlite-utils" query db.sqlite \
        "select trailer, quantile(temp_c, 0.5) as median, sqlite_version() as v from readings group by trailer order by trailer" \
        --nl --load-extension "$EXT")
    local want
    want=$(printf '{"trailer": "a", "median": 4.2, "v": "%s"}\n{"trailer": "b", "median": 4.25, "v": "%s"}' \
        "$want_version" "$want_version")
    if [ "$got" != "$want" ]; then
        printf 'FAIL: sqlite-utils query --load-extension:\n got: %s\nwant: %s\n' "$got" "$want" >&2
        exit 1
    fi
    echo "ok: sqlite-utils query --load-extension (SQLite $want_version): $got" | tr '\n' ' '
    echo
}

# datasette on 127.0.0.1 and a free port, bounded by timeout, always stopped.
check_datasette() {
    local want_version=$1 port
    port=$("${SMOKE[@]}" free-port)
    timeout 120 "$V/datasette" serve db.sqlite -h 127.0.0.1 -p "$port" \
        --load-extension "$EXT" >"$WORK/datasette.log" 2>&1 &
    DATASETTE_PID=$!
    if ! "${SMOKE[@]}" datasette "$port" "$want_version"; then
        echo "datasette's log:" >&2
        cat "$WORK/datasette.log" >&2
        exit 1
    fi
    kill "$DATASETTE_PID"
    wait "$DATASETTE_PID" 2>/dev/null || true
    DATASETTE_PID=""
    echo "ok: datasette stopped"
}

STDLIB_VERSION=$("${SMOKE[@]}" sqlite-version sqlite3)
echo "== sqlite-utils and datasette on the standard sqlite3 module (SQLite $STDLIB_VERSION)"
check_sqlite_utils "$STDLIB_VERSION"
check_datasette "$STDLIB_VERSION"

echo "== pysqlite3-binary (requirements-pysqlite3.txt)"
if "${PIP[@]}" install --quiet --only-binary=:all: -r "$HERE/requirements-pysqlite3.txt" \
    2>"$WORK/pysqlite3.err"; then
    "${SMOKE[@]}" module pysqlite3
    "${SMOKE[@]}" side-by-side pysqlite3
    PYSQLITE3_VERSION=$("${SMOKE[@]}" sqlite-version pysqlite3)
    echo "== sqlite-utils and datasette again, now on pysqlite3 (SQLite $PYSQLITE3_VERSION)"
    check_sqlite_utils "$PYSQLITE3_VERSION"
    check_datasette "$PYSQLITE3_VERSION"
elif grep -q "No matching distribution found" "$WORK/pysqlite3.err"; then
    echo "SKIPPED: pysqlite3-binary publishes no wheel for this platform ($(uname -sm), $("$V/python" --version)):"
    grep "No matching distribution found" "$WORK/pysqlite3.err"
else
    cat "$WORK/pysqlite3.err" >&2
    exit 1
fi

# A real interpreter whose sqlite3 was built without extension loading, if this machine has
# one on PATH (pyenv builds often are): ogive.load must say so, not crash.
OTHER=$(command -v python3 || true)
if [ -n "$OTHER" ] && "$OTHER" -c 'import sqlite3, sys; sys.exit(hasattr(sqlite3.Connection, "enable_load_extension"))' 2>/dev/null; then
    echo "== $OTHER: its sqlite3 cannot load extensions"
    mkdir "$WORK/only-ogive"
    cp -r "$(dirname "$EXT")" "$WORK/only-ogive/"
    PYTHONPATH=$WORK/only-ogive "$OTHER" "$HERE/smoke.py" no-loading
else
    echo "(no python3 on PATH whose sqlite3 lacks extension loading; that check ran on a stand-in in 'errors')"
fi

echo "== Python package smoke test passed"
