"""The catalog: one SQLite file of result documents, one record per (input, settings).

Every write is one transaction (``BEGIN IMMEDIATE``), so a killed process
loses at most the record in flight; every query binds its parameters.
"""

from __future__ import annotations

import json
import os
import sqlite3
from dataclasses import asdict, dataclass, field

from ..errors import InputError
from . import document as docs
from .schema import FIT_COLUMNS, check_file, connect, migrate, user_name, utc_now

_RECORD_COLUMNS = (
    "id", "junction", "chip", "cooldown", "measured", "measured_iso", "temperature_K",
    "input_path", "input_sha256", "settings_sha256", "tool_version", "generated_utc",
    "recorded_utc", "recorded_by", "origin", "changed_json",
)


@dataclass(frozen=True)
class Recorded:
    """What :meth:`Catalog.record` did: the record's id, whether it is new, what changed."""

    catalog_path: str
    record_id: int
    created: bool
    changes: list = field(default_factory=list)
    previous_id: int | None = None


@dataclass
class RecordRow:
    """One record's labels, queryable fit numbers and flag codes (not the document)."""

    id: int
    junction: str
    chip: str
    cooldown: str
    measured: str
    measured_iso: str | None
    temperature_K: float | None
    input_path: str
    input_sha256: str
    settings_sha256: str
    tool_version: str
    generated_utc: str
    recorded_utc: str
    recorded_by: str
    origin: str
    changed: dict | None
    fits: list = field(default_factory=list)
    flags: list = field(default_factory=list)

    def fit(self, branch: str) -> dict | None:
        return next((f for f in self.fits if f["branch"] == branch), None)

    def to_dict(self) -> dict:
        return asdict(self)


def order_key(row: RecordRow, first_id: dict):
    """Measurement order: metadata date, then cooldown label, then when first recorded."""
    return (row.measured_iso or "", docs.natural_key(row.cooldown),
            first_id.get(row.input_sha256, row.id), row.id)


def in_order(rows: list[RecordRow]) -> list[RecordRow]:
    first: dict = {}
    for r in rows:
        first[r.input_sha256] = min(first.get(r.input_sha256, r.id), r.id)
    return sorted(rows, key=lambda r: order_key(r, first))


class Catalog:
    """An open catalog; use :func:`open_catalog`, and close it (or use ``with``)."""

    def __init__(self, path: str, conn: sqlite3.Connection):
        self.path = path
        self.conn = conn

    def __enter__(self) -> Catalog:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        self.conn.close()

    @property
    def catalog_id(self) -> str:
        row = self.conn.execute(
            "SELECT value FROM catalog_info WHERE key = 'catalog_id'").fetchone()
        return row[0] if row else ""

    # -- writing ---------------------------------------------------------------------------
    def record(self, result, *, source_path=None, labels: dict | None = None) -> Recorded:
        """Record a :class:`~jjpattern.result.Result` (or its document); idempotent.

        The same input with the same settings is found and not stored again; a
        new settings hash for a known input is a new record listing what changed.
        """
        doc = docs.as_document(result)
        path = os.path.abspath(os.fspath(source_path)) if source_path else None
        fields = docs.labels(doc, labels, path)
        fields.update(recorded_utc=utc_now(), recorded_by=user_name(), origin="")
        with self.transaction():
            return self.insert_document(doc, fields)

    def insert_document(self, doc: dict, fields: dict) -> Recorded:
        """Insert inside an open transaction unless the (input, settings) pair is present."""
        c = self.conn
        key = (docs.input_sha256(doc), docs.settings_sha256(doc))
        row = c.execute("SELECT id FROM records WHERE input_sha256 = ? AND settings_sha256 = ?",
                        key).fetchone()
        if row:
            return Recorded(self.path, row[0], False)
        earlier = c.execute("SELECT id, settings_json, tool_version FROM records "
                            "WHERE input_sha256 = ? ORDER BY id DESC LIMIT 1",
                            key[:1]).fetchone()
        changes, previous = [], None
        if earlier:
            previous = earlier[0]
            changes = docs.settings_changes(json.loads(earlier[1]), earlier[2], doc)
        changed = {"previous_record": previous, "settings": changes} if earlier else None
        tool = str((doc.get("tool") or {}).get("version", ""))
        values = {
            **{k: fields[k] for k in ("junction", "chip", "cooldown", "measured",
                                      "measured_iso", "temperature_K", "input_path",
                                      "recorded_utc", "recorded_by")},
            "input_sha256": key[0], "settings_sha256": key[1], "tool_version": tool,
            "generated_utc": str(doc.get("generated_utc", "")),
            "origin": fields["origin"] or self.catalog_id,
            "settings_json": json.dumps(doc.get("settings") or {}, sort_keys=True,
                                        ensure_ascii=False),
            "changed_json": None if changed is None else json.dumps(changed,
                                                                    ensure_ascii=False),
            "document": docs.pack(doc),
        }
        names = ", ".join(values)
        marks = ", ".join("?" for _ in values)
        record_id = c.execute(f"INSERT INTO records ({names}) VALUES ({marks})",
                              tuple(values.values())).lastrowid
        fit_names = ("record_id", "branch", "model") + FIT_COLUMNS
        c.executemany(
            f"INSERT INTO fits ({', '.join(fit_names)}) "
            f"VALUES ({', '.join('?' for _ in fit_names)})",
            [(record_id, f.get("branch"), f.get("model"), *(f.get(k) for k in FIT_COLUMNS))
             for f in doc.get("fits", [])])
        c.executemany(
            "INSERT INTO flags (record_id, code, severity, branch, evidence_json) "
            "VALUES (?, ?, ?, ?, ?)",
            [(record_id, f.get("code"), f.get("severity"), f.get("branch"),
              json.dumps(f.get("evidence") or {}, ensure_ascii=False, allow_nan=False))
             for f in doc.get("flags", [])])
        return Recorded(self.path, record_id, True, changes, previous)

    def transaction(self):
        return _Transaction(self.conn)

    def add_documents(self, documents, *, source: str, labels: dict | None = None) -> dict:
        """Record many documents ``(doc, source_path)`` in one transaction; log the import."""
        added = present = 0
        with self.transaction():
            for doc, path in documents:
                doc = checked_document(doc, path or source)
                fields = docs.labels(doc, labels, path)
                fields.update(recorded_utc=utc_now(), recorded_by=user_name(), origin="")
                done = self.insert_document(doc, fields)
                added, present = added + done.created, present + (not done.created)
            self.log_import(source, "", added, present)
        return {"added": added, "present": present}

    def merge(self, other_path: str) -> dict:
        """Add every record of another catalog that this one lacks, keeping its labels,
        who recorded it and when; the other file is opened read-only."""
        from .schema import version_check

        other_path = os.fspath(other_path)
        if not os.path.isfile(other_path):
            raise InputError(f"{other_path}: no such catalog file; check the path")
        check_file(other_path)
        if os.path.realpath(other_path) == os.path.realpath(self.path):
            raise InputError(f"{other_path}: is this catalog itself; give another catalog")
        src = sqlite3.connect(f"file:{_uri_path(other_path)}?mode=ro", uri=True, timeout=60)
        try:
            version = version_check(src, other_path)
            if version < 1:
                raise InputError(f"{other_path}: an empty file, not a catalog")
            origin = "origin" if version >= 2 else "''"
            other_id = src.execute("SELECT value FROM catalog_info "
                                   "WHERE key = 'catalog_id'").fetchone()[0]
            cols = [c for c in _RECORD_COLUMNS if c not in ("id", "origin", "changed_json")]
            rows = src.execute(f"SELECT {', '.join(cols)}, {origin}, document FROM records "
                               "ORDER BY id")
            added = present = 0
            with self.transaction():
                for row in rows:
                    fields = dict(zip(cols + ["origin"], row[:-1], strict=True))
                    fields["origin"] = fields["origin"] or other_id
                    done = self.insert_document(docs.unpack(row[-1]), fields)
                    added, present = added + done.created, present + (not done.created)
                self.log_import(other_path, other_id, added, present)
        finally:
            src.close()
        return {"added": added, "present": present}

    def log_import(self, source, source_id, added, present) -> None:
        self.conn.execute(
            "INSERT INTO imports (source, source_catalog_id, imported_utc, imported_by, "
            "records_added, records_present) VALUES (?, ?, ?, ?, ?, ?)",
            (str(source), source_id, utc_now(), user_name(), added, present))

    # -- reading ---------------------------------------------------------------------------
    def records(self, *, junction=None, chip=None, cooldown=None,
                record_id=None) -> list[RecordRow]:
        """Records matching every filter given (exact text), with fits and flag codes."""
        sql = (f"SELECT {', '.join(_RECORD_COLUMNS)} FROM records "
               "WHERE (?1 IS NULL OR junction = ?1) AND (?2 IS NULL OR chip = ?2) "
               "AND (?3 IS NULL OR cooldown = ?3) AND (?4 IS NULL OR id = ?4) ORDER BY id")
        rows = self.conn.execute(sql, (junction, chip, cooldown, record_id)).fetchall()
        out = {}
        for r in rows:
            values = dict(zip(_RECORD_COLUMNS, r, strict=True))
            changed = values.pop("changed_json")
            out[r[0]] = RecordRow(**values, changed=json.loads(changed) if changed else None)
        if not out:
            return []
        names = ("record_id", "branch", "model") + FIT_COLUMNS
        for row in self._rows_of("fits", names, out):
            fit = dict(zip(names, row, strict=True))
            out[fit.pop("record_id")].fits.append(fit)
        for record_id, code, branch in self._rows_of("flags", ("record_id", "code", "branch"),
                                                     out):
            out[record_id].flags.append({"code": code, "branch": branch})
        return list(out.values())

    def _rows_of(self, table, names, by_id):
        ids = sorted(by_id)
        for start in range(0, len(ids), 500):
            chunk = ids[start:start + 500]
            marks = ", ".join("?" for _ in chunk)
            yield from self.conn.execute(
                f"SELECT {', '.join(names)} FROM {table} WHERE record_id IN ({marks}) "
                "ORDER BY rowid", chunk)

    def record_row(self, record_id: int) -> RecordRow:
        rows = self.records(record_id=int(record_id))
        if not rows:
            raise InputError(f"{self.path}: no record {record_id}; `jjpattern catalog list "
                             "records` shows the ids")
        return rows[0]

    def document(self, record_id: int) -> dict:
        """The result document of a record, as it was recorded."""
        row = self.conn.execute("SELECT document FROM records WHERE id = ?",
                                (int(record_id),)).fetchone()
        if row is None:
            raise InputError(f"{self.path}: no record {record_id}; `jjpattern catalog list "
                             "records` shows the ids")
        return docs.unpack(row[0])

    def result(self, record_id: int):
        """The record as a :class:`~jjpattern.result.Result`."""
        from ..result import Result

        return Result.from_dict(self.document(record_id))

    def documents(self, ids):
        """``(id, document)`` for each id, in the order given."""
        for record_id in ids:
            yield record_id, self.document(record_id)

    def chips_of(self, junction: str) -> list[str]:
        return [r[0] for r in self.conn.execute(
            "SELECT DISTINCT chip FROM records WHERE junction = ? ORDER BY chip", (junction,))]

    def names(self, column: str) -> list[str]:
        """Distinct junction, chip or cooldown names (for suggestions)."""
        if column not in ("junction", "chip", "cooldown"):
            raise ValueError(column)
        return [r[0] for r in self.conn.execute(
            f"SELECT DISTINCT {column} FROM records ORDER BY {column}")]

    def imports(self) -> list[dict]:
        cur = self.conn.execute("SELECT * FROM imports ORDER BY id")
        names = [d[0] for d in cur.description]
        return [dict(zip(names, row, strict=True)) for row in cur]

    def info(self) -> dict:
        out = dict(self.conn.execute("SELECT key, value FROM catalog_info"))
        out["records"] = self.conn.execute("SELECT count(*) FROM records").fetchone()[0]
        out["layout"] = self.conn.execute("PRAGMA user_version").fetchone()[0]
        return out

    def integrity(self) -> str:
        return self.conn.execute("PRAGMA integrity_check").fetchone()[0]

    def copy_to(self, dest: str) -> None:
        """A consistent single-file copy (SQLite's backup), also while others write."""
        target = sqlite3.connect(dest)
        try:
            self.conn.backup(target)
            target.execute("PRAGMA journal_mode = DELETE")
        finally:
            target.close()


def checked_document(doc, where) -> dict:
    """``doc`` when it reads as a result document; an error naming ``where`` if not."""
    try:
        return docs.as_document(doc)
    except (InputError, TypeError, KeyError, ValueError) as exc:
        raise InputError(f"{where}: not a usable result document ({exc})") from None


class _Transaction:
    def __init__(self, conn):
        self.conn = conn

    def __enter__(self):
        self.conn.execute("BEGIN IMMEDIATE")
        return self.conn

    def __exit__(self, kind, exc, tb):
        self.conn.execute("ROLLBACK" if kind else "COMMIT")
        return False


def _uri_path(path: str) -> str:
    from urllib.parse import quote

    return quote(os.path.abspath(path).replace(os.sep, "/"))


def open_catalog(path, *, create: bool = True) -> Catalog:
    """Open (and when ``create``, make) the catalog at ``path``; migrate an older layout.

    Raises
    ------
    InputError
        Not a catalog, written by a newer version, or (``create=False``) missing.
    """
    path = os.path.expanduser(os.fspath(path))
    if os.path.isdir(path):
        raise InputError(f"{path}: is a folder; give the catalog file, e.g. "
                         f"{os.path.join(path, 'catalog.sqlite')}")
    if os.path.exists(path):
        check_file(path)
    elif not create:
        raise InputError(f"{path}: no catalog there; check the path, or make one with "
                         f"`jjpattern catalog init {path}`")
    else:
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(f"{path}: the folder {folder} does not exist; create it first")
    conn = connect(path)
    try:
        migrate(conn, path)
    except BaseException:
        conn.close()
        raise
    return Catalog(path, conn)


def record_result(catalog_path, result, *, source_path=None, labels=None) -> Recorded:
    """Open the catalog, record one result, close it (one writer at a time is safe)."""
    with open_catalog(catalog_path) as catalog:
        return catalog.record(result, source_path=source_path, labels=labels)
