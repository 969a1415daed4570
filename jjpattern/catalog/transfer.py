"""Export a catalog (CSV, Parquet, JSON lines, a single-file SQLite copy) and import into
one (another catalog, result documents, folders of them, JSON lines)."""

from __future__ import annotations

import json
import os

from ..errors import InputError
from .document import labels as doc_labels
from .drift import DEFAULT_TOLERANCES, Tolerances, junction_drift
from .history import flat_rows, rows_csv
from .schema import SQLITE_HEADER
from .store import checked_document, in_order

EXPORT_FORMATS = (".csv", ".parquet", ".jsonl", ".sqlite", ".db")
_LABEL_FIELDS = ("junction", "chip", "cooldown", "measured", "measured_iso", "temperature_K",
                 "input_path", "recorded_utc", "recorded_by", "origin")


def _records_with_drift(catalog, tol, **filters) -> list[dict]:
    rows = catalog.records(**filters)
    groups: dict = {}
    for row in rows:
        groups.setdefault((row.chip, row.junction), []).append(row)
    out = []
    for key in sorted(groups):
        ordered = in_order(groups[key])
        drift = junction_drift(ordered, tol)
        for row in ordered:
            entry = row.to_dict()
            entry["drift"] = [f.to_dict() for f in drift[row.id][0]]
            out.append(entry)
    return out


def export_catalog(catalog, out: str, *, tol: Tolerances = DEFAULT_TOLERANCES, **filters) -> int:
    """Write the records (matching ``filters``) to ``out``, format by suffix; the count."""
    from ..report.files import write_text

    suffix = os.path.splitext(out)[1].lower()
    if suffix not in EXPORT_FORMATS:
        raise InputError(f"{out}: export as {', '.join(EXPORT_FORMATS)}; change the suffix")
    folder = os.path.dirname(os.path.abspath(out))
    if not os.path.isdir(folder):
        raise InputError(f"{out}: the folder {folder} does not exist; create it first")
    if suffix in (".sqlite", ".db"):
        if any(v is not None for v in filters.values()):
            raise InputError(f"{out}: a catalog copy holds every record; leave out --chip, "
                             "--junction and --cooldown, or export .jsonl")
        if os.path.exists(out):
            raise InputError(f"{out}: exists already; choose a new file name")
        catalog.copy_to(out)
        return catalog.info()["records"]
    records = _records_with_drift(catalog, tol, **filters)
    if suffix == ".jsonl":
        lines = []
        for rec in records:
            lines.append(json.dumps({"record": {k: rec[k] for k in _LABEL_FIELDS},
                                     "document": catalog.document(rec["id"])},
                                    ensure_ascii=False, allow_nan=False,
                                    separators=(",", ":")))
        write_text(out, "".join(line + "\n" for line in lines))
    elif suffix == ".csv":
        write_text(out, rows_csv(flat_rows(records)))
    else:
        _write_parquet(out, flat_rows(records))
    return len(records)


def _write_parquet(out: str, rows) -> None:
    import pandas as pd

    from ..outdir import atomic_file
    from .history import ROW_COLUMNS

    frame = pd.DataFrame(rows, columns=list(ROW_COLUMNS))
    try:
        with atomic_file(out, binary=True) as handle:
            frame.to_parquet(handle, index=False)
    except ImportError:
        raise InputError(f"{out}: writing Parquet needs pyarrow (pip install pyarrow); or "
                         "export .csv") from None


def _is_sqlite(path: str) -> bool:
    with open(path, "rb") as handle:
        return handle.read(len(SQLITE_HEADER)) == SQLITE_HEADER


def _jsonl_documents(path: str):
    with open(path, encoding="utf-8") as handle:
        for number, line in enumerate(handle, 1):
            if not line.strip():
                continue
            try:
                item = json.loads(line)
            except json.JSONDecodeError as exc:
                raise InputError(f"{path}: line {number} is not JSON ({exc.msg}); give the "
                                 "file written by jjpattern catalog export") from None
            if isinstance(item, dict) and "document" in item:
                yield item["document"], item.get("record") or {}
            else:
                yield item, {}


def import_sources(catalog, sources, *, labels: dict | None = None) -> dict:
    """Merge catalogs and result documents into ``catalog`` without duplicates.

    Returns ``{source: {"added": n, "present": m, "skipped": k}}``; ``skipped``
    counts JSON files in folders that are not result documents.
    """
    from .compare import folder_documents

    report = {}
    for source in sources:
        source = os.fspath(source)
        if not os.path.exists(source):
            raise InputError(f"{source}: no such file or folder; check the path")
        if os.path.isdir(source):
            found = folder_documents(source)
            total = sum(1 for _, _, files in os.walk(source) for f in files
                        if f.lower().endswith(".json"))
            counts = catalog.add_documents(found, source=source, labels=labels)
            counts["skipped"] = total - len(found)
        elif _is_sqlite(source):
            counts = catalog.merge(source)
            counts["skipped"] = 0
        elif source.lower().endswith(".jsonl"):
            counts = _add_jsonl(catalog, source, labels)
        else:
            from ..result import Result

            Result.read(source)  # a clear message when it is not a result document
            with open(source, encoding="utf-8") as handle:
                doc = json.load(handle)
            counts = catalog.add_documents([(doc, None)], source=source, labels=labels)
            counts["skipped"] = 0
        report[source] = counts
    return report


def _add_jsonl(catalog, source, labels) -> dict:
    from .schema import user_name, utc_now

    added = present = 0
    with catalog.transaction():
        for number, (doc, record) in enumerate(_jsonl_documents(source), 1):
            doc = checked_document(doc, f"{source} line {number}")
            fields = doc_labels(doc, labels)
            fields.update(recorded_utc=utc_now(), recorded_by=user_name(), origin="")
            if not labels:  # the exporting catalog's labels, who recorded and when
                fields.update({k: record[k] for k in _LABEL_FIELDS if k in record})
            done = catalog.insert_document(doc, fields)
            added, present = added + done.created, present + (not done.created)
        catalog.log_import(source, "", added, present)
    return {"added": added, "present": present, "skipped": 0}
