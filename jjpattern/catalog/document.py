"""From a result document to the fields a catalog record is found by (pure functions)."""

from __future__ import annotations

import datetime
import hashlib
import json
import os
import re
import zlib

from ..errors import InputError

#: Label -> metadata keys that may carry it, first found wins (``# chip: KT-14``).
LABEL_KEYS = {
    "junction": ("junction", "junction_id"),
    "chip": ("chip", "chip_id"),
    "cooldown": ("cooldown",),
    "date": ("date", "measured", "measurement_date"),
    "temperature_K": ("temperature_K",),
}
_DATE_FORMATS = ("%Y-%m-%d", "%Y-%m-%d %H:%M", "%Y-%m-%d %H:%M:%S", "%Y-%m-%dT%H:%M",
                 "%Y-%m-%dT%H:%M:%S", "%Y-%m-%dT%H:%M:%SZ", "%d.%m.%Y", "%Y/%m/%d")


def as_document(result) -> dict:
    """The JSON document of a :class:`~jjpattern.result.Result` or of a document dict.

    A dict is checked by reading it and kept as it was written (its settings
    hash was made by the tool version that wrote it).
    """
    from ..result import Result

    if isinstance(result, Result):
        return result.to_dict()
    if not isinstance(result, dict):
        raise TypeError(f"expected a Result or its document, got {type(result).__name__}")
    Result.from_dict(result)
    return result


def pack(doc: dict) -> bytes:
    """Compact JSON, compressed: point lists make documents of tens of kilobytes."""
    text = json.dumps(doc, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    return zlib.compress(text.encode("utf-8"), 6)


def unpack(blob: bytes) -> dict:
    return json.loads(zlib.decompress(blob).decode("utf-8"))


def canonical_sha256(value) -> str:
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def input_sha256(doc: dict) -> str:
    """The input file's SHA-256, or a hash of the points for data that never were a file."""
    sha = (doc.get("input") or {}).get("sha256")
    if sha:
        return str(sha)
    points = [f.get("points") for f in doc.get("fits", [])]
    return "points:" + canonical_sha256({"input": doc.get("input"), "points": points})


def settings_sha256(doc: dict) -> str:
    sha = doc.get("settings_sha256")
    if sha:
        return str(sha)
    return "settings:" + canonical_sha256({"tool": doc.get("tool"), "s": doc.get("settings")})


def parse_date(text: str) -> str | None:
    """ISO 8601 form of a metadata date (``2026-03-14``, ``14.03.2026``), else ``None``."""
    text = text.strip()
    for fmt in _DATE_FORMATS:
        try:
            value = datetime.datetime.strptime(text, fmt)
        except ValueError:
            continue
        return value.strftime("%Y-%m-%dT%H:%M:%S" if ("%H" in fmt) else "%Y-%m-%d")
    return None


def _from_metadata(metadata: dict, label: str):
    for key in LABEL_KEYS[label]:
        value = metadata.get(key)
        if value is not None and str(value).strip() != "":
            return value
    return None


def labels(doc: dict, overrides: dict | None = None, source_path=None) -> dict:
    """Junction, chip, cooldown, date and temperature of a document.

    ``overrides`` (from ``--catalog-label``) win over the file's metadata; the
    junction falls back to the input file's name. Text is kept verbatim.
    """
    overrides = {k: v for k, v in (overrides or {}).items() if v is not None}
    unknown = sorted(set(overrides) - set(LABEL_KEYS))
    if unknown:
        raise InputError(f"catalog label {unknown[0]!r} is not known; use "
                         f"{', '.join(LABEL_KEYS)}")
    metadata = (doc.get("input") or {}).get("metadata") or {}
    found = {k: overrides.get(k, _from_metadata(metadata, k)) for k in LABEL_KEYS}
    path = source_path or (doc.get("input") or {}).get("path") or ""
    junction = found["junction"]
    if junction is None:
        junction = os.path.splitext(os.path.basename(str(path)))[0] or "junction"
    temperature = found["temperature_K"]
    if temperature is None:
        temperature = ((doc.get("settings") or {}).get("extract") or {}).get("temperature_K")
    try:
        temperature = None if temperature is None else float(temperature)
    except (TypeError, ValueError):
        raise InputError(f"temperature_K = {temperature!r} is not a number; write it in "
                         "kelvin as a plain number") from None
    date = "" if found["date"] is None else str(found["date"])
    return {
        "junction": str(junction), "chip": str(found["chip"] or ""),
        "cooldown": str(found["cooldown"] or ""), "measured": date,
        "measured_iso": parse_date(date) if date else None, "temperature_K": temperature,
        "input_path": str(path),
    }


def flat_settings(settings: dict) -> dict:
    """``{"fit.loss": "cauchy", ...}`` for the stages that change a result."""
    out = {}
    for stage, values in sorted((settings or {}).items()):
        if stage == "report" or not isinstance(values, dict):
            continue
        for key, value in sorted(values.items()):
            out[f"{stage}.{key}"] = value
    return out


def settings_changes(old_settings: dict, old_tool: str, doc: dict) -> list[dict]:
    """What differs between an earlier record's settings and this document's."""
    old = flat_settings(old_settings)
    new = flat_settings(doc.get("settings") or {})
    changes = [{"setting": key, "from": old.get(key), "to": new.get(key)}
               for key in sorted(set(old) | set(new)) if old.get(key) != new.get(key)]
    tool = str((doc.get("tool") or {}).get("version", ""))
    if tool != old_tool:
        changes.append({"setting": "tool_version", "from": old_tool, "to": tool})
    return changes


_NUMBER = re.compile(r"(\d+)")


def natural_key(text: str):
    """``CD-9`` before ``CD-10``: digits compare as numbers."""
    return [(0, int(p), "") if p.isdigit() else (1, 0, p) for p in _NUMBER.split(text or "")
            if p != ""]
