"""The catalog file: round trips, one record per (input, settings), migrations, names kept
verbatim, merges and exports. Documents are built by hand (tests/catalog_helpers.py)."""

import csv
import json
import os
import sqlite3

import pytest
from catalog_helpers import result

from jjpattern.catalog import SCHEMA_VERSION, open_catalog, record_result
from jjpattern.catalog.paths import (
    catalog_for_reading,
    catalog_for_recording,
    default_catalog_path,
)
from jjpattern.catalog.schema import APPLICATION_ID
from jjpattern.catalog.transfer import export_catalog, import_sources
from jjpattern.errors import InputError
from jjpattern.result import Result
from jjpattern.settings import Settings


@pytest.fixture
def path(tmp_path):
    return str(tmp_path / "lab.sqlite")


def test_document_round_trip_is_exact(path):
    r = result(date="2026-03-14", flags=[])
    done = record_result(path, r, source_path="data/j03.csv")
    with open_catalog(path, create=False) as cat:
        again = cat.result(done.record_id)
        row = cat.record_row(done.record_id)
        assert cat.integrity() == "ok"
    assert again.to_json() == r.to_json()
    assert (row.junction, row.chip, row.cooldown, row.measured_iso) == (
        "KT14-J03", "KT-14", "CD-07", "2026-03-14")
    assert row.temperature_K == 1.45 and row.tool_version == r.tool["version"]
    assert row.input_path == os.path.abspath("data/j03.csv")
    assert row.settings_sha256 == r.settings.hash()
    positive = row.fit("positive")
    assert positive["ic0_A"] == 47e-6 and positive["period_stderr_T"] == 0.5e-6


def test_recording_twice_is_one_record(path):
    r = result()
    first = record_result(path, r)
    second = record_result(path, Result.from_json(r.to_json()))
    assert first.created and not second.created
    assert second.record_id == first.record_id
    with open_catalog(path) as cat:
        assert len(cat.records()) == 1


def test_changed_setting_is_a_new_record_that_says_what_changed(path):
    plain = result()
    robust = result(settings=Settings().replace(fit__loss="cauchy", diagnose__seed=3))
    assert plain.input["sha256"] == robust.input["sha256"]
    a = record_result(path, plain)
    b = record_result(path, robust)
    assert b.created and b.record_id != a.record_id and b.previous_id == a.record_id
    assert b.changes == [{"setting": "diagnose.seed", "from": 0, "to": 3},
                         {"setting": "fit.loss", "from": "linear", "to": "cauchy"}]
    with open_catalog(path) as cat:
        row = cat.record_row(b.record_id)
    assert row.changed == {"previous_record": a.record_id, "settings": b.changes}
    # The report stage does not change a result, so it is not a new analysis.
    again = result(settings=Settings().replace(report__dpi=100))
    assert not record_result(path, again).created


HOSTILE = [
    "Robert'); DROP TABLE records;--",
    'J03" OR 1=1 --',
    "50% _wild*?[a]",
    "Ω-junction µ 接合 🧊",
    "e\u0301",            # e + combining accent (NFD), kept apart from the NFC form
    "\u00e9",
    "line\nbreak\ttab",
    "  spaced  ",
    "C:\\chips\\J1",
]


def test_sql_hostile_and_unicode_names_are_kept_verbatim(path):
    with open_catalog(path) as cat:
        for i, name in enumerate(HOSTILE):
            cat.record(result(junction=name, chip=name[::-1], cooldown=f"{name}#{i}"))
        assert sorted(cat.names("junction")) == sorted(HOSTILE)
        for i, name in enumerate(HOSTILE):
            rows = cat.records(junction=name)
            assert [(r.junction, r.chip, r.cooldown) for r in rows] == [
                (name, name[::-1], f"{name}#{i}")]
            assert cat.chips_of(name) == [name[::-1]]
        assert cat.records(junction="%") == [] and cat.records(junction="*") == []
        assert cat.integrity() == "ok"
        tables = {r[0] for r in cat.conn.execute("SELECT name FROM sqlite_master")}
        assert {"records", "fits", "flags", "imports"} <= tables


def test_labels_fall_back_to_file_name_and_take_overrides(path):
    r = result(junction=None, chip=None, cooldown=None, path="/old/data/j07_cd2.csv")
    with open_catalog(path) as cat:
        a = cat.record(r)
        assert cat.record_row(a.record_id).junction == "j07_cd2"
    with open_catalog(str(path) + "2") as cat:
        b = cat.record(r, labels={"junction": "KT14-J07", "cooldown": "CD-02",
                                  "date": "14.03.2026"})
        row = cat.record_row(b.record_id)
        assert (row.junction, row.cooldown, row.measured, row.measured_iso) == (
            "KT14-J07", "CD-02", "14.03.2026", "2026-03-14")
        with pytest.raises(InputError, match="not known"):
            cat.record(r, labels={"wafer": "W1"})


# The layout of version 1 as released, frozen here so that an edit of the migration code
# that breaks old catalogs fails this test.
V1_DDL = """
CREATE TABLE catalog_info (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE records (id INTEGER PRIMARY KEY, input_sha256 TEXT NOT NULL,
  settings_sha256 TEXT NOT NULL, junction TEXT NOT NULL, chip TEXT NOT NULL DEFAULT '',
  cooldown TEXT NOT NULL DEFAULT '', measured TEXT NOT NULL DEFAULT '', measured_iso TEXT,
  temperature_K REAL, input_path TEXT NOT NULL DEFAULT '', tool_version TEXT NOT NULL,
  generated_utc TEXT NOT NULL, recorded_utc TEXT NOT NULL,
  recorded_by TEXT NOT NULL DEFAULT '', settings_json TEXT NOT NULL, changed_json TEXT,
  document BLOB NOT NULL, UNIQUE (input_sha256, settings_sha256));
CREATE INDEX records_junction ON records (chip, junction);
CREATE INDEX records_cooldown ON records (chip, cooldown);
CREATE TABLE fits (record_id INTEGER NOT NULL REFERENCES records (id) ON DELETE CASCADE,
  branch TEXT NOT NULL, model TEXT NOT NULL, period_T REAL, period_stderr_T REAL,
  field_offset_T REAL, field_offset_stderr_T REAL, ic0_A REAL, ic0_stderr_A REAL,
  effective_area_m2 REAL, effective_area_stderr_m2 REAL, node_floor_A REAL,
  node_floor_stderr_A REAL, reduced_chisq REAL, lobes_observed INTEGER,
  nodes_observed INTEGER, points_used INTEGER, loss TEXT, PRIMARY KEY (record_id, branch));
CREATE TABLE flags (record_id INTEGER NOT NULL REFERENCES records (id) ON DELETE CASCADE,
  code TEXT NOT NULL, severity TEXT NOT NULL, branch TEXT, evidence_json TEXT NOT NULL);
CREATE INDEX flags_record ON flags (record_id);
CREATE INDEX flags_code ON flags (code);
"""


def _write_v1(path, docs):
    import zlib

    conn = sqlite3.connect(path)
    conn.executescript(V1_DDL)
    conn.execute("INSERT INTO catalog_info VALUES ('catalog_id', 'cafe01')")
    for i, r in enumerate(docs, 1):
        doc = r.to_dict()
        blob = zlib.compress(json.dumps(doc, separators=(",", ":")).encode())
        conn.execute(
            "INSERT INTO records (id, input_sha256, settings_sha256, junction, chip, cooldown, "
            "tool_version, generated_utc, recorded_utc, recorded_by, settings_json, document)"
            " VALUES (?, ?, ?, ?, 'KT-14', ?, '0.1.0', ?, '2026-01-02T03:04:05Z', 'ana', ?, ?)",
            (i, doc["input"]["sha256"], doc["settings_sha256"], r.title,
             r.metadata["cooldown"], doc["generated_utc"], json.dumps(doc["settings"]), blob))
        conn.execute("INSERT INTO fits (record_id, branch, model, ic0_A, ic0_stderr_A) "
                     "VALUES (?, 'positive', 'rectangular', ?, ?)",
                     (i, r.fits[0].ic0_A, r.fits[0].ic0_stderr_A))
    conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    conn.execute("PRAGMA user_version = 1")
    conn.commit()
    conn.close()


def _layout(path):
    conn = sqlite3.connect(path)
    tables = [r[0] for r in conn.execute(
        "SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
    out = {t: [(c[1], c[2], c[3], c[5]) for c in conn.execute(f"PRAGMA table_info({t})")]
           for t in tables}
    out["indexes"] = sorted(r[0] for r in conn.execute(
        "SELECT name FROM sqlite_master WHERE type = 'index' AND sql IS NOT NULL"))
    conn.close()
    return out


def test_migration_from_the_first_layout_keeps_every_record(tmp_path, path):
    old = [result(cooldown="CD-07"), result(cooldown="CD-08", ic0_A=40e-6)]
    _write_v1(path, old)
    with open_catalog(path) as cat:
        rows = cat.records()
        assert [r.cooldown for r in rows] == ["CD-07", "CD-08"]
        assert {r.origin for r in rows} == {"cafe01"}  # made there, before merges existed
        assert rows[1].recorded_by == "ana"
        assert cat.result(2).to_json() == old[1].to_json()
        assert cat.info()["layout"] == SCHEMA_VERSION == 2
        new = cat.record(result(cooldown="CD-09"))
        assert new.record_id == 3
    # The same layout as a catalog made new; the old file is kept as a backup.
    record_result(tmp_path / "fresh.sqlite", result())
    assert _layout(path) == _layout(tmp_path / "fresh.sqlite")
    backup = sqlite3.connect(f"{path}.layout1.bak")
    assert backup.execute("PRAGMA user_version").fetchone()[0] == 1
    assert backup.execute("SELECT count(*) FROM records").fetchone()[0] == 2
    backup.close()


def test_newer_or_foreign_files_are_refused_untouched(tmp_path, path):
    record_result(path, result())
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA user_version = 99")
    conn.commit()
    conn.close()
    before = open(path, "rb").read()
    with pytest.raises(InputError, match="newer jjpattern.*upgrade"):
        open_catalog(path)
    assert open(path, "rb").read() == before
    other = tmp_path / "other.sqlite"
    conn = sqlite3.connect(other)
    conn.execute("CREATE TABLE samples (x)")
    conn.commit()
    conn.close()
    with pytest.raises(InputError, match="another program"):
        open_catalog(other)
    text = tmp_path / "notes.sqlite"
    text.write_text("not a database")
    with pytest.raises(InputError, match="not an SQLite file"):
        open_catalog(text)
    with pytest.raises(InputError, match="no catalog there"):
        open_catalog(tmp_path / "missing.sqlite", create=False)
    with pytest.raises(InputError, match="does not exist"):
        open_catalog(tmp_path / "no" / "such.sqlite")


def test_default_location_per_platform():
    linux = {"HOME": "/home/ana"}
    assert default_catalog_path(linux, "linux") == \
        "/home/ana/.local/share/jjpattern/catalog.sqlite"
    assert default_catalog_path({**linux, "XDG_DATA_HOME": "/data/ana"}, "linux") == \
        "/data/ana/jjpattern/catalog.sqlite"
    # The XDG base-directory rule: a relative path is invalid and ignored.
    assert default_catalog_path({**linux, "XDG_DATA_HOME": "rel"}, "linux") == \
        "/home/ana/.local/share/jjpattern/catalog.sqlite"
    assert default_catalog_path({"HOME": "/Users/ana"}, "darwin") == \
        "/Users/ana/Library/Application Support/jjpattern/catalog.sqlite"
    win = default_catalog_path({"LOCALAPPDATA": "C:/Users/ana/AppData/Local"}, "win32")
    assert win.replace("\\", "/") == "C:/Users/ana/AppData/Local/jjpattern/catalog.sqlite"


def test_default_catalog_only_after_opting_in(tmp_path):
    env = {"HOME": str(tmp_path), "XDG_DATA_HOME": str(tmp_path / "xdg")}
    assert catalog_for_recording(None, environ=env) is None
    with pytest.raises(InputError, match="catalog init"):
        catalog_for_reading(None, environ=env)
    made = default_catalog_path(env)
    os.makedirs(os.path.dirname(made))
    record_result(made, result())
    assert catalog_for_recording(None, environ=env) == made
    assert catalog_for_recording(None, disabled=True, environ=env) is None
    assert catalog_for_recording("x.sqlite", environ=env) == "x.sqlite"
    shared = str(tmp_path / "shared.sqlite")
    assert catalog_for_recording(None, environ={**env, "JJPATTERN_CATALOG": shared}) == shared


def test_merge_another_catalog_without_duplicates(tmp_path):
    mine, theirs = str(tmp_path / "mine.sqlite"), str(tmp_path / "theirs.sqlite")
    shared = result(cooldown="CD-07")
    record_result(mine, shared)
    record_result(mine, result(cooldown="CD-08", ic0_A=45e-6))
    record_result(theirs, shared)
    record_result(theirs, result(junction="KT14-J05", cooldown="CD-08"))
    with open_catalog(theirs) as cat:
        their_id = cat.catalog_id
        cat.conn.execute("UPDATE records SET recorded_by = 'bo'")
    with open_catalog(mine) as cat:
        assert cat.merge(theirs) == {"added": 1, "present": 1}
        assert cat.merge(theirs) == {"added": 0, "present": 2}
        added = cat.records(junction="KT14-J05")[0]
        assert (added.recorded_by, added.origin) == ("bo", their_id)
        assert cat.result(added.id).to_json() == result(
            junction="KT14-J05", cooldown="CD-08").to_json()
        assert [(i["records_added"], i["records_present"]) for i in cat.imports()] == [
            (1, 1), (0, 2)]
        with pytest.raises(InputError, match="this catalog itself"):
            cat.merge(mine)


def test_exports_read_back(tmp_path, path):
    docs = [result(cooldown="CD-07", date="2026-01-10"),
            result(cooldown="CD-08", date="2026-02-11", ic0_A=40e-6, ic0_stderr_A=0.1e-6),
            result(junction="Ω-junction µ", cooldown="CD-08")]
    with open_catalog(path) as cat:
        for r in docs:
            cat.record(r)
        assert export_catalog(cat, str(tmp_path / "all.csv")) == 3
        assert export_catalog(cat, str(tmp_path / "all.jsonl")) == 3
        assert export_catalog(cat, str(tmp_path / "copy.sqlite")) == 3
        assert export_catalog(cat, str(tmp_path / "j03.csv"), junction="KT14-J03") == 2
        with pytest.raises(InputError, match="suffix"):
            export_catalog(cat, str(tmp_path / "all.xlsx"))
    with open(tmp_path / "all.csv", encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == 6  # two branches each
    cd8 = [r for r in rows if r["cooldown"] == "CD-08" and r["junction"] == "KT14-J03"]
    assert float(cd8[0]["ic0_A"]) == 40e-6
    assert cd8[0]["drift"] == "ic0-changed"  # 47 -> 40 uA, -15 %, far beyond 5 sigma
    assert {r["junction"] for r in rows} == {"KT14-J03", "Ω-junction µ"}
    again = str(tmp_path / "again.sqlite")
    with open_catalog(again) as cat:
        counts = import_sources(cat, [str(tmp_path / "all.jsonl")])
        assert counts[str(tmp_path / "all.jsonl")]["added"] == 3
        assert import_sources(cat, [str(tmp_path / "copy.sqlite")])[
            str(tmp_path / "copy.sqlite")] == {"added": 0, "present": 3, "skipped": 0}
        assert [cat.result(r.id).to_json() for r in cat.records()] == [
            d.to_json() for d in docs]
    with open_catalog(tmp_path / "copy.sqlite", create=False) as cat:
        assert cat.integrity() == "ok" and len(cat.records()) == 3


def test_import_result_documents_from_a_folder(tmp_path, path):
    folder = tmp_path / "batch"
    (folder / "reports" / "j03").mkdir(parents=True)
    a, b = result(cooldown="CD-07"), result(junction="KT14-J05")
    (folder / "j03.json").write_text(a.to_json())
    (folder / "reports" / "j03" / "result.json").write_text(a.to_json())  # the same again
    (folder / "j05.json").write_text(b.to_json())
    (folder / "provenance.json").write_text(json.dumps({"versions": {}}))
    with open_catalog(path) as cat:
        counts = import_sources(cat, [str(folder)])
    assert counts[str(folder)] == {"added": 2, "present": 1, "skipped": 1}


def test_parquet_export(tmp_path, path):
    with open_catalog(path) as cat:
        cat.record(result())
        out = str(tmp_path / "all.parquet")
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            with pytest.raises(InputError, match="needs pyarrow"):
                export_catalog(cat, out)
            assert [p for p in os.listdir(tmp_path) if "parquet" in p] == []
            return
        assert export_catalog(cat, out) == 1
    import pandas as pd

    frame = pd.read_parquet(out)
    assert list(frame["ic0_A"]) == [47e-6, 47e-6]
