"""Compare two results, or two chips' worth of results, number by number.

A side is a result document, an input file (analysed with default settings),
a folder of result documents (a batch output or report folders), or catalog
records: ``#12`` (one record), ``NAME@COOLDOWN`` (a junction or a whole chip in
that cooldown).
"""

from __future__ import annotations

import json
import os
from dataclasses import asdict

from ..errors import InputError
from .drift import DEFAULT_TOLERANCES, Tolerances, chip_flags, difference, fit_drift

#: (number, its standard error) compared for every branch.
MAIN_NUMBERS = (
    ("ic0_A", "ic0_stderr_A"), ("period_T", "period_stderr_T"),
    ("field_offset_T", "field_offset_stderr_T"),
    ("effective_area_m2", "effective_area_stderr_m2"),
    ("node_floor_A", "node_floor_stderr_A"), ("asymmetry", "asymmetry_stderr"),
)


def junction_name(doc: dict) -> str:
    from .document import labels

    return labels(doc)["junction"]


def compare_numbers(fa: dict, fb: dict) -> list[dict]:
    """Every main number of two fits: both values, B - A with its error and significance."""
    out = []
    for key, err_key in MAIN_NUMBERS:
        a, b = fa.get(key), fb.get(key)
        d, d_err, z = difference(a, fa.get(err_key), b, fb.get(err_key))
        out.append({"quantity": key, "a": a, "a_stderr": fa.get(err_key), "b": b,
                    "b_stderr": fb.get(err_key), "difference": d, "difference_stderr": d_err,
                    "significance_sigma": z,
                    "relative_change": d / abs(a) if d is not None and a else None})
    return out


def _pairs(side_a: dict, side_b: dict):
    if len(side_a) == 1 and len(side_b) == 1:
        (na, da), (nb, db) = next(iter(side_a.items())), next(iter(side_b.items()))
        return [(na if na == nb else f"{na} / {nb}", da, db, na, nb)], [], []
    common = sorted(set(side_a) & set(side_b))
    return ([(j, side_a[j], side_b[j], None, None) for j in common],
            sorted(set(side_a) - set(side_b)), sorted(set(side_b) - set(side_a)))


def compare_sides(side_a: dict, side_b: dict, *, label_a: str = "A", label_b: str = "B",
                  tol: Tolerances = DEFAULT_TOLERANCES) -> dict:
    """Differences junction by junction (``{junction: document}`` on each side).

    One result on each side is compared whatever the junctions are called. Drift
    flags take A as the earlier measurement; ``chip`` holds ``chip-drift`` flags
    when many junctions moved together.
    """
    pairs, only_a, only_b = _pairs(side_a, side_b)
    junctions, results = [], {}
    for name, da, db, name_a, name_b in pairs:
        fits_a = {f["branch"]: f for f in da.get("fits", [])}
        branches, flags, checked = [], [], set()
        for fb in db.get("fits", []):
            fa = fits_a.get(fb["branch"])
            if fa is None:
                continue
            branches.append({"branch": fb["branch"], "model_a": fa.get("model"),
                             "model_b": fb.get("model"), "numbers": compare_numbers(fa, fb)})
            more, codes = fit_drift(fa, fb, tol)
            flags += more
            checked |= codes
        results[name] = (flags, checked)
        entry = {"junction": name, "branches": branches,
                 "drift": [f.to_dict() for f in flags]}
        if name_a is not None and name_a != name_b:
            entry.update(name_a=name_a, name_b=name_b)
        junctions.append(entry)
    chips = {str(((d.get("input") or {}).get("metadata") or {}).get("chip", ""))
             for side in (side_a, side_b) for d in side.values()}
    chip = chips.pop() if len(chips) == 1 else ""
    chip_level = chip_flags(results, tol, chip=chip) if len(pairs) > 1 else []
    return {"a": label_a, "b": label_b, "tolerances": asdict(tol), "junctions": junctions,
            "only_in_a": only_a, "only_in_b": only_b,
            "chip": [f.to_dict() for f in chip_level]}


# -- reading a side ------------------------------------------------------------------------
def _read_json(path: str):
    try:
        with open(path, encoding="utf-8") as handle:
            doc = json.load(handle)
    except (OSError, UnicodeDecodeError, json.JSONDecodeError):
        return None
    if isinstance(doc, dict) and "fits" in doc and "schema_version" in doc:
        return doc
    return None


def folder_documents(folder: str) -> list[tuple[dict, str]]:
    """``(document, path)`` of every result document under ``folder`` (other JSON skipped)."""
    found = []
    for root, dirs, files in os.walk(folder):
        dirs.sort()
        for name in sorted(files):
            if name.lower().endswith(".json"):
                path = os.path.join(root, name)
                doc = _read_json(path)
                if doc is not None:
                    found.append((doc, path))
    return found


def _by_junction(found, where: str) -> dict:
    from .document import input_sha256, settings_sha256

    out, seen, origin = {}, set(), {}
    for doc, path in found:
        key = (input_sha256(doc), settings_sha256(doc))
        if key in seen:
            continue  # the same result twice (a batch JSON and its report's result.json)
        seen.add(key)
        name = junction_name(doc)
        if name in out:
            raise InputError(f"{where}: two different results for junction {name!r} "
                             f"({origin[name]} and {path}); compare them one by one")
        out[name], origin[name] = doc, path
    return out


def load_side(text: str, catalog_path=None) -> tuple[str, dict]:
    """``(label, {junction: document})`` for one argument of ``jjpattern compare``."""
    if os.path.isdir(text):
        found = folder_documents(text)
        if not found:
            raise InputError(f"{text}: no jjpattern result documents (.json) in this folder")
        return text, _by_junction(found, text)
    if os.path.isfile(text):
        if text.lower().endswith(".json"):
            from ..result import Result

            Result.read(text)  # a clear message when it is not a result document
            doc = _read_json(text)
        else:
            from ..pipeline import analyze

            doc = analyze(text).to_dict()
        return text, {junction_name(doc): doc}
    if catalog_path is None:
        raise InputError(f"{text}: no such file or folder; for catalog records write #ID or "
                         "NAME@COOLDOWN and give --catalog PATH")
    return _catalog_side(text, catalog_path)


def _catalog_side(text: str, catalog_path) -> tuple[str, dict]:
    from .store import in_order, open_catalog

    with open_catalog(catalog_path, create=False) as catalog:
        if text.startswith("#") and text[1:].isdigit():
            row = catalog.record_row(int(text[1:]))
            return (f"record {row.id} ({row.junction}, {row.cooldown or 'no cooldown'})",
                    {row.junction: catalog.document(row.id)})
        name, at, cooldown = text.rpartition("@")
        if not at:
            raise InputError(f"{text}: not a file, folder or catalog reference; write #ID "
                             "for a record or NAME@COOLDOWN for a junction or chip")
        as_chip = catalog.records(chip=name, cooldown=cooldown)
        as_junction = catalog.records(junction=name, cooldown=cooldown)
        if as_chip and as_junction:
            raise InputError(f"{text}: {name!r} names both a chip and a junction; give the "
                             "records as #ID (jjpattern catalog list records)")
        rows = as_chip or as_junction
        if not rows:
            raise InputError(f"{catalog.path}: no records for {name!r} in cooldown "
                             f"{cooldown!r}; `jjpattern catalog list cooldowns` shows them")
        chips = {r.chip for r in rows}
        if as_junction and len(chips) > 1:
            ids = ", ".join(f"#{r.id}" for r in rows)
            raise InputError(f"{text}: junction {name!r} is on several chips in that cooldown; "
                             f"choose a record ({ids})")
        last = {}
        for row in in_order(rows):
            last[row.junction] = row.id  # the last measurement of each junction
        side = {junction: catalog.document(i) for junction, i in sorted(last.items())}
    what = "chip" if as_chip else "junction"
    return f"{what} {name} in cooldown {cooldown}", side
