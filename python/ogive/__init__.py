"""ogive: distributions inside SQLite (ECDFs, quantiles, tests, fits), from Python.

This package ships ogive's loadable SQLite extension (``libogive.so``) and loads it into the
connections of Python's SQLite modules:

* :func:`path` gives the absolute path of the shipped library, for any client that loads
  extensions by path (``sqlite-utils --load-extension``, ``datasette --load-extension``, the
  sqlite3 shell's ``.load``);
* :func:`load` loads it into a connection of the standard ``sqlite3`` module, ``apsw`` or
  ``pysqlite3``.

Example::

    >>> import sqlite3, ogive
    >>> conn = ogive.load(sqlite3.connect(":memory:"))
    >>> conn.execute("SELECT quantile(column1, 0.5) FROM (VALUES (1), (2), (3))").fetchone()
    (2.0,)

The SQL functions themselves are documented in the project's README and by
``ogive functions NAME`` in the companion shell.
"""

import atexit
import os
import shutil
import sys
import tempfile

__all__ = ["ExtensionLoadingUnavailable", "load", "path"]
__version__ = "0.1.0"

if sys.platform == "win32":
    _LIBRARY = "ogive.dll"
elif sys.platform == "darwin":
    _LIBRARY = "libogive.dylib"
else:
    _LIBRARY = "libogive.so"


class ExtensionLoadingUnavailable(RuntimeError):
    """The connection's SQLite module was built without extension loading.

    Raised by :func:`load` for a connection of a ``sqlite3`` (or ``pysqlite3``) module that
    has no ``enable_load_extension`` method: Python compiled without
    ``--enable-loadable-sqlite-extensions``, as some macOS and pyenv builds are. The message
    names the alternatives: ``apsw``, ``pysqlite3-binary``, or the sqlite3 command-line shell
    with ``.load`` and :func:`path`.

    Example::

        >>> import sqlite3, ogive
        >>> try:
        ...     ogive.load(sqlite3.connect(":memory:"))
        ... except ogive.ExtensionLoadingUnavailable as e:
        ...     print(e)    # only on a Python whose sqlite3 cannot load extensions
    """


def path():
    """Returns the absolute path (a ``str``) of the shipped extension, ``libogive.so``.

    Give it to anything that loads SQLite extensions by path. Keep the file name: SQLite
    derives the entry point ``sqlite3_ogive_init`` from ``libogive``.

    Errors: :class:`FileNotFoundError` if the library is missing from the installed package
    (a broken or hand-copied install); reinstall with ``pip install ./python`` from the
    repository.

    Examples::

        >>> import ogive
        >>> ogive.path()
        '/.../site-packages/ogive/libogive.so'

    and from a shell::

        sqlite-utils query db.sqlite "select median(x) from t" \\
            --load-extension "$(python -c 'import ogive; print(ogive.path())')"
    """
    library = os.path.join(os.path.dirname(os.path.abspath(__file__)), _LIBRARY)
    if not os.path.isfile(library):
        raise FileNotFoundError(
            f"ogive.path: the extension {library} is missing from the installed package; "
            "reinstall it with `pip install ./python` from the ogive repository"
        )
    return library


_NO_LOADING = (
    "ogive.load: this {module} module was built without extension loading (its connections "
    "have no enable_load_extension method; Python needs --enable-loadable-sqlite-extensions). "
    "Use apsw (`pip install apsw`; ogive.load(apsw.Connection(...))), pysqlite3-binary "
    "(`pip install pysqlite3-binary`; ogive.load(pysqlite3.dbapi2.connect(...))), or the "
    "sqlite3 command-line shell: .load {path}"
)


def _connection_type(conn):
    """'sqlite3', 'pysqlite3' or 'apsw' for a connection of that module, else None."""
    for name, module in (
        ("sqlite3", "sqlite3"),
        ("pysqlite3", "pysqlite3.dbapi2"),
        ("apsw", "apsw"),
    ):
        mod = sys.modules.get(module)
        connection = getattr(mod, "Connection", None) if mod is not None else None
        if isinstance(connection, type) and isinstance(conn, connection):
            return name
    return None


# The copies made for modules whose SQLite library is not the first to load the shipped file.
_COPIES = {}

# The start of ogive's refusal of a second SQLite library in one process.
_SECOND_LIBRARY = "ogive is already loaded into another SQLite library in this process"


def _copy_for(kind):
    """A copy of the shipped library for connections of module ``kind``.

    One loaded copy of the extension serves one SQLite library, and apsw and pysqlite3 each
    bring their own SQLite besides the one ``sqlite3`` uses: when the shipped file already
    serves another library, ``kind``'s connections load a copy, kept in a temporary
    directory of this process (removed at exit) and reused for that module.
    """
    if kind not in _COPIES:
        folder = tempfile.mkdtemp(prefix=f"ogive-{kind}-")
        atexit.register(shutil.rmtree, folder, True)
        library = os.path.join(folder, _LIBRARY)
        shutil.copyfile(path(), library)
        _COPIES[kind] = library
    return _COPIES[kind]


def load(conn):
    """Loads the ogive extension into ``conn`` and returns ``conn``.

    ``conn`` is a connection of the standard ``sqlite3`` module, of ``pysqlite3`` (the
    ``pysqlite3-binary`` package), or of ``apsw``. Extension loading is switched on for the
    load and off again afterwards (also when the load fails), so SQL run later on the
    connection cannot load other libraries. The functions stay registered for the life of
    the connection; load once per connection. Connections of different modules in one
    process each get their own copy of the library (each module has its own SQLite, and
    one copy serves one), so sqlite3 and apsw connections can be used side by side.

    Errors:

    * :class:`ExtensionLoadingUnavailable` if the connection's ``sqlite3`` module was built
      without extension loading; the message names apsw, pysqlite3-binary and the sqlite3
      shell as alternatives.
    * :class:`TypeError` for anything else than a connection of those three modules (for a
      ``sqlite_utils.Database`` pass ``db.conn``; for a SQLAlchemy engine, its raw DB-API
      connection).
    * the module's own error (``sqlite3.OperationalError``, ``apsw.ExtensionLoadingError``)
      if SQLite refuses the library, for instance a host older than SQLite 3.31.0, which
      ogive refuses with one line naming both versions.
    * :class:`FileNotFoundError` from :func:`path` if the library is missing.

    Examples::

        >>> import sqlite3, ogive
        >>> conn = ogive.load(sqlite3.connect(":memory:"))
        >>> conn.execute("SELECT ecdf(column1, 2) FROM (VALUES (1), (2), (3), (4))").fetchone()
        (0.5,)

        >>> import apsw
        >>> conn = ogive.load(apsw.Connection(":memory:"))
        >>> conn.execute("SELECT median(column1) FROM (VALUES (1), (5), (9))").fetchall()
        [(5.0,)]

        >>> import pandas
        >>> pandas.read_sql("SELECT quantile(column1, 0.9) AS p90 FROM (VALUES (1), (2), (3))",
        ...                 ogive.load(sqlite3.connect(":memory:")))
           p90
        0  2.8
    """
    kind = _connection_type(conn)
    if kind is None:
        raise TypeError(
            "ogive.load: expected a connection of sqlite3, pysqlite3 or apsw, got "
            f"{type(conn).__module__}.{type(conn).__qualname__}; for a sqlite_utils.Database "
            "pass db.conn, for other clients load the file at ogive.path() with their own "
            "extension option"
        )
    if not callable(getattr(conn, "enable_load_extension", None)):
        raise ExtensionLoadingUnavailable(_NO_LOADING.format(module=kind, path=path()))
    library = _COPIES.get(kind) or path()
    conn.enable_load_extension(True)
    try:
        try:
            conn.load_extension(library)
        except Exception as e:  # each module has its own error class
            if _SECOND_LIBRARY not in str(e) or library != path():
                raise
            conn.load_extension(_copy_for(kind))
    finally:
        conn.enable_load_extension(False)
    return conn
