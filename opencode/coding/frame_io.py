"""Read and write a code frame as CSV or JSON in our own simple columns.

CSV columns: number,label,kind,net,hotkey,description,include,exclude,special (kind code|net; net = the
parent net's number), optionally active (1/0) and rule. JSON: {"frame": name, "codes": [{...}]} with the
same keys plus examples (a list). Importing upserts by number and is checked whole before anything is
written, in one undoable transaction.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import Any

from opencode.coding.frames import KINDS, SPECIALS, RESERVED_HOTKEYS, frame_id, load_frame
from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.files.cell_guard import guard_cell
from opencode.files.safe_write import atomic_open
from opencode.study import frames_store as fstore
from opencode.study.store import Study

CSV_COLUMNS = ("number", "label", "kind", "net", "hotkey", "description", "include", "exclude", "special",
               "active", "rule")
REQUIRED = ("number", "label")


def frame_records(study: Study, question: str) -> list[dict[str, Any]]:
    """The frame as plain records (the JSON export's `codes`)."""
    return [{"number": c.number, "label": c.label, "kind": c.kind, "net": c.net, "hotkey": c.hotkey,
             "description": c.description, "include": c.include, "exclude": c.exclude, "special": c.special,
             "active": c.active, "rule": c.rule, "examples": c.examples} for c in load_frame(study, question).codes]


def export_frame(study: Study, question: str, path: str | Path) -> Path:
    """Write a question's frame to .csv or .json (chosen by the file's suffix)."""
    path = Path(path)
    records = frame_records(study, question)
    if path.suffix.lower() == ".json":
        with atomic_open(path) as handle:
            json.dump({"frame": load_frame(study, question).name, "codes": records}, handle, ensure_ascii=False,
                      indent=2)
    elif path.suffix.lower() == ".csv":
        with atomic_open(path, newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(CSV_COLUMNS)
            for r in records:
                values = [r["number"], r["label"], r["kind"], r["net"] or "", r["hotkey"] or "", r["description"],
                          r["include"], r["exclude"], r["special"] or "", int(r["active"]), r["rule"]]
                writer.writerow([guard_cell(v) if isinstance(v, str) else v for v in values])
    else:
        raise OpenCodeError(f"{path}: a frame is written as .csv or .json")
    return path


def _read_records(path: Path) -> list[tuple[str, dict[str, Any]]]:
    """(where, record) pairs from a frame file; `where` names the row for error messages."""
    if not path.is_file():
        raise OpenCodeError(f"{path}: no such file")
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as error:
        raise OpenCodeError(f"{path}: byte offset {error.start} (0x{error.object[error.start]:02x}) is not UTF-8; "
                            "save the file as UTF-8") from None
    if path.suffix.lower() == ".json":
        try:
            data = json.loads(text)
        except json.JSONDecodeError as error:
            raise OpenCodeError(f"{path}: not valid JSON ({error})") from error
        codes = data.get("codes") if isinstance(data, dict) else data
        if not isinstance(codes, list):
            raise OpenCodeError(f"{path}: expected {{\"codes\": [...]}} or a list of codes")
        for i, r in enumerate(codes):
            if not isinstance(r, dict):
                raise OpenCodeError(f"{path}: code entry {i + 1} is {type(r).__name__}, expected an object "
                                    "such as {\"number\": 1, \"label\": \"...\"}")
        return [(f"{path}: code entry {i + 1}", dict(r)) for i, r in enumerate(codes)]
    rows = list(csv.DictReader(io.StringIO(text)))
    header = [h.strip() for h in (csv.reader(io.StringIO(text)).__next__() if text.strip() else [])]
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise OpenCodeError(f"{path}: missing column(s) {', '.join(missing)} (columns: {', '.join(CSV_COLUMNS)})")
    unknown = [h for h in header if h not in CSV_COLUMNS and h != "examples"]
    if unknown:
        raise OpenCodeError(f"{path}: unknown column(s) {', '.join(unknown)} (columns: {', '.join(CSV_COLUMNS)})")
    return [(f"{path}: row {i + 2}", {k.strip(): v for k, v in r.items() if k}) for i, r in enumerate(rows)]


def _text(value: Any) -> str:
    return "" if value is None else str(value).strip()


def _int(value: Any, where: str, column: str) -> int | None:
    text = _text(value)
    if not text:
        return None
    try:
        number = float(text)
    except ValueError:
        number = float("nan")
    if not number.is_integer() or number < 1:
        raise OpenCodeError(f"{where}, column {column}: {text!r} is not a code number (a whole number from 1 up)")
    return int(number)


def _parse(where: str, record: dict[str, Any]) -> dict[str, Any]:
    number = _int(record.get("number"), where, "number")
    if number is None:
        raise OpenCodeError(f"{where}: the code number is empty")
    label = _text(record.get("label"))
    if not label:
        raise OpenCodeError(f"{where}: code {number} has no label")
    kind = _text(record.get("kind")).lower() or "code"
    if kind not in KINDS:
        raise OpenCodeError(f"{where}: code {number}: kind {kind!r} is not one of {', '.join(KINDS)}")
    special = _text(record.get("special")).lower() or None
    if special is not None and special not in SPECIALS:
        raise OpenCodeError(f"{where}: code {number}: special {special!r} is not one of {', '.join(SPECIALS)}")
    hotkey = record.get("hotkey")
    hotkey = None if hotkey is None or str(hotkey) == "" else str(hotkey)
    if hotkey is not None and (len(hotkey) != 1 or hotkey in RESERVED_HOTKEYS):
        raise OpenCodeError(f"{where}: code {number}: hotkey {hotkey!r} must be one character other than space, "
                            "'/' and '?'")
    active = record.get("active", True)
    active = active if isinstance(active, bool) else _text(active).lower() not in ("0", "false", "no", "retired")
    examples = record.get("examples") or []
    if isinstance(examples, str):
        examples = [e.strip() for e in examples.split("|") if e.strip()]
    return {"number": number, "label": label, "kind": kind, "net": _int(record.get("net"), where, "net"),
            "hotkey": hotkey, "description": _text(record.get("description")),
            "include_note": _text(record.get("include")), "exclude_note": _text(record.get("exclude")),
            "special": special, "active": active, "rule": _text(record.get("rule")), "examples": list(examples),
            "where": where}


def _check_structure(parsed: list[dict[str, Any]], existing: dict[int, dict[str, Any]]) -> None:
    """Numbers unique, hotkeys unique, nets real and nested at most one level, across file and frame together."""
    seen: dict[int, str] = {}
    for p in parsed:
        if p["number"] in seen:
            raise OpenCodeError(f"{p['where']}: code number {p['number']} already appears at {seen[p['number']]}")
        seen[p["number"]] = p["where"]
    merged = {n: {"kind": r["kind"], "net": r["net"], "hotkey": r["hotkey"], "label": r["label"]}
              for n, r in existing.items()}
    merged.update({p["number"]: p for p in parsed})
    where = {p["number"]: p["where"] for p in parsed}
    hotkeys: dict[str, int] = {}
    for number, code in sorted(merged.items()):
        here = where.get(number, f"code {number} already in the frame")
        key = code["hotkey"]
        if key is not None:
            if key in hotkeys:
                raise OpenCodeError(f"{here}: code {number}: hotkey {key!r} is already used by code {hotkeys[key]}")
            hotkeys[key] = number
        parent = code["net"]
        if parent is None:
            continue
        if parent == number:
            raise OpenCodeError(f"{here}: code {number} names itself as its net")
        if parent not in merged:
            raise OpenCodeError(f"{here}: code {number}: net {parent} does not exist")
        if merged[parent]["kind"] != "net":
            raise OpenCodeError(f"{here}: code {number}: {parent} is a code, not a net")
        grand = merged[parent]["net"]
        if grand is not None and (grand == number or merged.get(grand, {}).get("net") is not None):
            raise OpenCodeError(f"{here}: code {number}: nets {parent} and {grand} form a cycle or nest deeper than "
                                "one level")
        if code["kind"] == "net" and grand is not None:
            raise OpenCodeError(f"{here}: net {number}: its net {parent} is inside net {grand}; nets nest only one "
                                "level")


def import_frame(study: Study, question: str, path: str | Path, actor: str = "oecode") -> dict[str, int]:
    """Add or update codes from a frame file (by number); returns counts of codes added and updated."""
    path = Path(path)
    parsed = [_parse(where, record) for where, record in _read_records(path)]
    if not parsed:
        raise OpenCodeError(f"{path}: holds no codes")
    fid = frame_id(study, question, create=True)
    with study.transaction():
        rows = {r["number"]: r for r in fstore.code_rows(study, fid)}
        numbers = {r["id"]: r["number"] for r in rows.values()}
        existing = {n: {**r, "net": numbers.get(r["net_id"])} for n, r in rows.items()}
        _check_structure(parsed, existing)
        change = Change(study)
        for p in parsed:  # hotkeys first cleared where they move, so the UNIQUE index never trips mid-way
            old = rows.get(p["number"])
            if old is not None and old["hotkey"] is not None and old["hotkey"] != p["hotkey"]:
                change.put_code({"id": old["id"], "hotkey": None})
        ids: dict[int, int] = {}
        added = 0
        for p in parsed:
            fields = {k: v for k, v in p.items() if k not in ("net", "where")}
            old = rows.get(p["number"])
            if old is None:
                ids[p["number"]] = change.put_code({"frame_id": fid, **fields, "net_id": None})
                added += 1
            else:
                ids[p["number"]] = change.put_code({"id": old["id"], **fields})
        all_ids = {**{n: r["id"] for n, r in rows.items()}, **ids}
        for p in parsed:
            change.put_code({"id": ids[p["number"]], "net_id": all_ids.get(p["net"]) if p["net"] else None})
        change.commit(actor, "import-frame", "frame", fid, question=question, source=str(path))
    return {"added": added, "updated": len(parsed) - added}
