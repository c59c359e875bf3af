"""The library's SQLite index: tables, schema version and migrations.

The index lives in ``<library>/index.sqlite`` beside ``<library>/entries/``.
It runs in WAL mode (readers never block the one writer) with a busy timeout,
and every change happens inside one ``BEGIN IMMEDIATE`` transaction.

Versioning
----------
``meta.schema_version`` says which layout the index has.  Opening an index of
a newer version is refused with :class:`LibraryError` (upgrade instgen); an
older one is upgraded in place by the functions in :data:`MIGRATIONS`
(``version -> function(connection)`` taking the index from ``version`` to
``version + 1``), each inside the same transaction as the new version number,
and recorded in the ``migrations`` table.  ``meta.fingerprint_version`` records
which fingerprint scheme named the entries.
"""

from __future__ import annotations

import datetime as _dt
import sqlite3
import time
from collections.abc import Callable
from pathlib import Path

from ..errors import LibraryError

SCHEMA_VERSION = 1

#: Upgrades: version -> function(sqlite3.Connection) taking the index to version + 1.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {}

#: Seconds a writer waits for another writer before giving up.
BUSY_TIMEOUT = 60.0

TABLES = """
CREATE TABLE IF NOT EXISTS meta (
    key TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS migrations (
    version INTEGER PRIMARY KEY,
    applied TEXT NOT NULL,
    note TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS entries (
    fingerprint TEXT PRIMARY KEY,
    file TEXT NOT NULL,
    sha256 TEXT NOT NULL,
    graph TEXT NOT NULL,
    n INTEGER NOT NULL,
    m INTEGER NOT NULL,
    couplings TEXT,
    fields TEXT,
    has_fields INTEGER NOT NULL,
    rules TEXT,
    construction TEXT,
    cert_status TEXT,
    cert_energy REAL,
    cert_method TEXT,
    cert_seconds REAL,
    ground_states INTEGER,
    cert_state TEXT,
    cert_details TEXT,
    provenance TEXT NOT NULL,
    created TEXT,
    added TEXT NOT NULL,
    updated TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS entries_graph ON entries(graph);
CREATE INDEX IF NOT EXISTS entries_n ON entries(n);
CREATE TABLE IF NOT EXISTS scores (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    fingerprint TEXT NOT NULL REFERENCES entries(fingerprint) ON DELETE CASCADE,
    key TEXT NOT NULL,
    metric TEXT NOT NULL,
    value REAL,
    ci_low REAL,
    ci_high REAL,
    kind TEXT,
    solver TEXT,
    reads INTEGER,
    tool_version TEXT,
    record TEXT NOT NULL,
    added TEXT NOT NULL,
    UNIQUE (fingerprint, key)
);
CREATE INDEX IF NOT EXISTS scores_metric ON scores(metric, fingerprint);
CREATE TABLE IF NOT EXISTS tags (
    fingerprint TEXT NOT NULL REFERENCES entries(fingerprint) ON DELETE CASCADE,
    tag TEXT NOT NULL,
    PRIMARY KEY (fingerprint, tag)
);
CREATE TABLE IF NOT EXISTS sightings (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    fingerprint TEXT NOT NULL REFERENCES entries(fingerprint) ON DELETE CASCADE,
    added TEXT NOT NULL,
    provenance TEXT NOT NULL
);
"""


def now() -> str:
    """The current UTC time as ISO text (seconds)."""
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()


def connect(index: Path, create: bool) -> sqlite3.Connection:
    """Open the index; never creates the file unless ``create``."""
    mode = "rwc" if create else "rw"
    try:
        con = sqlite3.connect(f"{index.resolve().as_uri()}?mode={mode}", uri=True,
                              timeout=BUSY_TIMEOUT, isolation_level=None)
    except sqlite3.OperationalError as exc:
        raise LibraryError(f"cannot open the library index {index}: {exc}") from None
    try:
        con.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT * 1000)}")
        con.execute("PRAGMA foreign_keys = ON")
        con.execute("PRAGMA synchronous = NORMAL")
    except sqlite3.DatabaseError as exc:
        con.close()
        raise LibraryError(f"{index} is damaged or not a library index ({exc})") from None
    return con


def initialise(con: sqlite3.Connection, fingerprint_version: int) -> None:
    """Create the tables of a new index; leaves an existing index untouched.

    Safe when several processes create the same library at once: the check
    and the creation happen inside one ``BEGIN IMMEDIATE`` transaction.
    """
    try:
        con.execute("BEGIN IMMEDIATE")
        exists = con.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'meta'").fetchone()
        if not exists:
            # statement by statement: executescript() would commit the transaction
            for stmt in TABLES.split(";"):
                if stmt.strip():
                    con.execute(stmt)
            con.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", [
                ("schema_version", str(SCHEMA_VERSION)),
                ("fingerprint_version", str(fingerprint_version)),
                ("created", now()),
            ])
            con.execute("INSERT INTO migrations (version, applied, note) VALUES (?, ?, ?)",
                        (SCHEMA_VERSION, now(), "created"))
        con.execute("COMMIT")
        if not exists:
            for _ in range(50):  # WAL needs a moment alone with the file; others may be connecting
                if con.execute("PRAGMA journal_mode = WAL").fetchone()[0].lower() == "wal":
                    break
                time.sleep(0.1)
            else:
                raise LibraryError("could not switch the new library index to WAL mode")
    except sqlite3.DatabaseError as exc:
        if con.in_transaction:
            con.execute("ROLLBACK")
        raise LibraryError(f"cannot create the library index: {exc}") from None


def schema_version(con: sqlite3.Connection, where) -> int:
    """The index's schema version; LibraryError when it is not an instgen index."""
    try:
        row = con.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()
    except sqlite3.DatabaseError as exc:
        raise LibraryError(f"{where} is damaged or not a library index ({exc})") from None
    if row is None or not str(row[0]).isdigit():
        raise LibraryError(f"{where} is damaged: it records no schema version")
    return int(row[0])


def upgrade(con: sqlite3.Connection, where) -> int:
    """Refuse a newer index; bring an older one up to :data:`SCHEMA_VERSION`."""
    version = schema_version(con, where)
    if version > SCHEMA_VERSION:
        raise LibraryError(f"{where} has schema version {version}, newer than this instgen reads "
                           f"({SCHEMA_VERSION}); upgrade instgen to use this library")
    while version < SCHEMA_VERSION:
        if version not in MIGRATIONS:
            raise LibraryError(f"{where} has schema version {version}, which this instgen cannot upgrade")
        con.execute("BEGIN IMMEDIATE")
        try:
            current = schema_version(con, where)  # another process may have upgraded meanwhile
            if current == version:
                MIGRATIONS[version](con)
                con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(version + 1),))
                con.execute("INSERT INTO migrations (version, applied, note) VALUES (?, ?, ?)",
                            (version + 1, now(), f"upgraded from {version}"))
            con.execute("COMMIT")
        except BaseException:
            if con.in_transaction:
                con.execute("ROLLBACK")
            raise
        version = schema_version(con, where)
    return version
