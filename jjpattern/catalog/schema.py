"""The catalog's SQLite layout, its version, and the forward migrations.

A fresh catalog is built by running every migration from an empty file, so a
migrated catalog and a new one have the same layout by construction. The
version lives in ``PRAGMA user_version`` and the file is marked as ours by
``PRAGMA application_id``; a newer version is refused, never rewritten.
"""

from __future__ import annotations

import datetime
import getpass
import os
import sqlite3
import uuid

from .. import __version__
from ..errors import InputError

#: ``PRAGMA application_id`` of a jjpattern catalog ("JJPC" in ASCII).
APPLICATION_ID = 0x4A4A5043
#: The layout this code writes and reads.
SCHEMA_VERSION = 2
SQLITE_HEADER = b"SQLite format 3\x00"

#: Numbers of one fit kept as columns (queryable); the whole fit stays in the document.
FIT_COLUMNS = (
    "period_T", "period_stderr_T", "field_offset_T", "field_offset_stderr_T",
    "ic0_A", "ic0_stderr_A", "effective_area_m2", "effective_area_stderr_m2",
    "node_floor_A", "node_floor_stderr_A", "reduced_chisq", "lobes_observed",
    "nodes_observed", "points_used", "loss",
)

_V1 = """
CREATE TABLE catalog_info (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE records (
    id INTEGER PRIMARY KEY,
    input_sha256 TEXT NOT NULL,
    settings_sha256 TEXT NOT NULL,
    junction TEXT NOT NULL,
    chip TEXT NOT NULL DEFAULT '',
    cooldown TEXT NOT NULL DEFAULT '',
    measured TEXT NOT NULL DEFAULT '',
    measured_iso TEXT,
    temperature_K REAL,
    input_path TEXT NOT NULL DEFAULT '',
    tool_version TEXT NOT NULL,
    generated_utc TEXT NOT NULL,
    recorded_utc TEXT NOT NULL,
    recorded_by TEXT NOT NULL DEFAULT '',
    settings_json TEXT NOT NULL,
    changed_json TEXT,
    document BLOB NOT NULL,
    UNIQUE (input_sha256, settings_sha256)
);
CREATE INDEX records_junction ON records (chip, junction);
CREATE INDEX records_cooldown ON records (chip, cooldown);
CREATE TABLE fits (
    record_id INTEGER NOT NULL REFERENCES records (id) ON DELETE CASCADE,
    branch TEXT NOT NULL,
    model TEXT NOT NULL,
    period_T REAL, period_stderr_T REAL, field_offset_T REAL, field_offset_stderr_T REAL,
    ic0_A REAL, ic0_stderr_A REAL, effective_area_m2 REAL, effective_area_stderr_m2 REAL,
    node_floor_A REAL, node_floor_stderr_A REAL, reduced_chisq REAL,
    lobes_observed INTEGER, nodes_observed INTEGER, points_used INTEGER, loss TEXT,
    PRIMARY KEY (record_id, branch)
);
CREATE TABLE flags (
    record_id INTEGER NOT NULL REFERENCES records (id) ON DELETE CASCADE,
    code TEXT NOT NULL,
    severity TEXT NOT NULL,
    branch TEXT,
    evidence_json TEXT NOT NULL
);
CREATE INDEX flags_record ON flags (record_id);
CREATE INDEX flags_code ON flags (code);
"""

# Version 2: where each record was first made (merged catalogs keep the maker's id) and
# a log of merges, so that a lab can tell whose catalog a record came from.
_V2 = """
ALTER TABLE records ADD COLUMN origin TEXT NOT NULL DEFAULT '';
UPDATE records SET origin = (SELECT value FROM catalog_info WHERE key = 'catalog_id');
CREATE TABLE imports (
    id INTEGER PRIMARY KEY,
    source TEXT NOT NULL,
    source_catalog_id TEXT NOT NULL DEFAULT '',
    imported_utc TEXT NOT NULL,
    imported_by TEXT NOT NULL DEFAULT '',
    records_added INTEGER NOT NULL,
    records_present INTEGER NOT NULL
);
"""


def utc_now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def user_name() -> str:
    """Who records (several people share a lab catalog); empty when the system cannot say."""
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001 - no user name is not an error
        return ""


def _create_v1(conn: sqlite3.Connection) -> None:
    for statement in _V1.split(";"):
        if statement.strip():
            conn.execute(statement)
    conn.executemany("INSERT INTO catalog_info (key, value) VALUES (?, ?)", [
        ("catalog_id", uuid.uuid4().hex), ("created_utc", utc_now()),
        ("created_by_tool", __version__)])


def _to_v2(conn: sqlite3.Connection) -> None:
    for statement in _V2.split(";"):
        if statement.strip():
            conn.execute(statement)


#: MIGRATIONS[n] takes a catalog from version n to n + 1 (0 is an empty file).
MIGRATIONS = (_create_v1, _to_v2)
assert len(MIGRATIONS) == SCHEMA_VERSION


def check_file(path: str) -> None:
    """Refuse a file that is not an SQLite database before SQLite touches it."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(len(SQLITE_HEADER))
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
    if head and head != SQLITE_HEADER:
        raise InputError(f"{path}: not a jjpattern catalog (not an SQLite file); give the "
                         "catalog's .sqlite file")


def connect(path: str) -> sqlite3.Connection:
    """A connection in autocommit mode (transactions are explicit), WAL, durable commits."""
    conn = sqlite3.connect(path, timeout=60.0, isolation_level=None)
    try:
        conn.execute("PRAGMA busy_timeout = 60000")
        version_check(conn, path)
        mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            raise InputError(f"{path}: SQLite cannot use write-ahead logging there (a network "
                             "or read-only folder?); keep the catalog on a local disk")
        # FULL: a commit survives a power cut, not only a killed process; records are few.
        conn.execute("PRAGMA synchronous = FULL")
        conn.execute("PRAGMA foreign_keys = ON")
    except BaseException:
        conn.close()
        raise
    return conn


def version_check(conn: sqlite3.Connection, path: str) -> int:
    """The catalog's layout version; an error for foreign or newer files."""
    try:
        # One statement, one snapshot: read apart, another process's creation could
        # commit between them (tables but no id yet) and look like a foreign file.
        app, version, tables = conn.execute(
            "SELECT (SELECT application_id FROM pragma_application_id), "
            "(SELECT user_version FROM pragma_user_version), "
            "(SELECT count(*) FROM sqlite_master)").fetchone()
    except sqlite3.DatabaseError as exc:
        raise InputError(f"{path}: not a readable SQLite catalog ({exc})") from None
    if app != APPLICATION_ID and (app != 0 or tables):
        raise InputError(f"{path}: an SQLite file of another program, not a jjpattern "
                         "catalog; give another path")
    if version > SCHEMA_VERSION:
        raise InputError(f"{path}: written by a newer jjpattern (catalog layout {version}, "
                         f"this version reads up to {SCHEMA_VERSION}); upgrade jjpattern")
    return version


def migrate(conn: sqlite3.Connection, path: str, target: int = SCHEMA_VERSION) -> int:
    """Bring the catalog up to ``target``; returns the version found before.

    A catalog that holds data is first copied to ``PATH.layoutN.bak``. The
    version is read again inside the write transaction, so two processes
    opening an old catalog at once migrate it once.
    """
    found = version_check(conn, path)
    if found >= target:
        return found
    if found >= 1:
        _backup(conn, f"{path}.layout{found}.bak")
    conn.execute("BEGIN IMMEDIATE")
    try:
        found = version_check(conn, path)
        for step in range(found, target):
            MIGRATIONS[step](conn)
        conn.execute(f"PRAGMA application_id = {APPLICATION_ID:d}")
        conn.execute(f"PRAGMA user_version = {int(target):d}")
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    return found


def _backup(conn: sqlite3.Connection, dest: str) -> None:
    if os.path.exists(dest):
        return
    target = sqlite3.connect(dest)
    try:
        conn.backup(target)
    finally:
        target.close()
